//! Rainflow cycle counting (ASTM E1049-85 (reapproved 2011), section 5.4.4,
//! "rainflow counting"), offline and online.
//!
//! The method, as the standard gives it: reversals (peaks and valleys) are
//! read one by one onto a stack; with X the range of the newest two and Y
//! the range of the two before them, while X ≥ Y: if Y contains the
//! starting point S, Y is counted as one half cycle and its first point is
//! discarded (S moves to its second point); otherwise Y is counted as one
//! full cycle and both its points are discarded. At the end of the history
//! every range left on the stack (the residue) counts as one half cycle.
//!
//! The online counter ([`RainflowCounter`]) finds reversals from sampled
//! values with a hysteresis gate: the running extreme becomes a reversal
//! only once the signal has come back from it by more than the gate, so
//! noise smaller than the gate makes no cycles (a "racetrack" or
//! hysteresis filter, common practice). Full cycles, and the half cycles
//! of the starting-point rule, are final when they are emitted; the stack
//! and the running extreme are the counter's whole state (serde), so a
//! counter stored and reloaded between any two samples counts exactly as
//! one that never stopped. [`RainflowCounter::residue_cycles`] counts the
//! residue as the end of a history would, without consuming it.
//!
//! Each reversal carries a temperature: the highest temperature seen on
//! the path since the reversal before it (points discarded by a counted
//! cycle hand theirs on), so a cycle's temperature (the higher of its two
//! points) is never lower than the hottest instant between them. Fatigue
//! curves corrected by the modulus at temperature read it.

use serde::{Deserialize, Serialize};

/// One reversal (or the running extreme): a value and the highest
/// temperature (K) seen on the path leading to it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Reversal {
    pub value: f64,
    pub temperature_k: f64,
}

/// One counted cycle or half cycle.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Cycle {
    /// Range (peak to valley), in the signal's unit (MPa for stress).
    pub range: f64,
    /// Mean of the two reversals.
    pub mean: f64,
    /// 1.0 for a full cycle, 0.5 for a half cycle.
    pub count: f64,
    /// The higher temperature of the two reversals, K.
    pub temperature_k: f64,
}

impl Cycle {
    fn of(a: &Reversal, b: &Reversal, count: f64) -> Cycle {
        Cycle {
            range: (a.value - b.value).abs(),
            mean: 0.5 * (a.value + b.value),
            count,
            temperature_k: a.temperature_k.max(b.temperature_k),
        }
    }
}

/// The online rainflow counter. Its fields are its whole state.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct RainflowCounter {
    /// Confirmed reversals not yet consumed by a cycle; the first is the
    /// starting point S of the standard.
    pub stack: Vec<Reversal>,
    /// The running extreme since the newest confirmed reversal, not yet a
    /// reversal (the signal has not come back from it by more than the gate).
    pub candidate: Option<Reversal>,
    /// +1 while the candidate is a rising extreme, −1 falling, 0 before the
    /// signal first left the starting point by more than the gate.
    pub direction: i8,
}

impl RainflowCounter {
    /// A counter that has seen nothing.
    pub fn new() -> RainflowCounter {
        RainflowCounter::default()
    }

    /// Feed one sample. `gate` (≥ 0, the signal's unit): a reversal is
    /// confirmed only when the signal comes back from the running extreme
    /// by more than the gate (0: any strict reversal, as the standard
    /// reads a sequence of peaks and valleys). Closed cycles are passed to
    /// `out` as they close. Non-finite values are ignored.
    pub fn push(&mut self, value: f64, temperature_k: f64, gate: f64, out: &mut impl FnMut(Cycle)) {
        if !value.is_finite() {
            return;
        }
        let Some(last) = self.stack.last_mut() else {
            self.stack.push(Reversal { value, temperature_k });
            return;
        };
        match self.candidate.as_mut() {
            None => {
                let d = value - last.value;
                if d.abs() > gate {
                    self.direction = if d > 0.0 { 1 } else { -1 };
                    let t = temperature_k.max(last.temperature_k);
                    self.candidate = Some(Reversal { value, temperature_k: t });
                } else {
                    last.temperature_k = last.temperature_k.max(temperature_k);
                }
            }
            Some(c) => {
                let dir = f64::from(self.direction);
                let ahead = (value - c.value) * dir;
                if ahead >= 0.0 {
                    c.temperature_k = c.temperature_k.max(temperature_k);
                    if ahead > 0.0 {
                        c.value = value;
                    }
                } else if -ahead > gate {
                    let confirmed = *c;
                    self.candidate = Some(Reversal { value, temperature_k });
                    self.direction = -self.direction;
                    Self::settle(&mut self.stack, confirmed, out);
                } else {
                    c.temperature_k = c.temperature_k.max(temperature_k);
                }
            }
        }
    }

    /// Push a reversal onto `stack` and count what it closes (the
    /// three-point rule of ASTM E1049-85 5.4.4 with the starting-point rule).
    fn settle(stack: &mut Vec<Reversal>, r: Reversal, out: &mut impl FnMut(Cycle)) {
        stack.push(r);
        while stack.len() >= 3 {
            let n = stack.len();
            let x = (stack[n - 1].value - stack[n - 2].value).abs();
            let y = (stack[n - 2].value - stack[n - 3].value).abs();
            if x < y {
                break;
            }
            if n == 3 {
                // Y contains the starting point: one half cycle, S moves on.
                out(Cycle::of(&stack[0], &stack[1], 0.5));
                stack.remove(0);
            } else {
                out(Cycle::of(&stack[n - 3], &stack[n - 2], 1.0));
                let hot = stack[n - 3].temperature_k.max(stack[n - 2].temperature_k);
                let mut last = stack[n - 1];
                last.temperature_k = last.temperature_k.max(hot);
                stack.truncate(n - 3);
                stack.push(last);
            }
        }
    }

    /// The cycles the residue would give if the history ended now: the
    /// running extreme read as the last reversal, the cycles it closes, and
    /// every range left as a half cycle. The counter is not changed.
    pub fn residue_cycles(&self, out: &mut impl FnMut(Cycle)) {
        let mut stack = self.stack.clone();
        if let Some(c) = self.candidate {
            Self::settle(&mut stack, c, out);
        }
        for w in stack.windows(2) {
            out(Cycle::of(&w[0], &w[1], 0.5));
        }
    }

    /// Number of reversals held (the stack and the running extreme).
    pub fn held(&self) -> usize {
        self.stack.len() + usize::from(self.candidate.is_some())
    }
}

/// Offline count of a whole history: every closed cycle, then the residue
/// as half cycles (the complete ASTM E1049-85 5.4.4 count), with reversals
/// found through the same gate as the online counter.
pub fn count(values: &[f64], gate: f64) -> Vec<Cycle> {
    let mut c = RainflowCounter::new();
    let mut v = Vec::new();
    for &x in values {
        c.push(x, 0.0, gate, &mut |cy| v.push(cy));
    }
    c.residue_cycles(&mut |cy| v.push(cy));
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn summary(c: &[Cycle]) -> Vec<(f64, f64, f64)> {
        c.iter().map(|c| (c.range, c.mean, c.count)).collect()
    }

    /// ASTM E1049-85 Fig. 6 example history (reversals −2, 1, −3, 5, −1, 3,
    /// −4, 4, −2; from memory): its rainflow count (Table 4 of the
    /// standard, from memory) is ranges 3 ×0.5, 4 ×1.5, 6 ×0.5, 8 ×1.0 and
    /// 9 ×0.5.
    #[test]
    fn astm_example_counts_as_the_standard_tabulates() {
        let c = count(&[-2.0, 1.0, -3.0, 5.0, -1.0, 3.0, -4.0, 4.0, -2.0], 0.0);
        let mut by_range = std::collections::BTreeMap::new();
        for cy in &c {
            *by_range.entry(cy.range as i64).or_insert(0.0) += cy.count;
        }
        let got: Vec<(i64, f64)> = by_range.into_iter().collect();
        assert_eq!(got, vec![(3, 0.5), (4, 1.5), (6, 0.5), (8, 1.0), (9, 0.5)]);
    }

    #[test]
    fn constant_and_noise_below_the_gate_make_no_cycles() {
        assert!(count(&[5.0; 20], 0.0).is_empty());
        let noisy: Vec<f64> = (0..200).map(|i| 100.0 + if i % 2 == 0 { 0.4 } else { -0.4 }).collect();
        assert!(count(&noisy, 1.0).is_empty());
    }

    #[test]
    fn stored_and_reloaded_counter_counts_the_same() {
        let xs = [0.0, 3.0, 1.0, 7.0, 2.0, 2.5, -4.0, 6.0, 5.0, 8.0, -1.0];
        let whole = count(&xs, 0.0);
        for split in 0..xs.len() {
            let mut c = RainflowCounter::new();
            let mut v = Vec::new();
            for &x in &xs[..split] {
                c.push(x, 0.0, 0.0, &mut |cy| v.push(cy));
            }
            let json = serde_json::to_string(&c).unwrap();
            let mut c: RainflowCounter = serde_json::from_str(&json).unwrap();
            for &x in &xs[split..] {
                c.push(x, 0.0, 0.0, &mut |cy| v.push(cy));
            }
            c.residue_cycles(&mut |cy| v.push(cy));
            assert_eq!(summary(&v), summary(&whole), "split at {split}");
        }
    }

    #[test]
    fn residue_report_does_not_consume() {
        let mut c = RainflowCounter::new();
        for x in [0.0, 5.0, 1.0, 4.0] {
            c.push(x, 0.0, 0.0, &mut |_| {});
        }
        let before = c.clone();
        let mut n = 0;
        c.residue_cycles(&mut |_| n += 1);
        assert!(n > 0);
        assert_eq!(c, before);
    }

    #[test]
    fn cycle_temperature_is_the_hottest_on_its_path() {
        let mut c = RainflowCounter::new();
        let mut v = Vec::new();
        // −20 → 10 → 0 (hot on the way down) → 30: the inner cycle 10/0 closes.
        let pts = [(-20.0, 300.0), (10.0, 300.0), (5.0, 800.0), (0.0, 300.0), (30.0, 300.0)];
        for (x, t) in pts {
            c.push(x, t, 0.0, &mut |cy| v.push(cy));
        }
        c.residue_cycles(&mut |cy| v.push(cy));
        assert!(v.iter().any(|cy| cy.count == 1.0 && cy.range == 10.0 && cy.temperature_k == 800.0), "{v:?}");
    }
}

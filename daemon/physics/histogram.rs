//! Time-at-condition histograms: hours spent in each temperature class and
//! pressure class, as European boiler practice keeps them for in-service
//! life-expectancy calculations (EN 12952-4, from memory).
//!
//! Classes are given by ascending edges; the first class is "below the first
//! edge" and the last "at or above the last edge", so no time is lost.
//!
//! The table is two-dimensional (hours by temperature class *and* pressure
//! class); the marginals are its row and column sums. Time on a straight
//! line of temperature and pressure is booked exactly
//! ([`TimeAtCondition::add_line_hinted`]): each cell gets the time between
//! the line's crossings of its edges, found analytically.

use serde::{Deserialize, Serialize};

/// A two-dimensional histogram of hours by temperature and pressure class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimeAtCondition {
    /// Temperature class edges, K, ascending.
    pub temperature_edges_k: Vec<f64>,
    /// Pressure class edges, MPa gauge, ascending.
    pub pressure_edges_mpa: Vec<f64>,
    /// Hours, row-major: `hours[ti * (pressure_edges.len() + 1) + pi]`.
    pub hours: Vec<f64>,
}

/// Index of the class of `x` for ascending `edges` (0 ..= edges.len()).
#[inline]
pub fn class_index(edges: &[f64], x: f64) -> usize {
    edges.partition_point(|&e| e <= x)
}

/// [`class_index`] with a guess (the class of the previous value, which a
/// slowly varying signal rarely leaves): checked in O(1), searched only
/// when wrong. Always the same result as [`class_index`].
#[inline]
pub fn class_index_hinted(edges: &[f64], x: f64, hint: usize) -> usize {
    if hint <= edges.len() && (hint == 0 || edges[hint - 1] <= x) && (hint == edges.len() || x < edges[hint]) {
        hint
    } else {
        class_index(edges, x)
    }
}

/// The cell of the previous booking with its edges: a search hint that
/// needs no look at the histogram's edges while values stay inside it, so
/// a steady or slowly moving signal reads only the hour it adds to. Outside
/// it (or for NaN) the classes are searched and the hint moves; the result
/// is always that of [`class_index`] on both axes. A hint belongs to the
/// histogram that moved it: start from [`CellHint::default`] for another.
#[derive(Debug, Clone, Copy)]
pub struct CellHint {
    /// The cell's classes (temperature, pressure).
    t: usize,
    p: usize,
    /// The cell is `[t_lo, t_hi) × [p_lo, p_hi)`, infinite at the open
    /// ends; NaN (nothing inside) until the first booking.
    t_lo: f64,
    t_hi: f64,
    p_lo: f64,
    p_hi: f64,
    /// The cell's index in `hours`.
    index: usize,
}

impl Default for CellHint {
    fn default() -> Self {
        CellHint { t: 0, p: 0, t_lo: f64::NAN, t_hi: f64::NAN, p_lo: f64::NAN, p_hi: f64::NAN, index: 0 }
    }
}

impl CellHint {
    /// Whether (t, p) is in the hinted cell. For ascending edges this is
    /// exactly `class_index(t) == self.t && class_index(p) == self.p`
    /// where it says yes (the cell is `edges[c−1] ≤ x < edges[c]`); it says
    /// no for NaN and for +∞, which are then searched.
    #[inline(always)]
    fn holds(&self, t: f64, p: f64) -> bool {
        self.t_lo <= t && t < self.t_hi && self.p_lo <= p && p < self.p_hi
    }

    /// The hinted classes (temperature, pressure).
    pub fn classes(&self) -> (usize, usize) {
        (self.t, self.p)
    }
}

impl TimeAtCondition {
    /// An empty histogram with the given class edges.
    pub fn new(temperature_edges_k: Vec<f64>, pressure_edges_mpa: Vec<f64>) -> Self {
        let n = (temperature_edges_k.len() + 1) * (pressure_edges_mpa.len() + 1);
        TimeAtCondition { temperature_edges_k, pressure_edges_mpa, hours: vec![0.0; n] }
    }

    /// Evenly spaced edges from `low` to `high` in steps of `step`.
    pub fn even_edges(low: f64, high: f64, step: f64) -> Vec<f64> {
        let n = ((high - low) / step).round().max(0.0) as usize;
        (0..=n).map(|i| low + step * i as f64).collect()
    }

    /// Add `dt_h` hours at temperature `t_k` and pressure `p_mpa`.
    #[inline]
    pub fn add(&mut self, t_k: f64, p_mpa: f64, dt_h: f64) {
        let ti = class_index(&self.temperature_edges_k, t_k);
        let pi = class_index(&self.pressure_edges_mpa, p_mpa);
        self.hours[ti * (self.pressure_edges_mpa.len() + 1) + pi] += dt_h;
    }

    /// [`TimeAtCondition::add`] with the cell of the previous call as a
    /// search hint (moved to this call's cell).
    #[inline(always)]
    pub fn add_hinted(&mut self, t_k: f64, p_mpa: f64, dt_h: f64, hint: &mut CellHint) {
        if !hint.holds(t_k, p_mpa) {
            *hint = self.search(t_k, p_mpa, hint);
        }
        self.hours[hint.index] += dt_h;
    }

    /// The cell of (t, p), searched from `hint`'s classes (out of line: the
    /// common booking stays in its cell).
    #[inline(never)]
    fn search(&self, t_k: f64, p_mpa: f64, hint: &CellHint) -> CellHint {
        let ti = class_index_hinted(&self.temperature_edges_k, t_k, hint.t);
        let pi = class_index_hinted(&self.pressure_edges_mpa, p_mpa, hint.p);
        self.cell(ti, pi)
    }

    /// The hint for cell (`ti`, `pi`).
    #[inline]
    fn cell(&self, ti: usize, pi: usize) -> CellHint {
        let (te, pe) = (&self.temperature_edges_k, &self.pressure_edges_mpa);
        let lo = |e: &[f64], i: usize| if i == 0 { f64::NEG_INFINITY } else { e[i - 1] };
        let hi = |e: &[f64], i: usize| e.get(i).copied().unwrap_or(f64::INFINITY);
        CellHint {
            t: ti,
            p: pi,
            t_lo: lo(te, ti),
            t_hi: hi(te, ti),
            p_lo: lo(pe, pi),
            p_hi: hi(pe, pi),
            index: ti * (pe.len() + 1) + pi,
        }
    }

    /// Add `dt_h` hours spent on a straight line from temperature and
    /// pressure `from = (t0, p0)` to `to = (t1, p1)`: each cell gets the
    /// fraction of the time the line spends in it, between its crossings of
    /// the cell's edges (crossing at `u = (edge − v0)/(v1 − v0)` of the
    /// way). `hint` is the cell at the line's start (a search hint, as for
    /// [`TimeAtCondition::add_hinted`]) and becomes the one at its end.
    #[inline(always)]
    pub fn add_line_hinted(&mut self, from: (f64, f64), to: (f64, f64), dt_h: f64, hint: &mut CellHint) {
        // Common case: both ends in the hinted cell (a slowly moving line
        // stays in the cell of the previous piece's end), so is the whole
        // line (cells are intervals); the same result as the search.
        // Inlined into the caller; the search is kept out of line.
        if hint.holds(from.0, from.1) && hint.holds(to.0, to.1) {
            self.hours[hint.index] += dt_h;
            return;
        }
        self.add_line_searched(from, to, dt_h, hint);
    }

    /// [`TimeAtCondition::add_line_hinted`] for a line with an end outside
    /// the hinted cell: the classes of both ends searched from the hint.
    #[inline(never)]
    fn add_line_searched(&mut self, from: (f64, f64), to: (f64, f64), dt_h: f64, hint: &mut CellHint) {
        let w = self.pressure_edges_mpa.len() + 1;
        let t_start = class_index_hinted(&self.temperature_edges_k, from.0, hint.t);
        let p_start = class_index_hinted(&self.pressure_edges_mpa, from.1, hint.p);
        let t_end = class_index_hinted(&self.temperature_edges_k, to.0, t_start);
        let p_end = class_index_hinted(&self.pressure_edges_mpa, to.1, p_start);
        *hint = self.cell(t_end, p_end);
        if t_start == t_end && p_start == p_end {
            // Both ends in one cell: so is the whole line (classes are intervals).
            self.hours[t_start * w + p_start] += dt_h;
        } else {
            self.add_crossing_line(from, to, dt_h, (t_start, p_start), (t_end, p_end));
        }
    }

    /// [`TimeAtCondition::add_line_hinted`] for a line that leaves its
    /// starting cell: walk the cells in order of the crossing times.
    #[inline(never)]
    fn add_crossing_line(
        &mut self,
        from: (f64, f64),
        to: (f64, f64),
        dt_h: f64,
        start: (usize, usize),
        end: (usize, usize),
    ) {
        let w = self.pressure_edges_mpa.len() + 1;
        // The next crossing on one axis: the fraction of the way at which
        // the line leaves class `i` towards class `j`, and the class it enters.
        fn next(edges: &[f64], v0: f64, v1: f64, i: usize, j: usize) -> Option<(f64, usize)> {
            if i == j {
                return None;
            }
            let (edge, into) = if j > i { (edges[i], i + 1) } else { (edges[i - 1], i - 1) };
            Some(((edge - v0) / (v1 - v0), into))
        }
        let (mut ti, mut pi) = start;
        let mut u = 0.0;
        loop {
            let nt = next(&self.temperature_edges_k, from.0, to.0, ti, end.0);
            let np = next(&self.pressure_edges_mpa, from.1, to.1, pi, end.1);
            let (at, temperature) = match (nt, np) {
                (None, None) => break,
                (Some(a), None) => (a.0, true),
                (None, Some(b)) => (b.0, false),
                (Some(a), Some(b)) => (a.0.min(b.0), a.0 <= b.0),
            };
            let at = at.clamp(u, 1.0);
            self.hours[ti * w + pi] += (at - u) * dt_h;
            u = at;
            if temperature {
                ti = nt.map_or(ti, |n| n.1);
            } else {
                pi = np.map_or(pi, |n| n.1);
            }
        }
        self.hours[ti * w + pi] += (1.0 - u) * dt_h;
    }

    /// Total hours.
    pub fn total_h(&self) -> f64 {
        self.hours.iter().sum()
    }

    /// Hours per temperature class (summed over pressure classes).
    pub fn temperature_hours(&self) -> Vec<f64> {
        let w = self.pressure_edges_mpa.len() + 1;
        self.hours.chunks(w).map(|r| r.iter().sum()).collect()
    }

    /// Hours per pressure class (summed over temperature classes).
    pub fn pressure_hours(&self) -> Vec<f64> {
        let w = self.pressure_edges_mpa.len() + 1;
        let mut out = vec![0.0; w];
        for r in self.hours.chunks(w) {
            for (o, h) in out.iter_mut().zip(r) {
                *o += h;
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn classes() {
        let e = [10.0, 20.0, 30.0];
        assert_eq!(class_index(&e, 5.0), 0);
        assert_eq!(class_index(&e, 10.0), 1);
        assert_eq!(class_index(&e, 29.9), 2);
        assert_eq!(class_index(&e, 30.0), 3);
    }

    #[test]
    fn a_line_books_the_time_between_edge_crossings() {
        // Temperature 0 → 40 over 8 h across edges 10, 20, 30; pressure
        // 0 → 4 across edge 3. By hand: T passes 10, 20, 30 at 2, 4, 6 h;
        // p passes 3 at 6 h as well.
        let mut h = TimeAtCondition::new(vec![10.0, 20.0, 30.0], vec![3.0]);
        let mut hint = CellHint::default();
        h.add_line_hinted((0.0, 0.0), (40.0, 4.0), 8.0, &mut hint);
        assert_eq!(hint.classes(), (3, 1));
        let want = [[2.0, 0.0], [2.0, 0.0], [2.0, 0.0], [0.0, 2.0]];
        for (ti, row) in want.iter().enumerate() {
            for (pi, &v) in row.iter().enumerate() {
                assert!((h.hours[ti * 2 + pi] - v).abs() < 1e-12, "{ti},{pi}: {:?}", h.hours);
            }
        }
        // Falling the other way books the same cells.
        let mut g = TimeAtCondition::new(vec![10.0, 20.0, 30.0], vec![3.0]);
        let mut hint = g.cell(3, 1);
        g.add_line_hinted((40.0, 4.0), (0.0, 0.0), 8.0, &mut hint);
        for (a, b) in g.hours.iter().zip(&h.hours) {
            assert!((a - b).abs() < 1e-12);
        }
    }

    proptest! {
        #[test]
        fn a_line_loses_no_time(t0 in 600.0f64..900.0, t1 in 600.0f64..900.0, p0 in 0.0f64..25.0, p1 in 0.0f64..25.0, dt in 0.0f64..10.0, hint in (0usize..22, 0usize..4)) {
            let mut h = TimeAtCondition::new(TimeAtCondition::even_edges(700.0, 900.0, 10.0), vec![5.0, 10.0, 20.0]);
            let mut hint = h.cell(hint.0, hint.1);
            h.add_line_hinted((t0, p0), (t1, p1), dt, &mut hint);
            prop_assert!((h.total_h() - dt).abs() < 1e-12);
            prop_assert!(h.hours.iter().all(|&x| x >= 0.0));
            prop_assert_eq!(hint.classes(), (class_index(&h.temperature_edges_k, t1), class_index(&h.pressure_edges_mpa, p1)));
        }

        /// The hinted booking puts every value in the cell of the plain
        /// search, from any previous cell, NaN and infinities included.
        #[test]
        fn the_hinted_cell_is_the_cell(v in proptest::collection::vec((prop_oneof![690.0f64..910.0, Just(700.0), Just(900.0), Just(f64::NAN), Just(f64::INFINITY), Just(f64::NEG_INFINITY)], prop_oneof![0.0f64..25.0, Just(5.0), Just(20.0), Just(f64::NAN), Just(f64::INFINITY)]), 1..40)) {
            let edges = (TimeAtCondition::even_edges(700.0, 900.0, 10.0), vec![5.0, 10.0, 20.0]);
            let (mut hinted, mut plain) = (TimeAtCondition::new(edges.0.clone(), edges.1.clone()), TimeAtCondition::new(edges.0, edges.1));
            let mut hint = CellHint::default();
            for (i, (t, p)) in v.into_iter().enumerate() {
                let dt = (i + 1) as f64;
                hinted.add_hinted(t, p, dt, &mut hint);
                plain.add(t, p, dt);
                prop_assert_eq!(&hinted.hours, &plain.hours);
                prop_assert_eq!(hint.classes(), (class_index(&plain.temperature_edges_k, t), class_index(&plain.pressure_edges_mpa, p)));
            }
        }

        #[test]
        fn hinted_class_is_the_class(x in -10.0f64..50.0, hint in 0usize..6) {
            let e = [10.0, 20.0, 30.0];
            prop_assert_eq!(class_index_hinted(&e, x, hint), class_index(&e, x));
            prop_assert_eq!(class_index_hinted(&e, f64::NAN, hint), class_index(&e, f64::NAN));
        }

        #[test]
        fn no_time_is_lost(v in proptest::collection::vec((500.0f64..1000.0, 0.0f64..30.0, 0.0f64..10.0), 0..50)) {
            let mut h = TimeAtCondition::new(TimeAtCondition::even_edges(700.0, 900.0, 10.0), vec![5.0, 10.0, 20.0]);
            let mut total = 0.0;
            for (t, p, dt) in v { h.add(t, p, dt); total += dt; }
            prop_assert!((h.total_h() - total).abs() < 1e-9);
            prop_assert!((h.temperature_hours().iter().sum::<f64>() - total).abs() < 1e-9);
            prop_assert!((h.pressure_hours().iter().sum::<f64>() - total).abs() < 1e-9);
        }
    }
}

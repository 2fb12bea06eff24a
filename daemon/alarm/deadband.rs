//! Levels with hysteresis: which severity a value implies, given the
//! severity the alarm already holds.
//!
//! Reaching a level needs the value at or beyond it (`value ≥ level` for
//! higher-is-worse indices, `value ≤ level` for lower-is-worse). Holding a
//! level once reached needs less: the value only has to stay within the
//! deadband of it (`value ≥ level − d`, or `value ≤ level + d`). So an
//! alarm clears, or steps down, only when the value falls clear of
//! `level − d` (rises clear of `level + d`), and a value wandering around a
//! level inside the deadband raises one event, not one per sample.
//!
//! Deadband width `d = max(fraction · |level|, minimum)`. The default
//! fraction is 2 % of the level: the accumulated indices (life fraction,
//! strain, wear) hardly ever fall, so the band mainly absorbs the noise of
//! the instantaneous ones (rates, projections). A pure percentage gives no
//! band at a level of zero, which is the default over-design level (any
//! exceedance of the design temperature), so that index has a floor of
//! 5 K, a few times typical thermocouple noise (±1.5 K), so noise around
//! the design temperature cannot clear and re-raise the alarm. A wider band
//! keeps the alarm standing longer, never shorter: the conservative side.
//! Both are choices of this program, not of any code; the book's
//! configuration may change them per index, and [`super::delay`] adds on-
//! and off-delays.

use super::index::{AlarmIndex, Direction, Severity};
use crate::engine::plan::Levels;
use serde::{Deserialize, Serialize};

/// Default deadband as a fraction of the level.
pub const DEFAULT_DEADBAND_FRACTION: f64 = 0.02;
/// Default smallest deadband of the over-design temperature index, K:
/// about three times a thermocouple's typical noise of ±1.5 K (common
/// practice: a deadband of a few times the signal's noise; also the order
/// of 1 % of a temperature span, the usual starting point for temperature
/// alarms, ISA-TR18.2.2 / EEMUA 191 from memory).
pub const DEFAULT_OVER_DESIGN_DEADBAND_K: f64 = 5.0;

/// Deadband of one index.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Deadband {
    /// Width as a fraction of the level's magnitude.
    pub fraction: f64,
    /// Smallest width, in the index's own unit.
    #[serde(default)]
    pub minimum: f64,
}

impl Deadband {
    /// The built-in deadband of an index (see the module notes).
    pub fn default_for(index: AlarmIndex) -> Deadband {
        let minimum = match index {
            AlarmIndex::MetalTemperatureOverDesign => DEFAULT_OVER_DESIGN_DEADBAND_K,
            _ => 0.0,
        };
        Deadband { fraction: DEFAULT_DEADBAND_FRACTION, minimum }
    }

    /// Width of the band at `level`.
    pub fn width(&self, level: f64) -> f64 {
        (self.fraction * level.abs()).max(self.minimum)
    }
}

/// Whether `value` is at or beyond `level`.
pub fn reaches(direction: Direction, value: f64, level: f64) -> bool {
    match direction {
        Direction::HigherIsWorse => value >= level,
        Direction::LowerIsWorse => value <= level,
    }
}

/// Whether `value` is still within the deadband `width` of `level`.
pub fn holds(direction: Direction, value: f64, level: f64, width: f64) -> bool {
    match direction {
        Direction::HigherIsWorse => value >= level - width,
        Direction::LowerIsWorse => value <= level + width,
    }
}

/// The severity `value` implies when the alarm currently holds `current`:
/// the highest severity whose level is reached, or, at or below `current`,
/// still held within its deadband. `None`: the condition is clear.
/// A non-finite value (an infinite projection) reaches and holds nothing.
pub fn next_severity(
    direction: Direction,
    levels: &Levels,
    deadband: &Deadband,
    current: Option<Severity>,
    value: f64,
) -> Option<Severity> {
    if !value.is_finite() {
        return None;
    }
    Severity::ALL
        .into_iter()
        .filter(|s| match s.level(levels) {
            None => false,
            Some(l) => {
                reaches(direction, value, l)
                    || (current.is_some_and(|c| *s <= c) && holds(direction, value, l, deadband.width(l)))
            }
        })
        .max()
}

#[cfg(test)]
mod tests {
    use super::*;

    const LF: Levels = Levels { advisory: Some(0.3), warning: Some(0.5), critical: Some(0.7) };
    const DB: Deadband = Deadband { fraction: 0.02, minimum: 0.0 };

    #[test]
    fn reaching_needs_the_level_holding_needs_the_band() {
        let up = Direction::HigherIsWorse;
        assert_eq!(next_severity(up, &LF, &DB, None, 0.299), None);
        assert_eq!(next_severity(up, &LF, &DB, None, 0.3), Some(Severity::Advisory));
        assert_eq!(next_severity(up, &LF, &DB, None, 0.71), Some(Severity::Critical));
        // Warning held down to 0.5 − 0.01.
        assert_eq!(next_severity(up, &LF, &DB, Some(Severity::Warning), 0.491), Some(Severity::Warning));
        assert_eq!(next_severity(up, &LF, &DB, Some(Severity::Warning), 0.489), Some(Severity::Advisory));
        // Advisory held down to 0.3 − 0.006.
        assert_eq!(next_severity(up, &LF, &DB, Some(Severity::Advisory), 0.295), Some(Severity::Advisory));
        assert_eq!(next_severity(up, &LF, &DB, Some(Severity::Advisory), 0.293), None);
        // A band never lifts an alarm above what it holds.
        assert_eq!(next_severity(up, &LF, &DB, Some(Severity::Advisory), 0.495), Some(Severity::Advisory));
    }

    #[test]
    fn lower_is_worse_mirrors() {
        let h = Levels { advisory: None, warning: Some(17_520.0), critical: Some(8_760.0) };
        let down = Direction::LowerIsWorse;
        assert_eq!(next_severity(down, &h, &DB, None, 20_000.0), None);
        assert_eq!(next_severity(down, &h, &DB, None, 17_000.0), Some(Severity::Warning));
        assert_eq!(next_severity(down, &h, &DB, None, 8_000.0), Some(Severity::Critical));
        // Critical held up to 8760 + 175.2.
        assert_eq!(next_severity(down, &h, &DB, Some(Severity::Critical), 8_900.0), Some(Severity::Critical));
        assert_eq!(next_severity(down, &h, &DB, Some(Severity::Critical), 8_950.0), Some(Severity::Warning));
        assert_eq!(next_severity(down, &h, &DB, Some(Severity::Warning), 17_800.0), Some(Severity::Warning));
        assert_eq!(next_severity(down, &h, &DB, Some(Severity::Warning), 17_900.0), None);
        assert_eq!(next_severity(down, &h, &DB, Some(Severity::Warning), f64::INFINITY), None);
    }

    #[test]
    fn zero_level_uses_the_floor() {
        let od = Levels { advisory: None, warning: Some(0.0), critical: None };
        let db = Deadband::default_for(AlarmIndex::MetalTemperatureOverDesign);
        let up = Direction::HigherIsWorse;
        assert_eq!(db.width(0.0), 5.0);
        assert_eq!(next_severity(up, &od, &db, None, -0.1), None);
        assert_eq!(next_severity(up, &od, &db, Some(Severity::Warning), -4.9), Some(Severity::Warning));
        assert_eq!(next_severity(up, &od, &db, Some(Severity::Warning), -5.1), None);
    }
}

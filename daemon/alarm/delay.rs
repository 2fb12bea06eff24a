//! On-delay and off-delay, in event time: a change of an alarm's condition
//! takes effect only once it has held for the delay.
//!
//! * **On-delay**: a worse severity (activation or escalation) must hold
//!   for `on_delay_s` of event time before it is annunciated; a value that
//!   only touches a level with noise never does.
//! * **Off-delay**: a better severity (step down or clear) must hold for
//!   `off_delay_s`; an intermittent fault stays one alarm instead of one
//!   per blink.
//!
//! The waiting change is kept on the record ([`Pending`]), so a restart
//! keeps the clock. Time is event time, as everywhere in the pure book: a
//! delay advances only as data (or the service's sensor checks) move event
//! time, never by a clock of its own.
//!
//! Defaults ([`Delay::default_for`]) follow the usual starting points of
//! alarm rationalisation by signal type (common practice, ISA-TR18.2.2 /
//! EEMUA 191 tables, from memory: temperature about 60 s on and off):
//! * metal temperature over design: 60 s on, 60 s off;
//! * damage rate and projected hours to critical (rates that move with the
//!   load): 600 s on and off;
//! * sensor out of range and bad quality: alarm at once, off only after an
//!   hour of good data (3600 s), so an intermittent transmitter (burn-out
//!   spikes every half hour) is one alarm, not one per spike; a choice of
//!   this program (keeping a sensor alarm longer is the conservative side;
//!   a silence that follows is alarmed as stale meanwhile, the fault having
//!   changed);
//! * accumulated indices (life fraction, strain, wear), sensor stale (its
//!   hold time plus `stale_grace_s` is already a delay) and service health:
//!   none.
//!
//! They are choices of this program; the plant's alarm philosophy decides,
//! and `[alarms.delays.<index>]` sets them per index.

use super::index::{AlarmIndex, Severity};
use serde::{Deserialize, Serialize};

/// On-delay and off-delay of one index, seconds of event time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Delay {
    #[serde(default)]
    pub on_delay_s: f64,
    #[serde(default)]
    pub off_delay_s: f64,
}

impl Delay {
    /// No delay.
    pub const NONE: Delay = Delay { on_delay_s: 0.0, off_delay_s: 0.0 };

    /// The built-in delays of an index (see the module notes).
    pub fn default_for(index: AlarmIndex) -> Delay {
        match index {
            AlarmIndex::MetalTemperatureOverDesign => Delay { on_delay_s: 60.0, off_delay_s: 60.0 },
            AlarmIndex::DamageRate | AlarmIndex::HoursToCritical => Delay { on_delay_s: 600.0, off_delay_s: 600.0 },
            AlarmIndex::SensorOutOfRange | AlarmIndex::SensorBadQuality => {
                Delay { on_delay_s: 0.0, off_delay_s: 3600.0 }
            }
            _ => Delay::NONE,
        }
    }
}

/// A change of condition waiting for its delay.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Pending {
    /// The condition waiting (`None`: clear).
    pub condition: Option<Severity>,
    /// Event time (ms) it was first seen.
    pub since_ms: i64,
}

/// The condition to act on now, given the one in force (`current`), the
/// one the value implies (`implied`) and what was waiting (`pending`,
/// updated in place).
pub fn filter(
    delay: &Delay,
    current: Option<Severity>,
    implied: Option<Severity>,
    pending: &mut Option<Pending>,
    time_ms: i64,
) -> Option<Severity> {
    if implied == current {
        *pending = None;
        return current;
    }
    let wait_s = if implied > current { delay.on_delay_s } else { delay.off_delay_s };
    let wait_ms = if wait_s.is_finite() && wait_s > 0.0 { (wait_s * 1000.0).round() as i64 } else { 0 };
    let since = match pending {
        Some(p) if p.condition == implied => p.since_ms,
        _ => time_ms,
    };
    if time_ms.saturating_sub(since) >= wait_ms {
        *pending = None;
        implied
    } else {
        *pending = Some(Pending { condition: implied, since_ms: since });
        current
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    const W: Option<Severity> = Some(Severity::Warning);

    #[test]
    fn a_change_acts_once_it_has_held_for_its_delay() {
        let d = Delay { on_delay_s: 60.0, off_delay_s: 30.0 };
        let mut p = None;
        assert_eq!(filter(&d, None, W, &mut p, 0), None);
        assert_eq!(filter(&d, None, W, &mut p, 59_999), None);
        assert_eq!(filter(&d, None, W, &mut p, 60_000), W);
        assert_eq!(p, None);
        // Interrupted: the clock starts again.
        assert_eq!(filter(&d, W, None, &mut p, 70_000), W);
        assert_eq!(filter(&d, W, W, &mut p, 80_000), W);
        assert_eq!(filter(&d, W, None, &mut p, 90_000), W);
        assert_eq!(filter(&d, W, None, &mut p, 119_999), W);
        assert_eq!(filter(&d, W, None, &mut p, 120_000), None);
        // No delay: at once.
        assert_eq!(filter(&Delay::NONE, None, W, &mut None, 0), W);
    }
}

//! The plant simulator of the demo: generates tag values for an invented
//! unit from the configuration's own plan (design conditions, units of each
//! tag), time-compressed, with start-ups, daily load swings, a shutdown, an
//! over-temperature excursion and a failing sensor.
//!
//! Pure: `values_at(t)` is a function of simulated time only (plus a
//! deterministic jitter), so the scenario is the same on every run.
//! Invented behaviour for the demo only.

use crate::engine::plan::{Input, Plan};
use crate::physics::units::Quantity;

/// What one tag represents in the scenario.
#[derive(Debug, Clone)]
struct SimTag {
    name: String,
    quantity: Quantity,
    /// Full-load value in internal units.
    full: f64,
    /// Cold value in internal units.
    cold: f64,
    /// Converts an internal value to what the tag publishes.
    unit: crate::engine::plan::TagPlan,
    /// This tag shows the over-temperature excursion.
    excursion: bool,
    /// This tag's sensor fails (spikes, then silence).
    failing: bool,
}

/// Scenario timetable, in simulated days from the start.
pub const EXCURSION_DAY: f64 = 3.0;
pub const EXCURSION_HOURS: f64 = 6.0;
pub const FAILURE_DAY: f64 = 5.0;
pub const SILENCE_HOURS: f64 = 20.0;
/// Good readings between the burn-out spikes and the silence: longer than
/// the hour of good data an out-of-range alarm needs to clear, so the
/// silence raises its own stale-tag alarm (one fault is one alarm: a tag
/// still out of range when it falls silent would stay out of range).
pub const RECOVERY_HOURS: f64 = 2.0;
pub const SHUTDOWN_DAY: f64 = 12.0;
pub const SHUTDOWN_HOURS: f64 = 30.0;

/// The simulator.
#[derive(Debug, Clone)]
pub struct Simulator {
    tags: Vec<SimTag>,
    start_ms: i64,
}

/// One generated sample: tag, event time, value in the tag's unit.
#[derive(Debug, Clone, PartialEq)]
pub struct SimSample {
    pub tag: String,
    pub time_ms: i64,
    pub value: f64,
}

fn jitter(seed: u64) -> f64 {
    // SplitMix64 to a number in [-1, 1).
    let mut z = seed.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 52) as f64 - 1.0
}

impl Simulator {
    /// Build the scenario from a plan, starting at `start_ms` of event time.
    pub fn new(plan: &Plan, start_ms: i64) -> Simulator {
        let mut tags = vec![];
        let mut temp_tags_seen = 0;
        for (ti, tp) in plan.tags.iter().enumerate() {
            let id = ti as u32;
            let reader = plan.components.iter().find(|c| c.tags().contains(&id));
            let (full, cold): (f64, f64) = match (tp.unit.quantity, reader) {
                (Quantity::Temperature, Some(c)) => {
                    let d = c.design_temperature_k.unwrap_or(813.15);
                    (d - 12.0, 300.0)
                }
                (Quantity::Temperature, None) => (813.15, 300.0),
                (Quantity::Pressure, Some(c)) => (0.93 * c.design_pressure_mpa.unwrap_or(16.0), 0.0),
                (Quantity::Pressure, None) => (16.0, 0.0),
                (Quantity::Force, _) => (120.0, 20.0),
                (Quantity::Length, _) => (0.06, 0.005),
                (Quantity::Speed, _) => (2.0, 0.0),
                (Quantity::Frequency, _) => (15.0, 0.0),
                (Quantity::Dimensionless, _) => (1.0, 0.0),
            };
            // Stay inside the tag's valid range when cold.
            let cold = match tp.valid_range {
                Some([lo, _]) if tp.unit.quantity == Quantity::Temperature => cold.max(tp.unit.to_internal(lo) + 30.0),
                _ => cold,
            };
            let is_temp = tp.unit.quantity == Quantity::Temperature;
            let excursion = is_temp
                && reader.is_some_and(|c| {
                    c.name.contains("OUTLET-LEG-A")
                        || (c.metal_temperature == Some(Input::Tag(id))
                            && temp_tags_seen == 0
                            && !plan.components.iter().any(|c| c.name.contains("OUTLET-LEG-A")))
                });
            let failing = is_temp && reader.is_some_and(|c| c.name.contains("OUTLET-LEG-B"));
            if is_temp {
                temp_tags_seen += 1;
            }
            tags.push(SimTag {
                name: tp.name.clone(),
                quantity: tp.unit.quantity,
                full,
                cold,
                unit: tp.clone(),
                excursion,
                failing,
            });
        }
        // Without the named parts, the second temperature tag fails.
        if !tags.iter().any(|t| t.failing) {
            if let Some(t) = tags.iter_mut().filter(|t| t.quantity == Quantity::Temperature).nth(1) {
                t.failing = true;
            }
        }
        Simulator { tags, start_ms }
    }

    /// Unit load (0 = cold and stopped, 1 = full load) at simulated day `d`.
    pub fn load(d: f64) -> f64 {
        let start_up = |since_h: f64| (since_h / 8.0).clamp(0.0, 1.0);
        let restart = SHUTDOWN_DAY + SHUTDOWN_HOURS / 24.0;
        let running = if d < SHUTDOWN_DAY {
            start_up(d * 24.0)
        } else if d < restart {
            // Coast down over 4 h, then cold.
            (1.0 - (d - SHUTDOWN_DAY) * 24.0 / 4.0).max(0.0)
        } else {
            start_up((d - restart) * 24.0)
        };
        // Daily swing: 65 % at night, full load in the afternoon.
        let daily = 0.825 + 0.175 * (2.0 * std::f64::consts::PI * (d - 0.375)).sin();
        running * daily
    }

    /// The samples at one instant (the failing sensor may give none).
    pub fn samples_at(&self, time_ms: i64) -> Vec<SimSample> {
        let d = (time_ms - self.start_ms) as f64 / 86_400_000.0;
        let load = Self::load(d);
        let mut out = Vec::with_capacity(self.tags.len());
        for (i, t) in self.tags.iter().enumerate() {
            let j = jitter((time_ms as u64).wrapping_mul(31).wrapping_add(i as u64));
            let mut v = match t.quantity {
                Quantity::Temperature => {
                    // Metal temperature follows load: 50 K below full-load
                    // temperature at zero load on the firing curve, down to
                    // cold below 30 % load (start-up and coast-down).
                    let hot = |l: f64| t.full - 50.0 * (1.0 - l);
                    let v = if load >= 0.3 { hot(load) } else { t.cold + (hot(0.3) - t.cold) * load / 0.3 };
                    // Mostly a disturbance common to every temperature (the
                    // fire), a little of each sensor's own: two thermocouples
                    // of one fatigue location then differ by sensor noise
                    // only, below the rainflow gate.
                    let common = jitter((time_ms as u64).wrapping_mul(31).wrapping_add(1_000_003));
                    v.max(t.cold) + 1.3 * common + 0.2 * j
                }
                _ => (t.cold + (t.full - t.cold) * load * (1.0 + 0.01 * j)).max(t.cold),
            };
            if t.excursion && (EXCURSION_DAY..EXCURSION_DAY + EXCURSION_HOURS / 24.0).contains(&d) {
                v += 45.0;
            }
            let mut spike = false;
            if t.failing {
                let f = d - FAILURE_DAY;
                if (0.0..0.5).contains(&f) && j > 0.9 {
                    // Burn-out spikes: 5000 in the tag's unit, outside any
                    // valid range, so they are rejected as out of range.
                    spike = true;
                } else if (0.5 + RECOVERY_HOURS / 24.0..0.5 + (RECOVERY_HOURS + SILENCE_HOURS) / 24.0).contains(&f) {
                    continue; // silent: the stale-tag alarm fires
                }
            }
            // Internal value to the tag's engineering unit, then to raw.
            let eng = if spike { 5000.0 } else { t.unit.unit.from_internal(v) };
            let raw = (eng - t.unit.offset) / t.unit.scale;
            out.push(SimSample { tag: t.name.clone(), time_ms, value: (raw * 1000.0).round() / 1000.0 });
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn load_profile() {
        assert_eq!(Simulator::load(0.0), 0.0);
        assert!(Simulator::load(1.5) > 0.6);
        assert_eq!(Simulator::load(SHUTDOWN_DAY + 0.5), 0.0);
        assert!(Simulator::load(SHUTDOWN_DAY + 3.0) > 0.6);
    }

    #[test]
    fn demo_scenario_has_an_excursion_and_a_failing_sensor() {
        let cfg: crate::settings::Settings = toml::from_str(include_str!("../../config/demo/plant.toml")).unwrap();
        let plan = crate::settings::validate::plan_settings("demo", cfg).unwrap().plan;
        let sim = Simulator::new(&plan, 0);
        assert!(sim.tags.iter().any(|t| t.excursion));
        assert!(sim.tags.iter().any(|t| t.failing));
        let n_normal = sim.samples_at(2 * 86_400_000).len();
        let n_silent = sim.samples_at(((FAILURE_DAY + 0.6) * 86_400_000.0) as i64).len();
        assert_eq!(n_silent + 1, n_normal);
        // Between the spikes and the silence the thermocouple reads well
        // for longer than an out-of-range alarm needs to clear.
        let recovering = ((FAILURE_DAY + 0.5 + 0.5 * RECOVERY_HOURS / 24.0) * 86_400_000.0) as i64;
        assert_eq!(sim.samples_at(recovering).len(), n_normal);
        const { assert!(RECOVERY_HOURS > 1.0, "an out-of-range alarm clears after an hour of good data") };
    }
}

//! Loading and validating a configuration into the engine's plan.
//!
//! Every problem is collected, not just the first, and each names the file,
//! the place (component or tag), the key, what is wrong and how to fix it.

use super::library::MaterialLibrary;
use super::schema::*;
use crate::engine::plan::*;
use crate::physics::histogram::TimeAtCondition;
use crate::physics::material::Material;
use crate::physics::stress::StressBasis;
use crate::physics::units::{celsius_to_kelvin, kelvin_to_celsius, Quantity, Unit};
use std::collections::HashMap;
use std::fmt;
use std::path::{Path, PathBuf};

mod fatigue;
pub use fatigue::{DEFAULT_CREEP_FATIGUE, DEFAULT_FATIGUE_USAGE};

/// One problem found in a configuration.
#[derive(Debug, Clone, PartialEq)]
pub struct ConfigProblem {
    /// Where: `component "X"`, `tag "Y"`, `material "Z"`, or `file`.
    pub place: String,
    /// The key, dotted, for example `geometry.wall`.
    pub key: String,
    /// What is wrong.
    pub problem: String,
    /// What would fix it.
    pub fix: String,
}

impl fmt::Display for ConfigProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}, key `{}`: {}", self.place, self.key, self.problem)?;
        if !self.fix.is_empty() {
            write!(f, " (fix: {})", self.fix)?;
        }
        Ok(())
    }
}

/// A configuration that cannot be used, with every problem found.
#[derive(Debug, Clone, thiserror::Error)]
pub struct ConfigError {
    pub file: String,
    pub problems: Vec<ConfigProblem>,
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // The same problem found twice (by two checks) is printed once.
        let mut unique: Vec<&ConfigProblem> = vec![];
        for p in &self.problems {
            if !unique.contains(&p) {
                unique.push(p);
            }
        }
        writeln!(f, "configuration {} has {} problem(s):", self.file, unique.len())?;
        for p in unique {
            writeln!(f, "  - {p}")?;
        }
        Ok(())
    }
}

/// A loaded configuration: the settings as read, the library with user
/// grades added, the plan for the engine and any warnings.
#[derive(Debug, Clone)]
pub struct LoadedConfig {
    pub file: String,
    pub settings: Settings,
    pub library: MaterialLibrary,
    pub plan: Plan,
    pub warnings: Vec<ConfigProblem>,
}

/// Where the `LIFELEDGER__SECTION__KEY` overrides of a configuration file
/// come from.
#[derive(Debug, Clone, Default, PartialEq)]
pub enum Overrides {
    /// The process environment: what `run`, `replay`, `check-config` and
    /// `ledger` read (containers configure the service this way).
    #[default]
    Environment,
    /// None: the file alone. The demo runs on its own settings and must not
    /// follow a production environment into a production ledger or database.
    FileOnly,
    /// These variables (name, value) instead of the process environment, so
    /// tests never change the environment other tests and children inherit.
    Given(Vec<(String, String)>),
}

/// Read a configuration file with `LIFELEDGER__…` environment overrides.
pub fn read_settings(path: &Path) -> Result<Settings, ConfigError> {
    read_settings_with(path, &Overrides::Environment)
}

/// Read a configuration file with overrides from `overrides`.
pub fn read_settings_with(path: &Path, overrides: &Overrides) -> Result<Settings, ConfigError> {
    let file = path.display().to_string();
    let fail = |problem: String, fix: &str| ConfigError {
        file: file.clone(),
        problems: vec![ConfigProblem { place: "file".into(), key: "-".into(), problem, fix: fix.into() }],
    };
    if !path.exists() {
        return Err(fail("file not found".into(), "give the path of a TOML configuration file"));
    }
    // Parse with toml first: its errors carry line and column numbers.
    let text = std::fs::read_to_string(path).map_err(|e| fail(e.to_string(), "check permissions"))?;
    // Every schema problem at once (each unknown key with its line and a
    // suggestion), not one per run.
    let problems = super::schema_check::schema_problems(&text);
    if !problems.is_empty() {
        return Err(ConfigError { file: file.clone(), problems });
    }
    // Overrides stay text (`try_parsing(false)`): a string setting keeps
    // "007" or "12345" as written; number and boolean settings parse the
    // text when the settings are deserialised.
    let env =
        || config::Environment::with_prefix("LIFELEDGER").prefix_separator("__").separator("__").try_parsing(false);
    let builder =
        config::Config::builder().add_source(config::File::from(PathBuf::from(path)).format(config::FileFormat::Toml));
    let builder = match overrides {
        Overrides::Environment => builder.add_source(env()),
        Overrides::FileOnly => builder,
        Overrides::Given(vars) => builder.add_source(env().source(Some(vars.iter().cloned().collect()))),
    };
    let cfg = builder.build().map_err(|e| fail(e.to_string(), "correct the TOML"))?;
    cfg.try_deserialize::<Settings>()
        .map_err(|e| fail(format!("after environment overrides: {e}"), "check LIFELEDGER__… variables"))
}

/// Read, validate and plan a configuration file (with environment overrides).
pub fn load_plan(path: &Path) -> Result<LoadedConfig, ConfigError> {
    load_plan_with(path, &Overrides::Environment)
}

/// Read, validate and plan a configuration file with overrides from `overrides`.
pub fn load_plan_with(path: &Path, overrides: &Overrides) -> Result<LoadedConfig, ConfigError> {
    let settings = read_settings_with(path, overrides)?;
    plan_settings(&path.display().to_string(), settings)
}

/// Validate settings already read and build the plan.
pub fn plan_settings(file: &str, settings: Settings) -> Result<LoadedConfig, ConfigError> {
    let mut v = Validator { problems: vec![], warnings: vec![] };
    let mut library = MaterialLibrary::embedded();
    for m in &settings.materials {
        v.material(m);
        library.insert(m.clone());
    }
    let (included, problems) = super::material_file::read_all(file, &settings.material_files);
    v.problems.extend(problems);
    let mut user_grades: Vec<String> = settings.materials.iter().map(|m| m.grade.clone()).collect();
    for (shown, m) in included {
        let before = v.problems.len();
        v.material(&m);
        if user_grades.contains(&m.grade) {
            v.err(
                &format!("material \"{}\"", m.grade),
                "grade",
                "defined twice (a [[material]] block or another [[material_file]] has it too)",
                "keep one definition, or give the fitted grade its own name (--grade)",
            );
        }
        for p in &mut v.problems[before..] {
            p.place = format!("{} (from [[material_file]] {shown})", p.place);
        }
        user_grades.push(m.grade.clone());
        library.insert(m);
    }
    v.engine(&settings.engine);
    if let Some(p) = name_problem(&settings.plant.name) {
        v.err("[plant]", "name", p, "use printable characters only (it is the plant tag of every database point)");
    }
    let tags = v.tags(&settings);
    let timing = v.timing(&settings);
    let tag_index: HashMap<&str, usize> = tags.iter().enumerate().map(|(i, t)| (t.name.as_str(), i)).collect();
    let mut components = Vec::new();
    let mut seen = HashMap::new();
    for (i, c) in settings.components.iter().enumerate() {
        if let Some(j) = seen.insert(c.name.clone(), i) {
            v.err(
                &format!("component \"{}\"", c.name),
                "name",
                format!("duplicate component name (also component #{})", j + 1),
                "give every component a unique name",
            );
        }
        if let Some(p) = v.component(c, &settings, &library, &tags, &tag_index) {
            components.push(p);
        }
    }
    if !v.problems.is_empty() {
        return Err(ConfigError { file: file.to_string(), problems: v.problems });
    }
    let plan = Plan {
        plant: settings.plant.name.clone(),
        gap_policy: settings.engine.gap_policy,
        recent_rate_window_h: settings.engine.recent_rate_window_h,
        future_margin_ms: timing.future_margin_ms,
        earliest_plausible_ms: timing.earliest_plausible_ms,
        reorder_window_ms: timing.reorder_window_ms,
        tags,
        components,
    };
    Ok(LoadedConfig { file: file.to_string(), settings, library, plan, warnings: v.warnings })
}

/// Whether a name is safe for logs, topics and line protocol.
pub fn name_problem(name: &str) -> Option<String> {
    if name.trim().is_empty() {
        return Some("name is empty".into());
    }
    if let Some(c) = name.chars().find(|c| c.is_control()) {
        return Some(format!("name contains the control character U+{:04X}", c as u32));
    }
    if name != name.trim() {
        return Some("name has leading or trailing spaces".into());
    }
    None
}

/// A number for a message: at most six decimals, trailing zeros dropped
/// (−273.15, 10000, 1000000).
fn tidy(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}

/// Parse an RFC 3339 date-time or a plain date (midnight UTC) to ms.
pub fn parse_date_ms(s: &str) -> Option<i64> {
    if let Ok(t) = chrono::DateTime::parse_from_rfc3339(s) {
        return Some(t.timestamp_millis());
    }
    chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d")
        .ok()
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|d| d.and_utc().timestamp_millis())
}

/// The date a free text begins with (`2026-09-30 (spring outage)`), for
/// `[component.initial] as_of`; `None` when it begins with no date.
fn leading_date_ms(s: &str) -> Option<i64> {
    let first = s.split_whitespace().next()?;
    parse_date_ms(first)
}

/// The event-time rules of `[engine]`, in ms.
struct Timing {
    future_margin_ms: i64,
    earliest_plausible_ms: i64,
    reorder_window_ms: i64,
}

struct Validator {
    problems: Vec<ConfigProblem>,
    warnings: Vec<ConfigProblem>,
}

impl Validator {
    fn err(&mut self, place: &str, key: &str, problem: impl Into<String>, fix: &str) {
        self.problems.push(ConfigProblem {
            place: place.into(),
            key: key.into(),
            problem: problem.into(),
            fix: fix.into(),
        });
    }

    fn warn(&mut self, place: &str, key: &str, problem: impl Into<String>, fix: &str) {
        self.warnings.push(ConfigProblem {
            place: place.into(),
            key: key.into(),
            problem: problem.into(),
            fix: fix.into(),
        });
    }

    fn material(&mut self, m: &Material) {
        let place = format!("material \"{}\"", m.grade);
        if let Some(p) = name_problem(&m.grade) {
            self.err(&place, "grade", p, "use printable characters only");
        }
        let lm = &m.larson_miller;
        if !(2..=4).contains(&lm.coefficients.len()) {
            self.err(
                &place,
                "larson_miller.coefficients",
                "needs 2 to 4 coefficients",
                "give [a0, a1] up to [a0, a1, a2, a3]",
            );
        }
        if !(lm.stress_range_mpa[0] > 0.0 && lm.stress_range_mpa[0] < lm.stress_range_mpa[1]) {
            self.err(
                &place,
                "larson_miller.stress_range_mpa",
                "must be [low, high] with 0 < low < high",
                "give the stress span of the data",
            );
        }
        if !(lm.temperature_range_k[0] > 0.0 && lm.temperature_range_k[0] < lm.temperature_range_k[1]) {
            self.err(
                &place,
                "larson_miller.temperature_range_k",
                "must be [low, high] in K with 0 < low < high",
                "give the temperature span of the data in K",
            );
        }
        if !(m.melting_point_k.value > 0.0) {
            self.err(&place, "melting_point_k", "must be positive (K)", "give the solidus in K");
        }
    }

    /// Engine-wide numbers.
    fn engine(&mut self, e: &EngineSettings) {
        let place = "[engine]";
        if !(e.recent_rate_window_h > 0.0 && e.recent_rate_window_h.is_finite()) {
            self.err(place, "recent_rate_window_h", "must be a positive number of hours", "for example 720");
        }
        if !(e.recent_rate_settling_h >= 0.0 && e.recent_rate_settling_h.is_finite()) {
            self.err(
                place,
                "recent_rate_settling_h",
                "must be zero or a positive number of hours",
                "for example 168 (one week of operation)",
            );
        }
        if !(e.temperature_class_k > 0.0 && e.temperature_class_k.is_finite()) {
            self.err(place, "temperature_class_k", "must be a positive number of kelvin", "for example 10");
        }
        if !e.temperature_class_origin_c.is_finite() {
            self.err(place, "temperature_class_origin_c", "must be a finite temperature in °C", "for example 0");
        }
    }

    /// Timestamp plausibility and the reorder window.
    fn timing(&mut self, s: &Settings) -> Timing {
        let e = &s.engine;
        let mut seconds = |key: &str, v: f64, max_s: f64, fix: &str| -> i64 {
            if !(v.is_finite() && (0.0..=max_s).contains(&v)) {
                self.err("[engine]", key, format!("{v} is not a number of seconds from 0 to {max_s}"), fix);
                return 0;
            }
            (v * 1000.0).round() as i64
        };
        let future_margin_ms = seconds(
            "future_margin_s",
            e.future_margin_s,
            86_400.0,
            "for example 300 (samples more than 5 minutes ahead of the clock are rejected)",
        );
        let reorder_window_ms = seconds(
            "reorder_window_s",
            e.reorder_window_s,
            86_400.0,
            "for example 120 (samples up to 2 minutes out of order are integrated in order)",
        );
        let earliest_plausible_ms = match parse_date_ms(e.earliest_plausible.trim()) {
            Some(t) => t,
            None => {
                self.err(
                    "[engine]",
                    "earliest_plausible",
                    format!("{:?} is not an RFC 3339 date or date-time", e.earliest_plausible),
                    "for example \"2000-01-01\"",
                );
                0
            }
        };
        Timing { future_margin_ms, earliest_plausible_ms, reorder_window_ms }
    }

    fn tags(&mut self, s: &Settings) -> Vec<TagPlan> {
        let mut out = Vec::new();
        let mut seen = HashMap::new();
        for (i, t) in s.tags.iter().enumerate() {
            let place = format!("tag \"{}\"", t.name);
            if let Some(p) = name_problem(&t.name) {
                self.err(&place, "name", p, "use printable characters only");
            }
            if let Some(j) = seen.insert(t.name.clone(), i) {
                self.err(
                    &place,
                    "name",
                    format!("duplicate tag (also tag #{})", j + 1),
                    "define each tag once; several components may read it",
                );
            }
            let unit = match Unit::parse(&t.unit) {
                Ok(u) => u,
                Err(e) => {
                    self.err(&place, "unit", e.to_string(), "use one of the listed spellings");
                    Unit::parse("1").unwrap()
                }
            };
            // Every tag has a plausibility range: its own, or else the
            // physical default of its quantity, in the tag's unit (the unit
            // of the value after scale and offset, which the engine's screen
            // compares with the range).
            let valid_range = match t.valid_range {
                Some([lo, hi]) => {
                    if !(lo < hi) {
                        self.err(&place, "valid_range", "low must be below high", "give [low, high] in the tag's unit");
                    }
                    [lo, hi]
                }
                None => {
                    let [lo, hi] = unit.plausible_range();
                    self.warn(
                        &place,
                        "valid_range",
                        format!(
                            "not set: the physical default for {} applies, {} to {} {}",
                            unit.quantity,
                            tidy(lo),
                            tidy(hi),
                            unit.name
                        ),
                        "set valid_range = [low, high] to the transmitter's calibrated span",
                    );
                    [lo, hi]
                }
            };
            let hold = t.max_hold_s.unwrap_or(s.engine.max_hold_s);
            if !(hold > 0.0 && hold.is_finite()) {
                self.err(&place, "max_hold_s", "must be a positive number of seconds", "for example 900");
            }
            if !(t.scale.is_finite() && t.scale != 0.0 && t.offset.is_finite()) {
                self.err(
                    &place,
                    "scale",
                    "scale must be finite and non-zero, offset finite",
                    "default scale = 1, offset = 0",
                );
            }
            out.push(TagPlan {
                name: t.name.clone(),
                unit,
                valid_range: Some(valid_range),
                max_hold_ms: (hold * 1000.0).round() as i64,
                interpolation: t.interpolation,
                scale: t.scale,
                offset: t.offset,
            });
        }
        out
    }

    fn quantity(&mut self, place: &str, key: &str, q: &QuantitySetting, quantity: Quantity) -> Option<f64> {
        match Unit::parse_for(&q.unit, quantity) {
            Ok(u) => {
                if !q.value.is_finite() {
                    self.err(place, key, "value is not a finite number", "give a number");
                    return None;
                }
                Some(u.to_internal(q.value))
            }
            Err(e) => {
                self.err(place, key, e.to_string(), "use one of the listed spellings");
                None
            }
        }
    }

    fn input(
        &mut self,
        place: &str,
        key: &str,
        i: &InputSetting,
        quantity: Quantity,
        tags: &[TagPlan],
        index: &HashMap<&str, usize>,
    ) -> Option<Input> {
        match i {
            InputSetting::Constant(q) => {
                let v = self.quantity(place, key, q, quantity)?;
                let [lo, hi] = quantity.plausible_range();
                if !(lo..=hi).contains(&v) || (quantity == Quantity::Temperature && v <= 0.0) {
                    let u = Unit::parse(&q.unit).unwrap_or_else(|_| Unit::parse("1").unwrap());
                    self.err(
                        place,
                        key,
                        format!(
                            "{} {} is outside the physical range of {quantity} ({} to {} {})",
                            q.value,
                            q.unit,
                            tidy(u.from_internal(lo)),
                            tidy(u.from_internal(hi)),
                            u.name
                        ),
                        "check the value and its unit",
                    );
                }
                Some(Input::Constant(v))
            }
            InputSetting::Tag(name) => match index.get(name.as_str()) {
                Some(&ti) => {
                    if tags[ti].unit.quantity != quantity {
                        self.err(
                            place,
                            key,
                            format!(
                                "tag \"{name}\" measures {} (unit {}), but {key} needs {quantity}",
                                tags[ti].unit.quantity, tags[ti].unit.name
                            ),
                            "point the input at a tag of the right kind, or fix the tag's unit",
                        );
                    }
                    Some(Input::Tag(ti as TagId))
                }
                None => {
                    self.err(
                        place,
                        key,
                        format!("tag \"{name}\" is not defined"),
                        "add a [[tag]] entry with this name, or correct the name",
                    );
                    None
                }
            },
        }
    }

    fn levels(&mut self, place: &str, key: &str, given: Option<LevelSettings>, default: Levels) -> Levels {
        let l = match given {
            None => default,
            Some(g) => Levels { advisory: g.advisory, warning: g.warning, critical: g.critical },
        };
        let vals: Vec<f64> = l.iter().map(|(_, v)| v).collect();
        if vals.windows(2).any(|w| w[0] >= w[1]) {
            self.err(place, key, "levels must rise: advisory < warning < critical", "reorder the levels");
        }
        if vals.iter().any(|v| !v.is_finite() || *v < 0.0) {
            self.err(place, key, "levels must be finite and not negative", "give numbers ≥ 0");
        }
        l
    }

    fn component(
        &mut self,
        c: &ComponentSettings,
        s: &Settings,
        library: &MaterialLibrary,
        tags: &[TagPlan],
        index: &HashMap<&str, usize>,
    ) -> Option<ComponentPlan> {
        let place = format!("component \"{}\"", c.name);
        let place = place.as_str();
        if let Some(p) = name_problem(&c.name) {
            self.err(place, "name", p, "use printable characters only");
        }
        if let Some(p) = (!c.unit.is_empty()).then(|| name_problem(&c.unit)).flatten() {
            self.err(place, "unit", p, "use printable characters only");
        }
        let material = match library.get(&c.material) {
            Some(m) => Some(m.clone()),
            None => {
                self.err(
                    place,
                    "material",
                    format!("unknown grade \"{}\"", c.material),
                    &format!("use one of: {}; or add a [[material]] block", library.names().join(", ")),
                );
                None
            }
        };
        if let Some(why) = material.as_ref().and_then(|m| m.unchecked_curve.as_ref()) {
            if c.kind != ComponentKind::WearContact {
                self.warn(
                    place,
                    "material",
                    format!("the rupture curve of {} is not checked against a second source: {why}", c.material),
                    "give the supplier's curve as a [[material]] block (or [[material_file]]) for this part",
                );
            }
        }
        let design_t = c
            .design_temperature
            .as_ref()
            .and_then(|q| self.quantity(place, "design_temperature", q, Quantity::Temperature));
        let design_p =
            c.design_pressure.as_ref().and_then(|q| self.quantity(place, "design_pressure", q, Quantity::Pressure));
        let metal_temperature = c
            .metal_temperature
            .as_ref()
            .and_then(|i| self.input(place, "metal_temperature", i, Quantity::Temperature, tags, index));
        let pressure =
            c.pressure.as_ref().and_then(|i| self.input(place, "pressure", i, Quantity::Pressure, tags, index));

        let stress = if let Some(fs) = &c.fixed_stress {
            if c.geometry.is_some() {
                self.err(
                    place,
                    "fixed_stress",
                    "both fixed_stress and geometry are given",
                    "keep one: geometry for pressure parts, fixed_stress otherwise",
                );
            }
            self.quantity(place, "fixed_stress", fs, Quantity::Pressure).map(StressPlan::Fixed)
        } else if let Some(g) = &c.geometry {
            let od = self.quantity(place, "geometry.outside_diameter", &g.outside_diameter, Quantity::Length);
            let wall = self.quantity(place, "geometry.wall", &g.wall, Quantity::Length);
            let loss = g
                .measured_wall_loss
                .as_ref()
                .and_then(|q| self.quantity(place, "geometry.measured_wall_loss", q, Quantity::Length))
                .unwrap_or(0.0);
            if let Some(ca) = &g.corrosion_allowance {
                self.quantity(place, "geometry.corrosion_allowance", ca, Quantity::Length);
            }
            let wall_ref = match &g.wall_reference_date {
                None => None,
                Some(d) => match parse_date_ms(d) {
                    Some(ms) => Some(ms),
                    None => {
                        self.err(
                            place,
                            "geometry.wall_reference_date",
                            format!("\"{d}\" is not a date"),
                            "write 2025-06-01 or 2025-06-01T00:00:00Z",
                        );
                        None
                    }
                },
            };
            if !(g.thinning_rate_mm_per_year >= 0.0 && g.thinning_rate_mm_per_year.is_finite()) {
                self.err(
                    place,
                    "geometry.thinning_rate_mm_per_year",
                    "must be zero or positive",
                    "give mm per year, 0 for none",
                );
            }
            match (od, wall) {
                (Some(od), Some(wall)) => {
                    if !(wall > 0.0) {
                        self.err(
                            place,
                            "geometry.wall",
                            "wall thickness must be positive",
                            "give the measured or nominal wall",
                        );
                    } else if !(od > 2.0 * wall) {
                        self.err(
                            place,
                            "geometry.outside_diameter",
                            format!("outside diameter {od} mm is not larger than twice the wall ({wall} mm)"),
                            "check diameter and wall (and their units)",
                        );
                    }
                    if loss >= wall && wall > 0.0 {
                        self.err(
                            place,
                            "geometry.measured_wall_loss",
                            "measured wall loss is not smaller than the wall",
                            "check the inspection record",
                        );
                    }
                    if pressure.is_none() {
                        self.err(
                            place,
                            "pressure",
                            "a pressure part needs a pressure input",
                            "set pressure = \"TAG\" or { value = …, unit = \"bar\" }",
                        );
                    }
                    Some(StressPlan::Hoop {
                        basis: c.stress_basis.unwrap_or(StressBasis::MeanDiameter),
                        outside_diameter_mm: od,
                        wall_mm: wall,
                        measured_loss_mm: loss,
                        thinning_rate_mm_per_year: g.thinning_rate_mm_per_year,
                        wall_reference_ms: wall_ref,
                    })
                }
                _ => None,
            }
        } else if c.wear.is_some() {
            Some(StressPlan::Fixed(0.0))
        } else {
            self.err(
                place,
                "geometry",
                "neither geometry nor fixed_stress is given",
                "add [component.geometry] for a pressure part, or fixed_stress",
            );
            None
        };
        if !(c.stress_factor > 0.0 && c.stress_factor.is_finite()) {
            self.err(place, "stress_factor", "must be positive", "1.0 for none");
        }
        if metal_temperature.is_none() && c.wear.is_none() && c.metal_temperature.is_none() {
            self.err(
                place,
                "metal_temperature",
                "no metal temperature input",
                "set metal_temperature = \"TAG\" or a constant",
            );
        }

        let wear = c.wear.as_ref().and_then(|w| self.wear(place, w, material.as_ref(), tags, index));

        if let (Some(m), Some(t)) = (&material, design_t) {
            let [lo, hi] = m.larson_miller.temperature_range_k;
            if (t < lo || t > hi) && t >= m.creep_threshold_k() {
                let msg = format!(
                    "design temperature {:.1} °C is outside the data range of {} ({:.0}–{:.0} °C)",
                    t - 273.15,
                    m.grade,
                    lo - 273.15,
                    hi - 273.15
                );
                if c.allow_extrapolation {
                    self.warn(place, "design_temperature", msg, "extrapolated hours are flagged");
                } else {
                    self.err(
                        place,
                        "design_temperature",
                        msg,
                        "choose a grade whose data covers it, or set allow_extrapolation = true",
                    );
                }
            }
        }
        if !(0.0..1.0e3).contains(&c.initial.life_fraction)
            || !(0.0..1.0).contains(&c.initial.creep_strain)
            || c.initial.wear_depth_mm < 0.0
        {
            self.err(
                place,
                "initial",
                "initial values must be ≥ 0 (life fraction and strain as fractions)",
                "for example life_fraction = 0.12",
            );
        }
        let th = &c.thresholds;
        let thresholds = Thresholds {
            life_fraction: self.levels(place, "thresholds.life_fraction", th.life_fraction, DEFAULT_LIFE_FRACTION),
            creep_strain: self.levels(place, "thresholds.creep_strain", th.creep_strain, DEFAULT_CREEP_STRAIN),
            wear_index: self.levels(place, "thresholds.wear_index", th.wear_index, DEFAULT_WEAR_INDEX),
            over_design_temperature_k: self.levels(
                place,
                "thresholds.over_design_temperature_k",
                th.over_design_temperature_k,
                DEFAULT_OVER_DESIGN,
            ),
            hours_to_critical: th
                .hours_to_critical
                .map(|l| Levels { advisory: l.advisory, warning: l.warning, critical: l.critical })
                .unwrap_or(DEFAULT_HOURS_TO_CRITICAL),
        };
        let fatigue = c.fatigue.as_ref().and_then(|f| {
            let fretting = c.wear.as_ref().is_some_and(|w| w.model == WearModel::Fretting);
            self.fatigue(
                place,
                f,
                material.as_ref(),
                stress.as_ref(),
                fretting,
                metal_temperature.is_some(),
                tags,
                index,
            )
        });
        let material = material?;
        let stress = stress?;
        let t_ref = design_t.unwrap_or(material.larson_miller.temperature_range_k[1]);
        // Classes on round degrees Celsius: edges at the origin plus whole
        // class widths, from about 60 K below the reference temperature to
        // about 40 K above it; converted to K as samples are, so a sample
        // on an edge lands in the class above it.
        let step = s.engine.temperature_class_k.max(1.0);
        let origin_c = s.engine.temperature_class_origin_c;
        let t_lo_c = origin_c + ((kelvin_to_celsius(t_ref) - 60.0 - origin_c) / step).floor() * step;
        let temperature_edges_k: Vec<f64> = TimeAtCondition::even_edges(t_lo_c, t_lo_c + 100.0 + step, step)
            .into_iter()
            .map(celsius_to_kelvin)
            .collect();
        let p_ref = design_p.unwrap_or(match stress {
            StressPlan::Fixed(_) => 1.0,
            _ => 20.0,
        });
        let nclass = s.engine.pressure_classes.clamp(1, 40);
        let pressure_edges_mpa: Vec<f64> = (1..=nclass).map(|i| 1.2 * p_ref * i as f64 / nclass as f64).collect();
        let curve_basis = c.curve_basis.unwrap_or(s.engine.curve_basis);
        Some(ComponentPlan {
            name: c.name.clone(),
            unit: c.unit.clone(),
            kind: c.kind,
            curve: crate::physics::larson_miller::PreparedCurve::new(&material.larson_miller, curve_basis),
            curve_basis,
            material,
            design_temperature_k: design_t,
            design_pressure_mpa: design_p,
            stress,
            stress_factor: c.stress_factor,
            metal_temperature,
            pressure,
            wear,
            initial_life_fraction: c.initial.life_fraction,
            initial_creep_strain: c.initial.creep_strain,
            initial_wear_depth_mm: c.initial.wear_depth_mm,
            initial_as_of_ms: c.initial.as_of.as_deref().and_then(leading_date_ms),
            temperature_correction_k: 0.0,
            thresholds,
            recent_rate_settling_h: s.engine.recent_rate_settling_h,
            temperature_edges_k,
            pressure_edges_mpa,
            fatigue,
        })
    }

    fn wear(
        &mut self,
        place: &str,
        w: &WearSettings,
        material: Option<&Material>,
        tags: &[TagPlan],
        index: &HashMap<&str, usize>,
    ) -> Option<WearPlan> {
        let load = self.input(place, "wear.normal_load", &w.normal_load, Quantity::Force, tags, index);
        let mut speed = None;
        let (mut slip, mut freq) = (None, None);
        let volume_coefficient;
        match w.model {
            WearModel::Archard => {
                match &w.sliding_speed {
                    Some(i) => speed = self.input(place, "wear.sliding_speed", i, Quantity::Speed, tags, index),
                    None => self.err(
                        place,
                        "wear.sliding_speed",
                        "Archard wear needs a sliding speed",
                        "set sliding_speed = \"TAG\" or { value = …, unit = \"mm/s\" }",
                    ),
                }
                let hv = w.hardness_hv.or(material.and_then(|m| m.hardness_hv.as_ref().map(|h| h.value)));
                match hv {
                    Some(hv) if hv > 0.0 => {
                        volume_coefficient = w.wear_coefficient / crate::physics::units::vickers_to_mpa(hv)
                    }
                    _ => {
                        self.err(
                            place,
                            "wear.hardness_hv",
                            "no hardness for Archard wear",
                            "set hardness_hv, or use a grade that has one",
                        );
                        volume_coefficient = 0.0;
                    }
                }
            }
            WearModel::Fretting => {
                match &w.slip_amplitude {
                    Some(i) => slip = self.input(place, "wear.slip_amplitude", i, Quantity::Length, tags, index),
                    None => self.err(
                        place,
                        "wear.slip_amplitude",
                        "fretting wear needs a slip amplitude",
                        "set slip_amplitude = \"TAG\" or { value = 50, unit = \"um\" }",
                    ),
                }
                match &w.frequency {
                    Some(i) => freq = self.input(place, "wear.frequency", i, Quantity::Frequency, tags, index),
                    None => self.err(
                        place,
                        "wear.frequency",
                        "fretting wear needs a frequency",
                        "set frequency = \"TAG\" or { value = 30, unit = \"Hz\" }",
                    ),
                }
                volume_coefficient = w.wear_coefficient;
            }
        }
        if !(w.wear_coefficient > 0.0 && w.wear_coefficient.is_finite()) {
            self.err(place, "wear.wear_coefficient", "must be positive", "give the coefficient of the contact pair");
        }
        if !(w.contact_area_mm2 > 0.0 && w.contact_area_mm2.is_finite()) {
            self.err(place, "wear.contact_area_mm2", "must be positive", "give the apparent contact area in mm²");
        }
        let allow = self.quantity(place, "wear.allowable_depth", &w.allowable_depth, Quantity::Length);
        if allow.is_some_and(|a| !(a > 0.0)) {
            self.err(place, "wear.allowable_depth", "must be positive", "give the allowable wear depth");
        }
        Some(WearPlan {
            model: w.model,
            normal_load: load?,
            sliding_speed: speed,
            slip_amplitude: slip,
            frequency: freq,
            volume_coefficient,
            contact_area_mm2: w.contact_area_mm2,
            allowable_depth_mm: allow?,
            regime_bounds: w.regime_bounds.unwrap_or_default(),
        })
    }
}

/// Default life-fraction levels: advisory 0.3, warning 0.5, critical 0.7.
/// Reasoning: rupture data scatter by a factor of about 2 in life around
/// the mean, so a life fraction of 0.5 on the minimum curve can already be
/// exhaustion for a weak heat; inspection is planned well before.
/// Defaults only: the plant's governing code and engineer set the limits.
pub const DEFAULT_LIFE_FRACTION: Levels = Levels { advisory: Some(0.3), warning: Some(0.5), critical: Some(0.7) };
/// Default creep strain levels: warning 0.5 %, critical 1 % (a common
/// replacement criterion for low-alloy steam piping is 1–2 % strain; the
/// lower end is taken). Defaults only.
pub const DEFAULT_CREEP_STRAIN: Levels = Levels { advisory: None, warning: Some(0.005), critical: Some(0.01) };
/// Default wear index levels: warning 0.5, critical 0.8 of the allowable
/// depth, leaving time to plan an outage. Defaults only.
pub const DEFAULT_WEAR_INDEX: Levels = Levels { advisory: None, warning: Some(0.5), critical: Some(0.8) };
/// Default over-design temperature: a warning at any exceedance (0 K).
pub const DEFAULT_OVER_DESIGN: Levels = Levels { advisory: None, warning: Some(0.0), critical: None };
/// Default projected hours to the critical life fraction: warning below
/// 17 520 h (two years), critical below 8 760 h (one year); lower means
/// worse, so the alarm module compares these the other way round.
pub const DEFAULT_HOURS_TO_CRITICAL: Levels =
    Levels { advisory: None, warning: Some(17_520.0), critical: Some(8_760.0) };

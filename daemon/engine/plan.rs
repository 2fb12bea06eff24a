//! The engine's plan: everything a component integrator needs, already
//! validated and in internal units. Built from the configuration by
//! `settings::validate`; the engine never sees a unit string.

use crate::physics::larson_miller::CurveBasis;
use crate::physics::material::Material;
use crate::physics::stress::StressBasis;
use crate::physics::units::Unit;
use crate::physics::wear::RegimeBounds;
use serde::{Deserialize, Serialize};

/// Index of a tag in the plan.
pub type TagId = u32;

/// One plant signal.
#[derive(Debug, Clone)]
pub struct TagPlan {
    pub name: String,
    pub unit: Unit,
    /// Accepted range in the tag's own unit (after scale and offset).
    /// Settings validation always sets it: the configured range, else the
    /// physical default of the unit's quantity.
    pub valid_range: Option<[f64; 2]>,
    /// Longest trusted hold, milliseconds.
    pub max_hold_ms: i64,
    pub interpolation: Interpolation,
    pub scale: f64,
    pub offset: f64,
}

/// Where an input's value comes from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Input {
    Tag(TagId),
    /// A constant in internal units.
    Constant(f64),
}

/// How stress is found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StressPlan {
    /// Hoop stress from pressure and geometry.
    Hoop {
        basis: StressBasis,
        outside_diameter_mm: f64,
        wall_mm: f64,
        measured_loss_mm: f64,
        thinning_rate_mm_per_year: f64,
        /// Event time (ms since epoch) of the wall measurement; `None`:
        /// thinning counts from the component's first sample.
        wall_reference_ms: Option<i64>,
    },
    /// A fixed stress, MPa.
    Fixed(f64),
}

/// Wear contact inputs and constants, internal units.
#[derive(Debug, Clone)]
pub struct WearPlan {
    pub model: WearModel,
    /// Normal load, N.
    pub normal_load: Input,
    /// Archard sliding speed, mm/s.
    pub sliding_speed: Option<Input>,
    /// Fretting slip amplitude, mm.
    pub slip_amplitude: Option<Input>,
    /// Fretting frequency, Hz.
    pub frequency: Option<Input>,
    /// Archard: K/H in mm²/N (dimensionless K over hardness in MPa).
    /// Fretting: K_w in mm³/(N·mm).
    pub volume_coefficient: f64,
    pub contact_area_mm2: f64,
    pub allowable_depth_mm: f64,
    pub regime_bounds: RegimeBounds,
}

/// Alarm levels of one index (absent level: not alarmed).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct Levels {
    pub advisory: Option<f64>,
    pub warning: Option<f64>,
    pub critical: Option<f64>,
}

impl Levels {
    /// The levels that are set, with their severity names, lowest first.
    pub fn iter(&self) -> impl Iterator<Item = (&'static str, f64)> {
        [("advisory", self.advisory), ("warning", self.warning), ("critical", self.critical)]
            .into_iter()
            .filter_map(|(n, v)| v.map(|v| (n, v)))
    }

    /// The highest level set.
    pub fn top(&self) -> Option<f64> {
        self.critical.or(self.warning).or(self.advisory)
    }
}

/// Alarm thresholds of a component, internal units.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Thresholds {
    pub life_fraction: Levels,
    /// Creep strain as a fraction (0.01 = 1 %).
    pub creep_strain: Levels,
    pub wear_index: Levels,
    /// Kelvin above design temperature.
    pub over_design_temperature_k: Levels,
    /// Hours to the critical life fraction (alarm when below).
    pub hours_to_critical: Levels,
}

/// One tracked part.
#[derive(Debug, Clone)]
pub struct ComponentPlan {
    pub name: String,
    pub unit: String,
    pub kind: ComponentKind,
    pub material: Material,
    pub curve_basis: CurveBasis,
    /// The material's master curve on `curve_basis`, prepared once.
    pub curve: crate::physics::larson_miller::PreparedCurve,
    /// Design metal temperature, K.
    pub design_temperature_k: Option<f64>,
    /// Design pressure, MPa gauge.
    pub design_pressure_mpa: Option<f64>,
    pub stress: StressPlan,
    pub stress_factor: f64,
    pub metal_temperature: Option<Input>,
    pub pressure: Option<Input>,
    pub wear: Option<WearPlan>,
    pub initial_life_fraction: f64,
    pub initial_creep_strain: f64,
    pub initial_wear_depth_mm: f64,
    /// When the initial values were established (`[component.initial]
    /// as_of`): a history starting before it is re-based there
    /// (`engine::inspection`).
    pub initial_as_of_ms: Option<i64>,
    /// Added to the measured metal temperature, K: the correction an
    /// oxide finding sets (`engine::inspection`); 0 from the configuration.
    pub temperature_correction_k: f64,
    pub thresholds: Thresholds,
    /// Operating hours the recent-rate window must hold before projections
    /// use the recent rates alone (the engine-wide setting).
    pub recent_rate_settling_h: f64,
    /// Temperature class edges of the histogram, K.
    pub temperature_edges_k: Vec<f64>,
    /// Pressure class edges of the histogram, MPa.
    pub pressure_edges_mpa: Vec<f64>,
    /// Fatigue at an assessed location (`[component.fatigue]`).
    pub fatigue: Option<super::fatigue::FatiguePlan>,
}

impl ComponentPlan {
    /// Creep threshold temperature, K.
    pub fn creep_threshold_k(&self) -> f64 {
        self.material.creep_threshold_k()
    }

    /// Tags this component reads.
    pub fn tags(&self) -> Vec<TagId> {
        let mut v: Vec<TagId> = [
            self.metal_temperature,
            self.pressure,
            self.wear.as_ref().map(|w| w.normal_load),
            self.wear.as_ref().and_then(|w| w.sliding_speed),
            self.wear.as_ref().and_then(|w| w.slip_amplitude),
            self.wear.as_ref().and_then(|w| w.frequency),
        ]
        .into_iter()
        .flatten()
        .filter_map(|i| match i {
            Input::Tag(t) => Some(t),
            Input::Constant(_) => None,
        })
        .collect();
        v.extend(self.fatigue.iter().flat_map(|f| f.tags()));
        v.sort_unstable();
        v.dedup();
        v
    }
}

/// The whole plan.
#[derive(Debug, Clone)]
pub struct Plan {
    pub plant: String,
    pub gap_policy: GapPolicy,
    pub recent_rate_window_h: f64,
    /// Largest lead of a sample's event time over the wall clock, ms.
    pub future_margin_ms: i64,
    /// Earliest plausible event time, ms since the epoch.
    pub earliest_plausible_ms: i64,
    /// Allowed lateness (reorder window), ms of event time; 0: none.
    pub reorder_window_ms: i64,
    pub tags: Vec<TagPlan>,
    pub components: Vec<ComponentPlan>,
}

/// What to do over intervals without trustworthy data.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum GapPolicy {
    /// Integrate at the worse of design conditions and the last good value
    /// (the default: over-estimates damage rather than under-estimates).
    #[default]
    Conservative,
    /// Integrate at the last good value.
    HoldLast,
    /// Integrate nothing; the hours are only counted as unmonitored.
    Exclude,
}

/// Sample-and-hold or straight-line reconstruction between samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Interpolation {
    /// Straight line between consecutive samples (analog process values).
    #[default]
    Linear,
    /// The value holds until the next sample (report-on-change signals).
    Step,
}

/// The kind of part (reporting and defaults only).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ComponentKind {
    Tube,
    Header,
    Pipe,
    Casing,
    FurnaceTube,
    WearContact,
    Other,
}

/// Wear model of a contact.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WearModel {
    /// Archard sliding wear: V̇ = K·F·v/H.
    Archard,
    /// Fretting work-rate: V̇ = K_w·F·4δf.
    Fretting,
}

//! The configuration file schema, as typed serde structs.
//!
//! Every struct rejects unknown keys, so a misspelt key is an error rather
//! than a silently ignored setting. Quantities carry their unit
//! (`{ value = 540, unit = "degC" }`); conversion to internal units happens
//! in [`super::validate`].

use crate::physics::larson_miller::CurveBasis;
use crate::physics::material::Material;
use crate::physics::stress::StressBasis;
use crate::physics::wear::RegimeBounds;
use serde::{Deserialize, Serialize};

// The engine's plan vocabulary, which the configuration names.
pub use crate::engine::plan::{ComponentKind, GapPolicy, Interpolation, WearModel};

/// The whole configuration file.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Settings {
    /// Plant identity, written as tags on every database point.
    #[serde(default)]
    pub plant: PlantSettings,
    /// Engine defaults that apply to every component.
    #[serde(default)]
    pub engine: EngineSettings,
    /// The plant signals lifeledger reads.
    #[serde(default, rename = "tag")]
    pub tags: Vec<TagSettings>,
    /// The parts whose life is tracked.
    #[serde(default, rename = "component")]
    pub components: Vec<ComponentSettings>,
    /// User material grades, in the same format as the library files.
    #[serde(default, rename = "material")]
    pub materials: Vec<Material>,
    /// Grade files included whole (`[[material_file]] path = "…"`),
    /// relative to the configuration file: `settings::material_file`.
    #[serde(default, rename = "material_file")]
    pub material_files: Vec<super::material_file::MaterialFileSettings>,
    /// Sections used by the live service (MQTT, store, database, alarms,
    /// HTTP); kept as free-form tables here and typed by the service.
    #[serde(default)]
    pub mqtt: Option<toml::Table>,
    #[serde(default)]
    pub store: Option<toml::Table>,
    #[serde(default)]
    pub database: Option<toml::Table>,
    #[serde(default)]
    pub http: Option<toml::Table>,
    #[serde(default)]
    pub alarms: Option<toml::Table>,
}

/// Plant identity.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PlantSettings {
    #[serde(default = "default_plant")]
    pub name: String,
    /// Let a SIGHUP reload retire every configured component, or more than
    /// half of them, and let `run` start with no component at all. Off by
    /// default: an empty or truncated file must not stop the ledgers.
    #[serde(default)]
    pub allow_retiring_most: bool,
}

impl Default for PlantSettings {
    fn default() -> Self {
        PlantSettings { name: default_plant(), allow_retiring_most: false }
    }
}

fn default_plant() -> String {
    "plant".into()
}

/// Engine-wide settings.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct EngineSettings {
    /// Rupture curve used for life fraction: `minimum` (default) or `mean`.
    #[serde(default)]
    pub curve_basis: CurveBasis,
    /// Policy for gaps longer than a tag's hold time.
    #[serde(default)]
    pub gap_policy: GapPolicy,
    /// Default maximum hold time of a tag, seconds (default 900).
    #[serde(default = "default_hold")]
    pub max_hold_s: f64,
    /// Time constant of the recent damage rate used for projections, hours
    /// (default 720 h, about a month of operation).
    #[serde(default = "default_tau")]
    pub recent_rate_window_h: f64,
    /// Operating hours the recent-rate window must hold before projections
    /// use the recent rates alone; until then they use the larger of the
    /// recent and the design rate and are flagged settling (default 168 h,
    /// one week: a full weekly load cycle of a cycling unit).
    #[serde(default = "default_settling")]
    pub recent_rate_settling_h: f64,
    /// Width of temperature classes in the time-at-condition histogram, K.
    #[serde(default = "default_tclass")]
    pub temperature_class_k: f64,
    /// Where the temperature classes are anchored, °C: class edges lie at
    /// this value plus whole multiples of the class width (default 0, so
    /// 10 K classes have edges on round tens of degrees Celsius).
    #[serde(default)]
    pub temperature_class_origin_c: f64,
    /// Number of pressure classes between zero and 1.2 × design pressure.
    #[serde(default = "default_pclasses")]
    pub pressure_classes: usize,
    /// A sample stamped more than this many seconds ahead of the wall clock
    /// is rejected as an implausible time (default 300 s: gateway clocks
    /// drift by seconds, not minutes).
    #[serde(default = "default_future_margin")]
    pub future_margin_s: f64,
    /// A sample stamped before this date (RFC 3339 date or date-time) is
    /// rejected as an implausible time (default 2000-01-01: a clock reset to
    /// the epoch, not plant history).
    #[serde(default = "default_earliest")]
    pub earliest_plausible: String,
    /// Allowed lateness, seconds: samples are held this long in event time
    /// and integrated in event-time order, so data reordered within the
    /// window gives the same ledger as ordered data (default 120 s). The
    /// cost is latency: ledgers and alarms run this far behind the newest
    /// sample. 0 integrates every sample on arrival.
    #[serde(default = "default_reorder")]
    pub reorder_window_s: f64,
}

impl Default for EngineSettings {
    fn default() -> Self {
        EngineSettings {
            curve_basis: CurveBasis::default(),
            gap_policy: GapPolicy::default(),
            max_hold_s: default_hold(),
            recent_rate_window_h: default_tau(),
            recent_rate_settling_h: default_settling(),
            temperature_class_k: default_tclass(),
            temperature_class_origin_c: 0.0,
            pressure_classes: default_pclasses(),
            future_margin_s: default_future_margin(),
            earliest_plausible: default_earliest(),
            reorder_window_s: default_reorder(),
        }
    }
}

fn default_hold() -> f64 {
    900.0
}
fn default_tau() -> f64 {
    720.0
}
fn default_settling() -> f64 {
    168.0
}
fn default_tclass() -> f64 {
    10.0
}
fn default_pclasses() -> usize {
    6
}
fn default_future_margin() -> f64 {
    300.0
}
fn default_earliest() -> String {
    "2000-01-01".into()
}
fn default_reorder() -> f64 {
    120.0
}

/// One plant signal.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct TagSettings {
    /// The tag name as the plant knows it, for example `U2.SH3.TE-311`.
    pub name: String,
    /// Engineering unit of the values, for example `degC`, `barg`, `N`.
    pub unit: String,
    /// Values outside `[low, high]` (in the tag's unit) are rejected.
    #[serde(default)]
    pub valid_range: Option<[f64; 2]>,
    /// Longest interval (s) over which the last value is trusted.
    #[serde(default)]
    pub max_hold_s: Option<f64>,
    #[serde(default)]
    pub interpolation: Interpolation,
    /// Raw-to-engineering scaling: `value · scale + offset` before the unit.
    #[serde(default = "one")]
    pub scale: f64,
    #[serde(default)]
    pub offset: f64,
}

fn one() -> f64 {
    1.0
}

/// A number with its unit.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct QuantitySetting {
    pub value: f64,
    pub unit: String,
}

/// An input that is either a tag name or a constant quantity.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(untagged)]
pub enum InputSetting {
    Tag(String),
    Constant(QuantitySetting),
}

/// Wall and diameter of a pressure part.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct GeometrySettings {
    pub outside_diameter: QuantitySetting,
    /// Nominal (or last measured) wall thickness.
    pub wall: QuantitySetting,
    /// Wall already lost at `wall_reference_date`, from inspection.
    #[serde(default)]
    pub measured_wall_loss: Option<QuantitySetting>,
    /// Corrosion or erosion allowance included in the wall (reported).
    #[serde(default)]
    pub corrosion_allowance: Option<QuantitySetting>,
    /// Thinning in service, mm per year, from `wall_reference_date` on.
    #[serde(default)]
    pub thinning_rate_mm_per_year: f64,
    /// Date of the wall measurement (RFC 3339 date or date-time); thinning
    /// counts from here. Default: the first sample.
    #[serde(default)]
    pub wall_reference_date: Option<String>,
}

/// Inputs and constants of a wear contact.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct WearSettings {
    pub model: WearModel,
    pub normal_load: InputSetting,
    /// Archard: sliding speed (tag or constant).
    #[serde(default)]
    pub sliding_speed: Option<InputSetting>,
    /// Fretting: slip amplitude (tag or constant).
    #[serde(default)]
    pub slip_amplitude: Option<InputSetting>,
    /// Fretting: vibration frequency (tag or constant).
    #[serde(default)]
    pub frequency: Option<InputSetting>,
    /// Archard: dimensionless K. Fretting: work-rate coefficient K_w in
    /// mm³/(N·mm) = mm²/N (a value in Pa⁻¹ times 10⁶).
    pub wear_coefficient: f64,
    /// Hardness HV of the softer surface (Archard only); default: the
    /// material's.
    #[serde(default)]
    pub hardness_hv: Option<f64>,
    /// Apparent contact area, mm².
    pub contact_area_mm2: f64,
    /// Allowable wear depth.
    pub allowable_depth: QuantitySetting,
    #[serde(default)]
    pub regime_bounds: Option<RegimeBounds>,
}

/// State found at the last inspection or carried from an earlier record.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct InitialSettings {
    #[serde(default)]
    pub life_fraction: f64,
    #[serde(default)]
    pub creep_strain: f64,
    #[serde(default)]
    pub wear_depth_mm: f64,
    /// When these were established (informational).
    #[serde(default)]
    pub as_of: Option<String>,
}

/// Threshold levels of one index.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct LevelSettings {
    pub advisory: Option<f64>,
    pub warning: Option<f64>,
    pub critical: Option<f64>,
}

/// Alarm thresholds of a component; absent levels use the defaults.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ThresholdSettings {
    #[serde(default)]
    pub life_fraction: Option<LevelSettings>,
    #[serde(default)]
    pub creep_strain: Option<LevelSettings>,
    #[serde(default)]
    pub wear_index: Option<LevelSettings>,
    /// Margin above design temperature, K, that raises an alarm (default 0).
    #[serde(default)]
    pub over_design_temperature_k: Option<LevelSettings>,
    /// Projected hours to the critical life fraction (alarm when below).
    #[serde(default)]
    pub hours_to_critical: Option<LevelSettings>,
}

/// One tracked part.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ComponentSettings {
    /// Unique name, for example `U2-SH3-OUTLET-A`.
    pub name: String,
    /// Unit or area of the plant, for example `U2`.
    #[serde(default)]
    pub unit: String,
    pub kind: ComponentKind,
    /// Library grade or user grade.
    pub material: String,
    #[serde(default)]
    pub design_temperature: Option<QuantitySetting>,
    #[serde(default)]
    pub design_pressure: Option<QuantitySetting>,
    #[serde(default)]
    pub geometry: Option<GeometrySettings>,
    /// Hoop stress formula (default `mean_diameter`).
    #[serde(default)]
    pub stress_basis: Option<StressBasis>,
    /// For parts not loaded by internal pressure: a fixed stress.
    #[serde(default)]
    pub fixed_stress: Option<QuantitySetting>,
    /// Multiplier on computed stress (stress concentration, system loads).
    #[serde(default = "one")]
    pub stress_factor: f64,
    /// Metal temperature input (tag or constant).
    #[serde(default)]
    pub metal_temperature: Option<InputSetting>,
    /// Internal pressure input (tag or constant).
    #[serde(default)]
    pub pressure: Option<InputSetting>,
    /// Rupture curve override for this component.
    #[serde(default)]
    pub curve_basis: Option<CurveBasis>,
    /// Accept design conditions outside the material data range (the
    /// engine still flags every extrapolated hour).
    #[serde(default)]
    pub allow_extrapolation: bool,
    #[serde(default)]
    pub wear: Option<WearSettings>,
    #[serde(default)]
    pub initial: InitialSettings,
    #[serde(default)]
    pub thresholds: ThresholdSettings,
    /// Fatigue at an assessed location.
    #[serde(default)]
    pub fatigue: Option<FatigueSettings>,
}

/// Fatigue at an assessed location of a component (`[component.fatigue]`).
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct FatigueSettings {
    /// The location assessed, in words (for example "bore of the largest
    /// nozzle").
    pub location: String,
    /// Stress factor k_p on the pressure hoop stress at the location
    /// (replaces the component's `stress_factor` there).
    #[serde(default = "one")]
    pub pressure_stress_factor: f64,
    /// Thermal stress factor f_t of the location (1 for a plain bore).
    #[serde(default = "one")]
    pub thermal_stress_factor: f64,
    /// Fluid or inner-surface temperature (tag or constant). With
    /// `wall_temperature` the difference is measured; alone, it is derived
    /// from its rate of change (quasi-steady hollow cylinder).
    #[serde(default)]
    pub fluid_temperature: Option<InputSetting>,
    /// Metal temperature in the wall (tag or constant), at `wall_position`.
    #[serde(default)]
    pub wall_temperature: Option<InputSetting>,
    /// Where `wall_temperature` is measured: `mid_wall` (taken as the mean
    /// wall temperature) or `outer_surface`.
    #[serde(default)]
    pub wall_position: WallPosition,
    /// Outside diameter and wall at the location for the ramp-derived
    /// difference; default: the component's geometry.
    #[serde(default)]
    pub outside_diameter: Option<QuantitySetting>,
    #[serde(default)]
    pub wall: Option<QuantitySetting>,
    /// Hysteresis gate of the rainflow counter, MPa: reversals smaller than
    /// this make no cycles.
    #[serde(default = "default_gate_mpa")]
    pub hysteresis_gate_mpa: f64,
    /// Design fatigue curve (`asme_carbon_low_alloy`, `asme_austenitic`);
    /// default: the material's.
    #[serde(default)]
    pub design_curve: Option<String>,
    /// Class widths of the cycle table, MPa.
    #[serde(default = "default_range_class_mpa")]
    pub range_class_mpa: f64,
    #[serde(default = "default_mean_class_mpa")]
    pub mean_class_mpa: f64,
    /// Rate of change of the fluid temperature in a design start-up, K/min
    /// (`check-config` shows the allowable cycles of such a start-stop).
    #[serde(default = "default_design_ramp")]
    pub design_ramp_k_per_min: f64,
    /// Fatigue usage before the ledger started (an earlier assessment).
    #[serde(default)]
    pub initial_usage: f64,
    /// Limit of the primary-plus-secondary stress range S_PS at the
    /// location, MPa: ranges above it get the simplified elastic-plastic
    /// factor K_e. Absent: no correction (the README's caution says so).
    #[serde(default)]
    pub plasticity_limit_mpa: Option<f64>,
    /// Fatigue strength reduction factor (≥ 1) of a fretting contact at the
    /// location: multiplies the alternating stress of cycles that close
    /// while the component's fretting contact is in partial or gross slip.
    /// Needs a fretting `[component.wear]`.
    #[serde(default)]
    pub fretting_knockdown: Option<f64>,
    /// Alarm levels of fatigue usage and of the creep-fatigue index.
    #[serde(default)]
    pub fatigue_usage: Option<LevelSettings>,
    #[serde(default)]
    pub creep_fatigue: Option<LevelSettings>,
}

/// Where a wall thermocouple sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WallPosition {
    #[default]
    MidWall,
    OuterSurface,
}

fn default_gate_mpa() -> f64 {
    10.0
}
fn default_range_class_mpa() -> f64 {
    20.0
}
fn default_mean_class_mpa() -> f64 {
    50.0
}
fn default_design_ramp() -> f64 {
    5.0
}

//! Formulas that turn inspection findings into ledger figures: the
//! straight-line fit of wall measurements (thinning rate with its standard
//! uncertainty), the steam-side oxide growth law (thickness and hours to an
//! effective metal temperature), and the creep-cavitation class of a
//! replica to bounds on the consumed life fraction.
//!
//! CAUTION: the oxide law and the class-to-life-fraction correlation below
//! are published screening correlations written here from memory; they are
//! not authoritative. The governing local code and a licensed engineer's
//! assessment decide; a plant should replace them with its own data.

use serde::{Deserialize, Serialize};

/// Hours in a year of 365.25 days.
pub const HOURS_PER_YEAR: f64 = 365.25 * 24.0;

/// A straight line fitted by ordinary least squares to (time, wall)
/// points: the wall at the mean time, the slope, and the slope's standard
/// uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LineFit {
    /// Slope, mm per year (negative: the wall thins).
    pub slope_mm_per_year: f64,
    /// Standard uncertainty of the slope, mm per year; `None` with two
    /// points (no degrees of freedom left for the scatter).
    pub slope_uncertainty_mm_per_year: Option<f64>,
    /// Number of points.
    pub points: usize,
}

/// Ordinary least squares of wall (mm) on time (years):
///
/// `b = Σ(tᵢ − t̄)(wᵢ − w̄) / Σ(tᵢ − t̄)²`, residual variance
/// `s² = Σ(wᵢ − a − b·tᵢ)² / (n − 2)`, `u(b) = √(s² / Σ(tᵢ − t̄)²)`
/// (any statistics text, e.g. Montgomery & Runger, *Applied Statistics and
/// Probability for Engineers*, simple linear regression).
///
/// `points` are (time in hours, wall in mm). `None` with fewer than two
/// distinct times.
pub fn fit_wall_line(points: &[(f64, f64)]) -> Option<LineFit> {
    let n = points.len();
    if n < 2 {
        return None;
    }
    let nf = n as f64;
    let t_mean = points.iter().map(|p| p.0 / HOURS_PER_YEAR).sum::<f64>() / nf;
    let w_mean = points.iter().map(|p| p.1).sum::<f64>() / nf;
    let mut stt = 0.0;
    let mut stw = 0.0;
    for &(t, w) in points {
        let dt = t / HOURS_PER_YEAR - t_mean;
        stt += dt * dt;
        stw += dt * (w - w_mean);
    }
    if !(stt > 0.0) {
        return None;
    }
    let b = stw / stt;
    let a = w_mean - b * t_mean;
    let u = if n > 2 {
        let sse: f64 = points
            .iter()
            .map(|&(t, w)| {
                let r = w - a - b * t / HOURS_PER_YEAR;
                r * r
            })
            .sum();
        Some((sse / (nf - 2.0) / stt).sqrt())
    } else {
        None
    };
    Some(LineFit { slope_mm_per_year: b, slope_uncertainty_mm_per_year: u, points: n })
}

/// A steam-side oxide growth law of the Larson-Miller kind:
/// `log10 x = a · P + b`, `P = T_R · (c + log10 t)`, with x the oxide
/// thickness in mils (0.001 in), T_R the metal temperature in degrees
/// Rankine and t the hours of service.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OxideLaw {
    pub a: f64,
    pub b: f64,
    pub c: f64,
    /// Where the constants come from, for people.
    pub source: &'static str,
}

/// The steam-side oxide law for 2¼Cr-1Mo (T22/P22/10CrMo9-10):
/// `log10 x[mils] = 0.00022 · T[°R] · (20 + log10 t[h]) − 7.25`.
/// Rehn and Apblett (1981), as quoted for tube metal temperature
/// estimation in boiler-tube life assessment; constants from memory.
/// Validity: roughly 480–620 °C metal temperature, 10³–2·10⁵ h.
pub const OXIDE_LAW_2_25CR_1MO: OxideLaw = OxideLaw {
    a: 0.00022,
    b: -7.25,
    c: 20.0,
    source: "Rehn and Apblett (1981) steam-side oxide law for 2.25Cr-1Mo, constants from memory",
};

/// The oxide law of a grade, by its library grade name; `None` when no law
/// is built in for the grade.
pub fn oxide_law_for(grade: &str) -> Option<OxideLaw> {
    match grade {
        "2.25Cr-1Mo" => Some(OXIDE_LAW_2_25CR_1MO),
        _ => None,
    }
}

/// Millimetres per mil (0.001 in), exact.
const MM_PER_MIL: f64 = 0.0254;

impl OxideLaw {
    /// Oxide thickness (mm) after `hours` at a steady metal temperature
    /// `t_k` (K): the law evaluated forward.
    pub fn thickness_mm(&self, t_k: f64, hours: f64) -> f64 {
        let t_r = t_k * 1.8;
        let p = t_r * (self.c + hours.log10());
        10f64.powf(self.a * p + self.b) * MM_PER_MIL
    }

    /// The steady metal temperature (K) that grows `oxide_mm` in `hours`:
    /// the law inverted, `T_R = (log10 x − b) / (a · (c + log10 t))`,
    /// `T = T_R / 1.8`. `None` for non-positive thickness or hours.
    pub fn effective_temperature_k(&self, oxide_mm: f64, hours: f64) -> Option<f64> {
        if !(oxide_mm > 0.0 && hours > 1.0 && oxide_mm.is_finite() && hours.is_finite()) {
            return None;
        }
        let x_mils = oxide_mm / MM_PER_MIL;
        let t_r = (x_mils.log10() - self.b) / (self.a * (self.c + hours.log10()));
        Some(t_r / 1.8)
    }
}

impl OxideLaw {
    /// The hours of steady service at `t_k` that grow `oxide_mm`: the law
    /// inverted for time, `log10 t = (log10 x − b)/(a·T_R) − c`.
    pub fn hours_to_grow(&self, t_k: f64, oxide_mm: f64) -> f64 {
        let x_mils = (oxide_mm / MM_PER_MIL).max(f64::MIN_POSITIVE);
        10f64.powf((x_mils.log10() - self.b) / (self.a * t_k * 1.8) - self.c)
    }

    /// The scale `oxide_mm` thick after `dt_h` more hours at `t_k`: grown
    /// on from the equivalent time at that temperature (the usual
    /// time-equivalence step for a law of the Larson-Miller kind).
    pub fn grow_mm(&self, oxide_mm: f64, t_k: f64, dt_h: f64) -> f64 {
        self.thickness_mm(t_k, self.hours_to_grow(t_k, oxide_mm) + dt_h)
    }
}

/// Thermal conductivity of steam-side magnetite scale, W/(m·K): 0.5, the
/// low end of the values commonly used for it (about 0.5–0.6; from memory),
/// so the temperature rise across the scale is on the high side.
pub const SCALE_CONDUCTIVITY_W_PER_M_K: f64 = 0.5;

/// Temperature rise across a scale of `oxide_mm` carrying `heat_flux_kw_m2`
/// (flat-wall Fourier conduction, `ΔT = q·x/k`; with q in kW/m² and x in
/// mm the factors of 1000 cancel), K.
pub fn scale_temperature_rise_k(heat_flux_kw_m2: f64, oxide_mm: f64) -> f64 {
    heat_flux_kw_m2 * oxide_mm / SCALE_CONDUCTIVITY_W_PER_M_K
}

/// Creep-cavitation class of a replica after Neubauer and Wedel (1983).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ReplicaClass {
    /// No cavities seen.
    None,
    /// A: isolated cavities.
    Isolated,
    /// B: oriented cavities (aligned on grain boundaries normal to stress).
    Oriented,
    /// C: microcracks (linked cavities).
    Microcracks,
    /// D: macrocracks.
    Macrocracks,
}

impl ReplicaClass {
    /// Parses `0`/`none`, `A`/`isolated`, `B`/`oriented`,
    /// `C`/`microcracks`, `D`/`macrocracks` (any case).
    pub fn parse(s: &str) -> Option<ReplicaClass> {
        match s.trim().to_ascii_lowercase().as_str() {
            "0" | "none" | "no cavities" => Some(ReplicaClass::None),
            "a" | "isolated" => Some(ReplicaClass::Isolated),
            "b" | "oriented" => Some(ReplicaClass::Oriented),
            "c" | "microcracks" | "microcrack" => Some(ReplicaClass::Microcracks),
            "d" | "macrocracks" | "macrocrack" => Some(ReplicaClass::Macrocracks),
            _ => None,
        }
    }

    /// The class letter as written on inspection sheets.
    pub fn letter(&self) -> &'static str {
        match self {
            ReplicaClass::None => "0",
            ReplicaClass::Isolated => "A",
            ReplicaClass::Oriented => "B",
            ReplicaClass::Microcracks => "C",
            ReplicaClass::Macrocracks => "D",
        }
    }

    /// Bounds `[low, high]` on the consumed creep life fraction for the
    /// class: the ranges commonly quoted with the Neubauer–Wedel classes
    /// (0.27, 0.46, 0.65, 0.84 as the class boundaries, after Cane and
    /// Shammas' cavitation model as tabulated in Viswanathan, *Damage
    /// Mechanisms and Life Assessment of High-Temperature Components*,
    /// 1989); from memory, screening only.
    pub fn life_fraction_bounds(&self) -> [f64; 2] {
        match self {
            ReplicaClass::None => [0.0, 0.27],
            ReplicaClass::Isolated => [0.27, 0.46],
            ReplicaClass::Oriented => [0.46, 0.65],
            ReplicaClass::Microcracks => [0.65, 0.84],
            ReplicaClass::Macrocracks => [0.84, 1.0],
        }
    }
}

/// The source line of the replica correlation, for reports.
pub const REPLICA_SOURCE: &str = "Neubauer and Wedel (1983) classes; life-fraction ranges after Cane and Shammas \
     as tabulated by Viswanathan (1989); from memory, screening only";

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: walls 6.0, 5.8, 5.5 mm at 0, 1, 2 years.
    /// t̄ = 1, w̄ = 5.7667; Stt = 2; Stw = (−1)(0.2333) + 0 + (1)(−0.2667) = −0.5;
    /// b = −0.25 mm/y; a = 6.0167; residuals 0.0167·(−1, 2, −1)... :
    /// r = (−0.01667, 0.03333, −0.01667), SSE = 0.0016667, s² = SSE/1,
    /// u(b) = √(0.0016667/2) = 0.028868 mm/y (closed form of simple
    /// linear regression).
    #[test]
    fn three_walls_give_the_hand_worked_slope_and_uncertainty() {
        let y = HOURS_PER_YEAR;
        let f = fit_wall_line(&[(0.0, 6.0), (y, 5.8), (2.0 * y, 5.5)]).unwrap();
        assert!((f.slope_mm_per_year + 0.25).abs() < 1e-12, "{f:?}");
        let u = f.slope_uncertainty_mm_per_year.unwrap();
        assert!((u - (0.0016666666666666668f64 / 2.0).sqrt()).abs() < 1e-9, "{u}");
    }

    #[test]
    fn two_walls_give_the_secant_without_uncertainty() {
        let y = HOURS_PER_YEAR;
        let f = fit_wall_line(&[(0.0, 6.0), (2.0 * y, 5.0)]).unwrap();
        assert!((f.slope_mm_per_year + 0.5).abs() < 1e-12);
        assert_eq!(f.slope_uncertainty_mm_per_year, None);
        assert!(fit_wall_line(&[(y, 6.0), (y, 5.0)]).is_none(), "one date is no rate");
    }

    /// Hand-worked forward and back: T = 540 °C = 813.15 K = 1463.67 °R,
    /// t = 10⁵ h: P = 1463.67·25 = 36591.75, log10 x = 8.05019 − 7.25 =
    /// 0.80019, x = 6.3123 mils = 0.16033 mm.
    #[test]
    fn the_t22_oxide_law_matches_the_hand_worked_case() {
        let law = OXIDE_LAW_2_25CR_1MO;
        let x = law.thickness_mm(813.15, 1.0e5);
        assert!((x - 0.16033).abs() < 2e-4, "{x}");
        let t = law.effective_temperature_k(x, 1.0e5).unwrap();
        assert!((t - 813.15).abs() < 1e-9, "{t}");
        assert!(law.effective_temperature_k(0.0, 1.0e5).is_none());
    }

    /// Hand-worked: 100 kW/m² across 0.30 mm of scale with k = 0.5 W/(m·K):
    /// ΔT = 1e5 W/m² · 3e-4 m / 0.5 W/(m·K) = 60 K. Growing on: the time to
    /// grow a scale at T inverts the law, so growing by 0 h changes nothing
    /// and growing is monotonic.
    #[test]
    fn the_scale_insulates_and_grows_by_the_law() {
        assert!((scale_temperature_rise_k(100.0, 0.30) - 60.0).abs() < 1e-12);
        let law = OXIDE_LAW_2_25CR_1MO;
        let t = law.hours_to_grow(813.15, 0.16033);
        assert!((t / 1.0e5 - 1.0).abs() < 2e-3, "{t}");
        assert!((law.grow_mm(0.2, 830.0, 0.0) - 0.2).abs() < 1e-12);
        assert!(law.grow_mm(0.2, 830.0, 1000.0) > 0.2);
    }

    #[test]
    fn replica_classes_parse_and_bound() {
        assert_eq!(ReplicaClass::parse("b"), Some(ReplicaClass::Oriented));
        assert_eq!(ReplicaClass::parse("Microcracks"), Some(ReplicaClass::Microcracks));
        assert_eq!(ReplicaClass::parse("2b"), None);
        // Contiguous and ordered.
        let all = [
            ReplicaClass::None,
            ReplicaClass::Isolated,
            ReplicaClass::Oriented,
            ReplicaClass::Microcracks,
            ReplicaClass::Macrocracks,
        ];
        for w in all.windows(2) {
            assert_eq!(w[0].life_fraction_bounds()[1], w[1].life_fraction_bounds()[0]);
        }
    }
}

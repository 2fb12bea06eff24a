//! Thermal stress at the bore of a thick-walled cylinder from the
//! through-wall temperature difference, measured or derived from the rate
//! of change of the fluid temperature.
//!
//! Sign convention: ΔT = T_mean − T_inner (the mean wall temperature minus
//! the inner surface temperature). Heating the bore (a start-up) makes ΔT
//! negative and the thermal hoop stress at the bore compressive; cooling
//! (a shutdown, a quench) makes it tensile, where it adds to the pressure
//! stress.

/// Thermal hoop stress at the inner surface, MPa:
/// `σ_t = f_t · E · α · ΔT / (1 − ν)`, E in MPa, α in 1/K, ΔT = T_mean −
/// T_inner in K, ν Poisson's ratio, f_t the thermal stress factor of the
/// location (1 for the plain bore of a long cylinder; larger at a nozzle
/// bore).
///
/// For a long free cylinder the bore hoop (and axial) stress is exactly
/// `E·α/(1−ν) · (T̄ − T_i)` with T̄ the area-mean temperature (Timoshenko &
/// Goodier, Theory of Elasticity, the hollow cylinder, plane strain with free
/// ends; from memory). Elastic; valid while the stress range stays within
/// shakedown.
pub fn thermal_stress_mpa(f_t: f64, modulus_mpa: f64, alpha_per_k: f64, poisson: f64, delta_t_k: f64) -> f64 {
    f_t * modulus_mpa * alpha_per_k * delta_t_k / (1.0 - poisson)
}

/// Form factor φ of the quasi-steady temperature field in a hollow
/// cylinder heated or cooled at the bore at a constant rate, the outside
/// insulated: `T_inner − T_mean = φ · v · s² / a` (v the rate, s the wall,
/// a the thermal diffusivity).
///
/// Derivation (quasi-steady state, Carslaw & Jaeger, Conduction of Heat in
/// Solids, the regular regime; worked here, the closed form from the
/// derivation not from a table): every point heats at v, so
/// `a·(1/r)·d/dr(r·dθ/dr) = v`, `dθ/dr = 0` at r_o, θ(r_i) = 0, giving
/// `θ(r) = v/(2a)·[(r² − r_i²)/2 − r_o²·ln(r/r_i)]`, whose area mean is
/// `T̄ − T_i = −(v/a)·[r_o⁴·ln(m) / (2(r_o² − r_i²)) − (r_o² − r_i²)/8 − r_o²/4]`,
/// m = r_o / r_i. For a thin wall φ → 1/3, the flat-plate value (common
/// practice: EN 12952-3 and EN 13445-3 use φ with this limit, from memory).
/// `outside_diameter_mm > 2·wall_mm > 0`.
pub fn quasi_steady_form_factor(outside_diameter_mm: f64, wall_mm: f64) -> f64 {
    let ro = 0.5 * outside_diameter_mm;
    let ri = ro - wall_mm;
    let s = wall_mm;
    let (ro2, ri2) = (ro * ro, ri * ri);
    let d = ro2 - ri2;
    let m = ro / ri;
    (ro2 * ro2 * m.ln() / (2.0 * d) - d / 8.0 - ro2 / 4.0) / (s * s)
}

/// Ratio (T_inner − T_mean) / (T_inner − T_outer) of the same quasi-steady
/// field: turns a measured inner-to-outer difference into the
/// inner-to-mean difference the stress needs. From θ(r_o) above:
/// `T_i − T_o = v/(2a)·[r_o²·ln(m) − (r_o² − r_i²)/2]`. Thin wall: 2/3.
pub fn mean_to_outer_ratio(outside_diameter_mm: f64, wall_mm: f64) -> f64 {
    let ro = 0.5 * outside_diameter_mm;
    let ri = ro - wall_mm;
    let (ro2, ri2) = (ro * ro, ri * ri);
    let outer = 0.5 * (ro2 * (ro / ri).ln() - 0.5 * (ro2 - ri2));
    quasi_steady_form_factor(outside_diameter_mm, wall_mm) * wall_mm * wall_mm / outer
}

/// Through-wall difference ΔT = T_mean − T_inner (K) of the quasi-steady
/// field for a fluid temperature rate `rate_k_per_s` (K/s; positive when
/// heating): `ΔT = −φ · v · s² / a`, s in mm, a in mm²/s. Valid once the
/// ramp has lasted longer than about s²/a (the field has settled) and for
/// a heat-transfer coefficient high enough that the bore follows the fluid
/// (conservative otherwise: a lower coefficient lowers the difference).
pub fn ramp_delta_t_k(rate_k_per_s: f64, outside_diameter_mm: f64, wall_mm: f64, diffusivity_mm2_per_s: f64) -> f64 {
    -quasi_steady_form_factor(outside_diameter_mm, wall_mm) * rate_k_per_s * wall_mm * wall_mm / diffusivity_mm2_per_s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thin_wall_limits_are_the_flat_plate_values() {
        // Flat plate insulated on one side, quasi-steady: T_i − T_mean =
        // v s²/(3a), T_i − T_o = v s²/(2a) (worked by hand from
        // a·θ'' = v, θ'(s) = 0; common practice).
        let phi = quasi_steady_form_factor(100_000.0, 10.0);
        assert!((phi - 1.0 / 3.0).abs() < 1e-3, "{phi}");
        let r = mean_to_outer_ratio(100_000.0, 10.0);
        assert!((r - 2.0 / 3.0).abs() < 1e-3, "{r}");
    }

    #[test]
    fn thick_wall_factor_by_numerical_quadrature() {
        // Area mean of θ(r) by the midpoint rule, independent of the
        // closed form's algebra.
        let (do_, s) = (355.6, 50.0);
        let (ro, ri) = (do_ / 2.0, do_ / 2.0 - s);
        let theta = |r: f64| 0.5 * ((r * r - ri * ri) / 2.0 - ro * ro * (r / ri).ln());
        let n = 200_000;
        let h = (ro - ri) / n as f64;
        let mut num = 0.0;
        for i in 0..n {
            let r = ri + (i as f64 + 0.5) * h;
            num += theta(r) * r * h;
        }
        let mean = 2.0 * num / (ro * ro - ri * ri);
        let phi = -mean / (s * s);
        assert!((phi / quasi_steady_form_factor(do_, s) - 1.0).abs() < 1e-6);
    }

    #[test]
    fn hand_worked_thermal_stress() {
        // E = 190 GPa, α = 13.5e-6 /K, ν = 0.3, ΔT = 40 K, f_t = 1:
        // 190000 · 13.5e-6 · 40 / 0.7 = 146.57 MPa (hand-worked).
        let s = thermal_stress_mpa(1.0, 190_000.0, 13.5e-6, 0.3, 40.0);
        assert!((s - 146.571_428_571).abs() < 1e-6);
    }
}

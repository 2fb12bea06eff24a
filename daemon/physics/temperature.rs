//! Homologous temperature and the creep threshold.
//!
//! Homologous temperature is T/Tm with both in K. Creep in metals becomes
//! significant above roughly 0.3–0.5 Tm; the rule of thumb of the trade,
//! used when a material gives no threshold of its own, is 0.4 Tm
//! (common practice, for example Ashby & Jones, *Engineering Materials 1*,
//! ch. 17; from memory).

/// Homologous temperature T/Tm, both in K.
#[inline]
pub fn homologous_temperature(temperature_k: f64, melting_point_k: f64) -> f64 {
    temperature_k / melting_point_k
}

/// Default creep threshold: 0.4 of the melting point (both in K).
#[inline]
pub fn default_creep_threshold_k(melting_point_k: f64) -> f64 {
    0.4 * melting_point_k
}

/// Whether a metal temperature is in the creep range for a threshold.
#[inline]
pub fn in_creep_range(temperature_k: f64, threshold_k: f64) -> bool {
    temperature_k >= threshold_k
}

#[cfg(test)]
mod tests {
    use super::*;

    // Facts of the trade (common practice, no single source): lead creeps at
    // room temperature because Tm ≈ 600 K, so 296 K is 0.49 Tm; ice
    // (Tm 273 K) creeps above about 109 K.
    #[test]
    fn lead_creeps_at_room_temperature() {
        let th = homologous_temperature(296.0, 600.0);
        assert!((th - 0.4933).abs() < 1e-3);
        assert!(in_creep_range(296.0, default_creep_threshold_k(600.0)));
    }

    #[test]
    fn ice_threshold() {
        assert!((default_creep_threshold_k(273.15) - 109.26).abs() < 0.01);
    }

    #[test]
    fn steel_at_room_temperature_does_not_creep() {
        // Iron melts at 1811 K (CRC Handbook, from memory); 0.4 Tm = 724 K.
        assert!(!in_creep_range(293.0, default_creep_threshold_k(1811.0)));
    }
}

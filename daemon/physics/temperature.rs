//! temperature

/// Default creep threshold: 0.4 of the melting point (both in K).
pub fn default_creep_threshold_k(melting_point_k: f64) -> f64 {
    0.4 * melting_point_k
}

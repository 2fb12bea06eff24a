//! Time-at-condition histograms: hours spent in each temperature class and
//! pressure class, as European boiler practice keeps them for in-service
//! life-expectancy calculations (EN 12952-4, from memory).
//!
//! Classes are given by ascending edges; the first class is "below the first
//! edge" and the last "at or above the last edge", so no time is lost.

use serde::{Deserialize, Serialize};

/// A two-dimensional histogram of hours by temperature and pressure class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimeAtCondition {
    /// Temperature class edges, K, ascending.
    pub temperature_edges_k: Vec<f64>,
    /// Pressure class edges, MPa gauge, ascending.
    pub pressure_edges_mpa: Vec<f64>,
    /// Hours, row-major: `hours[ti * (pressure_edges.len() + 1) + pi]`.
    pub hours: Vec<f64>,
}

/// Index of the class of `x` for ascending `edges` (0 ..= edges.len()).
#[inline]
pub fn class_index(edges: &[f64], x: f64) -> usize {
    edges.partition_point(|&e| e <= x)
}

/// [`class_index`] with a guess (the class of the previous value, which a
/// slowly varying signal rarely leaves): checked in O(1), searched only
/// when wrong. Always the same result as [`class_index`].
#[inline]
pub fn class_index_hinted(edges: &[f64], x: f64, hint: usize) -> usize {
    if hint <= edges.len() && (hint == 0 || edges[hint - 1] <= x) && (hint == edges.len() || x < edges[hint]) {
        hint
    } else {
        class_index(edges, x)
    }
}

impl TimeAtCondition {
    /// An empty histogram with the given class edges.
    pub fn new(temperature_edges_k: Vec<f64>, pressure_edges_mpa: Vec<f64>) -> Self {
        let n = (temperature_edges_k.len() + 1) * (pressure_edges_mpa.len() + 1);
        TimeAtCondition { temperature_edges_k, pressure_edges_mpa, hours: vec![0.0; n] }
    }

    /// Evenly spaced edges from `low` to `high` in steps of `step`.
    pub fn even_edges(low: f64, high: f64, step: f64) -> Vec<f64> {
        let n = ((high - low) / step).round().max(0.0) as usize;
        (0..=n).map(|i| low + step * i as f64).collect()
    }

    /// Add `dt_h` hours at temperature `t_k` and pressure `p_mpa`.
    #[inline]
    pub fn add(&mut self, t_k: f64, p_mpa: f64, dt_h: f64) {
        let ti = class_index(&self.temperature_edges_k, t_k);
        let pi = class_index(&self.pressure_edges_mpa, p_mpa);
        self.hours[ti * (self.pressure_edges_mpa.len() + 1) + pi] += dt_h;
    }

    /// [`TimeAtCondition::add`] with the classes of the previous call as a
    /// search hint (updated to this call's classes).
    #[inline]
    pub fn add_hinted(&mut self, t_k: f64, p_mpa: f64, dt_h: f64, hint: &mut (usize, usize)) {
        let ti = class_index_hinted(&self.temperature_edges_k, t_k, hint.0);
        let pi = class_index_hinted(&self.pressure_edges_mpa, p_mpa, hint.1);
        *hint = (ti, pi);
        self.hours[ti * (self.pressure_edges_mpa.len() + 1) + pi] += dt_h;
    }

    /// Total hours.
    pub fn total_h(&self) -> f64 {
        self.hours.iter().sum()
    }

    /// Hours per temperature class (summed over pressure classes).
    pub fn temperature_hours(&self) -> Vec<f64> {
        let w = self.pressure_edges_mpa.len() + 1;
        self.hours.chunks(w).map(|r| r.iter().sum()).collect()
    }

    /// Hours per pressure class (summed over temperature classes).
    pub fn pressure_hours(&self) -> Vec<f64> {
        let w = self.pressure_edges_mpa.len() + 1;
        let mut out = vec![0.0; w];
        for r in self.hours.chunks(w) {
            for (o, h) in out.iter_mut().zip(r) {
                *o += h;
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn classes() {
        let e = [10.0, 20.0, 30.0];
        assert_eq!(class_index(&e, 5.0), 0);
        assert_eq!(class_index(&e, 10.0), 1);
        assert_eq!(class_index(&e, 29.9), 2);
        assert_eq!(class_index(&e, 30.0), 3);
    }

    proptest! {
        #[test]
        fn hinted_class_is_the_class(x in -10.0f64..50.0, hint in 0usize..6) {
            let e = [10.0, 20.0, 30.0];
            prop_assert_eq!(class_index_hinted(&e, x, hint), class_index(&e, x));
            prop_assert_eq!(class_index_hinted(&e, f64::NAN, hint), class_index(&e, f64::NAN));
        }

        #[test]
        fn no_time_is_lost(v in proptest::collection::vec((500.0f64..1000.0, 0.0f64..30.0, 0.0f64..10.0), 0..50)) {
            let mut h = TimeAtCondition::new(TimeAtCondition::even_edges(700.0, 900.0, 10.0), vec![5.0, 10.0, 20.0]);
            let mut total = 0.0;
            for (t, p, dt) in v { h.add(t, p, dt); total += dt; }
            prop_assert!((h.total_h() - total).abs() < 1e-9);
            prop_assert!((h.temperature_hours().iter().sum::<f64>() - total).abs() < 1e-9);
            prop_assert!((h.pressure_hours().iter().sum::<f64>() - total).abs() < 1e-9);
        }
    }
}

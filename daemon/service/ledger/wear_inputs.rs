//! A wear contact's inputs for its trend point: the normal load, the
//! sliding speed (Archard) or the slip amplitude and frequency (fretting)
//! at the point's event time, so the status page can chart what drives the
//! wear beside the wear index.
//!
//! A constant input is its configured value; a tag input is the tag's
//! newest accepted sample at or before the point (the point's time is the
//! ledger's integration frontier, normally a sample instant). Internal
//! units (N, mm/s, mm, Hz). NaN where the part is no wear contact, the
//! model does not use the input, or no sample is at or before the point.

use crate::engine::{ComponentPlan, Input, TagState};
use crate::store::WearInputs;

/// The wear inputs of `plan` at event time `t_ms`, read from `tags`.
pub(super) fn at(plan: &ComponentPlan, tags: &[TagState], t_ms: i64) -> WearInputs {
    let Some(w) = &plan.wear else { return WearInputs::NONE };
    let value = |input: Option<Input>| match input {
        None => f64::NAN,
        Some(Input::Constant(v)) => v,
        Some(Input::Tag(id)) => tags.get(id as usize).map_or(f64::NAN, |s| sample_at(s, t_ms)),
    };
    WearInputs {
        load_n: value(Some(w.normal_load)),
        sliding_speed_mm_s: value(w.sliding_speed),
        slip_mm: value(w.slip_amplitude),
        frequency_hz: value(w.frequency),
    }
}

/// The newest of a tag's two kept samples at or before `t_ms`.
fn sample_at(s: &TagState, t_ms: i64) -> f64 {
    [s.last, s.prev].into_iter().flatten().find(|&(t, _)| t <= t_ms).map_or(f64::NAN, |(_, v)| v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_sample_at_or_before_the_point() {
        let s = TagState { cursor_ms: Some(2000), prev: Some((1000, 7.0)), last: Some((2000, 9.0)) };
        assert_eq!(sample_at(&s, 2000), 9.0);
        assert_eq!(sample_at(&s, 1500), 7.0);
        assert!(sample_at(&s, 500).is_nan());
        assert!(sample_at(&TagState::default(), 0).is_nan());
    }
}

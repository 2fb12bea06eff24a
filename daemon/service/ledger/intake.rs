//! From an MQTT tag message to an engine sample, pure: which configured
//! tag a topic names, and the payload decoded under that template's
//! settings. No I/O and no clock read: the receive time is an argument.
//!
//! Every way a message can fail is a [`Refused`] value the ledger thread
//! counts under its own reason and logs (rate-limited); the message is
//! still acknowledged with its batch, because a message that can never be
//! read must not be redelivered for ever (issue 10, defect 2).

use crate::engine::tags::TagIndex;
use crate::engine::Sample;
use crate::ingest::decode::{decode_payload, PayloadSettings, TopicTemplate};

/// A tag message read.
#[derive(Debug, Clone, PartialEq)]
pub struct Taken {
    /// The tag's name, as the topic gave it.
    pub tag: String,
    /// The sample for the engine.
    pub sample: Sample,
    /// The payload had no timestamp; the receive time stands in for it.
    pub receive_time: bool,
}

/// Why a message gave no sample.
#[derive(Debug, Clone, PartialEq)]
pub enum Refused {
    /// The payload could not be read: the decoder's reason (a counter
    /// name such as `malformed_payload` or `oversized`) and what
    /// was wrong.
    Decode { reason: &'static str, detail: String },
    /// No topic template matches the topic.
    UnknownTopic,
    /// The topic names a tag that is not in the configuration.
    UnknownTag(String),
}

/// Reads one tag message received at `received_ms` (wall clock, ms).
pub fn take(
    templates: &[(TopicTemplate, PayloadSettings)],
    index: &TagIndex,
    topic: &str,
    payload: &[u8],
    received_ms: i64,
) -> Result<Taken, Refused> {
    let (tag, p) =
        templates.iter().find_map(|(t, p)| t.tag_for(topic).map(|tag| (tag, p))).ok_or(Refused::UnknownTopic)?;
    let d = decode_payload(p, payload, received_ms)
        .map_err(|e| Refused::Decode { reason: e.reason(), detail: e.to_string() })?;
    let Some(&id) = index.get(tag.as_str()) else { return Err(Refused::UnknownTag(tag)) };
    let sample = Sample { tag: id, time_ms: d.time_ms, value: d.value, quality: d.quality };
    Ok(Taken { tag, sample, receive_time: d.receive_time })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn templates() -> Vec<(TopicTemplate, PayloadSettings)> {
        let payload = PayloadSettings { max_bytes: 64, ..PayloadSettings::default() };
        vec![(TopicTemplate::new("plant/{tag}", "{tag}").unwrap(), payload)]
    }

    fn index() -> TagIndex {
        [("TE-1".to_string(), 0), ("PT-1".to_string(), 1)].into_iter().collect()
    }

    #[test]
    fn a_tag_message_becomes_a_sample_of_its_tag() {
        let t = take(&templates(), &index(), "plant/PT-1", br#"{"value": 17.5, "timestamp": 1790000000}"#, 5).unwrap();
        assert_eq!(t.tag, "PT-1");
        assert_eq!((t.sample.tag, t.sample.time_ms, t.sample.value), (1, 1_790_000_000_000, 17.5));
        assert!(!t.receive_time);
        // Without a timestamp the receive time stands in, and says so.
        let t = take(&templates(), &index(), "plant/TE-1", br#"{"value": 540}"#, 1_790_000_000_123).unwrap();
        assert_eq!(t.sample.time_ms, 1_790_000_000_123);
        assert!(t.receive_time);
    }

    /// Each way a message fails has its own reason, and none of them panics
    /// or gives a sample: a payload over the limit (issue 10, defect 2), a
    /// payload that is not a reading, a tag not configured, a topic no
    /// template matches.
    #[test]
    fn every_refusal_names_its_reason() {
        let (t, i) = (templates(), index());
        let big = format!("{{\"value\": 1, \"pad\": \"{}\"}}", "x".repeat(200));
        match take(&t, &i, "plant/TE-1", big.as_bytes(), 0) {
            Err(Refused::Decode { reason, detail }) => {
                assert_eq!(reason, "oversized");
                assert!(detail.contains("64"), "{detail}");
            }
            other => panic!("{other:?}"),
        }
        assert!(matches!(
            take(&t, &i, "plant/TE-1", b"\xff\xfe", 0),
            Err(Refused::Decode { reason: "malformed_payload", .. })
        ));
        let good = br#"{"value": 1.0}"#;
        assert_eq!(take(&t, &i, "plant/XX-9", good, 0), Err(Refused::UnknownTag("XX-9".into())));
        assert_eq!(take(&t, &i, "elsewhere/TE-1", good, 0), Err(Refused::UnknownTopic));
    }
}

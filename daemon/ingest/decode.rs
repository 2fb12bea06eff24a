//! Payload and topic decoding: an MQTT message becomes (tag, event time,
//! value, quality). Pure functions, tested without a broker.
//!
//! Topics map to tags through templates such as `site/{unit}/{tag}`: literal
//! segments must match, `{name}` captures one segment, and the tag name is
//! built from the captures by a second template (default `{tag}`).
//! Payloads are a bare number, or JSON with configurable dotted paths for
//! value, timestamp and quality. Timestamps are RFC 3339 strings or epoch
//! numbers (seconds or milliseconds, by setting or by magnitude), quoted or
//! not: a quoted epoch is read exactly as the same number; when a payload
//! has none, the receive time is used and the sample is flagged.

use crate::engine::tags::parse_quality;
use crate::engine::Quality;
use crate::event_time::parse_timestamp_ms;
use serde::Deserialize;

/// How a payload is laid out.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PayloadSettings {
    /// `number` (the payload is the value as text) or `json`.
    #[serde(default = "default_format")]
    pub format: PayloadFormat,
    /// JSON path of the value (dotted, e.g. `data.v`).
    #[serde(default = "default_value_path")]
    pub value: String,
    /// JSON path of the event time (default `timestamp`; `""`: always the
    /// receive time).
    #[serde(default = "default_timestamp_path")]
    pub timestamp: Option<String>,
    /// JSON path of the quality (default `quality`; `""`: always good):
    /// good/uncertain/bad, OPC-style 192/64/0, or true/false.
    #[serde(default = "default_quality_path")]
    pub quality: Option<String>,
    /// Unit of numeric timestamps: `s`, `ms`, or `auto` (≥ 1e11 means ms).
    #[serde(default)]
    pub timestamp_unit: TimestampUnit,
    /// Largest payload decoded, bytes; a longer one is rejected as
    /// `oversized` (counted and acknowledged like any bad input) without
    /// being parsed. Tag messages are far smaller than the default.
    #[serde(default = "default_max_bytes")]
    pub max_bytes: usize,
}

/// Payload layout.
#[derive(Debug, Clone, Copy, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
pub enum PayloadFormat {
    Number,
    Json,
}

/// Unit of numeric timestamps.
#[derive(Debug, Clone, Copy, Deserialize, PartialEq, Eq, Default)]
#[serde(rename_all = "snake_case")]
pub enum TimestampUnit {
    #[default]
    Auto,
    S,
    Ms,
}

fn default_format() -> PayloadFormat {
    PayloadFormat::Json
}
fn default_value_path() -> String {
    "value".into()
}
fn default_timestamp_path() -> Option<String> {
    Some("timestamp".into())
}
fn default_quality_path() -> Option<String> {
    Some("quality".into())
}
/// Default of [`PayloadSettings::max_bytes`]: 64 KiB, hundreds of times a
/// tag message.
pub const DEFAULT_MAX_PAYLOAD_BYTES: usize = 64 * 1024;
fn default_max_bytes() -> usize {
    DEFAULT_MAX_PAYLOAD_BYTES
}

impl Default for PayloadSettings {
    fn default() -> Self {
        PayloadSettings {
            format: default_format(),
            value: default_value_path(),
            timestamp: Some("timestamp".into()),
            quality: Some("quality".into()),
            timestamp_unit: TimestampUnit::Auto,
            max_bytes: DEFAULT_MAX_PAYLOAD_BYTES,
        }
    }
}

/// A decoded payload.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Decoded {
    pub time_ms: i64,
    pub value: f64,
    pub quality: Quality,
    /// The payload had no timestamp; the receive time was used.
    pub receive_time: bool,
}

/// Why a message was rejected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DecodeError {
    #[error("topic {0:?} matches no topic template")]
    UnknownTopic(String),
    #[error("payload is not valid UTF-8")]
    NotUtf8,
    #[error("payload {0:?} is not a number")]
    NotNumber(String),
    #[error("payload is not JSON: {0}")]
    NotJson(String),
    #[error("JSON has no {0:?}")]
    MissingField(String),
    #[error("JSON field {0:?} is not a number")]
    FieldNotNumber(String),
    #[error("timestamp {0:?} is neither RFC 3339 nor epoch seconds/milliseconds")]
    BadTimestamp(String),
    #[error("quality {0:?} is not good, uncertain or bad")]
    BadQuality(String),
    #[error("payload of {len} bytes is larger than payload.max_bytes = {limit}")]
    Oversized { len: usize, limit: usize },
}

impl DecodeError {
    /// Stable reason name for counters.
    pub fn reason(&self) -> &'static str {
        match self {
            DecodeError::UnknownTopic(_) => "unknown_topic",
            DecodeError::NotUtf8 | DecodeError::NotNumber(_) | DecodeError::NotJson(_) => "malformed_payload",
            DecodeError::MissingField(_) | DecodeError::FieldNotNumber(_) => "malformed_payload",
            DecodeError::BadTimestamp(_) => "bad_timestamp",
            DecodeError::BadQuality(_) => "bad_quality_field",
            DecodeError::Oversized { .. } => "oversized",
        }
    }
}

fn at_path<'a>(v: &'a serde_json::Value, path: &str) -> Option<&'a serde_json::Value> {
    path.split('.').try_fold(v, |v, k| v.get(k))
}

fn numeric_time(x: f64, unit: TimestampUnit) -> Option<i64> {
    if !x.is_finite() || x < 0.0 {
        return None;
    }
    let ms = match unit {
        TimestampUnit::S => x * 1000.0,
        TimestampUnit::Ms => x,
        TimestampUnit::Auto if x >= crate::event_time::EPOCH_MS_FROM => x,
        TimestampUnit::Auto => x * 1000.0,
    };
    (ms < crate::event_time::EPOCH_MS_BEYOND).then(|| ms.round() as i64)
}

/// Decode a payload received at `receive_ms`.
pub fn decode_payload(p: &PayloadSettings, payload: &[u8], receive_ms: i64) -> Result<Decoded, DecodeError> {
    if payload.len() > p.max_bytes {
        return Err(DecodeError::Oversized { len: payload.len(), limit: p.max_bytes });
    }
    let text = std::str::from_utf8(payload).map_err(|_| DecodeError::NotUtf8)?.trim();
    match p.format {
        PayloadFormat::Number => {
            let value: f64 = text.parse().map_err(|_| DecodeError::NotNumber(clip(text)))?;
            Ok(Decoded { time_ms: receive_ms, value, quality: Quality::Good, receive_time: true })
        }
        PayloadFormat::Json => {
            let v: serde_json::Value = serde_json::from_str(text).map_err(|e| DecodeError::NotJson(e.to_string()))?;
            let value = match at_path(&v, &p.value) {
                Some(serde_json::Value::Number(n)) => {
                    n.as_f64().ok_or_else(|| DecodeError::FieldNotNumber(p.value.clone()))?
                }
                Some(serde_json::Value::String(s)) => {
                    s.trim().parse().map_err(|_| DecodeError::FieldNotNumber(p.value.clone()))?
                }
                // JSON cannot carry NaN; a null value is a missing reading.
                Some(_) => return Err(DecodeError::FieldNotNumber(p.value.clone())),
                None => return Err(DecodeError::MissingField(p.value.clone())),
            };
            let (time_ms, receive_time) = match p
                .timestamp
                .as_deref()
                .filter(|p| !p.is_empty())
                .and_then(|path| at_path(&v, path))
            {
                None | Some(serde_json::Value::Null) => (receive_ms, true),
                Some(serde_json::Value::Number(n)) => {
                    let x = n.as_f64().unwrap_or(f64::NAN);
                    (numeric_time(x, p.timestamp_unit).ok_or_else(|| DecodeError::BadTimestamp(n.to_string()))?, false)
                }
                Some(serde_json::Value::String(s)) => {
                    // A quoted epoch is the same number as an unquoted one and
                    // follows `timestamp_unit` (gateways often quote epoch
                    // milliseconds); anything else must be RFC 3339.
                    let t = match s.trim().parse::<f64>() {
                        Ok(x) => numeric_time(x, p.timestamp_unit),
                        Err(_) => parse_timestamp_ms(s.trim()),
                    };
                    (t.ok_or_else(|| DecodeError::BadTimestamp(clip(s)))?, false)
                }
                Some(other) => return Err(DecodeError::BadTimestamp(clip(&other.to_string()))),
            };
            let quality = match p.quality.as_deref().filter(|p| !p.is_empty()).and_then(|path| at_path(&v, path)) {
                None | Some(serde_json::Value::Null) => Quality::Good,
                Some(serde_json::Value::Bool(true)) => Quality::Good,
                Some(serde_json::Value::Bool(false)) => Quality::Bad,
                Some(serde_json::Value::Number(n)) => match n.as_i64() {
                    // OPC quality: 192+ good, 64–191 uncertain, below bad.
                    Some(q) if q >= 192 => Quality::Good,
                    Some(q) if q >= 64 => Quality::Uncertain,
                    Some(_) => Quality::Bad,
                    None => return Err(DecodeError::BadQuality(n.to_string())),
                },
                Some(serde_json::Value::String(s)) => {
                    parse_quality(s).ok_or_else(|| DecodeError::BadQuality(clip(s)))?
                }
                Some(other) => return Err(DecodeError::BadQuality(clip(&other.to_string()))),
            };
            Ok(Decoded { time_ms, value, quality, receive_time })
        }
    }
}

fn clip(s: &str) -> String {
    s.chars().take(60).collect()
}

/// A compiled topic template.
#[derive(Debug, Clone, PartialEq)]
pub struct TopicTemplate {
    segments: Vec<Segment>,
    tag: String,
}

#[derive(Debug, Clone, PartialEq)]
enum Segment {
    Literal(String),
    Capture(String),
    /// `#` at the end: the rest of the topic, captured as `rest`.
    Rest,
}

impl TopicTemplate {
    /// Compile `topic` (e.g. `site/{unit}/{tag}`) with the tag-name template
    /// (e.g. `{unit}.{tag}`; default `{tag}`).
    pub fn new(topic: &str, tag: &str) -> Result<TopicTemplate, String> {
        let mut segments = vec![];
        let parts: Vec<&str> = topic.split('/').collect();
        for (i, s) in parts.iter().enumerate() {
            if *s == "#" {
                if i + 1 != parts.len() {
                    return Err(format!("`#` must be the last level of {topic:?}"));
                }
                segments.push(Segment::Rest);
            } else if s.starts_with('{') && s.ends_with('}') && s.len() > 2 {
                segments.push(Segment::Capture(s[1..s.len() - 1].to_string()));
            } else if s.contains(['{', '}', '+']) {
                return Err(format!("level {s:?} of {topic:?} must be a literal or a whole {{name}}"));
            } else {
                segments.push(Segment::Literal(s.to_string()));
            }
        }
        let t = TopicTemplate { segments, tag: tag.to_string() };
        let names = t.capture_names();
        let mut rest = tag.to_string();
        while let Some(a) = rest.find('{') {
            let b = rest[a..].find('}').ok_or_else(|| format!("unclosed {{ in tag template {tag:?}"))? + a;
            let name = &rest[a + 1..b];
            if !names.iter().any(|n| n == name) {
                return Err(format!("tag template {tag:?} uses {{{name}}}, which topic {topic:?} does not capture"));
            }
            rest = rest[b + 1..].to_string();
        }
        Ok(t)
    }

    fn capture_names(&self) -> Vec<String> {
        self.segments
            .iter()
            .filter_map(|s| match s {
                Segment::Capture(n) => Some(n.clone()),
                Segment::Rest => Some("rest".into()),
                Segment::Literal(_) => None,
            })
            .collect()
    }

    /// The MQTT subscription filter of this template (`{x}` becomes `+`).
    pub fn filter(&self) -> String {
        self.segments
            .iter()
            .map(|s| match s {
                Segment::Literal(l) => l.as_str(),
                Segment::Capture(_) => "+",
                Segment::Rest => "#",
            })
            .collect::<Vec<_>>()
            .join("/")
    }

    /// The tag name for a topic, if the topic matches.
    pub fn tag_for(&self, topic: &str) -> Option<String> {
        let levels: Vec<&str> = topic.split('/').collect();
        let mut caps: Vec<(&str, String)> = vec![];
        let mut i = 0;
        for s in &self.segments {
            match s {
                Segment::Literal(l) => {
                    if levels.get(i) != Some(&l.as_str()) {
                        return None;
                    }
                    i += 1;
                }
                Segment::Capture(n) => {
                    let v = levels.get(i)?;
                    if v.is_empty() {
                        return None;
                    }
                    caps.push((n, v.to_string()));
                    i += 1;
                }
                Segment::Rest => {
                    if i >= levels.len() {
                        return None;
                    }
                    caps.push(("rest", levels[i..].join("/")));
                    i = levels.len();
                }
            }
        }
        if i != levels.len() {
            return None;
        }
        let mut out = self.tag.clone();
        for (n, v) in caps {
            out = out.replace(&format!("{{{n}}}"), &v);
        }
        Some(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn templates() {
        let t = TopicTemplate::new("site/{unit}/{tag}", "{unit}.{tag}").unwrap();
        assert_eq!(t.filter(), "site/+/+");
        assert_eq!(t.tag_for("site/U2/TE-311A").as_deref(), Some("U2.TE-311A"));
        assert_eq!(t.tag_for("site/U2"), None);
        assert_eq!(t.tag_for("other/U2/TE"), None);
        let r = TopicTemplate::new("plant/#", "{rest}").unwrap();
        assert_eq!(r.tag_for("plant/U2/SH3/TE-1").as_deref(), Some("U2/SH3/TE-1"));
        assert!(TopicTemplate::new("a/{x}/b", "{y}").is_err());
        assert!(TopicTemplate::new("a/#/b", "{rest}").is_err());
    }

    #[test]
    fn payloads() {
        let p = PayloadSettings::default();
        let d = decode_payload(&p, br#"{"value": 541.5, "timestamp": "2026-10-01T00:00:00Z", "quality": "good"}"#, 7)
            .unwrap();
        assert_eq!(
            d,
            Decoded { time_ms: 1_790_812_800_000, value: 541.5, quality: Quality::Good, receive_time: false }
        );
        let d = decode_payload(&p, br#"{"value": 1, "timestamp": 1790812800}"#, 7).unwrap();
        assert_eq!(d.time_ms, 1_790_812_800_000);
        let d = decode_payload(&p, br#"{"value": 1, "timestamp": 1790812800123}"#, 7).unwrap();
        assert_eq!(d.time_ms, 1_790_812_800_123);
        let d = decode_payload(&p, br#"{"value": "2.5", "quality": 64}"#, 7).unwrap();
        assert_eq!((d.value, d.quality, d.time_ms, d.receive_time), (2.5, Quality::Uncertain, 7, true));
        let nested = PayloadSettings { value: "data.v".into(), timestamp: Some("data.t".into()), ..p.clone() };
        assert_eq!(decode_payload(&nested, br#"{"data":{"v":3,"t":1}}"#, 0).unwrap().value, 3.0);
        let num = PayloadSettings { format: PayloadFormat::Number, ..p.clone() };
        assert_eq!(decode_payload(&num, b" 12.5 ", 99).unwrap().time_ms, 99);
    }

    // A string epoch is read exactly like the same number: 1 790 822 820 s
    // after the epoch is 2026-10-01T02:47:00Z (checked with Python:
    // datetime.fromtimestamp(1790822820, timezone.utc)); gateways that
    // quote their epoch milliseconds send "1790822820000".
    #[test]
    fn string_epochs_are_read_like_numbers() {
        let t = 1_790_822_820_000;
        for unit in [TimestampUnit::Auto, TimestampUnit::Ms] {
            let p = PayloadSettings { timestamp_unit: unit, ..PayloadSettings::default() };
            for payload in
                [&br#"{"value": 1, "timestamp": "1790822820000"}"#[..], br#"{"value": 1, "timestamp": 1790822820000}"#]
            {
                assert_eq!(
                    decode_payload(&p, payload, 0).unwrap().time_ms,
                    t,
                    "{unit:?} {}",
                    String::from_utf8_lossy(payload)
                );
            }
            let p = PayloadSettings { timestamp_unit: unit, ..PayloadSettings::default() };
            let d = decode_payload(&p, br#"{"value": 1, "timestamp": " 1790822820000.5 "}"#, 0).unwrap();
            assert_eq!(d.time_ms, t + 1, "{unit:?}");
        }
        for unit in [TimestampUnit::Auto, TimestampUnit::S] {
            let p = PayloadSettings { timestamp_unit: unit, ..PayloadSettings::default() };
            for payload in
                [&br#"{"value": 1, "timestamp": "1790822820"}"#[..], br#"{"value": 1, "timestamp": 1790822820}"#]
            {
                assert_eq!(decode_payload(&p, payload, 0).unwrap().time_ms, t, "{unit:?}");
            }
            let d = decode_payload(&p, br#"{"value": 1, "timestamp": "1790822820.25"}"#, 0).unwrap();
            assert_eq!(d.time_ms, t + 250);
        }
        // With `s` set, a string of milliseconds is as far out of range as
        // the number would be.
        let s = PayloadSettings { timestamp_unit: TimestampUnit::S, ..PayloadSettings::default() };
        assert!(matches!(
            decode_payload(&s, br#"{"value": 1, "timestamp": "1790822820000"}"#, 0),
            Err(DecodeError::BadTimestamp(_))
        ));
        assert!(decode_payload(&s, br#"{"value": 1, "timestamp": 1790822820000}"#, 0).is_err());
        // RFC 3339 strings are unchanged, negative epochs are refused.
        let p = PayloadSettings::default();
        assert_eq!(decode_payload(&p, br#"{"value": 1, "timestamp": "2026-10-01T02:47:00Z"}"#, 0).unwrap().time_ms, t);
        assert!(decode_payload(&p, br#"{"value": 1, "timestamp": "-5"}"#, 0).is_err());
    }

    #[test]
    fn partial_payload_settings_keep_the_defaults() {
        let p: PayloadSettings = toml::from_str("value = \"v\"").unwrap();
        assert_eq!(p.timestamp.as_deref(), Some("timestamp"));
        assert_eq!(p.quality.as_deref(), Some("quality"));
        let none: PayloadSettings = toml::from_str("timestamp = \"\"").unwrap();
        assert!(decode_payload(&none, br#"{"value": 1, "timestamp": 5}"#, 9).unwrap().receive_time);
    }

    #[test]
    fn bad_payloads_say_what_is_wrong() {
        let p = PayloadSettings::default();
        assert_eq!(decode_payload(&p, b"{\"v\": 1}", 0).unwrap_err(), DecodeError::MissingField("value".into()));
        assert!(matches!(decode_payload(&p, b"not json", 0), Err(DecodeError::NotJson(_))));
        assert!(matches!(decode_payload(&p, br#"{"value": null}"#, 0), Err(DecodeError::FieldNotNumber(_))));
        assert!(matches!(
            decode_payload(&p, br#"{"value": 1, "timestamp": "soon"}"#, 0),
            Err(DecodeError::BadTimestamp(_))
        ));
        assert!(matches!(decode_payload(&p, br#"{"value": 1, "quality": "meh"}"#, 0), Err(DecodeError::BadQuality(_))));
        assert_eq!(decode_payload(&p, &[0xff, 0xfe], 0).unwrap_err(), DecodeError::NotUtf8);
        let num = PayloadSettings { format: PayloadFormat::Number, ..p };
        assert!(matches!(decode_payload(&num, b"NaNx", 0), Err(DecodeError::NotNumber(_))));
    }

    #[test]
    fn a_payload_over_the_limit_is_oversized_and_one_at_it_is_decoded() {
        let p = PayloadSettings { max_bytes: 16, ..PayloadSettings::default() };
        let at = br#"{"value": 12.25}"#;
        assert_eq!(at.len(), 16);
        assert_eq!(decode_payload(&p, at, 7).unwrap().value, 12.25);
        let over = br#"{"value": 12.250}"#;
        let err = decode_payload(&p, over, 7).unwrap_err();
        assert_eq!(err, DecodeError::Oversized { len: 17, limit: 16 });
        assert_eq!(err.reason(), "oversized");
        assert!(err.to_string().contains("payload.max_bytes"), "{err}");
        let default: PayloadSettings = toml::from_str("").unwrap();
        assert_eq!(default.max_bytes, 65_536);
    }
}

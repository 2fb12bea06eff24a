//! Operator commands from the MQTT command topic, parsed strictly.
//!
//! ```json
//! {"action":"acknowledge","component":"U2-SH3-OUTLET-LEG-A","index":"creep_life_fraction","by":"operator 7"}
//! {"action":"shelve","component":"U2-SH3-OUTLET-LEG-A","index":"creep_life_fraction","duration_h":8,"by":"operator 7","reason":"thermocouple replacement"}
//! {"action":"unshelve","component":"U2-SH3-OUTLET-LEG-A","by":"operator 7"}
//! {"action":"remove_from_service","tag":"U2.SH3.TE-311B","duration_h":1000,"by":"I&C","reason":"thermocouple replaced at the outage"}
//! {"action":"return_to_service","tag":"U2.SH3.TE-311B","by":"I&C"}
//! ```
//!
//! An optional `id` (a string) is echoed in the reply on the MQTT reply
//! topic (see `service::command_reply`).
//!
//! Over MQTT a command must also carry the operator token in a `token`
//! field (see [`carries_token`]); the field is allowed in every action and
//! never part of the parsed command. Over HTTP the token goes in the
//! `Authorization` header instead.
//!
//! ```json
//! {"action":"acknowledge","tag":"U2.SH3.PT-301","by":"operator 7"}
//! {"action":"acknowledge","unit":"U2","by":"operator 7"}
//! {"action":"acknowledge","all":true,"by":"operator 7"}
//! ```
//!
//! A command names exactly one target: `component` (its own alarms and the
//! sensor alarms of the tags it reads; also a full key `component/index`),
//! `tag` (that tag's sensor alarms), `unit` (every alarm of a plant unit)
//! or `"all": true`. Leaving out `index` (or giving null) addresses every
//! alarm of the target. `by` is
//! required (ISA-18.2 asks who acknowledged or shelved), and a shelve needs
//! a `reason` and a `duration_h` of at most [`MAX_SHELVE_H`]. Unknown
//! fields are rejected rather than ignored: a misspelt `duration_h` must not
//! turn into a default. Each error names the field and what is wrong.

use super::book::MAX_SHELVE_H;
use super::index::AlarmIndex;
use super::AlarmError;
use serde_json::{Map, Value};

/// How a command's target names its alarms.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Scope {
    /// A component (its own alarms and the sensor alarms of the tags it
    /// reads), or a full `component/index` key.
    #[default]
    Component,
    /// A tag's sensor alarms.
    Tag,
    /// Every alarm of a plant unit.
    Unit,
    /// Every alarm of the plant.
    All,
}

impl Scope {
    /// The command field that names this scope.
    pub fn field(self) -> &'static str {
        match self {
            Scope::Component => "component",
            Scope::Tag => "tag",
            Scope::Unit => "unit",
            Scope::All => "all",
        }
    }
}

/// Which alarms a command addresses.
#[derive(Debug, Clone, PartialEq)]
pub struct AlarmTarget {
    /// The name addressed: a component name or a full `component/index`
    /// key ([`Scope::Component`]), a tag name, a unit name; empty for
    /// [`Scope::All`].
    pub component: String,
    /// `None`: every alarm of the target.
    pub index: Option<AlarmIndex>,
    pub scope: Scope,
}

/// One operator command.
#[derive(Debug, Clone, PartialEq)]
pub enum AlarmCommand {
    Acknowledge {
        target: AlarmTarget,
        by: String,
    },
    Shelve {
        target: AlarmTarget,
        duration_h: f64,
        by: String,
        reason: String,
    },
    Unshelve {
        target: AlarmTarget,
        by: String,
    },
    /// Out of service for a repair, with who, why and until when.
    RemoveFromService {
        target: AlarmTarget,
        duration_h: f64,
        by: String,
        reason: String,
    },
    ReturnToService {
        target: AlarmTarget,
        by: String,
    },
}

impl AlarmCommand {
    /// Who sent the command.
    pub fn by(&self) -> &str {
        match self {
            AlarmCommand::Acknowledge { by, .. }
            | AlarmCommand::Shelve { by, .. }
            | AlarmCommand::Unshelve { by, .. }
            | AlarmCommand::RemoveFromService { by, .. }
            | AlarmCommand::ReturnToService { by, .. } => by,
        }
    }

    /// The alarms addressed.
    pub fn target(&self) -> &AlarmTarget {
        match self {
            AlarmCommand::Acknowledge { target, .. }
            | AlarmCommand::Shelve { target, .. }
            | AlarmCommand::Unshelve { target, .. }
            | AlarmCommand::RemoveFromService { target, .. }
            | AlarmCommand::ReturnToService { target, .. } => target,
        }
    }
}

fn bad(field: &str, problem: impl Into<String>) -> AlarmError {
    AlarmError::Command { field: field.to_string(), problem: problem.into() }
}

fn kind(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "a string",
        Value::Array(_) => "an array",
        Value::Object(_) => "an object",
    }
}

/// A required non-empty text field, trimmed.
fn text(o: &Map<String, Value>, field: &str) -> Result<String, AlarmError> {
    match o.get(field) {
        None | Some(Value::Null) => Err(bad(field, "is missing")),
        Some(Value::String(s)) if s.trim().is_empty() => Err(bad(field, "is empty")),
        Some(Value::String(s)) => match s.chars().find(|c| c.is_control()) {
            Some(c) => Err(bad(field, format!("contains the control character U+{:04X}", c as u32))),
            None => Ok(s.trim().to_string()),
        },
        Some(v) => Err(bad(field, format!("must be a string, got {}", kind(v)))),
    }
}

/// Whether `given` equals `expected`, compared in a time that depends only
/// on the length of `expected` (not on where the two first differ), so
/// that timing does not reveal the token a byte at a time.
pub fn tokens_match(given: &[u8], expected: &[u8]) -> bool {
    let mut diff = (given.len() != expected.len()) as u8;
    for (i, e) in expected.iter().enumerate() {
        diff |= given.get(i).copied().unwrap_or(0) ^ e;
    }
    diff == 0
}

/// Whether the command message `json` is a JSON object whose `token`
/// field is the string `expected` (compared with [`tokens_match`]). An
/// empty `expected` authorises nothing.
pub fn carries_token(json: &[u8], expected: &str) -> bool {
    if expected.is_empty() {
        return false;
    }
    match serde_json::from_slice::<Value>(json) {
        Ok(Value::Object(o)) => {
            matches!(o.get("token"), Some(Value::String(t)) if tokens_match(t.as_bytes(), expected.as_bytes()))
        }
        _ => false,
    }
}

/// Parse one command message.
pub fn parse_command(json: &[u8]) -> Result<AlarmCommand, AlarmError> {
    let v: Value = serde_json::from_slice(json).map_err(|e| AlarmError::CommandJson { problem: e.to_string() })?;
    let Value::Object(o) = v else {
        return Err(AlarmError::CommandJson { problem: format!("expected a JSON object, got {}", kind(&v)) });
    };
    let action = text(&o, "action")?;
    let allowed: &[&str] = match action.as_str() {
        "acknowledge" | "unshelve" | "return_to_service" => {
            &["action", "component", "tag", "unit", "all", "index", "by", "token", "id"]
        }
        "shelve" | "remove_from_service" => {
            &["action", "component", "tag", "unit", "all", "index", "by", "duration_h", "reason", "token", "id"]
        }
        other => {
            return Err(bad(
                "action",
                format!(
                    "unknown action \"{other}\"; expected acknowledge, shelve, unshelve, remove_from_service or \
                     return_to_service"
                ),
            ))
        }
    };
    if let Some(k) = o.keys().find(|k| !allowed.contains(&k.as_str())) {
        return Err(bad(k, format!("is not a field of {action}; its fields are {}", allowed.join(", "))));
    }
    let named: Vec<Scope> = [Scope::Component, Scope::Tag, Scope::Unit, Scope::All]
        .into_iter()
        .filter(|sc| !matches!(o.get(sc.field()), None | Some(Value::Null)))
        .collect();
    let scope = match named.as_slice() {
        [one] => *one,
        [] => return Err(bad("component", "is missing: name a component, a tag, a unit, or give \"all\": true")),
        _ => {
            let f: Vec<&str> = named.iter().map(|s| s.field()).collect();
            return Err(bad(f[1], format!("goes with none of {}: a command names one target", f.join(", "))));
        }
    };
    let component = match scope {
        Scope::All => match o.get("all") {
            Some(Value::Bool(true)) => String::new(),
            Some(v) => return Err(bad("all", format!("must be true to address every alarm, got {v}"))),
            None => unreachable!("scope from a present field"),
        },
        _ => text(&o, scope.field())?,
    };
    let index = match o.get("index") {
        None | Some(Value::Null) => None,
        Some(Value::String(s)) => Some(AlarmIndex::from_name(s.trim()).ok_or_else(|| {
            let names: Vec<&str> = AlarmIndex::ALL.iter().map(|i| i.name()).collect();
            bad("index", format!("unknown index \"{s}\"; expected one of {}", names.join(", ")))
        })?),
        Some(v) => return Err(bad("index", format!("must be a string, got {}", kind(v)))),
    };
    let by = text(&o, "by")?;
    let target = AlarmTarget { component, index, scope };
    Ok(match action.as_str() {
        "acknowledge" => AlarmCommand::Acknowledge { target, by },
        "unshelve" => AlarmCommand::Unshelve { target, by },
        "return_to_service" => AlarmCommand::ReturnToService { target, by },
        _ => {
            let (what, max_h) = if action == "shelve" {
                ("a shelve", MAX_SHELVE_H)
            } else {
                ("removing from service", super::book::MAX_OUT_OF_SERVICE_H)
            };
            let duration_h = match o.get("duration_h") {
                None | Some(Value::Null) => {
                    return Err(bad("duration_h", format!("is missing: {what} needs a duration in hours")))
                }
                Some(Value::Number(n)) => n.as_f64().unwrap_or(f64::NAN),
                Some(v) => return Err(bad("duration_h", format!("must be a number of hours, got {}", kind(v)))),
            };
            if !(duration_h > 0.0 && duration_h <= max_h) {
                return Err(bad(
                    "duration_h",
                    format!("must be more than 0 and at most {max_h} hours, got {duration_h}"),
                ));
            }
            let reason = text(&o, "reason")?;
            if action == "shelve" {
                AlarmCommand::Shelve { target, duration_h, by, reason }
            } else {
                AlarmCommand::RemoveFromService { target, duration_h, by, reason }
            }
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(json: &str) -> String {
        parse_command(json.as_bytes()).unwrap_err().to_string()
    }

    #[test]
    fn parses_the_three_actions() {
        let a = parse_command(br#"{"action":"acknowledge","component":"U2-SH3-OUTLET-LEG-A","index":"creep_life_fraction","by":"operator 7"}"#).unwrap();
        assert_eq!(
            a,
            AlarmCommand::Acknowledge {
                target: AlarmTarget {
                    component: "U2-SH3-OUTLET-LEG-A".into(),
                    index: Some(AlarmIndex::CreepLifeFraction),
                    scope: Scope::Component,
                },
                by: "operator 7".into()
            }
        );
        let s = parse_command(br#"{"action":"shelve","component":"C","index":"sensor_stale","duration_h":8,"by":"op","reason":"TC swap"}"#).unwrap();
        assert_eq!(
            s,
            AlarmCommand::Shelve {
                target: AlarmTarget {
                    component: "C".into(),
                    index: Some(AlarmIndex::SensorStale),
                    scope: Scope::Component
                },
                duration_h: 8.0,
                by: "op".into(),
                reason: "TC swap".into()
            }
        );
        let u = parse_command(br#"{"action":"unshelve","component":"C","by":"op"}"#).unwrap();
        assert_eq!(u.target().index, None);
        assert_eq!(u.by(), "op");
    }

    #[test]
    fn a_command_is_authorised_only_by_the_exact_token() {
        let cmd = |token: &str| format!(r#"{{"action":"unshelve","component":"C","by":"op","token":{token}}}"#);
        assert!(carries_token(cmd("\"s3cret\"").as_bytes(), "s3cret"));
        // The token field is not part of the command.
        assert_eq!(parse_command(cmd("\"s3cret\"").as_bytes()).unwrap().by(), "op");
        for wrong in ["\"s3cre\"", "\"s3cret \"", "\"s3crex\"", "\"S3CRET\"", "\"s3cret0\"", "\"\"", "null", "7"] {
            assert!(!carries_token(cmd(wrong).as_bytes(), "s3cret"), "{wrong} must not authorise");
        }
        assert!(!carries_token(br#"{"action":"unshelve","component":"C","by":"op"}"#, "s3cret"), "no token");
        assert!(!carries_token(b"not json", "s3cret"));
        assert!(!carries_token(cmd("\"\"").as_bytes(), ""), "an empty configured token authorises nothing");
        assert!(tokens_match(b"abc", b"abc") && !tokens_match(b"abc", b"abd") && !tokens_match(b"", b"a"));
        assert!(!tokens_match(b"abcd", b"abc") && !tokens_match(b"ab", b"abc"));
    }

    #[test]
    fn a_command_names_a_component_a_tag_a_unit_or_all() {
        let t = |json: &str| parse_command(json.as_bytes()).unwrap().target().clone();
        let tag = t(r#"{"action":"acknowledge","tag":"PT-301","by":"op"}"#);
        assert_eq!((tag.scope, tag.component.as_str(), tag.index), (Scope::Tag, "PT-301", None));
        let unit = t(r#"{"action":"shelve","unit":"U2","by":"op","reason":"outage","duration_h":8}"#);
        assert_eq!((unit.scope, unit.component.as_str()), (Scope::Unit, "U2"));
        let all = t(r#"{"action":"acknowledge","all":true,"by":"op"}"#);
        assert_eq!((all.scope, all.component.as_str()), (Scope::All, ""));
        assert!(err(r#"{"action":"acknowledge","all":false,"by":"op"}"#).contains("\"all\": must be true"));
        let e = err(r#"{"action":"acknowledge","component":"C","tag":"T","by":"op"}"#);
        assert!(e.contains("a command names one target"), "{e}");
        assert!(err(r#"{"action":"acknowledge","tag":"","by":"op"}"#).contains("\"tag\": is empty"));
    }

    #[test]
    fn errors_name_the_field_and_the_problem() {
        assert!(err("{not json").contains("not a valid JSON object"));
        assert!(err("[1]").contains("expected a JSON object, got an array"));
        assert!(err(r#"{"component":"C","by":"op"}"#).contains("\"action\": is missing"));
        assert!(err(r#"{"action":"silence","component":"C","by":"op"}"#).contains("unknown action \"silence\""));
        assert!(err(r#"{"action":"acknowledge","by":"op"}"#).contains("\"component\": is missing"));
        assert!(err(r#"{"action":"acknowledge","component":" ","by":"op"}"#).contains("\"component\": is empty"));
        assert!(err(r#"{"action":"acknowledge","component":"C"}"#).contains("\"by\": is missing"));
        assert!(err(r#"{"action":"acknowledge","component":"C","by":7}"#)
            .contains("\"by\": must be a string, got a number"));
        let e = err(r#"{"action":"acknowledge","component":"C","index":"creep","by":"op"}"#);
        assert!(e.contains("\"index\": unknown index \"creep\"") && e.contains("creep_life_fraction"), "{e}");
        assert!(
            err(r#"{"action":"shelve","component":"C","by":"op","reason":"r"}"#).contains("\"duration_h\": is missing")
        );
        assert!(err(r#"{"action":"shelve","component":"C","by":"op","reason":"r","duration_h":"8"}"#)
            .contains("got a string"));
        assert!(
            err(r#"{"action":"shelve","component":"C","by":"op","reason":"r","duration_h":0}"#).contains("more than 0")
        );
        assert!(err(r#"{"action":"shelve","component":"C","by":"op","reason":"r","duration_h":1000}"#)
            .contains("at most 720"));
        assert!(
            err(r#"{"action":"shelve","component":"C","by":"op","duration_h":8}"#).contains("\"reason\": is missing")
        );
        let e = err(r#"{"action":"shelve","component":"C","by":"op","reason":"r","duraton_h":8}"#);
        assert!(e.contains("\"duraton_h\": is not a field of shelve"), "{e}");
        assert!(err(r#"{"action":"acknowledge","component":"C","by":"op","duration_h":8}"#)
            .contains("\"duration_h\": is not a field of acknowledge"));
    }
}

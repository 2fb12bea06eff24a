//! Replies to MQTT alarm commands: what became of each command, on
//! `PREFIX/commands/replies` (not retained, QoS 1), so a console that sent
//! one over MQTT learns its real outcome as an HTTP caller does.
//!
//! ```json
//! {"id":"c-17","outcome":"applied","action":"acknowledge","by":"operator 7","summary":{…}}
//! {"id":"c-18","outcome":"unknown","error":"no sensor alarms recorded for tag …"}
//! {"outcome":"unauthorised","error":"missing or wrong \"token\""}
//! ```
//!
//! `id` is the command's own optional `id` field, echoed so the sender can
//! match the reply (not echoed for a command refused as unauthorised or
//! retained: nothing of an unauthorised message is repeated). An applied
//! command is answered once its batch is committed, with the summary of
//! the alarms it addressed; a refused one at once. The reply never carries
//! the token.

use serde::Serialize;

/// One reply.
#[derive(Debug, Clone, Serialize)]
pub struct CommandReply {
    #[serde(skip_serializing_if = "Option::is_none")]
    pub id: Option<String>,
    /// `applied`, `invalid`, `unknown`, `unauthorised` or `retained`.
    pub outcome: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub action: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub by: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error: Option<String>,
    /// The addressed alarms as they now are (applied commands).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub summary: Option<serde_json::Value>,
}

impl CommandReply {
    /// A refusal.
    pub fn refused(id: Option<String>, outcome: &'static str, error: impl Into<String>) -> CommandReply {
        CommandReply { id, outcome, action: None, by: None, error: Some(error.into()), summary: None }
    }

    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("a command reply always serialises")
    }
}

/// The command's `id` field, if it is a short string without control
/// characters (anything else is ignored, never echoed).
pub fn command_id(payload: &[u8]) -> Option<String> {
    let v: serde_json::Value = serde_json::from_slice(payload).ok()?;
    let id = v.get("id")?.as_str()?;
    (id.len() <= 200 && !id.chars().any(char::is_control)).then(|| id.to_string())
}

/// The command's `action` field, for the reply.
pub fn command_action(payload: &[u8]) -> Option<String> {
    let v: serde_json::Value = serde_json::from_slice(payload).ok()?;
    v.get("action")?.as_str().filter(|a| a.len() <= 40).map(String::from)
}

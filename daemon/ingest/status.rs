//! The retained status topic (`{topic_prefix}/status`) and who it belongs
//! to. Each instance publishes `online` there when it connects and leaves
//! `offline` (clean stop, or the broker's last will), retained, with the
//! plant name and MQTT client id that say which instance wrote it.
//!
//! Two instances on one broker under the same `topic_prefix` would
//! overwrite each other's status and share alarm and command topics. The
//! ingest task subscribes to the status topic (QoS 0: nothing to
//! acknowledge) and, for a status written by another instance (another
//! client id), logs a warning once and adds it to the snapshot's
//! `warnings`. Its own status coming back is no conflict. An `online`
//! status without an identity (written by an older version) is warned
//! about too: an instance that stopped would have left `offline`.

use serde::{Deserialize, Serialize};

/// Which instance wrote a status.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct StatusIdentity {
    pub plant: String,
    pub client_id: String,
}

#[derive(Serialize, Deserialize)]
struct StatusPayload {
    status: String,
    #[serde(default)]
    plant: Option<String>,
    #[serde(default)]
    client_id: Option<String>,
}

/// The retained status payload: `{"status":"online","plant":…,"client_id":…}`.
pub fn payload(status: &str, id: &StatusIdentity) -> Vec<u8> {
    serde_json::to_vec(&StatusPayload {
        status: status.into(),
        plant: Some(id.plant.clone()),
        client_id: Some(id.client_id.clone()),
    })
    .unwrap_or_else(|_| format!("{{\"status\":\"{status}\"}}").into_bytes())
}

/// The warning for a status under our prefix written by another instance;
/// `None` when it is our own, or says nothing about an instance running.
pub fn other_instance(topic: &str, bytes: &[u8], ours: &StatusIdentity) -> Option<String> {
    let p: StatusPayload = serde_json::from_slice(bytes).ok()?;
    let fix = "give each instance on a broker its own [mqtt] topic_prefix (and client_id)";
    match (p.client_id, p.plant) {
        (Some(c), _) if c == ours.client_id => None,
        (Some(c), plant) => Some(format!(
            "another instance (plant \"{}\", client_id \"{c}\", {}) uses this instance's status topic {topic}: \
             the instances overwrite each other's retained status and share alarm and command topics; {fix}",
            plant.unwrap_or_default(),
            p.status
        )),
        (None, _) if p.status == "online" => Some(format!(
            "an instance that does not name itself is online on this instance's status topic {topic} \
             (topic_prefix shared); {fix}"
        )),
        (None, _) => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn id(c: &str) -> StatusIdentity {
        StatusIdentity { plant: "North".into(), client_id: c.into() }
    }

    #[test]
    fn own_status_is_no_conflict_and_another_is() {
        let ours = id("a");
        assert_eq!(other_instance("p/status", &payload("online", &ours), &ours), None);
        let w = other_instance("p/status", &payload("offline", &id("b")), &ours).unwrap();
        assert!(w.contains("client_id \"b\"") && w.contains("topic_prefix") && w.contains("p/status"), "{w}");
        assert!(other_instance("p/status", br#"{"status":"online"}"#, &ours).is_some());
        assert_eq!(other_instance("p/status", br#"{"status":"offline"}"#, &ours), None);
        assert_eq!(other_instance("p/status", b"not json", &ours), None);
    }
}

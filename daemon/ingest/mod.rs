//! MQTT ingest: broker settings, the connection options, and the task that
//! polls the rumqttc event loop and hands every tag message to the ledger.
//!
//! Sessions are persistent (clean session off) and subscriptions QoS 1 with
//! manual acknowledgements: this task never acknowledges anything; the
//! ledger acknowledges a message only after the transaction holding its
//! effect has committed. If the ledger falls behind, the hand-over channel
//! fills, this task stops reading, and the broker keeps the backlog.

pub mod decode;
pub mod status;

use decode::{PayloadSettings, TopicTemplate};
use rumqttc::{
    AsyncClient, Event, EventLoop, LastWill, MqttOptions, Packet, Publish, QoS, TlsConfiguration, Transport,
};
use serde::Deserialize;
use std::path::PathBuf;
use std::time::Duration;
use tokio::sync::mpsc;

/// TLS settings of the broker connection.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TlsSettings {
    /// PEM file of the certificate authority that signed the broker's certificate.
    pub ca_file: PathBuf,
    /// PEM client certificate and key, for brokers that require them.
    #[serde(default)]
    pub client_cert_file: Option<PathBuf>,
    #[serde(default)]
    pub client_key_file: Option<PathBuf>,
}

/// One subscription: a topic template and how its payloads look.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SubscriptionSettings {
    /// Topic template, for example `brackenmoor/{unit}/{tag}`.
    pub topic: String,
    /// Tag name built from the captures (default `{tag}`).
    #[serde(default = "default_tag_template")]
    pub tag: String,
    #[serde(default)]
    pub payload: PayloadSettings,
}

fn default_tag_template() -> String {
    "{tag}".into()
}

/// The `[mqtt]` section.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MqttSettings {
    #[serde(default = "default_host")]
    pub host: String,
    #[serde(default = "default_port")]
    pub port: u16,
    /// Stable client id: the broker keeps the session (and the backlog) under it.
    #[serde(default = "default_client_id")]
    pub client_id: String,
    #[serde(default = "default_keep_alive")]
    pub keep_alive_s: u64,
    #[serde(default)]
    pub username: Option<String>,
    /// Name of an environment variable holding the password.
    #[serde(default)]
    pub password_env: Option<String>,
    /// File holding the password (trailing whitespace trimmed).
    #[serde(default)]
    pub password_file: Option<PathBuf>,
    #[serde(default)]
    pub tls: Option<TlsSettings>,
    /// Tag subscriptions.
    #[serde(default, rename = "subscription")]
    pub subscriptions: Vec<SubscriptionSettings>,
    /// Prefix of lifeledger's own topics (status, alarms, commands).
    #[serde(default = "default_prefix")]
    pub topic_prefix: String,
    /// Reconnect backoff bounds, seconds.
    #[serde(default = "default_backoff_min")]
    pub reconnect_min_s: f64,
    #[serde(default = "default_backoff_max")]
    pub reconnect_max_s: f64,
    /// Largest MQTT packet the client takes, bytes. A larger one would make
    /// the client drop the connection, and the broker would redeliver it on
    /// every reconnect: intake would stop for good. The default is MQTT
    /// 3.1.1's largest packet, so whatever the broker delivers is received;
    /// payloads over a subscription's `payload.max_bytes` are then rejected
    /// as `oversized` and acknowledged. Limit message sizes at the broker
    /// (mosquitto `max_packet_size`) to protect memory.
    #[serde(default = "default_max_message_bytes")]
    pub max_message_bytes: usize,
}

/// The largest packet MQTT 3.1.1 can frame: a remaining length of at most
/// 268 435 455 bytes (OASIS MQTT 3.1.1, section 2.2.3; from memory).
pub const MQTT_MAX_PACKET_BYTES: usize = 268_435_455;

/// How long a connection must stay up before a loss of it restarts the
/// reconnect backoff from `reconnect_min_s`. A connection the broker closes
/// at once (a refused login, a message it cannot hand over) keeps doubling
/// the delay instead of reconnecting at the shortest one forever.
pub const STABLE_CONNECTION: Duration = Duration::from_secs(10);

fn default_host() -> String {
    "127.0.0.1".into()
}
fn default_port() -> u16 {
    1883
}
fn default_client_id() -> String {
    "lifeledger".into()
}
fn default_keep_alive() -> u64 {
    30
}
fn default_prefix() -> String {
    "lifeledger".into()
}
fn default_backoff_min() -> f64 {
    0.5
}
fn default_backoff_max() -> f64 {
    30.0
}
fn default_max_message_bytes() -> usize {
    MQTT_MAX_PACKET_BYTES
}

impl MqttSettings {
    /// Topic of the retained online/offline status (also the last will).
    pub fn status_topic(&self) -> String {
        format!("{}/status", self.topic_prefix)
    }
    /// Topic of alarm events.
    pub fn alarm_event_topic(&self) -> String {
        format!("{}/alarms/events", self.topic_prefix)
    }
    /// Retained current-state topic of a component.
    pub fn alarm_state_topic(&self, component: &str) -> String {
        format!("{}/alarms/state/{}", self.topic_prefix, component.replace(['/', '+', '#'], "_"))
    }
    /// Command topic (acknowledge, shelve, unshelve).
    pub fn command_topic(&self) -> String {
        format!("{}/commands", self.topic_prefix)
    }
    /// Replies to MQTT commands (not retained).
    pub fn command_reply_topic(&self) -> String {
        format!("{}/commands/replies", self.topic_prefix)
    }

    /// The password, from the environment or a file; never logged.
    pub fn password(&self) -> Result<Option<String>, String> {
        if let Some(var) = &self.password_env {
            return std::env::var(var)
                .map(Some)
                .map_err(|_| format!("[mqtt] password_env: environment variable {var} is not set"));
        }
        if let Some(f) = &self.password_file {
            return std::fs::read_to_string(f)
                .map(|s| Some(s.trim_end().to_string()))
                .map_err(|e| format!("[mqtt] password_file {}: {e}", f.display()));
        }
        Ok(None)
    }

    /// Compiled topic templates, in order.
    pub fn templates(&self) -> Result<Vec<(TopicTemplate, PayloadSettings)>, String> {
        self.subscriptions
            .iter()
            .enumerate()
            .map(|(i, s)| {
                TopicTemplate::new(&s.topic, &s.tag)
                    .map(|t| (t, s.payload.clone()))
                    .map_err(|e| format!("[[mqtt.subscription]] #{}: {e}", i + 1))
            })
            .collect()
    }

    /// This instance's identity on the status topic.
    pub fn identity(&self, plant: &str) -> status::StatusIdentity {
        status::StatusIdentity { plant: plant.to_string(), client_id: self.client_id.clone() }
    }

    /// rumqttc options: persistent session, manual acks, last will (the
    /// offline status naming this instance of `plant`).
    pub fn options(&self, plant: &str) -> Result<MqttOptions, String> {
        let mut o = self.connection_options(&self.client_id)?;
        o.set_clean_session(false);
        o.set_manual_acks(true);
        o.set_last_will(LastWill::new(
            self.status_topic(),
            status::payload("offline", &self.identity(plant)),
            QoS::AtLeastOnce,
            true,
        ));
        Ok(o)
    }

    /// The client id of the alarm-event publisher's own connection:
    /// `client_id` with `-events` appended.
    pub fn event_client_id(&self) -> String {
        format!("{}-events", self.client_id)
    }

    /// rumqttc options of the alarm-event publisher
    /// (`service::event_publish`): its own connection with the same broker,
    /// credentials and TLS, a clean session and no last will. Only it
    /// publishes on that connection, so the broker's PUBACKs can be matched
    /// to the events it sent.
    pub fn event_options(&self) -> Result<MqttOptions, String> {
        let mut o = self.connection_options(&self.event_client_id())?;
        o.set_clean_session(true);
        Ok(o)
    }

    /// Broker, keep-alive, sizes, credentials and TLS, shared by both
    /// connections.
    fn connection_options(&self, client_id: &str) -> Result<MqttOptions, String> {
        let mut o = MqttOptions::new(client_id, &self.host, self.port);
        o.set_keep_alive(Duration::from_secs(self.keep_alive_s.max(5)));
        o.set_request_channel_capacity(4096);
        o.set_inflight(1000);
        o.set_max_packet_size(self.max_message_bytes, self.max_message_bytes);
        if let Some(user) = &self.username {
            o.set_credentials(user, self.password()?.unwrap_or_default());
        }
        if let Some(t) = &self.tls {
            let read =
                |p: &PathBuf, key: &str| std::fs::read(p).map_err(|e| format!("[mqtt.tls] {key} {}: {e}", p.display()));
            let ca = read(&t.ca_file, "ca_file")?;
            let client_auth = match (&t.client_cert_file, &t.client_key_file) {
                (Some(c), Some(k)) => Some((read(c, "client_cert_file")?, read(k, "client_key_file")?)),
                (None, None) => None,
                _ => return Err("[mqtt.tls] client_cert_file and client_key_file go together".into()),
            };
            o.set_transport(Transport::Tls(TlsConfiguration::Simple { ca, alpn: None, client_auth }));
        }
        Ok(o)
    }
}

/// This instance's identity on its status topic, and where the ingest task
/// reports other instances found there (`ingest::status`).
#[derive(Debug)]
pub struct InstanceWatch {
    pub identity: status::StatusIdentity,
    pub warnings: tokio::sync::watch::Sender<Vec<String>>,
}

/// What the ingest task hands to the ledger.
#[derive(Debug)]
pub enum Inbound {
    /// A message (tag or command), with its receive time (ms since epoch).
    Message { publish: Publish, received_ms: i64 },
    /// Connection state changed.
    Connection { connected: bool },
    /// An alarm command that came in over HTTP (already authorised); the
    /// ledger thread sends what became of it to `reply`.
    HttpCommand { payload: Vec<u8>, reply: tokio::sync::oneshot::Sender<CommandOutcome> },
}

/// What became of an HTTP alarm command, as the ledger thread decided.
#[derive(Debug, Clone, PartialEq)]
pub enum CommandOutcome {
    /// Carried out and committed to the ledger: the addressed component's
    /// alarms as they now are (JSON of its alarm summary).
    Applied(String),
    /// Not a valid command, or one the alarm book cannot carry out as
    /// given (a shelve too long or not ahead); the error.
    Invalid(String),
    /// No such component or alarm in the alarm book; the error.
    Unknown(String),
}

/// Wall-clock now in ms since the epoch (shell only; the engine never reads clocks).
pub fn now_ms() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_millis() as i64).unwrap_or(0)
}

/// Poll the event loop until shutdown: subscribe on every connection
/// without a kept session, forward publishes, reconnect with exponential
/// backoff. The backoff starts again from `reconnect_min_s` only after a
/// connection has stayed up for [`STABLE_CONNECTION`].
pub async fn run_event_loop(
    settings: MqttSettings,
    client: AsyncClient,
    mut eventloop: EventLoop,
    filters: std::sync::Arc<std::sync::Mutex<Vec<String>>>,
    to_ledger: mpsc::Sender<Inbound>,
    mut shutdown: crate::shutdown::ShutdownListener,
    instance: InstanceWatch,
) {
    let status_topic = settings.status_topic();
    let mut others: Vec<String> = vec![];
    let mut delay = settings.reconnect_min_s;
    // When the current connection was acknowledged by the broker.
    let mut connected_at: Option<std::time::Instant> = None;
    // Set once the service has sent its DISCONNECT (shutdown).
    let mut disconnecting = false;
    // Messages received but not yet handed to the ledger. The event loop is
    // polled while they wait, so the ledger's acknowledgements (which travel
    // through the client's request queue) always get out; the queue holds at
    // most what the broker's in-flight window lets it send unacknowledged.
    let mut waiting: std::collections::VecDeque<Inbound> = std::collections::VecDeque::new();
    loop {
        let ev = if waiting.is_empty() {
            tokio::select! {
                ev = eventloop.poll() => ev,
                _ = shutdown.stopped() => break,
            }
        } else {
            tokio::select! {
                permit = to_ledger.reserve() => {
                    match permit {
                        Ok(p) => {
                            if let Some(m) = waiting.pop_front() {
                                p.send(m);
                            }
                        }
                        // After the ledger has closed, intake is stopped: the
                        // messages stay unacknowledged and the broker
                        // redelivers them to the next session.
                        Err(_) => waiting.clear(),
                    }
                    continue;
                }
                ev = eventloop.poll() => ev,
                _ = shutdown.stopped() => break,
            }
        };
        match ev {
            Ok(Event::Incoming(Packet::ConnAck(ack))) => {
                connected_at = Some(std::time::Instant::now());
                tracing::info!(
                    session_present = ack.session_present,
                    "connected to MQTT broker {}:{}",
                    settings.host,
                    settings.port
                );
                // Subscriptions live in the broker's session; renew them anyway
                // (harmless when present, needed when the broker lost the session).
                // The filters in force now: a SIGHUP reload may have changed them.
                let now: Vec<String> = filters.lock().unwrap_or_else(|p| p.into_inner()).clone();
                for f in &now {
                    if let Err(e) = client.try_subscribe(f, QoS::AtLeastOnce) {
                        tracing::error!("subscribe {f}: {e}");
                    }
                }
                // Whoever's status is retained under the prefix arrives on
                // this subscription (QoS 0: nothing to acknowledge).
                if let Err(e) = client.try_subscribe(&status_topic, QoS::AtMostOnce) {
                    tracing::error!("subscribe {status_topic}: {e}");
                }
                let online = status::payload("online", &instance.identity);
                let _ = client.try_publish(&status_topic, QoS::AtLeastOnce, true, online);
                waiting.push_back(Inbound::Connection { connected: true });
            }
            // A status under our prefix: ours, or another instance's.
            Ok(Event::Incoming(Packet::Publish(p))) if p.topic == status_topic => {
                // Also matched by a QoS 1 tag subscription (`#`): acknowledged
                // here, it is no tag message.
                if p.qos != QoS::AtMostOnce {
                    let _ = client.try_ack(&p);
                }
                if let Some(w) = status::other_instance(&status_topic, &p.payload, &instance.identity) {
                    if !others.contains(&w) {
                        tracing::warn!("{w}");
                        others.push(w);
                        let _ = instance.warnings.send(others.clone());
                    }
                }
            }
            Ok(Event::Incoming(Packet::Publish(p))) => {
                waiting.push_back(Inbound::Message { publish: p, received_ms: now_ms() });
            }
            // The service asked to disconnect (shutdown): the broker closing
            // the connection next is the expected end, not a fault.
            Ok(Event::Outgoing(rumqttc::Outgoing::Disconnect)) => disconnecting = true,
            Ok(_) => {}
            Err(e) if disconnecting => {
                tracing::debug!("MQTT connection closed after disconnect: {e}");
                break;
            }
            Err(e) => {
                let wait;
                (wait, delay) = reconnect_backoff(delay, connected_at.take().map(|t| t.elapsed()), &settings);
                tracing::warn!(
                    "MQTT connection to {}:{} lost or refused: {e}; retrying in {wait:.1} s",
                    settings.host,
                    settings.port
                );
                waiting.push_back(Inbound::Connection { connected: false });
                tokio::select! {
                    // Validated settings keep `wait` positive and finite; a
                    // second's wait stands in should one ever not be.
                    _ = tokio::time::sleep(Duration::try_from_secs_f64(wait).unwrap_or(Duration::from_secs(1))) => {}
                    _ = shutdown.stopped() => break,
                }
            }
        }
    }
}

/// The reconnect backoff after an attempt or a connection failed: returns
/// (the wait before the next attempt, the wait after a further failure).
/// `planned` is what the previous call returned second (at first
/// `reconnect_min_s`); `up_for` how long the connection that just ended
/// had been up (`None`: it never got as far as the broker's
/// acknowledgement). Only a connection that stayed up for
/// [`STABLE_CONNECTION`] restarts the backoff at `reconnect_min_s`;
/// otherwise each failure doubles the wait, up to `reconnect_max_s`.
pub fn reconnect_backoff(planned: f64, up_for: Option<Duration>, s: &MqttSettings) -> (f64, f64) {
    let wait = match up_for {
        Some(up) if up >= STABLE_CONNECTION => s.reconnect_min_s,
        _ => planned,
    };
    // min/max rather than clamp: clamp panics on bounds validation let through.
    (wait, (wait * 2.0).min(s.reconnect_max_s).max(s.reconnect_min_s))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settings(min: f64, max: f64) -> MqttSettings {
        toml::from_str(&format!("reconnect_min_s = {min:?}\nreconnect_max_s = {max:?}")).unwrap()
    }

    /// Waits of `failures` connections that each ended after `up_for`.
    fn waits(s: &MqttSettings, up_for: Option<Duration>, failures: usize) -> Vec<f64> {
        let mut planned = s.reconnect_min_s;
        (0..failures)
            .map(|_| {
                let wait;
                (wait, planned) = reconnect_backoff(planned, up_for, s);
                wait
            })
            .collect()
    }

    #[test]
    fn refused_attempts_back_off_exponentially_up_to_the_maximum() {
        let s = settings(0.5, 30.0);
        assert_eq!(waits(&s, None, 8), [0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 30.0, 30.0]);
    }

    #[test]
    fn a_connection_that_dies_at_once_does_not_reset_the_backoff() {
        // The broker accepts the connection and the client drops it at the
        // first message: each session lasts well under a second.
        let s = settings(0.5, 30.0);
        assert_eq!(waits(&s, Some(Duration::from_millis(50)), 7), [0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 30.0]);
    }

    #[test]
    fn a_connection_that_stayed_up_restarts_the_backoff_at_the_minimum() {
        let s = settings(0.5, 30.0);
        let (wait, next) = reconnect_backoff(30.0, Some(STABLE_CONNECTION), &s);
        assert_eq!((wait, next), (0.5, 1.0));
    }

    #[test]
    fn the_client_takes_any_packet_mqtt_can_frame_unless_told() {
        let s = settings(0.5, 30.0);
        // MQTT 3.1.1 (OASIS), section 2.2.3: the remaining length is at most
        // 268 435 455 bytes (from memory).
        assert_eq!(s.max_message_bytes, 268_435_455);
        assert_eq!(s.options("P").unwrap().max_packet_size(), 268_435_455);
    }
}

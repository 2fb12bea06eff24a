//! The ledger thread: the one owner of the engine, the alarm book and the
//! store's write connection.
//!
//! It takes messages from the ingest task, decodes and integrates them,
//! and group-commits: once a batch is `[store] commit_interval_ms` old (or
//! full; with an interval of 0, whenever its queue runs dry) it
//! writes, in one transaction, the changed component ledgers, the tag
//! cursors, the alarm records, the counters and the new outbox points; only
//! then does it acknowledge the MQTT messages of the batch and publish the
//! alarm messages. A crash at any instant therefore loses nothing that was
//! acknowledged and, because cursors commit with the ledgers, counts nothing
//! twice when the broker redelivers.
//!
//! The alarm events of a batch go into the store's alarm journal in the
//! same transaction; at start-up the newest of them fill the snapshot's
//! `recent_events`, so the alarm history shown survives a restart. So do
//! the status page's trends: each `component_state` point's figures go into
//! the store's trend table in the same transaction, and the HTTP side reads
//! them from there. Once a UTC day of event time, each component's ledger
//! and its tags' states are copied into the store's checkpoints in the same
//! transaction too (`crate::ledger_file::checkpoint_rows`), for rollback.
//!
//! The thread is a shell around pure parts, each unit-tested without a
//! broker or a store: [`intake`] (topic and payload to a sample, or the
//! reason it is refused), [`series`] (points at event-time spacing),
//! [`rows`] (one commit's rows, and what a failed attempt gives back),
//! [`step`] (the batch: acknowledge and publish only after the commit),
//! [`gate`] (intake held over the outbox quota), `ledger_file` (the loaded
//! ledger, typed) and the sensor judgement ([`sensors`]). What stays here
//! is I/O and clocks: the channel, the store, the MQTT client, the wall
//! and monotonic clocks, the snapshot.

use super::command_reply::{command_action, command_id, CommandReply};
use super::commit_retry::{AfterFailure, CommitRetry};
use super::reload::SharedFilters;
use super::settings::ServiceSettings;
use super::snapshot::{ComponentFreshness, Freshness, ServiceCounters, Snapshot, TagFreshness};
use crate::alarm::{carries_token, parse_command, AlarmBook, AlarmError, AlarmEvent, AlarmIndex};
use crate::engine::tags::{tag_index, TagIndex};
use crate::engine::{ComponentState, Engine, Rejection, TagState};
use crate::event_time::rfc3339_ms;
use crate::ingest::decode::{PayloadSettings, TopicTemplate};
use crate::ingest::{now_ms, CommandOutcome, Inbound};
use crate::ledger_file::StoredLedger;
use crate::report::{threshold_points, ComponentReport};
use crate::settings::LoadedConfig;
use crate::store::Store;
use rumqttc::{AsyncClient, Publish, QoS};
use std::collections::{BTreeSet, HashMap};
use std::sync::Arc;
use std::time::{Duration, Instant};
use tokio::sync::{mpsc, watch};

/// Control messages from the main task.
#[derive(Debug)]
pub enum Control {
    /// Replace the configuration, keeping every ledger.
    Reload(Box<LoadedConfig>, Box<ServiceSettings>),
    /// Stop taking messages, commit, acknowledge, and return.
    Stop,
}

/// Rate-limited warnings: at most one line per reason every 10 s, with a
/// count of what was suppressed.
struct RateLimitedLog {
    last: HashMap<&'static str, (Instant, u64)>,
}

impl RateLimitedLog {
    fn warn(&mut self, reason: &'static str, msg: impl FnOnce() -> String) {
        if let Some(suppressed) = self.due(reason) {
            tracing::warn!(reason, suppressed, "{}", msg());
        }
    }

    fn error(&mut self, reason: &'static str, msg: impl FnOnce() -> String) {
        if let Some(suppressed) = self.due(reason) {
            tracing::error!(reason, suppressed, "{}", msg());
        }
    }

    /// Whether a line for `reason` may go out now, and how many were
    /// suppressed since the last one.
    fn due(&mut self, reason: &'static str) -> Option<u64> {
        let now = Instant::now();
        let e = self.last.entry(reason).or_insert((now - Duration::from_secs(3600), 0));
        if now.duration_since(e.0) >= Duration::from_secs(10) {
            let suppressed = e.1;
            *e = (now, 0);
            Some(suppressed)
        } else {
            e.1 += 1;
            None
        }
    }
}

/// The ledger: engine, alarms, store and the batch being built.
pub struct Ledger {
    cfg: Arc<LoadedConfig>,
    service: ServiceSettings,
    engine: Engine,
    book: AlarmBook,
    store: Store,
    client: AsyncClient,
    templates: Vec<(TopicTemplate, PayloadSettings)>,
    index: TagIndex,
    command_topic: String,
    /// The open batch: messages to acknowledge and events to publish once
    /// it is committed (the pure protocol, [`step`]).
    batch: step::Batch<Publish>,
    /// Origin of the monotonic milliseconds the batch is timed in.
    clock: Instant,
    /// The message being handled carried a sample of a configured tag.
    took_sample: bool,
    /// What the next commit writes besides the batch ([`rows`]).
    pending: rows::Pending,
    /// When each component's next series point is due ([`series`]).
    series: series::SeriesClock,
    /// Newest event time seen on any tag.
    newest_ms: Option<i64>,
    /// Per-tag sensor judgement ([`sensors::SensorJudge`]).
    sensors: sensors::SensorJudge,
    /// Sequence number the next committed alarm event gets (durable, in
    /// the store's meta with the journal).
    next_event_seq: u64,
    /// The alarm clock's latest reading (see [`Ledger::alarm_now`]).
    alarm_clock_ms: i64,
    /// MQTT commands carried out, answered on the reply topic once
    /// committed: (id, action, by, target).
    mqtt_replies: Vec<(Option<String>, Option<String>, String, crate::alarm::AlarmTarget)>,
    /// Alarm-system performance figures, fed with committed events.
    kpi: super::alarm_kpi::AlarmKpi,
    retired: Vec<(String, ComponentState)>,
    retired_tags: Vec<(String, TagState)>,
    counters: ServiceCounters,
    log: RateLimitedLog,
    snapshot_tx: watch::Sender<Arc<Snapshot>>,
    last_snapshot: Instant,
    last_health: Instant,
    /// When the retained alarm states were last all published again.
    last_state_republish: Instant,
    started: String,
    mqtt_connected: bool,
    outbox: crate::store::OutboxStats,
    /// Intake held while the outbox is over its quota ([`gate`]).
    gate: gate::IntakeGate,
    recent_events: std::collections::VecDeque<AlarmEvent>,
    /// Commit even with nothing pending (an HTTP command changed alarms).
    force_commit: bool,
    last_sensor_check: Instant,
    /// When to try a failed commit again, and when to give up.
    retry: CommitRetry,
    /// The last commit error while commits fail (readiness shows it).
    commit_error: Option<String>,
    /// Set when commits have failed for too long: `run` returns it.
    fatal: Option<anyhow::Error>,
    /// The operator token MQTT commands must carry (the `[http] token_env`
    /// token); `None`: every MQTT command is refused.
    command_token: Option<String>,
    /// The outbox sender's view of the database (`None`: no sender).
    database_link: Option<watch::Receiver<super::outbox::DatabaseLink>>,
    /// The database refused the service at the last look (alarm raised).
    database_refused: bool,
    /// HTTP commands carried out but not yet committed: the component
    /// addressed and where the outcome goes once the commit succeeded.
    command_replies: Vec<(crate::alarm::AlarmTarget, tokio::sync::oneshot::Sender<CommandOutcome>)>,
    /// Subscriptions in force and what the last reloads left undone.
    reloads: Reloads,
    /// Where the newest committed event sequence number goes for the alarm
    /// event publisher (`service::event_publish`); without one (unit
    /// tests) event messages are published directly after the commit.
    event_feed: Option<watch::Sender<u64>>,
}

/// The ledger's record of SIGHUP reloads (see [`super::reload`]).
struct Reloads {
    /// Filters subscribed to; the intake task renews them on reconnect.
    filters: SharedFilters,
    /// Changed settings that wait for a restart.
    restart_required: Vec<String>,
    /// Why the last reload was refused (cleared by one that is applied).
    refused: Option<String>,
}

/// Seconds of wall time between two publications of every retained alarm
/// state (besides every connection and every change).
const STATE_REPUBLISH_S: u64 = 60;

/// The plant-level alarm raised when no tag delivers data.
pub const PLANT_DATA_ALARM: &str = "lifeledger:plant-data";

/// The service-health alarm of a database that refuses the service.
pub const DATABASE_ALARM: &str = "lifeledger:database";

/// Alarm events kept in memory for the snapshot (`recent_events`).
const RECENT_EVENTS: usize = 200;

/// The newest [`RECENT_EVENTS`] events of the alarm journal, oldest first
/// (as `recent_events` keeps them). An unreadable entry is logged and
/// left out: it must not keep the service from starting.
fn recent_events(store: &Store) -> anyhow::Result<std::collections::VecDeque<AlarmEvent>> {
    let rows = store.alarm_journal_newest(RECENT_EVENTS)?;
    let mut events = std::collections::VecDeque::with_capacity(rows.len());
    for (id, row) in rows.into_iter().rev() {
        match serde_json::from_str::<AlarmEvent>(&row.event) {
            Ok(e) => events.push_back(e),
            Err(e) => tracing::error!(
                "ledger {}: alarm journal entry {id} ({} {}) unreadable ({e}); not shown",
                store.path().display(),
                row.component,
                row.index
            ),
        }
    }
    Ok(events)
}

/// `[store] commit_failure_limit_s` as a duration (validated positive and
/// at most a day; a limit that does not convert falls back to 300 s).
fn commit_failure_limit(s: &ServiceSettings) -> Duration {
    Duration::try_from_secs_f64(s.store.commit_failure_limit_s).unwrap_or(Duration::from_secs(300))
}

fn quota(s: &ServiceSettings) -> u64 {
    s.database.as_ref().map_or(u64::MAX, |d| d.outbox_quota_bytes)
}

impl Ledger {
    /// Open the ledger: load every stored ledger, cursor and alarm record.
    pub fn open(
        cfg: LoadedConfig,
        service: ServiceSettings,
        client: AsyncClient,
        snapshot_tx: watch::Sender<Arc<Snapshot>>,
    ) -> anyhow::Result<Ledger> {
        let mut store = Store::open_with(&service.store.path, service.store.create_if_missing)?;
        store.set_alarm_journal_max_events(service.store.alarm_journal_max_events);
        store.set_trend_points_per_component(service.store.trend_points_per_component);
        store.set_checkpoint_days(service.store.checkpoint_days);
        let loaded = store.load()?;
        let recent_events = recent_events(&store)?;
        let mut engine = Engine::new(cfg.plan.clone());
        // The store mirrors the reorder window: record what enters and leaves.
        engine.track_held_changes(true);
        let stored = StoredLedger::parse(&loaded, &service.store.path)?;
        let svc = ServiceCounters { decode_rejected: stored.decode_rejected, ..ServiceCounters::default() };
        let left = engine.import_state(stored.engine);
        for (key, e) in &stored.unreadable_alarms {
            tracing::error!(
                "ledger {}: alarm record {key} unreadable ({e}); it starts afresh",
                service.store.path.display()
            );
        }
        for ps in &service.alarms.plant_states {
            if !cfg.plan.tags.iter().any(|t| t.name == ps.tag) {
                anyhow::bail!(
                    "[[alarms.plant_state]] {:?}: tag {:?} is not a configured tag; name one of the [[tag]] entries",
                    ps.name,
                    ps.tag
                );
            }
        }
        let records = stored.alarms;
        let mut book = AlarmBook::from_records(records).with_config(service.alarms.clone());
        // Sensor alarms are kept per tag; records an older version kept per
        // component would stand for ever.
        for r in book.retire(|r| !(r.index.is_sensor() && r.affects.is_empty())) {
            tracing::info!(
                "alarm {} retired: sensor alarms are now kept per tag (state was {})",
                r.key(),
                r.state.name()
            );
        }
        let templates = service.mqtt.templates().map_err(|e| anyhow::anyhow!(e))?;
        let index = tag_index(&engine);
        let ntags = engine.plan().tags.len();
        let ncomp = engine.plan().components.len();
        let newest_ms = engine.tags().iter().filter_map(|t| t.cursor_ms).max();
        let stats = store.outbox_stats()?;
        tracing::info!(
            components = ncomp,
            tags = ntags,
            stored_components = loaded.components.len(),
            outbox_lines = stats.lines,
            "ledger {} opened",
            service.store.path.display()
        );
        let mut l = Ledger {
            command_topic: service.mqtt.command_topic(),
            cfg: Arc::new(cfg),
            engine,
            book,
            store,
            client,
            templates,
            index,
            batch: step::Batch::default(),
            clock: Instant::now(),
            took_sample: false,
            pending: rows::Pending::default(),
            series: series::SeriesClock::new(ncomp),
            newest_ms,
            sensors: sensors::SensorJudge::new(ntags, now_ms()),
            next_event_seq: stored.next_event_seq,
            alarm_clock_ms: i64::MIN,
            mqtt_replies: vec![],
            kpi: {
                // The recent journal seeds the figures across a restart.
                let mut k = super::alarm_kpi::AlarmKpi::default();
                k.record(&recent_events.iter().cloned().collect::<Vec<_>>());
                k
            },
            retired: left.components,
            retired_tags: left.tags,
            counters: svc,
            log: RateLimitedLog { last: HashMap::new() },
            snapshot_tx,
            last_snapshot: Instant::now() - Duration::from_secs(60),
            // The first health point goes out at the first idle moment.
            last_health: Instant::now() - Duration::from_secs(3600),
            last_state_republish: Instant::now(),
            started: rfc3339_ms(now_ms()),
            mqtt_connected: false,
            outbox: stats,
            gate: gate::IntakeGate::default(),
            recent_events,
            force_commit: false,
            last_sensor_check: Instant::now() - Duration::from_secs(60),
            retry: CommitRetry::new(commit_failure_limit(&service)),
            commit_error: None,
            fatal: None,
            reloads: Reloads {
                filters: Arc::new(std::sync::Mutex::new(Ledger::filters(&service))),
                restart_required: vec![],
                refused: None,
            },
            command_token: None,
            database_link: None,
            database_refused: false,
            command_replies: vec![],
            event_feed: None,
            service,
        };
        l.offer_stored_inspections()?;
        // Thresholds go to the database at start-up, at the newest event time.
        let t = l.newest_ms.unwrap_or_else(now_ms);
        l.queue_thresholds(t);
        // Every record judged against the ledger as loaded, so the values
        // the retained states carry from the first connection are current
        // (a record is stored only when its state changes).
        for ci in 0..l.engine.plan().components.len() {
            let (plan, st) = (&l.engine.plan().components[ci], &l.engine.components()[ci]);
            if let Some(ti) = st.integrated_to_ms {
                let ev = l.book.evaluate_component(plan, st, ti);
                l.note_events(ev);
            }
        }
        l.publish_snapshot(true);
        Ok(l)
    }

    /// The operator token MQTT commands must carry in their `token` field;
    /// `None` (or empty): MQTT commands are refused, counted `unauthorised`.
    pub fn set_command_token(&mut self, token: Option<String>) {
        self.command_token = token.filter(|t| !t.is_empty());
    }

    /// Alarm event messages are published by the journal's publisher,
    /// which `feed` tells the newest committed sequence number; the ledger
    /// thread then publishes only the retained alarm states.
    pub fn set_event_feed(&mut self, feed: watch::Sender<u64>) {
        feed.send_replace(self.next_event_seq.saturating_sub(1));
        self.event_feed = Some(feed);
    }

    /// Where the outbox sender says whether the database took its last
    /// write; shown as `database_reachable` in the snapshot.
    pub fn set_database_reachability(&mut self, link: watch::Receiver<super::outbox::DatabaseLink>) {
        self.database_link = Some(link);
    }

    fn queue_thresholds(&mut self, t: i64) {
        let plant = self.cfg.plan.plant.clone();
        let mut lines = vec![];
        for c in &self.cfg.plan.components {
            lines.extend(threshold_points(&plant, c, t).into_iter().filter_map(|p| p.to_line()));
        }
        self.pending.lines.extend(lines);
    }

    /// The subscription filters: tag templates and the command topic.
    pub fn filters(service: &ServiceSettings) -> Vec<String> {
        let mut f: Vec<String> = service.mqtt.templates().unwrap_or_default().iter().map(|(t, _)| t.filter()).collect();
        f.push(service.mqtt.command_topic());
        f.dedup();
        f
    }

    /// The subscription filters in force, for the intake task to subscribe
    /// to on every connection; reloads change them.
    pub fn shared_filters(&self) -> SharedFilters {
        self.reloads.filters.clone()
    }

    /// Run until stopped: the group-commit loop. Returns an error, having
    /// acknowledged nothing it could not write, when commits have failed
    /// without a break for `[store] commit_failure_limit_s`.
    pub fn run(
        mut self,
        mut rx: mpsc::Receiver<Inbound>,
        control: std::sync::mpsc::Receiver<Control>,
        rt: tokio::runtime::Handle,
    ) -> anyhow::Result<()> {
        loop {
            if let Some(e) = self.fatal.take() {
                self.publish_snapshot(true);
                return Err(e);
            }
            match control.try_recv() {
                Ok(Control::Stop) | Err(std::sync::mpsc::TryRecvError::Disconnected) => {
                    // Take what is already queued, then finish.
                    while let Ok(m) = rx.try_recv() {
                        self.handle(m);
                    }
                    // One last attempt even while failing commits wait.
                    self.retry.try_now();
                    self.commit();
                    break;
                }
                Ok(Control::Reload(cfg, service)) => {
                    self.retry.try_now();
                    self.commit();
                    self.reload(*cfg, *service);
                }
                Err(std::sync::mpsc::TryRecvError::Empty) => {}
            }
            // After a failed commit: take no messages until the next
            // attempt is due (the broker keeps them), and do not spin.
            if let Some(wait) = self.retry.wait(Instant::now()) {
                std::thread::sleep(wait.min(Duration::from_millis(200)));
                self.periodic();
                continue;
            }
            if self.gate.holding() {
                self.check_quota();
                if self.gate.holding() {
                    std::thread::sleep(Duration::from_millis(200));
                    self.periodic();
                    continue;
                }
            }
            if self.batch.is_empty() && (!self.pending.lines.is_empty() || self.force_commit) {
                // Rows without messages (series, health, a command) wait
                // for the group-commit interval like a batch of messages.
                self.batch.open(self.mono_ms());
            }
            let due = self.batch.due(
                self.mono_ms(),
                self.service.store.commit_interval_ms,
                self.service.store.commit_max_samples,
            );
            let msg = if matches!(due, step::Due::Idle) && self.pending.lines.is_empty() && !self.force_commit {
                match rt.block_on(async { tokio::time::timeout(Duration::from_millis(500), rx.recv()).await }) {
                    Ok(Some(m)) => {
                        self.batch.open(self.mono_ms());
                        Some(m)
                    }
                    Ok(None) => {
                        self.commit();
                        break;
                    }
                    Err(_) => {
                        self.periodic();
                        continue;
                    }
                }
            } else {
                // Group commit: take more messages until the open batch is
                // commit_interval_ms old (0: until the queue runs dry).
                let next = match due {
                    step::Due::Now => Err(false),
                    step::Due::Within(0) | step::Due::Idle => {
                        rx.try_recv().map_err(|e| e == mpsc::error::TryRecvError::Disconnected)
                    }
                    step::Due::Within(left) => {
                        match rt.block_on(async { tokio::time::timeout(Duration::from_millis(left), rx.recv()).await })
                        {
                            Ok(Some(m)) => Ok(m),
                            Ok(None) => Err(true),
                            Err(_) => Err(false),
                        }
                    }
                };
                match next {
                    Ok(m) => Some(m),
                    Err(false) => None,
                    Err(true) => {
                        self.commit();
                        break;
                    }
                }
            };
            match msg {
                Some(m) => {
                    self.handle(m);
                    if self.batch.samples() >= self.service.store.commit_max_samples {
                        self.commit();
                        self.batch.reset_age();
                    }
                }
                // The batch is old enough (or the queue ran dry with an
                // interval of 0): commit what we have (group commit).
                None => {
                    self.commit();
                    self.batch.reset_age();
                    self.periodic();
                }
            }
        }
        self.publish_snapshot(true);
        if self.retry.failing() {
            tracing::error!("ledger closed with its last batch not written; the broker redelivers it");
        } else {
            tracing::info!("ledger closed cleanly");
        }
        Ok(())
    }

    fn periodic(&mut self) {
        self.take_inspections();
        let now = now_ms();
        // Held samples whose window of wall time has passed (a feed that
        // stopped), and parts without tag inputs, move with the wall clock.
        self.engine.release_due(now);
        self.engine.advance_clock(now);
        self.collect_series();
        // Silence is judged by the wall clock, so a dead feed alarms even
        // though no batch arrives to trigger a commit.
        self.sensor_check();
        self.database_check();
        // Commit what the releases and the checks produced before the
        // snapshot is published, so it never shows a point not yet queued.
        if !self.batch.events().is_empty() || !self.pending.lines.is_empty() || !self.pending.trend_points.is_empty() {
            self.commit();
        }
        if let Ok(s) = self.store.outbox_stats() {
            self.outbox = s;
        }
        let alarm_now = self.alarm_now();
        let ev = self.book.tick(alarm_now);
        if !ev.is_empty() {
            self.note_events(ev);
            self.commit();
        }
        // Retained states carry values that move without an event (a wear
        // index past its last level): all published again once a minute.
        if self.mqtt_connected && self.last_state_republish.elapsed() >= Duration::from_secs(STATE_REPUBLISH_S) {
            self.last_state_republish = Instant::now();
            self.publish_all_states();
        }
        if self.last_health.elapsed() >= Duration::from_secs(self.service.store.health_interval_s.max(1)) {
            self.last_health = Instant::now();
            let p = self.health_point(now);
            self.pending.lines.push(p);
            self.commit();
        }
        self.publish_snapshot(false);
    }

    fn health_point(&self, now: i64) -> String {
        let e = self.engine.counters();
        let mut p = crate::lineproto::Point::new(crate::series_model::SERVICE_HEALTH.name, now * 1_000_000)
            .tag("plant", &self.cfg.plan.plant)
            .int("samples_accepted", e.accepted as i64)
            .int("duplicates", (e.duplicate + e.late) as i64)
            .int("outbox_lines", self.outbox.lines as i64)
            .int("outbox_bytes", self.outbox.bytes as i64)
            .float("commit_latency_ms", self.counters.last_commit_ms)
            .boolean("mqtt_connected", self.mqtt_connected);
        for r in Rejection::ALL {
            p = p.int(&format!("rejected_{}", r.name()), e.get(r) as i64);
        }
        for (k, v) in &self.counters.decode_rejected {
            p = p.int(&format!("rejected_{k}"), *v as i64);
        }
        p.to_line().unwrap_or_default()
    }

    fn reject(&mut self, reason: &'static str, topic: &str, detail: String) {
        *self.counters.decode_rejected.entry(reason.to_string()).or_insert(0) += 1;
        self.log.warn(reason, || format!("message on {topic} rejected: {detail}"));
    }

    fn handle(&mut self, m: Inbound) {
        match m {
            Inbound::HttpCommand { payload, reply } => match self.command(&payload) {
                Ok(component) => {
                    // Nothing to acknowledge; commit so the change is
                    // durable, then answer with the resulting state.
                    self.command_replies.push((component, reply));
                    self.force_commit = true;
                }
                Err(outcome) => {
                    let _ = reply.send(outcome);
                }
            },
            Inbound::Connection { connected } => {
                if connected && !self.mqtt_connected {
                    self.publish_all_states();
                }
                self.mqtt_connected = connected;
                self.publish_snapshot(true);
            }
            Inbound::Message { publish, received_ms } => {
                let topic = publish.topic.clone();
                if topic == self.command_topic {
                    self.mqtt_command(&publish);
                } else {
                    self.sample(&topic, &publish.payload, received_ms);
                }
                let sample = std::mem::take(&mut self.took_sample);
                let now = self.mono_ms();
                self.batch.offer(publish, sample, now);
            }
        }
    }

    /// A command from the MQTT command topic: carried out only if it is
    /// not a retained message and carries the operator token; refused,
    /// counted and logged (rate-limited, never echoing the payload or its
    /// token) otherwise.
    fn mqtt_command(&mut self, publish: &Publish) {
        if publish.retain {
            // A retained command would act again at every new subscription.
            self.refuse_command("retained");
            self.log.warn("command_retained", || {
                format!(
                    "alarm command on {} refused (retained): commands act once, when sent; clear the retained \
                     message on that topic",
                    publish.topic
                )
            });
            self.reply(CommandReply::refused(None, "retained", "a retained command is refused: commands act once"));
            return;
        }
        let authorised = self.command_token.as_deref().is_some_and(|t| carries_token(&publish.payload, t));
        if !authorised {
            self.refuse_command("unauthorised");
            let why = if self.command_token.is_none() {
                "no operator token is configured ([http] token_env), so MQTT commands are refused"
            } else {
                "missing or wrong \"token\""
            };
            self.log.warn("command_unauthorised", || {
                format!("alarm command on {} refused (unauthorised): {why}", publish.topic)
            });
            self.reply(CommandReply::refused(None, "unauthorised", why));
            return;
        }
        let id = command_id(&publish.payload);
        match self.command(&publish.payload) {
            Ok(target) => {
                let by = parse_command(&publish.payload).map(|c| c.by().to_string()).unwrap_or_default();
                self.mqtt_replies.push((id, command_action(&publish.payload), by, target));
                self.force_commit = true;
            }
            Err(CommandOutcome::Unknown(e)) => self.reply(CommandReply::refused(id, "unknown", e)),
            Err(CommandOutcome::Invalid(e)) => self.reply(CommandReply::refused(id, "invalid", e)),
            Err(CommandOutcome::Applied(_)) => {}
        }
    }

    /// Publish one reply on the command reply topic.
    fn reply(&mut self, r: CommandReply) {
        let topic = self.service.mqtt.command_reply_topic();
        if self.client.try_publish(topic, QoS::AtLeastOnce, false, r.to_json()).is_err() {
            self.log.warn("reply_failed", || "command reply not published (client queue full)".to_string());
        }
    }

    fn refuse_command(&mut self, reason: &str) {
        *self.counters.commands_rejected.entry(reason.to_string()).or_insert(0) += 1;
    }

    /// Carry out an authorised command: the name of the component it
    /// addressed, or what was wrong (counted and logged).
    fn command(&mut self, payload: &[u8]) -> Result<crate::alarm::AlarmTarget, CommandOutcome> {
        // Stamped on the alarm clock, the journal's one time base.
        let now = self.alarm_now();
        let cmd = match parse_command(payload) {
            Ok(c) => c,
            Err(e) => {
                self.refuse_command("invalid");
                tracing::warn!("alarm command rejected (invalid): {e}");
                return Err(CommandOutcome::Invalid(e.to_string()));
            }
        };
        match self.book.apply(&cmd, now) {
            Ok(ev) => {
                self.counters.commands_applied += 1;
                tracing::info!(by = cmd.by(), "alarm command carried out: {} event(s)", ev.len());
                self.note_events(ev);
                Ok(cmd.target().clone())
            }
            Err(e) => {
                self.refuse_command("refused");
                tracing::warn!("alarm command rejected (refused by the alarm book): {e}");
                Err(match e {
                    AlarmError::UnknownAlarm { .. }
                    | AlarmError::UnknownComponent { .. }
                    | AlarmError::UnknownTag { .. }
                    | AlarmError::UnknownUnit { .. } => CommandOutcome::Unknown(e.to_string()),
                    _ => CommandOutcome::Invalid(e.to_string()),
                })
            }
        }
    }

    /// The alarm clock, the one time base of the alarm journal: the newest
    /// event time seen, advanced by the wall time since the newest accepted
    /// sample arrived (so it moves on while data stops, and stays with the
    /// data during a backfill), never backwards. Commands and shelve ends
    /// use it; evaluations use the event time of their data, which it never
    /// lags.
    fn alarm_now(&mut self) -> i64 {
        let now = now_ms();
        let t = match (self.newest_ms, self.sensors.last_any_arrival) {
            (Some(n), Some(a)) => n.saturating_add((now - a).max(0)),
            (Some(n), None) => n.saturating_add((now - self.sensors.started_ms).max(0)),
            // No data yet: the wall clock, not kept (data may be older).
            (None, _) => return self.alarm_clock_ms.max(now),
        };
        self.alarm_clock_ms = self.alarm_clock_ms.max(t);
        self.alarm_clock_ms
    }

    /// Answer the HTTP commands of a batch now durable, after publishing
    /// the snapshot, so that what the caller reads next agrees.
    fn answer_commands(&mut self) {
        for (id, action, by, target) in std::mem::take(&mut self.mqtt_replies) {
            let summary = serde_json::to_value(self.book.summary_of(&target)).ok();
            self.reply(CommandReply { id, outcome: "applied", action, by: Some(by), error: None, summary });
        }
        if self.command_replies.is_empty() {
            return;
        }
        self.publish_snapshot(true);
        for (target, reply) in self.command_replies.drain(..) {
            let _ = reply.send(CommandOutcome::Applied(self.book.summary_of(&target).to_json()));
        }
    }

    fn sample(&mut self, topic: &str, payload: &[u8], received_ms: i64) {
        let taken = match intake::take(&self.templates, &self.index, topic, payload, received_ms) {
            Ok(t) => t,
            Err(intake::Refused::UnknownTopic) => {
                return self.reject("unknown_topic", topic, "no topic template matches".into());
            }
            Err(intake::Refused::Decode { reason, detail }) => return self.reject(reason, topic, detail),
            Err(intake::Refused::UnknownTag(tag)) => {
                self.engine.count_unknown_tag();
                self.log.warn("unknown_tag", || format!("message on {topic}: tag {tag:?} is not in the configuration"));
                return;
            }
        };
        if taken.receive_time {
            self.counters.receive_time_used += 1;
        }
        self.took_sample = true;
        let (s, tag) = (taken.sample, taken.tag);
        let id = s.tag;
        // The receive time is the wall clock the event time is judged by.
        let r = self.engine.offer(&s, received_ms);
        self.collect_series();
        let ti = id as usize;
        match r {
            Ok(()) => {
                self.newest_ms = Some(self.newest_ms.map_or(s.time_ms, |n| n.max(s.time_ms)));
                self.sensors.accepted(ti, received_ms);
            }
            Err(reason) => {
                self.log.warn(reason.name(), || {
                    format!("sample of {tag} at {} rejected: {}", rfc3339_ms(s.time_ms), reason.name())
                });
                self.sensors.rejected(ti, reason, s.time_ms, received_ms);
            }
        }
    }

    /// Raises the `lifeledger:database` service-health alarm while the
    /// database refuses the service (a wrong token, organisation or
    /// bucket), and returns it to normal once it takes points again.
    fn database_check(&mut self) {
        let Some(link) = &self.database_link else { return };
        let refusal = link.borrow().refusal.clone();
        if refusal.is_some() == self.database_refused {
            return;
        }
        self.database_refused = refusal.is_some();
        let detail = match &refusal {
            Some(r) => {
                tracing::error!(
                    "the database refuses the service ({r}); points stay in the outbox: check [database] token, org and bucket"
                );
                format!("database refuses the service's writes: {r}; points are kept in the outbox")
            }
            None => {
                tracing::info!("the database takes the service's writes again");
                "database takes the service's writes again".to_string()
            }
        };
        let t = self.newest_ms.unwrap_or_else(now_ms);
        let ev = self.book.evaluate_condition(
            DATABASE_ALARM,
            "",
            AlarmIndex::ServiceHealth,
            self.database_refused,
            &detail,
            t,
        );
        self.note_events(ev);
    }

    /// Series points at `series_interval_s` spacing of event time: called
    /// after every step of the engine (each sample, each release of the
    /// reorder window, each clock advance), so a burst of scans committed
    /// together still gives one point per interval, as `replay` does.
    fn collect_series(&mut self) {
        // The attention score of the latest published snapshot (at most
        // one snapshot period old): the ranking needs every part's alarms.
        // Read only when a point is due (the snapshot's lock is not taken
        // for every sample).
        let snapshot_tx = &self.snapshot_tx;
        let attention = |ci: usize, name: &str| {
            snapshot_tx.borrow().components.get(ci).filter(|c| c.component == name).and_then(|c| c.attention_score)
        };
        self.series.collect(&mut self.engine, self.service.store.series_interval_s, attention, &mut self.pending);
    }

    /// Write the batch in one transaction, then acknowledge and publish.
    /// After a failure nothing is tried before the retry wait is over.
    pub fn commit(&mut self) {
        if self.retry.wait(Instant::now()).is_some() {
            return;
        }
        self.collect_series();
        let changed = self.pending.take_engine_changes(&mut self.engine);
        if changed.is_empty() && self.pending.is_empty() && self.batch.is_empty() {
            self.force_commit = false;
            // Nothing to write: what the commands did is already durable.
            self.answer_commands();
            return;
        }
        self.force_commit = false;
        let started = Instant::now();
        // Every changed ledger judged at its own integration frontier.
        for &ci in &changed {
            let (plan, st) = (&self.engine.plan().components[ci], &self.engine.components()[ci]);
            if let Some(t) = st.integrated_to_ms {
                let ev = self.book.evaluate_component(plan, st, t);
                self.note_events(ev);
            }
        }
        self.sensor_check();
        self.database_check();
        // The rows of this attempt (pure, [`rows`]); the events are numbered
        // afresh by each attempt, from the durable count, so consumers can
        // see a gap and a retry never writes an event twice.
        let plan = self.batch.plan(self.next_event_seq);
        let rows = self.pending.rows(
            &self.engine,
            &self.book,
            changed,
            &plan,
            &self.counters.decode_rejected,
            self.service.database.is_some(),
        );
        // A daily copy of each changed component whose day has turned.
        let checkpoints = crate::ledger_file::checkpoint_rows(&self.engine, &rows.changed, &self.store);
        let history = crate::inspection::history_points(&self.engine, &rows.changed);
        let held = self.pending.held_rows(&self.engine);
        let outcome = self.store.commit(&rows.commit(&self.pending, &held, &checkpoints, &history));
        drop(held);
        match outcome {
            Ok(stats) => {
                if let Some(d) = self.retry.succeeded(Instant::now()) {
                    tracing::info!("ledger commits succeed again after failing for {:.1} s", d.as_secs_f64());
                    self.commit_error = None;
                    self.last_snapshot = Instant::now() - Duration::from_secs(60);
                }
                self.outbox = stats.outbox;
                let ms = started.elapsed().as_secs_f64() * 1000.0;
                // Counted once the points are in the outbox, not before.
                self.counters.series_points += self.pending.committed(rows);
                let c = &mut self.counters;
                c.commits += 1;
                c.last_commit_ms = ms;
                c.max_commit_ms = c.max_commit_ms.max(ms);
                c.total_commit_ms += ms;
                // Durable: now, and only now, acknowledge.
                let after = self.batch.committed(plan);
                for p in &after.ack {
                    if let Err(e) = self.client.try_ack(p) {
                        tracing::error!("MQTT acknowledge failed (the broker will redeliver): {e}");
                    } else {
                        c.acked += 1;
                    }
                }
                self.next_event_seq = after.next_seq;
                let events = after.publish;
                self.kpi.record(&events);
                self.publish_alarms(&events);
                for e in events {
                    self.recent_events.push_back(e);
                    if self.recent_events.len() > RECENT_EVENTS {
                        self.recent_events.pop_front();
                    }
                }
                self.answer_commands();
                self.check_quota();
            }
            Err(e) => {
                // Nothing is acknowledged; the state stays in memory and the
                // next commit writes it (upserts carry whole ledgers).
                self.batch.failed(plan);
                self.counters.commit_failures += 1;
                let failures = self.counters.commit_failures;
                let after = self.retry.failed(Instant::now());
                self.log.error("commit_failed", || {
                    let next = match after {
                        AfterFailure::RetryIn(d) => format!("next attempt in {:.2} s", d.as_secs_f64()),
                        AfterFailure::GiveUp { .. } => "giving up".into(),
                    };
                    format!("ledger commit failed ({failures} failures so far), nothing acknowledged: {e}; {next}")
                });
                if self.commit_error.is_none() {
                    self.last_snapshot = Instant::now() - Duration::from_secs(60);
                }
                self.commit_error = Some(e.to_string());
                if let AfterFailure::GiveUp { failing_for } = after {
                    self.fatal = Some(anyhow::anyhow!(
                        "ledger commits have failed for {:.0} s without a break ([store] commit_failure_limit_s = {}); \
                         stopping so that the service manager restarts lifeledger. Nothing unwritten was \
                         acknowledged. Check that the ledger file, its -wal and -shm files and their directory \
                         are writable by the service user and that the disk has room. Last error: {e}",
                        failing_for.as_secs_f64(),
                        self.service.store.commit_failure_limit_s
                    ));
                }
                self.pending.failed(rows, &mut self.engine);
            }
        }
        self.publish_snapshot(false);
    }

    fn check_quota(&mut self) {
        let q = quota(&self.service);
        if q == u64::MAX {
            return;
        }
        if let Ok(s) = self.store.outbox_stats() {
            self.outbox = s;
        }
        let t = now_ms();
        match self.gate.observe(self.outbox.bytes, q) {
            Some(gate::GateChange::Hold) => {
                tracing::error!(
                    outbox_bytes = self.outbox.bytes,
                    quota = q,
                    "outbox over its disk quota: intake paused (the broker keeps the backlog) until the database accepts points again"
                );
                let ev = self.book.evaluate_condition(
                    "lifeledger",
                    "",
                    AlarmIndex::ServiceHealth,
                    true,
                    "outbox over quota; intake paused",
                    t,
                );
                self.note_events(ev);
            }
            Some(gate::GateChange::Resume) => {
                tracing::info!("outbox below its quota again: intake resumed");
                let ev = self.book.evaluate_condition(
                    "lifeledger",
                    "",
                    AlarmIndex::ServiceHealth,
                    false,
                    "outbox below quota",
                    t,
                );
                self.note_events(ev);
            }
            None => {}
        }
    }

    /// Milliseconds since the ledger opened, on the monotonic clock: what
    /// the batch's group-commit rule is timed in.
    fn mono_ms(&self) -> u64 {
        self.clock.elapsed().as_millis() as u64
    }

    fn note_events(&mut self, ev: Vec<AlarmEvent>) {
        for e in &ev {
            self.pending.dirty_alarms.insert(e.key());
        }
        self.batch.note_events(ev);
    }

    /// Publish the retained alarm state of every component in the alarm
    /// book, at each connection: a state message lost after its commit (a
    /// crash before the publish, a broker that lost its retained messages)
    /// is put right at the next start or reconnection. Event messages are
    /// not sent again; the alarm journal keeps them.
    fn publish_all_states(&mut self) {
        let components: Vec<String> = self.book.components().into_iter().map(String::from).collect();
        let mut failed = 0usize;
        for s in self.book.summaries(components.iter().map(String::as_str)) {
            let topic = self.service.mqtt.alarm_state_topic(&s.component);
            if self.client.try_publish(topic, QoS::AtLeastOnce, true, s.to_json()).is_err() {
                failed += 1;
            }
        }
        if failed > 0 {
            self.log.warn("state_republish_failed", || {
                format!(
                    "{failed} of {} retained alarm states not published again (client queue full)",
                    components.len()
                )
            });
        }
    }

    fn publish_alarms(&self, events: &[AlarmEvent]) {
        let mut comps = BTreeSet::new();
        if let Some(feed) = &self.event_feed {
            // Committed: the publisher sends them from the journal.
            if !events.is_empty() {
                feed.send_replace(self.next_event_seq.saturating_sub(1));
            }
        }
        for e in events {
            if self.event_feed.is_none() {
                let _ = self.client.try_publish(
                    self.service.mqtt.alarm_event_topic(),
                    QoS::AtLeastOnce,
                    false,
                    e.to_json(),
                );
            }
            comps.insert(e.component.clone());
            // A tag's sensor alarm shows in the state of every part it feeds.
            comps.extend(e.affects.iter().cloned());
        }
        for c in comps {
            let s = self.book.current(&c);
            let _ =
                self.client.try_publish(self.service.mqtt.alarm_state_topic(&c), QoS::AtLeastOnce, true, s.to_json());
        }
    }

    fn reload(&mut self, cfg: LoadedConfig, service: ServiceSettings) {
        let plan = match super::reload::plan(&self.cfg, &self.service, &cfg, service) {
            Ok(p) => p,
            Err(why) => {
                tracing::error!("SIGHUP: configuration not reloaded: {why}");
                self.reloads.refused = Some(why);
                self.publish_snapshot(true);
                return;
            }
        };
        if !plan.restart_required.is_empty() {
            tracing::error!(
                "SIGHUP: changed settings not applied until the service restarts: {}; the running values stay",
                plan.restart_required.join(", ")
            );
        }
        self.reloads.restart_required = plan.restart_required;
        self.reloads.refused = None;
        let service = plan.service;
        let mut state = self.engine.export_state();
        state.components.append(&mut self.retired);
        state.tags.append(&mut self.retired_tags);
        {
            let old: Vec<&str> = self.engine.plan().tags.iter().map(|t| t.name.as_str()).collect();
            let new: Vec<&str> = cfg.plan.tags.iter().map(|t| t.name.as_str()).collect();
            self.sensors.reloaded(&old, &new);
        }
        let mut engine = Engine::new(cfg.plan.clone());
        // The store mirrors the reorder window: record what enters and leaves.
        engine.track_held_changes(true);
        let left = engine.import_state(state);
        self.retired = left.components;
        self.retired_tags = left.tags;
        self.engine = engine;
        self.index = tag_index(&self.engine);
        self.templates = service.mqtt.templates().unwrap_or_default();
        // The broker subscriptions follow the templates: new filters after
        // the templates that read them are in place, then the old ones go.
        *self.reloads.filters.lock().unwrap_or_else(|p| p.into_inner()) = Ledger::filters(&service);
        for f in &plan.subscribe {
            match self.client.try_subscribe(f, QoS::AtLeastOnce) {
                Ok(()) => tracing::info!("SIGHUP: subscribed to {f}"),
                Err(e) => tracing::error!("SIGHUP: subscribe {f}: {e}"),
            }
        }
        for f in &plan.unsubscribe {
            match self.client.try_unsubscribe(f) {
                Ok(()) => tracing::info!("SIGHUP: unsubscribed from {f}"),
                Err(e) => tracing::error!("SIGHUP: unsubscribe {f}: {e}"),
            }
        }
        self.book.set_config(service.alarms.clone());
        self.store.set_alarm_journal_max_events(service.store.alarm_journal_max_events);
        self.store.set_trend_points_per_component(service.store.trend_points_per_component);
        self.store.set_checkpoint_days(service.store.checkpoint_days);
        self.retry.set_give_up_after(commit_failure_limit(&service));
        self.series = series::SeriesClock::new(cfg.plan.components.len());
        self.cfg = Arc::new(cfg);
        self.service = service;
        let t = self.newest_ms.unwrap_or_else(now_ms);
        self.queue_thresholds(t);
        tracing::info!(
            components = self.cfg.plan.components.len(),
            retired = self.retired.len(),
            "configuration reloaded; every ledger kept"
        );
        self.publish_snapshot(true);
    }

    /// Data age of every tag and component, and each component's lag, by
    /// the wall clock now.
    fn freshness(&self) -> Freshness {
        let now = now_ms();
        let plan = self.engine.plan();
        let grace_ms = (self.service.alarms.stale_grace_s * 1000.0) as i64;
        let age = |a: Option<i64>| a.map(|a| (now - a).max(0) as f64 / 1000.0);
        let tags = plan
            .tags
            .iter()
            .zip(&self.sensors.last_arrival)
            .map(|(t, a)| TagFreshness {
                tag: t.name.clone(),
                data_age_s: age(*a),
                stale: now - a.unwrap_or(self.sensors.started_ms) > t.max_hold_ms.saturating_add(grace_ms),
            })
            .collect();
        let components = plan
            .components
            .iter()
            .enumerate()
            .map(|(ci, c)| {
                let inputs = self.engine.inputs(ci);
                // The stalest input sets the age; a part on the plant clock
                // has none.
                let data_age_s = if inputs.is_empty() {
                    None
                } else {
                    inputs
                        .iter()
                        .map(|&t| age(self.sensors.last_arrival[t as usize]))
                        .try_fold(0.0f64, |m, a| a.map(|a| m.max(a)))
                };
                let lag_s = self.engine.components()[ci].integrated_to_ms.map(|t| (now - t) as f64 / 1000.0);
                ComponentFreshness { component: c.name.clone(), data_age_s, lag_s, on_plant_clock: inputs.is_empty() }
            })
            .collect();
        Freshness { tags, components }
    }

    fn publish_snapshot(&mut self, force: bool) {
        // Large plants: the snapshot visits every component, so less often.
        let every = if self.engine.plan().components.len() > 1000 { 5000 } else { 500 };
        if !force && self.last_snapshot.elapsed() < Duration::from_millis(every) {
            return;
        }
        self.last_snapshot = Instant::now();
        let components: Vec<ComponentReport> = self
            .engine
            .plan()
            .components
            .iter()
            .zip(self.engine.components())
            .map(|(p, s)| ComponentReport::new(p, s))
            .collect();
        let mut alarms = self.book.summaries(self.engine.plan().components.iter().map(|c| c.name.as_str()));
        // The service's own alarms (service health, plant data, database)
        // after the components', so every standing alarm is in the snapshot.
        let service: BTreeSet<String> =
            self.book.records().map(|r| r.component.clone()).filter(|c| c.starts_with("lifeledger")).collect();
        alarms.extend(service.iter().map(|c| self.book.current(c)));
        let mut snap = Snapshot {
            plant: self.cfg.plan.plant.clone(),
            started: self.started.clone(),
            mqtt_connected: self.mqtt_connected,
            store_path: self.service.store.path.display().to_string(),
            outbox_lines: self.outbox.lines,
            outbox_bytes: self.outbox.bytes,
            outbox_parked_lines: self.outbox.parked,
            outbox_quota_bytes: quota(&self.service),
            holding: self.gate.holding(),
            commit_failing: self.commit_error.clone(),
            database_configured: self.service.database.is_some(),
            database_reachable: self.database_link.as_ref().and_then(|r| r.borrow().reachable),
            database_refusal: self.database_link.as_ref().and_then(|r| r.borrow().refusal.clone()),
            engine: self.engine.counters().clone(),
            service: self.counters.clone(),
            components,
            alarms,
            alarm_kpi: {
                let now = self.alarm_now();
                self.kpi.report(now, &self.book)
            },
            retired_components: self.retired.iter().map(|(n, _)| n.clone()).collect(),
            recent_events: self.recent_events.iter().cloned().collect(),
            no_plant_data: self.sensors.no_plant_data,
            freshness: self.freshness(),
            held_samples: self.engine.held_len() as u64,
            restart_required: self.reloads.restart_required.clone(),
            reload_refused: self.reloads.refused.clone(),
            // The configuration's warnings; the service adds the ingest
            // task's (service::run).
            warnings: self.cfg.warnings.iter().map(|w| format!("configuration: {w}")).collect(),
            max_shelve_h: {
                let max = self.book.config().max_shelve_h;
                if max > 0.0 {
                    max.min(crate::alarm::MAX_SHELVE_H)
                } else {
                    crate::alarm::MAX_SHELVE_H
                }
            },
            caution: crate::CAUTION,
        };
        super::attention::annotate(&mut snap);
        let _ = self.snapshot_tx.send(Arc::new(snap));
    }
}

pub mod gate;
mod inspection;
mod intake;
pub mod rows;
#[path = "ledger_sensors.rs"]
mod sensors;
mod series;
pub mod step;
mod wear_inputs;

#[cfg(test)]
#[path = "ledger_alarm_tests.rs"]
mod alarm_tests;

#[cfg(test)]
#[path = "ledger_attention_tests.rs"]
mod attention_tests;

#[cfg(test)]
mod tests {
    use super::*;

    /// A ledger on the demo plant with its store in `dir` and a database
    /// configured (never contacted: no outbox sender runs here), so that
    /// outbox lines are kept.
    fn ledger(dir: &std::path::Path) -> Ledger {
        let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
        let text = format!(
            "[store]\npath = {:?}\n[database]\nurl = \"http://127.0.0.1:9\"\norg = \"o\"\nbucket = \"b\"\n",
            dir.join("ledger.db")
        );
        let mut service = ServiceSettings::from_settings(&toml::from_str(&text).unwrap()).unwrap();
        // A new ledger, as `run --init-ledger` makes one.
        service.store.create_if_missing = true;
        let (client, _eventloop) = AsyncClient::new(rumqttc::MqttOptions::new("unit", "127.0.0.1", 9), 100);
        let (snap_tx, _snap_rx) = watch::channel(Arc::new(Snapshot::default()));
        Ledger::open(cfg, service, client, snap_tx).unwrap()
    }

    /// The outbox lines of the ledger file that start with `measurement`.
    fn outbox_lines(dir: &std::path::Path, measurement: &str) -> usize {
        let store = Store::attach(&dir.join("ledger.db")).unwrap();
        let lines = store.outbox_batch(usize::MAX, usize::MAX).unwrap();
        lines.iter().filter(|(_, l)| l.starts_with(&format!("{measurement},"))).count()
    }

    /// Failed commits keep their batch but make its alarm events' points
    /// afresh on each attempt: after three failures and one success the
    /// outbox holds the event once (before, each retry queued it again).
    #[test]
    fn retried_commits_write_each_alarm_event_once() {
        let dir = tempfile::tempdir().unwrap();
        let mut l = ledger(dir.path());
        l.commit();
        assert!(!l.retry.failing());
        let refuse = rusqlite::Connection::open(dir.path().join("ledger.db")).unwrap();
        refuse
            .execute_batch(
                "CREATE TRIGGER refuse BEFORE INSERT ON alarm_journal BEGIN SELECT RAISE(ABORT, 'refused'); END",
            )
            .unwrap();
        let ev = l.book.evaluate_condition("lifeledger", "", AlarmIndex::ServiceHealth, true, "unit test", 1_000);
        assert_eq!(ev.len(), 1);
        l.note_events(ev);
        for attempt in 1..=3 {
            l.retry.try_now();
            l.commit();
            assert!(l.retry.failing(), "attempt {attempt} failed");
            assert_eq!(l.counters.commit_failures, attempt);
            assert!(l.commit_error.as_deref().is_some_and(|e| e.contains("refused")), "{:?}", l.commit_error);
            assert!(!l.pending.lines.iter().any(|p| p.starts_with("alarm_event,")), "{:?}", l.pending.lines);
        }
        // Until the wait is over, commit() does not even try.
        l.commit();
        assert_eq!(l.counters.commit_failures, 3, "no attempt before the retry wait is over");

        refuse.execute_batch("DROP TRIGGER refuse").unwrap();
        l.retry.try_now();
        l.commit();
        assert!(!l.retry.failing() && l.commit_error.is_none());
        assert_eq!(outbox_lines(dir.path(), "alarm_event"), 1, "the event's point is in the outbox once");
    }
}

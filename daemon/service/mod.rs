//! The live service (`lifeledger run`): a thin async shell around the pure
//! engine.
//!
//! Tasks and their one job each:
//! * ingest (`crate::ingest::run_event_loop`): polls the MQTT event loop,
//!   hands messages over, never acknowledges;
//! * ledger thread ([`ledger`]): owns engine, alarms and the store's write
//!   connection; group-commits, then acknowledges;
//! * outbox sender ([`outbox`]): drains the outbox to the database;
//! * event publisher ([`event_publish`]): alarm event messages from the
//!   journal, until the broker acknowledges them;
//! * HTTP ([`http`]): health, readiness, metrics, JSON snapshot, alarm
//!   history and component trends (from the store's alarm journal and
//!   trend table).
//!
//! Shutdown is one type every task listens to ([`shutdown::Shutdown`]),
//! raised in order and awaited through each task's completion guard
//! (bounded), never by fixed sleeps. SIGTERM or SIGINT: the ledger takes
//! what is queued, commits and acknowledges; the event publisher sends
//! what was committed and waits for the broker's acknowledgements; the
//! service publishes its offline status and disconnects, and the event
//! loop ends once the broker has closed the connection; then HTTP, the
//! watchdog and the outbox sender (one last flush) stop. SIGHUP reloads the configuration and keeps every ledger
//! ([`reload`] says what a reload may change).

/// The alarm-system figures (pure; kept in the alarm core).
pub use crate::alarm::kpi as alarm_kpi;
pub mod attention;
pub mod command_reply;
pub mod commit_retry;
pub mod event_publish;
pub mod http;
pub mod http_inspection;
pub mod inspection_cli;
pub mod ledger;
pub mod outbox;
pub mod page;
pub mod reload;
pub mod settings;
pub use crate::shutdown;
pub mod snapshot;
pub mod systemd;

use crate::ingest::{run_event_loop, Inbound, InstanceWatch};
use crate::settings::{load_plan_with, Overrides};
use anyhow::Context;
use ledger::{Control, Ledger};
pub use settings::ServiceSettings;
use std::path::Path;
use std::sync::Arc;
use std::time::Duration;
use tokio::sync::{mpsc, watch};

/// Load and type a configuration for the service (with `LIFELEDGER__…`
/// environment overrides).
pub fn load_service(path: &Path) -> anyhow::Result<(crate::settings::LoadedConfig, ServiceSettings)> {
    load_service_with(path, &Overrides::Environment)
}

/// Load and type a configuration for the service with overrides from `overrides`.
pub fn load_service_with(
    path: &Path,
    overrides: &Overrides,
) -> anyhow::Result<(crate::settings::LoadedConfig, ServiceSettings)> {
    let cfg = load_plan_with(path, overrides).map_err(|e| anyhow::anyhow!("{e}"))?;
    let svc = ServiceSettings::from_settings(&cfg.settings)
        .map_err(|errs| anyhow::anyhow!("configuration {}:\n  - {}", path.display(), errs.join("\n  - ")))?;
    Ok((cfg, svc))
}

/// Why `run` refuses a configuration without components (every message
/// would be acknowledged and thrown away), unless `[plant]
/// allow_retiring_most = true` says that is intended; `None` when it
/// starts.
pub fn empty_plant_refusal(cfg: &crate::settings::LoadedConfig) -> Option<String> {
    (cfg.plan.components.is_empty() && !cfg.settings.plant.allow_retiring_most).then(|| {
        "no [[component]] is configured, so every sample would be acknowledged and thrown away; \
         configure the plant's components (or, if this is intended, set [plant] allow_retiring_most = true)"
            .to_string()
    })
}

/// Run the service until SIGTERM or SIGINT. A new ledger is created in
/// place of a missing or empty ledger file only if `init_ledger` is set
/// (`lifeledger run --init-ledger`); otherwise such a file is refused.
pub async fn run(config_path: &Path, init_ledger: bool) -> anyhow::Result<()> {
    run_until(config_path, init_ledger, std::future::pending()).await
}

/// Run the service until SIGTERM, SIGINT or `stop` completes.
pub async fn run_until(
    config_path: &Path,
    init_ledger: bool,
    stop: impl std::future::Future<Output = ()>,
) -> anyhow::Result<()> {
    run_until_with(config_path, Overrides::Environment, init_ledger, stop).await
}

/// [`run_until`] with the configuration's overrides from `overrides`, at
/// start and at every SIGHUP reload.
pub async fn run_until_with(
    config_path: &Path,
    overrides: Overrides,
    init_ledger: bool,
    stop: impl std::future::Future<Output = ()>,
) -> anyhow::Result<()> {
    let (cfg, mut svc) = load_service_with(config_path, &overrides)?;
    svc.store.create_if_missing = init_ledger;
    if let Some(e) = empty_plant_refusal(&cfg) {
        anyhow::bail!("configuration {}: {e}", config_path.display());
    }
    // What the tasks would fail on later (a secret unset, a file missing):
    // refused now, every problem at once, as check-config does.
    let problems = svc.startup_problems(|var| std::env::var(var).ok());
    if !problems.is_empty() {
        anyhow::bail!("configuration {}:\n  - {}", config_path.display(), problems.join("\n  - "));
    }
    for w in &cfg.warnings {
        tracing::warn!("{w}");
    }
    tracing::info!("{}", crate::CAUTION);
    // One shutdown signal for HTTP, the watchdog and the outbox sender,
    // raised last; intake and the event publisher have their own, raised
    // in order before it (see the end of this function).
    let shutdown = shutdown::Shutdown::new();
    let identity = svc.mqtt.identity(&cfg.plan.plant);
    let options = svc.mqtt.options(&cfg.plan.plant).map_err(|e| anyhow::anyhow!(e))?;
    let (client, eventloop) = rumqttc::AsyncClient::new(options, 4096);
    // The ledger thread publishes its snapshots on `ledger_snap`; HTTP reads
    // `snap_rx`: the same snapshots with the ingest task's warnings added.
    let (snap_tx, ledger_snap) = watch::channel(Arc::new(snapshot::Snapshot::default()));
    let (warn_tx, warn_rx) = watch::channel(Vec::<String>::new());
    let (merged_tx, snap_rx) = watch::channel(Arc::new(snapshot::Snapshot::default()));
    tokio::spawn(merge_warnings(ledger_snap.clone(), warn_rx, merged_tx));
    let library = Arc::new(cfg.library.clone());
    // The operator token: HTTP commands carry it as a bearer token, MQTT
    // commands in their `token` field. Without it both are refused.
    let token = match &svc.http.token_env {
        Some(var) => match std::env::var(var) {
            Ok(t) if t.is_empty() => anyhow::bail!("[http] token_env: environment variable {var} is empty"),
            Ok(t) => Some(t),
            Err(_) => anyhow::bail!("[http] token_env: environment variable {var} is not set"),
        },
        None => None,
    };
    let report_config = Arc::new(cfg.clone());
    let mut ledger = Ledger::open(cfg, svc.clone(), client.clone(), snap_tx)
        .with_context(|| format!("opening the ledger {}", svc.store.path.display()))?;
    ledger.set_command_token(token.clone());
    // Whether the database took the outbox sender's last write.
    let (reach_tx, reach_rx) = watch::channel(outbox::DatabaseLink::default());
    if svc.database.is_some() {
        ledger.set_database_reachability(reach_rx);
    }
    let filters = ledger.shared_filters();
    // Alarm event messages go out from the journal, on their own
    // connection, until the broker acknowledges them (event_publish).
    let (events_tx, events_rx) = watch::channel(0u64);
    ledger.set_event_feed(events_tx);
    let publisher_stop = shutdown::Shutdown::new();
    let mut publisher_task = tokio::spawn(event_publish::run(
        svc.mqtt.clone(),
        svc.store.path.clone(),
        events_rx,
        publisher_stop.listener(),
    ));
    let mut publisher_done = false;

    // HTTP first, so health is visible from the start.
    let listener = tokio::net::TcpListener::bind(&svc.http.listen)
        .await
        .with_context(|| format!("[http] listen {}: cannot bind", svc.http.listen))?;
    tracing::info!("status on http://{}/", listener.local_addr()?);
    let (in_tx, in_rx) = mpsc::channel::<Inbound>(1024);
    let http_state = http::HttpState {
        snapshot: snap_rx.clone(),
        token,
        commands: in_tx.clone(),
        library,
        journal: crate::store::JournalReader::new(&svc.store.path),
        trend: crate::store::TrendReader::new(&svc.store.path),
        config: Some(report_config),
    };
    let mut http_shutdown = shutdown.listener();
    let http_task = tokio::spawn(async move {
        let _ = axum::serve(listener, http::router(http_state))
            .with_graceful_shutdown(async move {
                http_shutdown.stopped().await;
            })
            .await;
    });

    let (ctl_tx, ctl_rx) = std::sync::mpsc::channel::<Control>();
    let rt = tokio::runtime::Handle::current();
    let mut ledger_task = tokio::task::spawn_blocking(move || ledger.run(in_rx, ctl_rx, rt));

    // The event loop keeps polling until the very end so that the last
    // acknowledgements and the offline status reach the broker.
    let intake_stop = shutdown::Shutdown::new();
    let mut ingest_task = tokio::spawn(run_event_loop(
        svc.mqtt.clone(),
        client.clone(),
        eventloop,
        filters,
        in_tx,
        intake_stop.listener(),
        InstanceWatch { identity: identity.clone(), warnings: warn_tx },
    ));

    // systemd (Type=notify): ready once intake runs; the watchdog is fed
    // while the ledger thread publishes and its commits succeed.
    let notifier = Arc::new(systemd::Notifier::from_env());
    notifier.ready(&format!("intake running; status on http://{}/", svc.http.listen));
    let watchdog_task = notifier.watchdog.map(|interval| {
        tokio::spawn(feed_watchdog(notifier.clone(), ledger_snap.clone(), interval / 2, shutdown.listener()))
    });

    let mut sender_task = svc
        .database
        .clone()
        .map(|d| tokio::spawn(outbox::run_sender(d, svc.store.path.clone(), reach_tx, shutdown.listener())));
    // The outbox sender, while it runs (never, without a database).
    let sender_ended = async {
        match sender_task.as_mut() {
            Some(t) => t.await,
            None => std::future::pending().await,
        }
    };
    tokio::pin!(sender_ended);

    // A task that ends before shutdown is a failure: the process stops with
    // an error naming it, so that the service manager restarts it.
    let mut failure: Option<anyhow::Error> = None;
    let mut ledger_done = None;
    let mut ingest_done = false;

    // Signals.
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        let mut term = signal(SignalKind::terminate())?;
        let mut int = signal(SignalKind::interrupt())?;
        let mut hup = signal(SignalKind::hangup())?;
        tokio::pin!(stop);
        loop {
            tokio::select! {
                r = &mut ledger_task => {
                    failure = Some(match &r {
                        Ok(Err(e)) => anyhow::anyhow!("{e:#}"),
                        Ok(Ok(())) => anyhow::anyhow!("the ledger thread stopped unexpectedly"),
                        Err(e) => anyhow::anyhow!("the ledger thread failed: {e}"),
                    });
                    ledger_done = Some(r);
                    break;
                }
                r = &mut ingest_task => {
                    failure = Some(anyhow::anyhow!("the MQTT intake task stopped unexpectedly: {r:?}"));
                    ingest_done = true;
                    break;
                }
                r = &mut publisher_task => {
                    failure = Some(anyhow::anyhow!("the alarm event publisher stopped unexpectedly: {r:?}"));
                    publisher_done = true;
                    break;
                }
                r = &mut sender_ended => {
                    failure = Some(anyhow::anyhow!("the outbox sender stopped unexpectedly (see the log above): {r:?}"));
                    sender_task = None;
                    break;
                }
                _ = &mut stop => { tracing::info!("stopping"); break; }
                _ = term.recv() => { tracing::info!("SIGTERM: stopping"); break; }
                _ = int.recv() => { tracing::info!("SIGINT: stopping"); break; }
                _ = hup.recv() => {
                    match load_service_with(config_path, &overrides) {
                        Ok((c, s)) => { let _ = ctl_tx.send(Control::Reload(Box::new(c), Box::new(s))); }
                        Err(e) => tracing::error!("SIGHUP: configuration not reloaded, the running one stays: {e:#}"),
                    }
                }
            }
        }
    }
    #[cfg(not(unix))]
    {
        tokio::select! {
            _ = tokio::signal::ctrl_c() => {}
            _ = stop => {}
        }
    }
    if let Some(e) = &failure {
        tracing::error!("stopping: {e:#}");
    }
    notifier.stopping();

    // Stop intake, let the ledger commit and acknowledge.
    let _ = ctl_tx.send(Control::Stop);
    if ledger_done.is_none() {
        let _ = ledger_task.await;
    }
    // The ledger's last events are committed: the publisher hands them to
    // the broker and waits (bounded) for the acknowledgements.
    if !publisher_stop.stop_and_wait(Duration::from_secs(5)).await {
        tracing::warn!("the alarm event publisher did not finish within 5 s; the rest go out at the next start");
    }
    if !publisher_done {
        let _ = tokio::time::timeout(Duration::from_secs(1), publisher_task).await;
    }
    let offline = crate::ingest::status::payload("offline", &identity);
    let _ = client.try_publish(svc.mqtt.status_topic(), rumqttc::QoS::AtLeastOnce, true, offline);
    // The last acknowledgements and the status are queued before the
    // DISCONNECT, and the client sends its queue in order: the event loop
    // ends by itself once the broker closes the connection after it. Wait
    // for that (bounded; not at all while the broker is away), then tell
    // it to stop in any case.
    let _ = client.try_disconnect();
    if !ingest_done {
        let connected = ledger_snap.borrow().mqtt_connected;
        let limit = if connected { Duration::from_secs(3) } else { Duration::ZERO };
        if tokio::time::timeout(limit, &mut ingest_task).await.is_ok() {
            ingest_done = true;
        } else if connected {
            tracing::warn!("the MQTT connection did not close within 3 s of the disconnect");
        }
    }
    if !intake_stop.stop_and_wait(Duration::from_secs(2)).await {
        tracing::warn!("the MQTT intake task did not stop within 2 s");
    }
    if !ingest_done {
        let _ = tokio::time::timeout(Duration::from_secs(1), ingest_task).await;
    }
    // HTTP, watchdog and the outbox sender's last flush (bounded).
    if !shutdown.stop_and_wait(Duration::from_secs(10)).await {
        tracing::warn!("HTTP or the outbox sender did not finish within 10 s");
    }
    if let Some(t) = sender_task {
        let _ = tokio::time::timeout(Duration::from_secs(1), t).await;
    }
    let _ = tokio::time::timeout(Duration::from_secs(1), http_task).await;
    if let Some(t) = watchdog_task {
        t.abort();
    }
    if let Some(e) = failure {
        return Err(e);
    }
    tracing::info!("stopped");
    Ok(())
}

/// Feeds systemd's watchdog every `every` while the ledger thread is alive
/// (it published a snapshot since the last look) and its commits succeed;
/// otherwise sends only a status line saying why, so that systemd restarts
/// a wedged service after `WatchdogSec`.
/// Forward the ledger's snapshots with the ingest task's warnings added
/// (another instance on the status topic), until the ledger's channel closes.
async fn merge_warnings(
    mut ledger: watch::Receiver<Arc<snapshot::Snapshot>>,
    mut warnings: watch::Receiver<Vec<String>>,
    out: watch::Sender<Arc<snapshot::Snapshot>>,
) {
    let mut warnings_open = true;
    loop {
        let snap = ledger.borrow_and_update().clone();
        let w = warnings.borrow_and_update().clone();
        let merged = if w.is_empty() {
            snap
        } else {
            let mut s = (*snap).clone();
            s.warnings.extend(w);
            Arc::new(s)
        };
        if out.send(merged).is_err() {
            return;
        }
        tokio::select! {
            r = ledger.changed() => if r.is_err() { return },
            r = warnings.changed(), if warnings_open => if r.is_err() { warnings_open = false },
        }
    }
}

async fn feed_watchdog(
    notifier: Arc<systemd::Notifier>,
    mut snapshots: watch::Receiver<Arc<snapshot::Snapshot>>,
    every: Duration,
    mut shutdown: shutdown::ShutdownListener,
) {
    let mut tick = tokio::time::interval(every);
    loop {
        tokio::select! {
            _ = tick.tick() => {}
            _ = shutdown.stopped() => break,
        }
        let moved = snapshots.has_changed().unwrap_or(false);
        let s = snapshots.borrow_and_update().clone();
        match (&s.commit_failing, moved) {
            (Some(e), _) => notifier.status(&format!("watchdog not fed: ledger commits failing: {e}")),
            (None, false) => {
                notifier.status("watchdog not fed: the ledger thread published nothing since the last look")
            }
            (None, true) => notifier.watchdog_ping(s.not_ready().as_deref().unwrap_or("ready")),
        };
    }
}

//! `lifeledger demo`: the whole service on one machine with no external
//! servers. An embedded MQTT broker (rumqttd) on a loopback port, the plant
//! simulator of [`sim`] publishing real MQTT tag messages, and the live
//! service subscribed to them exactly as in production, with its ledger in a
//! temporary (or named) directory and its status page on loopback.
//!
//! The plant, its tags and its history are invented, for the demo only. The
//! demo runs on its own settings alone: `LIFELEDGER__…` environment
//! overrides, which configure a production service, are ignored, so a demo
//! started where they are set never writes into that service's ledger or
//! database.

pub mod inspections;
pub mod sim;

use crate::ingest::now_ms;
use anyhow::Context;
use rumqttc::{AsyncClient, MqttOptions, QoS};
use std::path::PathBuf;
use std::time::{Duration, Instant};

/// A line on the demo's terminal. A terminal that went away (a closed
/// pipe, `lifeledger demo | head`) is not an error of the demo: the line is
/// dropped quietly and the demo goes on (`println!` would panic the task
/// that prints, and with it the simulator's MQTT loop).
macro_rules! say {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stdout().lock(), $($arg)*);
    }};
}

/// The shipped demo plant (also used by `replay` in the quick start).
pub const DEMO_PLANT: &str = include_str!("../../config/demo/plant.toml");

/// Demo options.
#[derive(Debug, Clone)]
pub struct DemoOptions {
    /// Real seconds to run; `None`: until Ctrl-C.
    pub duration_s: Option<f64>,
    /// Simulated seconds per real second.
    pub speed: f64,
    /// Simulated seconds between samples of a tag.
    pub sample_period_s: i64,
    /// Status page address.
    pub http: String,
    /// Ledger directory; `None`: a temporary directory.
    pub state_dir: Option<PathBuf>,
    /// Optional database (InfluxDB v2 write API).
    pub database_url: Option<String>,
    pub database_org: String,
    pub database_bucket: String,
    pub database_token_env: Option<String>,
}

fn free_port() -> anyhow::Result<u16> {
    Ok(std::net::TcpListener::bind("127.0.0.1:0")?.local_addr()?.port())
}

fn broker_config(port: u16) -> anyhow::Result<rumqttd::Config> {
    let text = format!(
        r#"
id = 0
[router]
id = 0
max_connections = 100
max_outgoing_packet_count = 2000
max_segment_size = 104857600
max_segment_count = 10
[v4.1]
name = "demo"
listen = "127.0.0.1:{port}"
next_connection_delay_ms = 1
[v4.1.connections]
connection_timeout_ms = 60000
max_payload_size = 65536
max_inflight_count = 500
dynamic_filters = true
"#
    );
    toml::from_str(&text).context("embedded broker configuration")
}

/// Run the demo until the duration ends or Ctrl-C.
pub async fn run(opts: DemoOptions) -> anyhow::Result<()> {
    // The status page's address first: a banner must not promise a page
    // that cannot be served. (The listener is released for the service,
    // which binds it a moment later.)
    drop(
        std::net::TcpListener::bind(&opts.http)
            .with_context(|| format!("--http {}: cannot listen there (in use?); give another address", opts.http))?,
    );
    let broker_port = free_port()?;
    let mut broker = rumqttd::Broker::new(broker_config(broker_port)?);
    std::thread::Builder::new().name("demo-broker".into()).spawn(move || {
        if let Err(e) = broker.start() {
            tracing::error!("embedded broker stopped: {e}");
        }
    })?;
    // Wait for the broker to listen (bounded).
    for _ in 0..100 {
        if std::net::TcpStream::connect(("127.0.0.1", broker_port)).is_ok() {
            break;
        }
        tokio::time::sleep(Duration::from_millis(20)).await;
    }

    let tmp;
    let dir = match &opts.state_dir {
        Some(d) => {
            std::fs::create_dir_all(d).with_context(|| format!("state directory {}", d.display()))?;
            d.clone()
        }
        None => {
            tmp = tempfile_dir()?;
            tmp.clone()
        }
    };
    let database = match &opts.database_url {
        Some(u) => format!(
            "[database]\nurl = {u:?}\norg = {:?}\nbucket = {:?}\n{}",
            opts.database_org,
            opts.database_bucket,
            opts.database_token_env.as_ref().map_or(String::new(), |t| format!("token_env = {t:?}\n"))
        ),
        None => String::new(),
    };
    // commit_interval_ms = 0: the demo runs plant time thousands of times
    // faster than the wall clock, and the embedded broker hands the service
    // only about a hundred unacknowledged messages at a time, so waiting
    // 150 ms per group commit would hold intake to some 700 messages a
    // second; the demo commits whenever its queue runs dry instead.
    let config_text = format!(
        "{DEMO_PLANT}\n\n# --- added by `lifeledger demo` ---\n[mqtt]\nport = {broker_port}\nclient_id = \"lifeledger-demo\"\n\
         [[mqtt.subscription]]\ntopic = \"brackenmoor/{{tag}}\"\n\
         [store]\npath = {:?}\nseries_interval_s = 600\nhealth_interval_s = 2\ncommit_interval_ms = 0\n[http]\nlisten = {:?}\n{database}",
        dir.join("ledger.sqlite").display().to_string(),
        opts.http,
    );
    let config_path = dir.join("demo.toml");
    std::fs::write(&config_path, &config_text)?;
    // The demo's own settings only: a production environment
    // (LIFELEDGER__STORE__PATH, LIFELEDGER__DATABASE__URL, …, as the
    // container files set them) must not send invented data to production.
    let overrides = crate::settings::Overrides::FileOnly;
    let (cfg, svc) = crate::service::load_service_with(&config_path, &overrides)?;
    let plan = cfg.plan.clone();

    // The simulated clock ends near the present: it starts as far in the
    // past as the run will cover (60 simulated days when the run has no
    // set duration), so dashboards show it in their usual "last days"
    // windows and databases that refuse future timestamps accept it.
    let span_ms = match opts.duration_s {
        Some(d) => (d * opts.speed.max(1.0) * 1000.0) as i64,
        None => 60 * 86_400_000,
    };
    let start_ms = ((now_ms() - span_ms) / 60_000) * 60_000;
    let simulator = sim::Simulator::new(&plan, start_ms);
    say!("lifeledger demo: {} (invented plant, demo data only)", plan.plant);
    say!("  status page      http://{}/", opts.http);
    say!(
        "  embedded broker  mqtt://127.0.0.1:{broker_port} (tags on brackenmoor/<tag>, alarms on lifeledger/alarms/#)"
    );
    say!("  ledger           {}", dir.join("ledger.sqlite").display());
    say!(
        "  settings         the demo's own only: LIFELEDGER__… environment variables are ignored{}",
        if opts.database_url.is_some() { "" } else { "; no database (--database-url to add one)" }
    );
    say!(
        "  speed            {:.0} simulated seconds per second ({:.1} simulated days per second)",
        opts.speed,
        opts.speed / 86_400.0
    );
    say!("  what to watch    day {:.0}: start-up; day {:.0}: over-temperature on outlet leg A (warning); day {:.0}: thermocouple of leg B fails (out-of-range, then stale-tag alarm); day {:.0}: shutdown and restart", 0.0, sim::EXCURSION_DAY, sim::FAILURE_DAY, sim::SHUTDOWN_DAY);
    say!("  {}", crate::CAUTION);
    say!("  Ctrl-C stops.");

    let stop = async {
        match opts.duration_s {
            Some(d) => {
                tokio::select! {
                    _ = tokio::time::sleep(Duration::from_secs_f64(d)) => {}
                    _ = tokio::signal::ctrl_c() => {}
                }
            }
            None => {
                let _ = tokio::signal::ctrl_c().await;
            }
        }
    };

    // The simulator publishes with QoS 1 through its own client.
    let mut mo = MqttOptions::new("brackenmoor-simulator", "127.0.0.1", broker_port);
    mo.set_keep_alive(Duration::from_secs(30));
    mo.set_inflight(500);
    let (client, mut eventloop) = AsyncClient::new(mo, 10_000);
    // Alarm events on the terminal as they happen (the service publishes
    // them on the alarm event topic).
    let events = svc.mqtt.alarm_event_topic();
    let client_for_events = client.clone();
    client.subscribe(events.clone(), QoS::AtLeastOnce).await.context("subscribing to the alarm events")?;
    let sim_loop = tokio::spawn(async move {
        loop {
            match eventloop.poll().await {
                Ok(rumqttc::Event::Incoming(rumqttc::Packet::Publish(p))) if p.topic == events => {
                    say!("{}", alarm_line(&p.payload, start_ms));
                }
                Ok(rumqttc::Event::Incoming(rumqttc::Packet::ConnAck(_))) => {
                    // A new session after a broker hiccup: subscribe again.
                    let _ = client_for_events.subscribe(events.clone(), QoS::AtLeastOnce).await;
                }
                Ok(_) => {}
                Err(_) => tokio::time::sleep(Duration::from_millis(200)).await,
            }
        }
    });
    let speed = opts.speed.max(1.0);
    let period_ms = opts.sample_period_s.max(1) * 1000;
    let http = opts.http.clone();
    let ledger_path = dir.join("ledger.sqlite");
    let publisher = tokio::spawn(async move {
        let began = Instant::now();
        let mut next_ms = start_ms;
        let mut last_print = Instant::now();
        // The outage inspection: entered half a day into the shutdown.
        let inspection_ms = start_ms + ((sim::SHUTDOWN_DAY + 0.5) * 86_400_000.0) as i64;
        let mut inspected = false;
        loop {
            // The simulated clock stops at the present: the service rejects
            // samples stamped ahead of the wall clock.
            let sim_now = (start_ms + (began.elapsed().as_secs_f64() * speed * 1000.0) as i64).min(now_ms());
            while next_ms <= sim_now {
                for s in simulator.samples_at(next_ms) {
                    let payload = format!("{{\"value\": {}, \"timestamp\": {}}}", s.value, s.time_ms);
                    if client.publish(format!("brackenmoor/{}", s.tag), QoS::AtLeastOnce, false, payload).await.is_err()
                    {
                        return;
                    }
                }
                next_ms += period_ms;
            }
            if !inspected && sim_now >= inspection_ms && ledger_path.exists() {
                inspected = true;
                let finding_ms = start_ms + (sim::SHUTDOWN_DAY * 86_400_000.0) as i64 + 3_600_000;
                match inspections::enter(&ledger_path, finding_ms, now_ms()) {
                    Ok(n) if n > 0 => {
                        say!("  outage inspection: {n} findings entered for {}", inspections::COMPONENT)
                    }
                    Ok(_) => {}
                    Err(e) => tracing::warn!("demo inspection records not entered: {e}"),
                }
            }
            if last_print.elapsed() >= Duration::from_secs(5) {
                last_print = Instant::now();
                say!("  simulated day {:.1} — see http://{http}/", (sim_now - start_ms) as f64 / 86_400_000.0);
            }
            tokio::time::sleep(Duration::from_millis(50)).await;
        }
    });
    // The demo keeps its ledger in its own state directory: the first start
    // there creates it.
    let result = crate::service::run_until_with(&config_path, overrides, true, stop).await;
    publisher.abort();
    sim_loop.abort();
    if opts.state_dir.is_some() {
        say!("lifeledger demo stopped; the ledger is in {}", dir.display());
    } else {
        match std::fs::remove_dir_all(&dir) {
            Ok(()) => say!(
                "lifeledger demo stopped; its temporary state {} was removed (--state-dir DIR keeps it)",
                dir.display()
            ),
            Err(e) => say!("lifeledger demo stopped; could not remove its temporary state {}: {e}", dir.display()),
        }
    }
    result
}

/// One alarm event as a terminal line: simulated day, severity, message.
fn alarm_line(payload: &[u8], start_ms: i64) -> String {
    let v: serde_json::Value = serde_json::from_slice(payload).unwrap_or_default();
    let day =
        v["time_ms"].as_i64().map_or(String::new(), |t| format!("day {:.1}", (t - start_ms) as f64 / 86_400_000.0));
    let severity = v["severity"].as_str().unwrap_or("-");
    let message = v["message"].as_str().map_or_else(|| String::from_utf8_lossy(payload).into_owned(), str::to_string);
    format!("  alarm  {day:>8}  {severity:<8} {message}")
}

fn tempfile_dir() -> anyhow::Result<PathBuf> {
    let base = std::env::temp_dir().join(format!("lifeledger-demo-{}", std::process::id()));
    std::fs::create_dir_all(&base)?;
    Ok(base)
}

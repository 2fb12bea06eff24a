//! The `lifeledger` command: a thin shell over the library. Each
//! subcommand parses its arguments, calls the library and prints.

use anyhow::{bail, Context, Result};
use clap::{Parser, Subcommand, ValueEnum};
use lifeledger::engine::Engine;
use lifeledger::report::{self, ComponentReport};
use lifeledger::settings::{library::MaterialLibrary, load_plan};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;

const CAUTION_HELP: &str = "CAUTION: lifeledger gives screening estimates for planning inspections. \
Built-in material data and alarm defaults are not authoritative: limits, material data and \
acceptance must come from the plant's governing code and a responsible (licensed) engineer.";

/// Creep and wear life ledger for high-temperature plant components.
///
/// lifeledger turns metal temperature, pressure, load and vibration tags
/// into hoop stress, creep life fraction (Larson-Miller rupture life,
/// Robinson's rule), creep strain (Norton-Arrhenius) and wear (Archard,
/// fretting work-rate) per component.
#[derive(Parser)]
#[command(name = "lifeledger", version, after_help = CAUTION_HELP, max_term_width = 100)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Clone, Copy, ValueEnum, PartialEq)]
enum Format {
    /// A table for people.
    Table,
    /// JSON for programs.
    Json,
}

#[derive(Subcommand)]
enum Command {
    /// Replay a historian CSV export through the engine and print the ledger.
    ///
    /// The CSV is long format, one sample per row: `timestamp,tag,value[,quality]`,
    /// with an optional header row. Timestamps are RFC 3339 or epoch seconds
    /// (milliseconds at or above 1e11); rows stamped ahead of the clock or
    /// before [engine] earliest_plausible are rejected and listed;
    /// quality is good (default), uncertain or bad. The file may be gzipped.
    /// Values are in each tag's configured unit. Malformed rows are counted
    /// and listed with their line numbers; they never stop the replay.
    ///
    /// Example:
    ///   lifeledger replay --config config/demo/plant.toml --input config/demo/history.csv.gz
    #[command(after_help = CAUTION_HELP)]
    Replay {
        /// Configuration file (TOML).
        #[arg(long, short)]
        config: PathBuf,
        /// Historian CSV (or .csv.gz); `-` reads standard input.
        #[arg(long, short)]
        input: String,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Also write the component time series as InfluxDB line protocol.
        #[arg(long, value_name = "FILE")]
        write_lp: Option<PathBuf>,
        /// Also write the component time series as CSV: one row per
        /// component per series interval, the fields of the database's
        /// `component_state` points.
        #[arg(long, value_name = "FILE")]
        write_csv: Option<PathBuf>,
        /// Event-time spacing of the series (line protocol and CSV), seconds.
        #[arg(long, visible_alias = "series-interval-s", default_value_t = 600)]
        lp_interval_s: i64,
        /// Never show a progress bar (it is shown only on a terminal anyway).
        #[arg(long)]
        no_progress: bool,
        /// Inspection records to apply at their dates: the JSON of
        /// `lifeledger inspection list --json` (records a service accepted keep
        /// their effective instants, so the replay gives the live ledger).
        #[arg(long, value_name = "FILE")]
        inspections: Option<PathBuf>,
    },
    /// Validate a configuration and print the values an engineer should sanity-check.
    ///
    /// Prints, per component: the stress at design conditions (hoop stress
    /// at design pressure, or the configured fixed stress), homologous
    /// temperature and whether it is in the creep range, rupture life at
    /// design conditions on the minimum and mean curves, hours at design
    /// conditions to each life-fraction alarm level, and validity warnings.
    /// Every problem in the file is listed at once. Exit status 1 if any.
    #[command(name = "check-config", after_help = CAUTION_HELP)]
    CheckConfig {
        /// Configuration file (TOML), by position or as `--config FILE`.
        #[arg(required_unless_present = "config_flag", conflicts_with = "config_flag")]
        config: Option<PathBuf>,
        /// Configuration file (TOML), as the other commands take it.
        #[arg(long = "config", id = "config_flag", value_name = "FILE")]
        config_flag: Option<PathBuf>,
        /// Check the file alone, not the environment variables and files it
        /// names (secrets, certificates): for checking a file away from the
        /// machine that runs it. The service's pre-start check must not use it.
        #[arg(long)]
        file_only: bool,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// List the material library or show one grade with every value and its source.
    #[command(after_help = CAUTION_HELP)]
    Materials {
        #[command(subcommand)]
        action: MaterialsAction,
    },
    /// Run the live service: subscribe to the plant's MQTT tags, keep the ledger, write the database, raise alarms.
    ///
    /// Reads [mqtt], [store], [database], [http] and [alarms] from the
    /// configuration (see README). Messages are acknowledged only after the
    /// ledger transaction that holds them has committed. SIGTERM/SIGINT stop
    /// cleanly; SIGHUP reloads the configuration and keeps every ledger.
    /// Logs go to standard error, filtered by RUST_LOG (default info).
    #[command(after_help = CAUTION_HELP)]
    Run {
        /// Configuration file (TOML).
        #[arg(long, short)]
        config: PathBuf,
        /// Log format.
        #[arg(long, value_enum, default_value_t = LogFormat::Human)]
        log_format: LogFormat,
        /// Create a new, empty ledger if the ledger file ([store] path) is missing or empty.
        ///
        /// Without it such a file is refused and nothing is created, so that a
        /// data volume that failed to mount does not silently restart every
        /// component from its initial values. Give it on the first start of a
        /// new installation; an existing ledger is opened as always.
        #[arg(long)]
        init_ledger: bool,
    },
    /// Show the ledger a service keeps: per component, life used, strain, wear, remaining life, flags.
    ///
    /// Reads the ledger file named by [store] path in the configuration
    /// without changing it, so it is safe while the service runs (it shows
    /// the last committed batch). Ledgers kept for components no longer in
    /// the configuration are listed by name.
    #[command(after_help = CAUTION_HELP)]
    Ledger {
        /// Configuration file (TOML) of the service.
        #[arg(long, short)]
        config: PathBuf,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// Roll one component, or the whole ledger, back to its newest checkpoint at or before a time.
    ///
    /// For a ledger poisoned by wrong data (a gateway clock years ahead, a bad
    /// historian export). Works on the ledger file of a STOPPED service: it
    /// refuses, changing nothing, while the service or any other program has
    /// the file open. The service keeps a checkpoint of every component once a
    /// UTC day of event time, for [store] checkpoint_days (default 90) days.
    ///
    /// The tags a rolled-back component reads are rewound with it, so that
    /// `lifeledger backfill` can deliver their samples again; other components
    /// that read those tags count nothing twice (they integrate only past their
    /// own time). Who did it and why go into the alarm journal.
    ///
    /// Then refill the hours since the checkpoint with `lifeledger backfill`
    /// from the historian, and start the service. Without a backfill, those
    /// hours are integrated by the gap policy (conservative by default) and
    /// counted as unmonitored when data arrive again.
    ///
    /// Example:
    ///   lifeledger rollback --config plant.toml --component U2-SH3-OUTLET-LEG-A \
    ///     --to 2026-10-20T00:00:00Z --by "A. Engineer" --reason "gateway clock jumped to 2030"
    #[command(after_help = CAUTION_HELP)]
    #[command(group(clap::ArgGroup::new("scope").required(true).args(["component", "all"])))]
    Rollback {
        /// Configuration file (TOML) of the service.
        #[arg(long, short)]
        config: PathBuf,
        /// Ledger file [default: the [store] path of the configuration].
        #[arg(long)]
        ledger: Option<PathBuf>,
        /// The component to roll back.
        #[arg(long, value_name = "NAME")]
        component: Option<String>,
        /// Roll every component of the configuration back.
        #[arg(long)]
        all: bool,
        /// Roll back to the newest checkpoint at or before this time (RFC 3339).
        #[arg(long, value_name = "RFC3339")]
        to: String,
        /// Who rolls the ledger back (recorded in the alarm journal).
        #[arg(long, value_name = "NAME")]
        by: String,
        /// Why (recorded in the alarm journal).
        #[arg(long, value_name = "TEXT")]
        reason: String,
        /// Say what would be restored, change nothing.
        #[arg(long)]
        dry_run: bool,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// Re-send components' component_state points for a time range from the ledger to the database.
    ///
    /// For a database that lost points it had accepted. The points come
    /// from the ledger's per-component trend records (the fields it keeps:
    /// metal temperature, pressure, hoop stress, life fraction, creep
    /// strain, wear index), with their event time, so re-sending is
    /// idempotent. Only what the trend still holds can be re-sent ([store]
    /// trend_points_per_component, a week by default). Reads the ledger
    /// only; safe while the service runs. Needs [database] in the
    /// configuration.
    ///
    /// Example:
    ///   lifeledger resend --config plant.toml --all --from 2026-10-20T00:00:00Z --to 2026-10-21T00:00:00Z
    #[command(after_help = CAUTION_HELP)]
    Resend {
        /// Configuration file (TOML) of the service.
        #[arg(long, short)]
        config: PathBuf,
        /// Ledger file [default: the [store] path of the configuration].
        #[arg(long)]
        ledger: Option<PathBuf>,
        /// The component whose points to re-send.
        #[arg(long, value_name = "NAME", required_unless_present = "all", conflicts_with = "all")]
        component: Option<String>,
        /// Re-send the points of every component of the configuration.
        #[arg(long)]
        all: bool,
        /// Earliest event time (RFC 3339), inclusive.
        #[arg(long, value_name = "RFC3339")]
        from: String,
        /// Latest event time (RFC 3339), inclusive.
        #[arg(long, value_name = "RFC3339")]
        to: String,
        /// Say how many points would be sent, send nothing.
        #[arg(long)]
        dry_run: bool,
    },
    /// Feed a historian CSV into a stopped service's ledger, through the same engine as `replay`.
    ///
    /// The engine starts from the ledger's stored state; rows at or before
    /// their tag's cursor are already in the ledger and are skipped (counted
    /// as duplicate or late). The result is committed in one transaction,
    /// with a checkpoint of each changed component. A missing ledger file is
    /// created: this is how a new installation starts from its history. Like
    /// `rollback`, it refuses while the service or another program has the
    /// file open. Alarms are evaluated by the service with its next data.
    ///
    /// The CSV is the same as for `replay`: `timestamp,tag,value[,quality]`.
    ///
    /// Example:
    ///   lifeledger backfill --config plant.toml --input historian-since-oct-20.csv.gz
    #[command(after_help = CAUTION_HELP)]
    Backfill {
        /// Configuration file (TOML) of the service.
        #[arg(long, short)]
        config: PathBuf,
        /// Ledger file [default: the [store] path of the configuration].
        #[arg(long)]
        ledger: Option<PathBuf>,
        /// Historian CSV (or .csv.gz); `-` reads standard input.
        #[arg(long, short)]
        input: String,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// Run everything on this machine with no external servers: embedded broker, plant simulator, live service, status page.
    ///
    /// An invented unit (Brackenmoor Demo Station, U2) is simulated, time
    /// compressed, and published as real MQTT tag messages to an embedded
    /// broker on a loopback port; the live service subscribes exactly as in
    /// production. Within a minute the ledgers move, a warning fires (an
    /// over-temperature excursion) and a stale-tag alarm fires (a failing
    /// thermocouple). Demo data only. The demo runs on its own settings:
    /// LIFELEDGER__… environment variables are ignored.
    ///
    /// Example: lifeledger demo --duration 60
    #[command(after_help = CAUTION_HELP)]
    Demo {
        /// Real seconds to run (default: until Ctrl-C).
        #[arg(long)]
        duration: Option<f64>,
        /// Simulated seconds per real second (86400: a simulated day per second).
        #[arg(long, default_value_t = 86_400.0)]
        speed: f64,
        /// Simulated seconds between two samples of a tag.
        #[arg(long, default_value_t = 240)]
        sample_period_s: i64,
        /// Status page address (loopback by default).
        #[arg(long, default_value = "127.0.0.1:8470")]
        http: String,
        /// Keep the ledger in this directory (default: a temporary one).
        #[arg(long)]
        state_dir: Option<PathBuf>,
        /// Also write to this database (InfluxDB v2 write API), e.g. http://127.0.0.1:8428.
        #[arg(long)]
        database_url: Option<String>,
        #[arg(long, default_value = "demo")]
        database_org: String,
        #[arg(long, default_value = "demo")]
        database_bucket: String,
        /// Environment variable holding the database token.
        #[arg(long)]
        database_token_env: Option<String>,
    },
    /// Fit material constants (Larson-Miller, Norton) from your own creep test data.
    #[command(after_help = CAUTION_HELP)]
    Fit {
        #[command(subcommand)]
        cmd: lifeledger::fit::FitCommand,
    },
    /// Write the assessment report of a component, a unit or the plant (HTML, CSV, JSON).
    ///
    /// Reads the service's ledger read-only (safe while it runs) and writes
    /// report.html (prints on A4 and US letter), report.csv and report.json
    /// into --out. Projections under design conditions, design + --shift-k,
    /// the measured profile and the measured profile + --shift-k stand
    /// beside the recent-rate projection.
    #[command(after_help = CAUTION_HELP)]
    Report {
        #[arg(long, short)]
        config: PathBuf,
        /// Ledger file [default: the [store] path of the configuration].
        #[arg(long)]
        ledger: Option<PathBuf>,
        /// One component.
        #[arg(long, value_name = "NAME", conflicts_with = "unit")]
        component: Option<String>,
        /// Every component of one unit.
        #[arg(long, value_name = "UNIT")]
        unit: Option<String>,
        /// Directory the three files go into.
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
        /// Temperature shift of the "what if" profiles, K.
        #[arg(long, default_value_t = 10.0)]
        shift_k: f64,
    },
    /// Inspection findings in the ledger: add, correct (supersede), list.
    ///
    /// Works on a stopped service's ledger and, safely, on a running one's.
    #[command(after_help = CAUTION_HELP)]
    Inspection {
        #[command(subcommand)]
        cmd: lifeledger::service::inspection_cli::InspectionCommand,
    },
}

#[derive(Clone, Copy, ValueEnum, PartialEq)]
enum LogFormat {
    Human,
    Json,
}

#[derive(Subcommand)]
enum MaterialsAction {
    /// List the grades (shipped, plus user grades of a configuration).
    List {
        /// Also include the [[material]] grades of this configuration.
        #[arg(long)]
        config: Option<PathBuf>,
    },
    /// Show one grade: every value, its source, and checks against its reference data.
    Show {
        /// Grade name or alias, for example `P22` or `9Cr-1Mo-V`.
        grade: String,
        #[arg(long)]
        config: Option<PathBuf>,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
}

fn init_logs(default: &str, json: bool) {
    let filter = tracing_subscriber::EnvFilter::try_from_default_env().unwrap_or_else(|_| default.into());
    // Under systemd, standard error is the journal (JOURNAL_STREAM): each
    // line starts with its priority, and no colour escapes are written
    // where standard error is not a terminal.
    use std::io::IsTerminal;
    let journal = std::env::var_os("JOURNAL_STREAM").is_some();
    let writer = lifeledger::service::systemd::JournalStderr { prefix: journal };
    let b = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_ansi(!journal && std::io::stderr().is_terminal())
        .with_writer(writer);
    if json {
        b.json().init();
    } else {
        b.init();
    }
}

fn cmd_run(config: PathBuf, init_ledger: bool) -> Result<i32> {
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    rt.block_on(lifeledger::service::run(&config, init_ledger))?;
    Ok(0)
}

fn main() {
    let cli = Cli::parse();
    match &cli.command {
        Command::Run { log_format, .. } => init_logs("info", *log_format == LogFormat::Json),
        Command::Demo { .. } => init_logs("warn,rumqttd=off", false),
        _ => init_logs("warn", false),
    }
    let result = match cli.command {
        Command::Run { config, init_ledger, .. } => cmd_run(config, init_ledger),
        Command::Ledger { config, format } => cmd_ledger(&config, format),
        Command::Demo {
            duration,
            speed,
            sample_period_s,
            http,
            state_dir,
            database_url,
            database_org,
            database_bucket,
            database_token_env,
        } => {
            let opts = lifeledger::demo::DemoOptions {
                duration_s: duration,
                speed,
                sample_period_s,
                http,
                state_dir,
                database_url,
                database_org,
                database_bucket,
                database_token_env,
            };
            tokio::runtime::Builder::new_multi_thread()
                .worker_threads(2)
                .enable_all()
                .build()
                .map_err(anyhow::Error::from)
                .and_then(|rt| rt.block_on(lifeledger::demo::run(opts)))
                .map(|_| 0)
        }
        Command::Replay { config, input, format, write_lp, write_csv, lp_interval_s, no_progress, inspections } => {
            cmd_replay(config, input, format, write_lp, write_csv, lp_interval_s, no_progress, inspections)
        }
        Command::CheckConfig { config, config_flag, format, file_only } => {
            // clap requires exactly one of the two.
            let file = config.or(config_flag).expect("check-config: a configuration file");
            cmd_check(file, format, file_only)
        }
        Command::Rollback { config, ledger, component, all: _, to, by, reason, dry_run, format } => {
            let scope = component.map_or(lifeledger::recovery::Scope::Whole, lifeledger::recovery::Scope::Component);
            cmd_rollback(&config, ledger, scope, &to, by, reason, dry_run, format)
        }
        Command::Backfill { config, ledger, input, format } => cmd_backfill(&config, ledger, &input, format),
        Command::Resend { config, ledger, component, all: _, from, to, dry_run } => {
            let scope = component.map_or(lifeledger::recovery::Scope::Whole, lifeledger::recovery::Scope::Component);
            cmd_resend(&config, ledger, scope, &from, &to, dry_run)
        }
        Command::Materials { action } => cmd_materials(action),
        Command::Fit { cmd } => lifeledger::fit::run(&cmd).map(|_| 0),
        Command::Inspection { cmd } => lifeledger::service::inspection_cli::run(&cmd),
        Command::Report { config, ledger, component, unit, out, shift_k } => {
            let scope = match (component, unit) {
                (Some(c), _) => lifeledger::assessment::Scope::Component(c),
                (None, Some(u)) => lifeledger::assessment::Scope::Unit(u),
                (None, None) => lifeledger::assessment::Scope::Plant,
            };
            cmd_report(&config, ledger, &scope, &out, shift_k)
        }
    };
    match result {
        Ok(code) => std::process::exit(code),
        // The reader of our output went away (`| head`): stop quietly, as
        // command-line tools do.
        Err(e) if is_broken_pipe(&e) => std::process::exit(0),
        Err(e) => {
            eprintln!("error: {e:#}");
            std::process::exit(2);
        }
    }
}

/// Whether an error comes from writing into a closed pipe.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    let pipe = std::io::ErrorKind::BrokenPipe;
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>().is_some_and(|io| io.kind() == pipe)
            || c.downcast_ref::<serde_json::Error>().is_some_and(|j| j.io_error_kind() == Some(pipe))
    })
}

/// "malformed rows: 36", and when fewer are listed below, which ones.
fn rows_heading(label: &str, total: u64, listed: usize) -> String {
    if (listed as u64) < total {
        format!("{label}: {total} (first {listed} of {total} listed)")
    } else {
        format!("{label}: {total}")
    }
}

fn cmd_report(
    config: &std::path::Path,
    ledger: Option<PathBuf>,
    scope: &lifeledger::assessment::Scope,
    out: &std::path::Path,
    shift_k: f64,
) -> Result<i32> {
    anyhow::ensure!(shift_k.is_finite(), "--shift-k {shift_k} is not a number of kelvin");
    let (cfg, service) = lifeledger::service::load_service(config)?;
    let path = ledger.unwrap_or(service.store.path);
    let now = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap_or_default().as_millis() as i64;
    let a = lifeledger::assessment::build(&cfg, &path, scope, shift_k, now, false)?;
    for p in lifeledger::assessment::write(&a, out)? {
        println!("wrote {}", p.display());
    }
    Ok(0)
}

fn load(config: &std::path::Path) -> Result<lifeledger::settings::LoadedConfig> {
    load_plan(config).map_err(|e| anyhow::anyhow!("{e}"))
}

/// The component reports as JSON, each with its `timeline`: the first
/// crossing of each alarm level, in event time.
fn timeline_json(
    reports: &[report::ComponentReport],
    crossings: &[Vec<lifeledger::replay::timeline::Crossing>],
) -> Result<serde_json::Value> {
    let mut list = Vec::with_capacity(reports.len());
    for (r, cs) in reports.iter().zip(crossings) {
        let mut v = serde_json::to_value(r)?;
        let tl: Vec<serde_json::Value> = cs
            .iter()
            .map(|c| {
                serde_json::json!({
                    "index": c.index,
                    "severity": c.severity,
                    "threshold": c.threshold,
                    "time": lifeledger::event_time::rfc3339_ms(c.time_ms),
                    "basis": c.basis,
                })
            })
            .collect();
        if let Some(o) = v.as_object_mut() {
            o.insert("timeline".into(), serde_json::Value::Array(tl));
        }
        list.push(v);
    }
    Ok(serde_json::Value::Array(list))
}

/// The timeline as text: one line per first crossing, per component.
fn timeline_text(
    reports: &[report::ComponentReport],
    crossings: &[Vec<lifeledger::replay::timeline::Crossing>],
) -> String {
    use lifeledger::replay::timeline::CrossingBasis;
    let mut s = String::from("\nLevels first crossed (event time):\n");
    if crossings.iter().all(|c| c.is_empty()) {
        s.push_str("  none\n");
        return s;
    }
    for (r, cs) in reports.iter().zip(crossings) {
        for c in cs {
            let how = match c.basis {
                CrossingBasis::Interpolated => "",
                CrossingBasis::Step => " (at an integrated instant)",
                CrossingBasis::Initial => " (initial value, before the history)",
            };
            s.push_str(&format!(
                "  {:<24} {:<30} {:<8} {:>10}  {}{}\n",
                r.component,
                c.index,
                c.severity,
                lifeledger::alarm::AlarmIndex::from_name(c.index)
                    .map_or(c.threshold.to_string(), |i| i.display(c.threshold)),
                lifeledger::event_time::rfc3339_ms(c.time_ms),
                how
            ));
        }
    }
    s
}

#[allow(clippy::too_many_arguments)]
fn cmd_replay(
    config: PathBuf,
    input: String,
    format: Format,
    write_lp: Option<PathBuf>,
    write_csv: Option<PathBuf>,
    lp_interval_s: i64,
    no_progress: bool,
    inspections: Option<PathBuf>,
) -> Result<i32> {
    let cfg = load(&config)?;
    for w in &cfg.warnings {
        eprintln!("warning: {w}");
    }
    let mut engine = Engine::new(cfg.plan.clone());
    if let Some(p) = &inspections {
        let rows = lifeledger::inspection::load_records_file(p)?;
        lifeledger::inspection::offer_rows_for_replay(&mut engine, &rows).map_err(|e| anyhow::anyhow!("{e}"))?;
    }
    let counter = std::sync::Arc::new(std::sync::atomic::AtomicU64::new(0));
    let total = std::fs::metadata(&input).map(|m| m.len()).unwrap_or(0);
    let reader = lifeledger::replay::open_input(&input, Some(counter.clone()))
        .with_context(|| format!("cannot open input {input}"))?;
    let bar = if !no_progress && std::io::stderr().is_terminal() && total > 0 {
        let b = indicatif::ProgressBar::new(total);
        b.set_style(
            indicatif::ProgressStyle::with_template("{spinner} replay [{bar:40}] {bytes}/{total_bytes} {msg} ({eta})")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        Some(b)
    } else {
        None
    };
    let mut lp_file = match &write_lp {
        Some(p) => Some(std::io::BufWriter::new(
            std::fs::File::create(p).with_context(|| format!("cannot create {}", p.display()))?,
        )),
        None => None,
    };
    let mut csv_file = match &write_csv {
        Some(p) => Some(std::io::BufWriter::new(
            std::fs::File::create(p).with_context(|| format!("cannot create {}", p.display()))?,
        )),
        None => None,
    };
    let opts = lifeledger::replay::ReplayOptions {
        lp_interval_ms: lp_interval_s.max(1) * 1000,
        ..lifeledger::replay::ReplayOptions::default()
    };
    let mut timeline = lifeledger::replay::timeline::Timeline::new(engine.components().len());
    let started = std::time::Instant::now();
    let outputs = lifeledger::replay::Outputs {
        lp: lp_file.as_mut().map(|w| w as &mut dyn Write),
        csv: csv_file.as_mut().map(|w| w as &mut dyn Write),
        timeline: Some(&mut timeline),
        history: None,
    };
    let outcome = lifeledger::replay::replay_to(&mut engine, reader, outputs, &opts, |rows| {
        if let Some(b) = &bar {
            b.set_position(counter.load(std::sync::atomic::Ordering::Relaxed));
            b.set_message(format!("{rows} rows"));
        }
    })
    .with_context(|| format!("reading {input}"))?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    if let Some(mut f) = lp_file {
        f.flush()?;
    }
    if let Some(mut f) = csv_file {
        f.flush()?;
    }
    let elapsed = started.elapsed().as_secs_f64();
    let reports = component_reports(&engine);
    let crossings: Vec<Vec<lifeledger::replay::timeline::Crossing>> =
        (0..engine.components().len()).map(|ci| timeline.crossings(ci)).collect();
    let mut out = std::io::stdout().lock();
    match format {
        Format::Json => {
            let j = serde_json::json!({
                "plant": engine.plan().plant,
                "config": cfg.file,
                "input": input,
                "rows": outcome.rows,
                "malformed_rows": outcome.malformed,
                "malformed_examples": outcome.malformed_examples,
                "implausible_time_examples": outcome.implausible_examples,
                "unknown_tags": outcome.unknown_tags,
                "first_sample": outcome.first_time_ms.map(lifeledger::event_time::rfc3339_ms),
                "last_sample": outcome.last_time_ms.map(lifeledger::event_time::rfc3339_ms),
                "counters": engine.counters(),
                "line_protocol_points": outcome.points_written,
                "csv_rows": outcome.csv_rows,
                "components": timeline_json(&reports, &crossings)?,
                "caution": lifeledger::CAUTION,
            });
            serde_json::to_writer_pretty(&mut out, &j)?;
            writeln!(out)?;
        }
        Format::Table => {
            writeln!(out, "lifeledger replay: {} ({} rows in {:.1} s)", engine.plant_name(), outcome.rows, elapsed)?;
            if let (Some(a), Some(b)) = (outcome.first_time_ms, outcome.last_time_ms) {
                writeln!(
                    out,
                    "event time {} to {}",
                    lifeledger::event_time::rfc3339_ms(a),
                    lifeledger::event_time::rfc3339_ms(b)
                )?;
            }
            writeln!(out, "{}", report::counters_line(engine.counters()))?;
            if outcome.malformed > 0 {
                writeln!(
                    out,
                    "{}",
                    rows_heading("malformed rows", outcome.malformed as u64, outcome.malformed_examples.len())
                )?;
                for m in &outcome.malformed_examples {
                    writeln!(out, "  line {}: {}", m.line, m.problem)?;
                }
            }
            let implausible = engine.counters().implausible_time;
            if implausible > 0 {
                writeln!(
                    out,
                    "WARNING: {implausible} rows rejected for an implausible event time (never integrated):"
                )?;
                for m in &outcome.implausible_examples {
                    writeln!(out, "  line {}: {}", m.line, m.problem)?;
                }
            }
            for (t, n) in &outcome.unknown_tags {
                writeln!(out, "unknown tag {t:?}: {n} rows (not in the configuration)")?;
            }
            writeln!(out)?;
            write!(out, "{}", report::summary_table(&reports))?;
            write!(out, "{}", timeline_text(&reports, &crossings))?;
            if let Some(p) = &write_lp {
                writeln!(out, "\nwrote {} line-protocol points to {}", outcome.points_written, p.display())?;
            }
            if let Some(p) = &write_csv {
                writeln!(out, "wrote {} CSV rows to {}", outcome.csv_rows, p.display())?;
            }
            writeln!(out, "\n{}", lifeledger::CAUTION)?;
        }
    }
    Ok(0)
}

/// The per-component summary of an engine's ledgers, in plan order.
fn component_reports(engine: &Engine) -> Vec<ComponentReport> {
    engine.plan().components.iter().zip(engine.components()).map(|(p, s)| ComponentReport::new(p, s)).collect()
}

fn cmd_ledger(config: &std::path::Path, format: Format) -> Result<i32> {
    let (cfg, service) = lifeledger::service::load_service(config)?;
    let path = &service.store.path;
    let loaded = lifeledger::store::read_ledger(path)?;
    let stored = lifeledger::ledger_file::StoredLedger::parse(&loaded, path)?;
    for (key, e) in &stored.unreadable_alarms {
        eprintln!("warning: ledger {}: alarm record {key} unreadable ({e}); not shown", path.display());
    }
    let decode_rejected = stored.decode_rejected;
    let mut engine = Engine::new(cfg.plan.clone());
    let retired = engine.import_state(stored.engine);
    let reports = component_reports(&engine);
    let retired: Vec<&str> = retired.components.iter().map(|(n, _)| n.as_str()).collect();
    let book = lifeledger::alarm::AlarmBook::from_records(stored.alarms).with_config(service.alarms.clone());
    let alarms: Vec<_> = engine.plan().components.iter().map(|c| book.current(&c.name)).collect();
    let mut out = std::io::stdout().lock();
    match format {
        Format::Json => {
            let j = serde_json::json!({
                "plant": engine.plan().plant,
                "config": cfg.file,
                "ledger": path.display().to_string(),
                "counters": engine.counters(),
                "decode_rejected": decode_rejected,
                "components": reports,
                "alarms": alarms,
                "retired_components": retired,
                "caution": lifeledger::CAUTION,
            });
            serde_json::to_writer_pretty(&mut out, &j)?;
            writeln!(out)?;
        }
        Format::Table => {
            writeln!(out, "lifeledger ledger: {} ({})", engine.plant_name(), path.display())?;
            writeln!(out, "{}", report::counters_line(engine.counters()))?;
            writeln!(out)?;
            write!(out, "{}", report::summary_table(&reports))?;
            // Time at condition, by temperature and pressure class together.
            for r in &reports {
                let t = report::class_table_text(r);
                if !t.is_empty() {
                    write!(out, "\n{t}")?;
                }
            }
            // Alarms that want attention: active, awaiting acknowledge, or shelved.
            let name = |v: serde_json::Result<serde_json::Value>| {
                v.ok().and_then(|v| v.as_str().map(str::to_string)).unwrap_or_default()
            };
            let open: Vec<_> = book
                .records()
                .filter(|r| {
                    r.is_active() || r.state.needs_acknowledge() || r.state == lifeledger::alarm::AlarmState::Shelved
                })
                .collect();
            if open.is_empty() {
                writeln!(out, "\nno alarm active, unacknowledged or shelved")?;
            } else {
                writeln!(out, "\nalarms active, unacknowledged or shelved (as of their last change of state):")?;
                for r in open {
                    writeln!(
                        out,
                        "  {:<28} {:<30} {:<9} {:<20} level {:<8} since {}",
                        r.component,
                        name(serde_json::to_value(r.index)),
                        r.severity.map(|s| name(serde_json::to_value(s))).unwrap_or_else(|| "-".into()),
                        name(serde_json::to_value(r.state)),
                        r.threshold.map_or("-".to_string(), |t| t.to_string()),
                        lifeledger::event_time::rfc3339_ms(r.since_ms)
                    )?;
                }
            }
            if !retired.is_empty() {
                writeln!(out, "\nledgers kept for components no longer configured: {}", retired.join(", "))?;
            }
            writeln!(out, "\n{}", lifeledger::CAUTION)?;
        }
    }
    Ok(0)
}

/// An event time for people, or `-`.
fn time_or_dash(t: Option<i64>) -> String {
    t.map_or("-".to_string(), lifeledger::event_time::rfc3339_ms)
}

fn cmd_resend(
    config: &std::path::Path,
    ledger: Option<PathBuf>,
    scope: lifeledger::recovery::Scope,
    from: &str,
    to: &str,
    dry_run: bool,
) -> Result<i32> {
    let time = |flag: &str, v: &str| {
        lifeledger::event_time::parse_timestamp_ms(v.trim())
            .with_context(|| format!("{flag} {v:?} is not a time; give RFC 3339, for example 2026-10-20T00:00:00Z"))
    };
    let (from_ms, to_ms) = (time("--from", from)?, time("--to", to)?);
    let (cfg, service) = lifeledger::service::load_service(config)?;
    let path = ledger.unwrap_or_else(|| service.store.path.clone());
    let resend = lifeledger::recovery::resend::collect(&cfg, &path, &scope, from_ms, to_ms)?;
    let lines: Vec<String> = resend.lines().cloned().collect();
    let mut out = std::io::stdout().lock();
    for (name, l) in &resend.components {
        writeln!(out, "{name}: {} points", l.len())?;
    }
    if dry_run {
        writeln!(out, "dry run: nothing sent ({} points)", lines.len())?;
        return Ok(0);
    }
    let Some(db) = &service.database else {
        anyhow::bail!("resend: the configuration {} has no [database] to send to", config.display());
    };
    let writer = lifeledger::sink::Writer::new(db)?;
    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build()?;
    for chunk in lines.chunks(db.batch_lines.max(1)) {
        rt.block_on(writer.write_lines(chunk)).with_context(|| {
            format!(
                "resend: the database at {} did not take the points; nothing is lost, run resend again",
                writer.url()
            )
        })?;
    }
    writeln!(out, "sent {} points to {}", lines.len(), writer.url())?;
    Ok(0)
}

#[allow(clippy::too_many_arguments)]
fn cmd_rollback(
    config: &std::path::Path,
    ledger: Option<PathBuf>,
    scope: lifeledger::recovery::Scope,
    to: &str,
    by: String,
    reason: String,
    dry_run: bool,
    format: Format,
) -> Result<i32> {
    use lifeledger::alarm::index::short;
    let to_ms = lifeledger::event_time::parse_timestamp_ms(to.trim())
        .with_context(|| format!("--to {to:?} is not a time; give RFC 3339, for example 2026-10-20T00:00:00Z"))?;
    let (cfg, service) = lifeledger::service::load_service(config)?;
    let req = lifeledger::recovery::RollbackRequest {
        ledger,
        scope,
        to_ms,
        by: by.trim().to_string(),
        reason: reason.trim().to_string(),
        dry_run,
    };
    let o = lifeledger::recovery::rollback(&cfg, &service, &req)?;
    let mut out = std::io::stdout().lock();
    if format == Format::Json {
        let j = serde_json::json!({
            "plant": cfg.plan.plant,
            "ledger": o.ledger.display().to_string(),
            "to": lifeledger::event_time::rfc3339_ms(to_ms),
            "by": req.by,
            "reason": req.reason,
            "dry_run": dry_run,
            "written": o.written,
            "components": o.plan.components,
            "tags": o.plan.tags,
            "unchanged": o.plan.unchanged,
            "integrated_past_now": o.integrated_past_now,
            "caution": lifeledger::CAUTION,
        });
        serde_json::to_writer_pretty(&mut out, &j)?;
        writeln!(out)?;
        return Ok(0);
    }
    writeln!(out, "lifeledger rollback: {} ({})", cfg.plan.plant, o.ledger.display())?;
    writeln!(
        out,
        "to the newest checkpoint at or before {}, by {}: {}",
        lifeledger::event_time::rfc3339_ms(to_ms),
        req.by,
        req.reason
    )?;
    if o.plan.components.is_empty() {
        writeln!(out, "\nnothing to roll back: every component in scope is integrated only to that time or earlier")?;
    } else {
        writeln!(
            out,
            "\n{:<28} {:<26} {:>13}   {:<26} {:>13}",
            "component", "integrated to", "life fraction", "checkpoint", "life fraction"
        )?;
        for c in &o.plan.components {
            writeln!(
                out,
                "{:<28} {:<26} {:>13} → {:<26} {:>13}",
                c.component,
                time_or_dash(c.integrated_to_ms_before),
                short(c.before.life_fraction),
                lifeledger::event_time::rfc3339_ms(c.checkpoint_ms),
                short(c.after.life_fraction)
            )?;
        }
    }
    for t in &o.plan.tags {
        write!(
            out,
            "tag {} rewound: cursor {} → {}",
            t.tag,
            time_or_dash(t.cursor_ms_before),
            time_or_dash(t.cursor_ms_after)
        )?;
        if !t.also_read_by.is_empty() {
            write!(
                out,
                " (also read by {}, which count nothing twice: they integrate only past their own time)",
                t.also_read_by.join(", ")
            )?;
        }
        writeln!(out)?;
    }
    for (name, t) in &o.plan.unchanged {
        writeln!(out, "left as it is: {name} (integrated to {})", time_or_dash(*t))?;
    }
    for (name, t) in &o.integrated_past_now {
        writeln!(
            out,
            "warning: {name} is integrated to {}, later than the wall clock: probably poisoned too; roll it back as well",
            lifeledger::event_time::rfc3339_ms(*t)
        )?;
    }
    if dry_run {
        writeln!(out, "\ndry run: nothing was changed")?;
    } else if o.written {
        writeln!(
            out,
            "\nrecorded in the alarm journal. Next: refill the hours since the checkpoint with \
             `lifeledger backfill --config {}{} --input HISTORIAN.csv`, then start the service; without a \
             backfill those hours are integrated by the gap policy, and counted as unmonitored, when data arrive",
            config.display(),
            req.ledger.as_ref().map_or(String::new(), |l| format!(" --ledger {}", l.display()))
        )?;
    }
    writeln!(out, "\n{}", lifeledger::CAUTION)?;
    Ok(0)
}

/// `after − before` for every counter, by name (zeros left out).
fn counter_delta(
    before: &lifeledger::engine::Counters,
    after: &lifeledger::engine::Counters,
) -> serde_json::Map<String, serde_json::Value> {
    let (b, a) = (serde_json::to_value(before).unwrap_or_default(), serde_json::to_value(after).unwrap_or_default());
    let mut delta = serde_json::Map::new();
    if let Some(a) = a.as_object() {
        for (k, v) in a {
            let d = v.as_u64().unwrap_or(0).saturating_sub(b.get(k).and_then(|x| x.as_u64()).unwrap_or(0));
            if d > 0 {
                delta.insert(k.clone(), d.into());
            }
        }
    }
    delta
}

fn cmd_backfill(config: &std::path::Path, ledger: Option<PathBuf>, input: &str, format: Format) -> Result<i32> {
    let (cfg, service) = lifeledger::service::load_service(config)?;
    for w in &cfg.warnings {
        eprintln!("warning: {w}");
    }
    let o = lifeledger::recovery::backfill(&cfg, &service, ledger, input)?;
    let delta = counter_delta(&o.counters_before, &o.counters_after);
    let mut out = std::io::stdout().lock();
    if format == Format::Json {
        let j = serde_json::json!({
            "plant": cfg.plan.plant,
            "ledger": o.ledger.display().to_string(),
            "input": input,
            "rows": o.input.rows,
            "malformed_rows": o.input.malformed,
            "malformed_examples": o.input.malformed_examples,
            "unknown_tags": o.input.unknown_tags,
            "first_sample": o.input.first_time_ms.map(lifeledger::event_time::rfc3339_ms),
            "last_sample": o.input.last_time_ms.map(lifeledger::event_time::rfc3339_ms),
            "samples": delta,
            "components": o.components,
            "checkpoints_written": o.checkpoints_written,
            "caution": lifeledger::CAUTION,
        });
        serde_json::to_writer_pretty(&mut out, &j)?;
        writeln!(out)?;
        return Ok(0);
    }
    writeln!(out, "lifeledger backfill: {} ({}) from {input}", cfg.plan.plant, o.ledger.display())?;
    if let (Some(a), Some(b)) = (o.input.first_time_ms, o.input.last_time_ms) {
        writeln!(
            out,
            "{} rows, event time {} to {}",
            o.input.rows,
            lifeledger::event_time::rfc3339_ms(a),
            lifeledger::event_time::rfc3339_ms(b)
        )?;
    }
    let words: Vec<String> = delta.iter().map(|(k, v)| format!("{} {v}", k.replace('_', " "))).collect();
    writeln!(out, "samples: {}", if words.is_empty() { "none".to_string() } else { words.join(", ") })?;
    if delta.contains_key("duplicate") || delta.contains_key("late") {
        writeln!(
            out,
            "(duplicate and late rows are at or before their tag's cursor: already in the ledger, integrated once)"
        )?;
    }
    if o.input.malformed > 0 {
        writeln!(
            out,
            "{}",
            rows_heading("malformed rows", o.input.malformed as u64, o.input.malformed_examples.len())
        )?;
        for m in &o.input.malformed_examples {
            writeln!(out, "  line {}: {}", m.line, m.problem)?;
        }
    }
    for (t, n) in &o.input.unknown_tags {
        writeln!(out, "unknown tag {t:?}: {n} rows (not in the configuration)")?;
    }
    if o.components.is_empty() {
        writeln!(out, "\nno component changed")?;
    } else {
        writeln!(
            out,
            "\n{:<28} {:<26}   {:<26} {:>13}   {:>13}",
            "component", "integrated to before", "after", "life fraction", "after"
        )?;
        for c in &o.components {
            writeln!(
                out,
                "{:<28} {:<26} → {:<26} {:>13} → {:>13}",
                c.component,
                time_or_dash(c.integrated_to_ms_before),
                time_or_dash(c.integrated_to_ms_after),
                lifeledger::alarm::index::short(c.before.life_fraction),
                lifeledger::alarm::index::short(c.after.life_fraction)
            )?;
        }
    }
    writeln!(
        out,
        "\ncheckpoints written: {}; alarms are evaluated by the service with its next data",
        o.checkpoints_written
    )?;
    writeln!(out, "\n{}", lifeledger::CAUTION)?;
    Ok(0)
}

/// " (stress factor 1.1 included)" when the factor is not 1.
fn factor_note(f: f64) -> String {
    if f == 1.0 {
        String::new()
    } else {
        format!(" (stress factor {f} included)")
    }
}

fn fmt_opt(v: Option<f64>, prec: usize) -> String {
    v.map_or("-".into(), |x| format!("{x:.prec$}"))
}

fn cmd_check(config: PathBuf, format: Format, file_only: bool) -> Result<i32> {
    let cfg = match load_plan(&config) {
        Ok(c) => c,
        Err(e) => {
            eprint!("{e}");
            return Ok(1);
        }
    };
    // The service sections too: what `run` would refuse must fail here,
    // before a deployment. Only addresses and paths are shown, never
    // credentials.
    let service = match lifeledger::service::settings::ServiceSettings::from_settings(&cfg.settings) {
        Ok(s) => s,
        Err(errs) => {
            eprintln!("configuration {}:\n  - {}", cfg.file, errs.join("\n  - "));
            return Ok(1);
        }
    };
    // Secrets and files, read from this process's environment and disk,
    // as `run` would read them.
    let problems = if file_only { vec![] } else { service.startup_problems(|var| std::env::var(var).ok()) };
    if !problems.is_empty() {
        eprintln!("configuration {}:\n  - {}", cfg.file, problems.join("\n  - "));
        return Ok(1);
    }
    // `run` refuses a plant without components unless told; with the
    // permission it is only a warning.
    let mut warnings: Vec<String> = cfg.warnings.iter().map(|w| w.to_string()).collect();
    if let Some(e) = lifeledger::service::empty_plant_refusal(&cfg) {
        eprintln!("configuration {}:\n  - {e}", cfg.file);
        return Ok(1);
    }
    if cfg.plan.components.is_empty() {
        warnings.push(
            "no [[component]] is configured: every sample will be acknowledged and thrown away \
             ([plant] allow_retiring_most = true allows it)"
                .into(),
        );
    }
    let service_summary = serde_json::json!({
        "mqtt": format!("{}:{}", service.mqtt.host, service.mqtt.port),
        "topic_prefix": service.mqtt.topic_prefix,
        "client_id": service.mqtt.client_id,
        "store": service.store.path.display().to_string(),
        "database": service.database.as_ref().map(|d| lifeledger::sink::redacted_url(&d.url)),
        "http": service.http.listen,
    });
    let mut checks: Vec<_> = cfg.plan.components.iter().map(report::design_check).collect();
    for (ci, c) in checks.iter_mut().enumerate() {
        c.advances_with = report::advance_rule(&cfg.plan, ci);
    }
    let mut out = std::io::stdout().lock();
    if format == Format::Json {
        let j = serde_json::json!({
            "config": cfg.file,
            "ok": true,
            "warnings": warnings,
            "service": service_summary,
            "components": checks,
            "caution": lifeledger::CAUTION,
        });
        serde_json::to_writer_pretty(&mut out, &j)?;
        writeln!(out)?;
        return Ok(0);
    }
    writeln!(out, "{}: OK, {} tags, {} components", cfg.file, cfg.plan.tags.len(), cfg.plan.components.len())?;
    writeln!(
        out,
        "service: MQTT {}:{}, ledger {}, database {}, HTTP {}",
        service.mqtt.host,
        service.mqtt.port,
        service.store.path.display(),
        service.database.as_ref().map_or("none".to_string(), |d| lifeledger::sink::redacted_url(&d.url)),
        service.http.listen
    )?;
    writeln!(
        out,
        "MQTT topics: status, alarms and commands under \"{}/\", client id \"{}\": \
         every instance on one broker needs its own [mqtt] topic_prefix and client_id",
        service.mqtt.topic_prefix, service.mqtt.client_id
    )?;
    for w in &warnings {
        writeln!(out, "warning: {w}")?;
    }
    for c in &checks {
        writeln!(out, "\n{} ({})", c.component, c.material)?;
        if let (Some(model), Some(depth)) = (c.wear_model, c.allowable_wear_depth_mm) {
            let model = match model {
                lifeledger::settings::schema::WearModel::Archard => "Archard sliding",
                lifeledger::settings::schema::WearModel::Fretting => "fretting work-rate",
            };
            writeln!(out, "  wear                             {model} model, allowable depth {depth:.3} mm")?;
        }
        if !c.creep_assessed {
            writeln!(out, "  creep                            not assessed (no metal temperature input)")?;
            writeln!(out, "  advances with                    {}", c.advances_with)?;
            for w in &c.warnings {
                writeln!(out, "  warning: {w}")?;
            }
            continue;
        }
        match (c.hoop_stress_at_design_mpa, c.fixed_stress_mpa) {
            (_, Some(s)) => {
                writeln!(out, "  fixed stress (configured)        {s:.1} MPa{}", factor_note(c.stress_factor))?
            }
            (Some(s), None) => {
                writeln!(out, "  hoop stress at design pressure   {s:.1} MPa{}", factor_note(c.stress_factor))?
            }
            (None, None) => writeln!(out, "  hoop stress at design pressure   - (no design pressure)")?,
        }
        writeln!(
            out,
            "  homologous temperature T/Tm      {} (creep threshold {:.0} °C; in creep range: {})",
            fmt_opt(c.homologous_temperature, 3),
            c.creep_threshold_c,
            c.in_creep_range.map_or("-", |b| if b { "yes" } else { "no" })
        )?;
        writeln!(
            out,
            "  rupture life at design           {} h minimum curve, {} h mean curve",
            fmt_opt(c.rupture_life_minimum_h, 0),
            fmt_opt(c.rupture_life_mean_h, 0)
        )?;
        for (k, h) in &c.hours_to_levels_at_design {
            writeln!(out, "  hours at design to {k:<22} {h:.0} h")?;
        }
        if let Some(f) = &c.fatigue {
            write!(out, "{}", report::fatigue::design_check_text(f))?;
        }
        writeln!(out, "  advances with                    {}", c.advances_with)?;
        for w in &c.warnings {
            writeln!(out, "  warning: {w}")?;
        }
    }
    writeln!(out, "\n{}", lifeledger::CAUTION)?;
    Ok(0)
}

fn library_with(config: &Option<PathBuf>) -> Result<MaterialLibrary> {
    match config {
        None => Ok(MaterialLibrary::embedded()),
        Some(p) => Ok(load(p)?.library),
    }
}

fn cmd_materials(action: MaterialsAction) -> Result<i32> {
    use lifeledger::physics::larson_miller::{rupture_strength_mpa, CurveBasis};
    use lifeledger::physics::units::kelvin_to_celsius as c;
    let mut out = std::io::stdout().lock();
    match action {
        MaterialsAction::List { config } => {
            let lib = library_with(&config)?;
            writeln!(out, "{:<14} {:>12} {:>16}  aliases", "grade", "T range °C", "σ range MPa")?;
            for m in lib.grades() {
                let lm = &m.larson_miller;
                writeln!(
                    out,
                    "{:<14} {:>5.0}–{:<6.0} {:>7.0}–{:<8.0}  {}",
                    m.grade,
                    c(lm.temperature_range_k[0]),
                    c(lm.temperature_range_k[1]),
                    lm.stress_range_mpa[0],
                    lm.stress_range_mpa[1],
                    m.aliases.join(", ")
                )?;
            }
            writeln!(out, "\n{}", lifeledger::CAUTION)?;
            Ok(0)
        }
        MaterialsAction::Show { grade, config, format } => {
            let lib = library_with(&config)?;
            let Some(m) = lib.get(&grade) else {
                bail!("unknown grade {grade:?}; known grades: {}", lib.names().join(", "));
            };
            if format == Format::Json {
                serde_json::to_writer_pretty(
                    &mut out,
                    &serde_json::json!({"material": m, "caution": lifeledger::CAUTION}),
                )?;
                writeln!(out)?;
                return Ok(0);
            }
            writeln!(out, "{} ({})", m.grade, m.aliases.join(", "))?;
            if !m.description.is_empty() {
                writeln!(out, "{}", m.description)?;
            }
            writeln!(
                out,
                "\nmelting point        {:.0} K ({:.0} °C)   source: {}",
                m.melting_point_k.value,
                c(m.melting_point_k.value),
                m.melting_point_k.source
            )?;
            match &m.creep_threshold_k {
                Some(t) => writeln!(
                    out,
                    "creep threshold      {:.0} K ({:.0} °C)   source: {}",
                    t.value,
                    c(t.value),
                    t.source
                )?,
                None => writeln!(out, "creep threshold      {:.0} K (0.4 Tm, rule of thumb)", m.creep_threshold_k())?,
            }
            if let Some(h) = &m.hardness_hv {
                writeln!(out, "hardness             {:.0} HV   source: {}", h.value, h.source)?;
            }
            let lm = &m.larson_miller;
            writeln!(
                out,
                "\nLarson-Miller        P = T[K]·({} + log10 t_r[h]) = Σ a_i·(log10 σ[MPa])^i",
                lm.constant_c
            )?;
            let coefficients: Vec<String> =
                lm.coefficients.iter().enumerate().map(|(i, a)| format!("a{i} = {a}")).collect();
            writeln!(out, "  coefficients       {}", coefficients.join(", "))?;
            writeln!(
                out,
                "  data range         {:.0}–{:.0} MPa, {:.0}–{:.0} °C",
                lm.stress_range_mpa[0],
                lm.stress_range_mpa[1],
                c(lm.temperature_range_k[0]),
                c(lm.temperature_range_k[1])
            )?;
            writeln!(out, "  minimum curve      {}", lm.minimum)?;
            writeln!(out, "  source             {}", lm.source)?;
            if let Some(n) = &m.norton {
                writeln!(
                    out,
                    "\nNorton-Arrhenius     ε̇[1/h] = {:e}·σ^{}·exp(−{}/(R·T))",
                    n.a_per_h, n.n, n.q_j_per_mol
                )?;
                writeln!(out, "  source             {}", n.source)?;
                let basis = serde_json::to_value(n.basis).ok().and_then(|v| v.as_str().map(str::to_string));
                writeln!(out, "  basis              {}", basis.unwrap_or_default())?;
                if let Some(note) = n.basis.strain_note() {
                    writeln!(out, "  NOTE               {note}")?;
                }
            }
            write!(out, "{}", report::fatigue::material_text(m))?;
            if let Some(why) = &m.unchecked_curve {
                writeln!(out, "\nNOT CHECKED against a second published source: {why}")?;
            }
            if !m.reference_rupture_strengths.is_empty() {
                writeln!(out, "\nreference rupture strengths against the master curve:")?;
                writeln!(
                    out,
                    "  {:>6} {:>9} {:>10} {:>10} {:>10}  source",
                    "°C", "hours", "ref MPa", "mean MPa", "min MPa"
                )?;
                for r in &m.reference_rupture_strengths {
                    let tk = r.temperature_c + 273.15;
                    writeln!(
                        out,
                        "  {:>6.0} {:>9.0} {:>10.1} {:>10} {:>10}  {}",
                        r.temperature_c,
                        r.hours,
                        r.stress_mpa,
                        fmt_opt(rupture_strength_mpa(lm, tk, r.hours, CurveBasis::Mean), 1),
                        fmt_opt(rupture_strength_mpa(lm, tk, r.hours, CurveBasis::Minimum), 1),
                        r.source
                    )?;
                    if let Some(reason) = &r.dropped {
                        writeln!(out, "  {:>6} DROPPED from the fit and the 5 % rule: {reason}", "")?;
                    }
                }
            }
            writeln!(out, "\nThese are screening values. {}", lifeledger::CAUTION)?;
            Ok(0)
        }
    }
}

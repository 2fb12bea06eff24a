//! Norton-Arrhenius fit checked against things outside lifeledger: the
//! constants behind synthetic data, numpy least squares on the same file,
//! and a three-test system solved by hand.

mod fit_support;

use fit_support::{assert_all_close, assert_close, floats, numpy_reference, Lcg};
use lifeledger::fit::{fit_norton, norton_toml, parse_rate_tests, NortonOptions};
use lifeledger::physics::norton::{creep_rate_per_h, GAS_CONSTANT};

/// Constants behind the synthetic tests (chosen for these tests, of the
/// size found for low-alloy steels): A = 100 /h/MPa^n, n = 5, Q = 300 kJ/mol.
const A: f64 = 100.0;
const N: f64 = 5.0;
const Q: f64 = 300_000.0;

fn true_ln_rate(stress_mpa: f64, temperature_k: f64) -> f64 {
    A.ln() + N * stress_mpa.ln() - Q / (GAS_CONSTANT * temperature_k)
}

/// Rate tests in 1/s (the file unit) with normal scatter `sigma` in ln rate.
fn synthetic_csv(seed: u64, sigma: f64) -> String {
    let mut rng = Lcg::new(seed);
    let mut s = String::from("temperature_c,stress_mpa,rate_per_s,specimen\n");
    let mut k = 0;
    for t_c in [540.0, 570.0, 600.0, 630.0] {
        for stress in [50.0, 70.0, 95.0, 130.0, 175.0] {
            let ln_rate = true_ln_rate(stress, t_c + 273.15) + sigma * rng.normal();
            k += 1;
            s.push_str(&format!("{t_c},{stress},{},N{k}\n", ln_rate.exp() / 3600.0));
        }
    }
    s
}

// (1) Without scatter the constants come back exactly; with seeded scatter
// of 0.2 in ln rate they come back within three standard errors.
#[test]
fn recovers_known_constants() {
    let exact = parse_rate_tests(&synthetic_csv(1, 0.0), "exact.csv").unwrap();
    let fit = fit_norton(&exact.tests, &NortonOptions::default()).unwrap();
    assert_close("n", fit.n, N, 1e-9, 1.0);
    assert_close("Q", fit.q_j_per_mol, Q, 1e-9, 1.0);
    assert_close("A", fit.a_per_h, A, 1e-7, 1.0);

    let noisy = parse_rate_tests(&synthetic_csv(2, 0.2), "noisy.csv").unwrap();
    let fit = fit_norton(&noisy.tests, &NortonOptions::default()).unwrap();
    let (n_se, q_se, a_se) = (fit.n_se.unwrap(), fit.q_se_j_per_mol.unwrap(), fit.ln_a_se.unwrap());
    assert!((fit.n - N).abs() < 3.0 * n_se, "n = {} ± {n_se}", fit.n);
    assert!((fit.q_j_per_mol - Q).abs() < 3.0 * q_se, "Q = {} ± {q_se}", fit.q_j_per_mol);
    assert!((fit.ln_a - A.ln()).abs() < 3.0 * a_se, "ln A = {} ± {a_se}", fit.ln_a);
    assert!((0.7..1.3).contains(&(fit.see_ln.unwrap() / 0.2)), "SEE {:?}", fit.see_ln);
    assert!(fit.warnings.is_empty(), "{:?}", fit.warnings);
}

// (2) numpy.linalg.lstsq with s²(XᵀX)⁻¹ on the same file (tests/fit_lstsq.py):
// ln A, n, Q, their standard errors and covariance, SEE, R², residuals,
// leverages and standardized residuals agree to 1e-8 relative.
#[test]
fn matches_numpy_least_squares() {
    let dir = tempfile::tempdir().unwrap();
    let text = synthetic_csv(9, 0.25);
    let path = fit_support::write(dir.path(), "rates.csv", &text);
    let fit = fit_norton(&parse_rate_tests(&text, "rates.csv").unwrap().tests, &NortonOptions::default()).unwrap();
    let r = numpy_reference(serde_json::json!({"model": "norton", "csv": path}));
    let beta = [fit.ln_a, fit.n, fit.q_j_per_mol];
    let se = [fit.ln_a_se.unwrap(), fit.n_se.unwrap(), fit.q_se_j_per_mol.unwrap()];
    assert_all_close("β", &beta, &floats(&r["beta"]), 1e-8, 0.0);
    assert_all_close("SE", &se, &floats(&r["se"]), 1e-8, 0.0);
    let cov = fit.covariance.as_ref().unwrap();
    for i in 0..3 {
        let want = floats(&r["cov"][i]);
        for j in 0..3 {
            let scale = (cov[i][i] * cov[j][j]).sqrt();
            assert_close(&format!("cov[{i}][{j}]"), cov[i][j], want[j], 1e-8, scale);
        }
    }
    let see = fit.see_ln.unwrap();
    assert_close("SEE", see, r["see"].as_f64().unwrap(), 1e-8, 0.0);
    assert_close("R²", fit.r_squared.unwrap(), r["r2"].as_f64().unwrap(), 1e-8, 0.0);
    let res: Vec<f64> = fit.residuals.iter().map(|x| x.residual).collect();
    assert_all_close("residuals", &res, &floats(&r["residuals"]), 1e-8, see);
    let lev: Vec<f64> = fit.residuals.iter().map(|x| x.leverage).collect();
    assert_all_close("leverage", &lev, &floats(&r["leverage"]), 1e-8, 1.0);
    let z: Vec<f64> = fit.residuals.iter().map(|x| x.standardized.unwrap()).collect();
    assert_all_close("standardized", &z, &floats(&r["standardized"]), 1e-8, 1.0);
}

// Exactly three tests: the 3×3 system, solved by hand here.
// Tests: (800 K, 100 MPa, 1e-6 /h), (800 K, 200 MPa, 3.2e-5 /h),
// (850 K, 100 MPa, r3). Same temperature: n = ln(3.2e-5/1e-6)/ln 2 =
// ln 32 / ln 2 = 5. Same stress: Q = R·ln(r3/1e-6)/(1/800 − 1/850); with
// r3 = 1e-6·e^3, Q = 3R/(1/800 − 1/850) = 3R·13600 = 40800·R J/mol.
// Then ln A = ln 1e-6 − 5·ln 100 + Q/(R·800) = ln 1e-6 − 5 ln 100 + 51.
#[test]
fn three_tests_solved_exactly() {
    let r3 = 1e-6 * 3f64.exp();
    let text = format!("temperature_k,stress_mpa,rate_per_h\n800,100,1e-6\n800,200,3.2e-5\n850,100,{r3}\n");
    let fit = fit_norton(&parse_rate_tests(&text, "three.csv").unwrap().tests, &NortonOptions::default()).unwrap();
    assert!(fit.exact && fit.see_ln.is_none() && fit.q_se_j_per_mol.is_none());
    assert_close("n", fit.n, 5.0, 1e-10, 1.0);
    assert_close("Q", fit.q_j_per_mol, 40_800.0 * GAS_CONSTANT, 1e-10, 1.0);
    assert_close("ln A", fit.ln_a, (1e-6f64).ln() - 5.0 * 100f64.ln() + 51.0, 1e-10, 1.0);
    assert!(fit.warnings.iter().any(|w| w.contains("exactly three tests")), "{:?}", fit.warnings);
    assert!(fit.warnings.iter().any(|w| w.contains("only two temperatures")), "{:?}", fit.warnings);
}

// (5) Round trip: the [norton] block deserializes into `NortonLaw` and the
// physics core gives back the fitted rates.
#[test]
fn norton_block_round_trip() {
    let fit = fit_norton(&parse_rate_tests(&synthetic_csv(4, 0.2), "rt.csv").unwrap().tests, &NortonOptions::default())
        .unwrap();
    #[derive(serde::Deserialize)]
    struct Block {
        norton: lifeledger::physics::material::NortonLaw,
    }
    let b: Block = toml::from_str(&norton_toml(&fit, "rt.csv").unwrap()).unwrap();
    assert_eq!(b.norton, fit.law("rt.csv"));
    for r in &fit.residuals {
        let rate = creep_rate_per_h(&b.norton, r.stress_mpa, r.temperature_k);
        assert_close("rate", rate, fit.rate_per_h(r.stress_mpa, r.temperature_k), 1e-12, 0.0);
        assert_close("ln rate", rate.ln(), r.ln_fitted, 1e-12, 1.0);
    }
}

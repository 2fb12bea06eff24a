//! The `lifeledger fit` command path, through `lifeledger::fit::run_to`
//! with arguments parsed by clap as the binary will: reports, files
//! written, and errors for bad input that name the file, the line and the
//! problem (and never panic).

use clap::Parser;
use lifeledger::fit::{run_to, FitCommand};
use lifeledger::physics::material::{LarsonMillerCurve, Material, NortonLaw};
use std::path::{Path, PathBuf};

#[derive(Parser)]
#[command(name = "lifeledger-fit")]
struct Cli {
    #[command(subcommand)]
    cmd: FitCommand,
}

fn parse(args: &[&str]) -> Result<FitCommand, String> {
    Cli::try_parse_from(std::iter::once("fit").chain(args.iter().copied())).map(|c| c.cmd).map_err(|e| e.to_string())
}

/// Run a fit command; Ok(stdout) or Err(the full error chain).
fn run(args: &[&str]) -> Result<String, String> {
    let cmd = parse(args)?;
    let mut out = Vec::new();
    run_to(&cmd, &mut out).map_err(|e| format!("{e:#}"))?;
    Ok(String::from_utf8(out).expect("utf-8 report"))
}

fn example(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("config/fit-examples").join(name)
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

#[test]
fn help_texts_are_valid_and_say_screening() {
    use clap::CommandFactory;
    Cli::command().debug_assert();
    for sub in ["larson-miller", "norton"] {
        let e = parse(&[sub, "--help"]).unwrap_err();
        let flat = e.split_whitespace().collect::<Vec<_>>().join(" ");
        assert!(flat.contains("screening fit") && flat.contains("responsible engineer"), "{e}");
    }
}

#[test]
fn larson_miller_example_writes_report_block_and_plot() {
    let dir = tempfile::tempdir().unwrap();
    let toml_path = dir.path().join("grade.toml");
    let svg_path = dir.path().join("lm.svg");
    let input = example("rupture-tests.csv");
    let out = run(&[
        "larson-miller",
        "--input",
        input.to_str().unwrap(),
        "--melting-point-c",
        "1490",
        "--grade",
        "my-heat",
        "--output",
        toml_path.to_str().unwrap(),
        "--plot",
        svg_path.to_str().unwrap(),
    ])
    .unwrap();
    for needle in [
        "chosen by BIC",
        "SEE",
        "R²",
        "k = 1.645",
        "Residuals by test",
        "responsible engineer",
        "Material block written",
    ] {
        assert!(out.contains(needle), "report lacks {needle:?}:\n{out}");
    }
    let m: Material = toml::from_str(&std::fs::read_to_string(&toml_path).unwrap()).unwrap();
    assert_eq!(m.grade, "my-heat");
    assert!((m.melting_point_k.value - 1763.15).abs() < 1e-9);
    assert!(m.larson_miller.source.contains("rupture-tests.csv"));
    let svg = std::fs::read_to_string(&svg_path).unwrap();
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
    // One marker per test (25 in the example file) plus one per legend entry.
    let tests = std::fs::read_to_string(&input).unwrap().lines().filter(|l| l.starts_with(char::is_numeric)).count();
    assert!(svg.matches("<circle").count() >= tests);
    assert_eq!(svg.matches("<polyline").count(), 3, "mean and two minimum curves");
}

#[test]
fn larson_miller_json_and_fragment() {
    let dir = tempfile::tempdir().unwrap();
    let toml_path = dir.path().join("lm.toml");
    let input = example("rupture-tests-us-units.csv");
    let out = run(&[
        "larson-miller",
        "--input",
        input.to_str().unwrap(),
        "--constant",
        "20",
        "--order",
        "1",
        "--k",
        "2",
        "--format",
        "json",
        "--output",
        toml_path.to_str().unwrap(),
    ])
    .unwrap();
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["fit"]["constant_c"], 20.0);
    assert_eq!(v["fit"]["order"], 1);
    assert_eq!(v["fit"]["k"], 2.0);
    let see = v["fit"]["see_log10_h"].as_f64().unwrap();
    assert!((v["fit"]["minimum_offset_log10_h"].as_f64().unwrap() - 2.0 * see).abs() < 1e-12);
    #[derive(serde::Deserialize)]
    struct Fragment {
        larson_miller: LarsonMillerCurve,
    }
    let f: Fragment = toml::from_str(&std::fs::read_to_string(&toml_path).unwrap()).unwrap();
    assert_eq!(f.larson_miller.constant_c, 20.0);
    assert_eq!(v["toml"].as_str().unwrap(), std::fs::read_to_string(&toml_path).unwrap());
    // °F and ksi were converted (NIST SP 811): the file spans 1000–1150 °F
    // and 10–42 ksi; 1000 °F = 810.93 K, 10 ksi = 68.94757 MPa.
    assert!((f.larson_miller.temperature_range_k[0] - (1000.0 + 459.67) / 1.8).abs() < 1e-9);
    assert!((f.larson_miller.temperature_range_k[1] - (1150.0 + 459.67) / 1.8).abs() < 1e-9);
    assert!((f.larson_miller.stress_range_mpa[0] - 10.0 * 6.894757).abs() < 1e-9);
    assert!((f.larson_miller.stress_range_mpa[1] - 42.0 * 6.894757).abs() < 1e-9);
}

#[test]
fn norton_example_writes_block_and_plot() {
    let dir = tempfile::tempdir().unwrap();
    let toml_path = dir.path().join("norton.toml");
    let svg_path = dir.path().join("n.svg");
    let out = run(&[
        "norton",
        "--input",
        example("creep-rate-tests.csv").to_str().unwrap(),
        "--output",
        toml_path.to_str().unwrap(),
        "--plot",
        svg_path.to_str().unwrap(),
    ])
    .unwrap();
    assert!(out.contains("linear least squares in ln") && out.contains("Q, J/mol"), "{out}");
    #[derive(serde::Deserialize)]
    struct Block {
        norton: NortonLaw,
    }
    let b: Block = toml::from_str(&std::fs::read_to_string(&toml_path).unwrap()).unwrap();
    assert!(b.norton.n > 4.0 && b.norton.n < 6.0, "{}", b.norton.n);
    let svg = std::fs::read_to_string(&svg_path).unwrap();
    assert_eq!(svg.matches("<polyline").count(), 3, "one line per test temperature");
    let json =
        run(&["norton", "--input", example("creep-rate-tests.csv").to_str().unwrap(), "--format", "json"]).unwrap();
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(v["fit"]["n_tests"], 12);
}

/// (4) Bad input: every error names the file, the line and the problem.
#[test]
fn bad_input_errors_name_file_line_and_problem() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let cases: Vec<(&str, &str, &[&str], Vec<&str>)> = vec![
        (
            "missing.csv",
            "# tests of heat X\ntemperature_c,rupture_h\n600,1000\n",
            &[],
            vec!["missing.csv: line 2: header has no stress column", "stress_mpa"],
        ),
        (
            "units.csv",
            "temperature_r,stress_mpa,rupture_h\n1500,100,1000\n",
            &[],
            vec!["units.csv: line 1", "unknown temperature unit", "temperature_c, temperature_k or temperature_f"],
        ),
        (
            "stress_units.csv",
            "temperature_c,stress_bar,rupture_h\n600,1000,1000\n",
            &[],
            vec!["line 1", "\"stress_bar\": unknown stress unit"],
        ),
        (
            "zero.csv",
            "temperature_c,stress_mpa,rupture_h\n600,100,1000\n625,100,300\n\n600,0,500\n",
            &[],
            vec!["zero.csv: line 5: stress_mpa = 0 must be positive"],
        ),
        (
            "negative_time.csv",
            "temperature_c,stress_mpa,rupture_h\n600,100,-5\n",
            &[],
            vec!["line 2: rupture_h = -5", "must be positive"],
        ),
        (
            "text.csv",
            "temperature_c,stress_mpa,rupture_h,heat\n600,100,1000,A\n600,1OO,1000,A\n",
            &[],
            vec!["text.csv: line 3: stress_mpa = \"1OO\" is not a number"],
        ),
        (
            "fields.csv",
            "temperature_c,stress_mpa,rupture_h\n600,100,1000\n600,100\n",
            &[],
            vec!["line 3: 2 fields, but the header (line 1) has 3 columns"],
        ),
        (
            "one_temperature.csv",
            "temperature_c,stress_mpa,rupture_h\n600,80,9000\n600,100,4000\n600,140,900\n600,200,120\n",
            &[],
            vec!["one_temperature.csv", "all 4 tests (lines 2-5) are at one temperature, 873.15 K", "--constant"],
        ),
        (
            "few_stresses.csv",
            "temperature_c,stress_mpa,rupture_h\n550,100,20000\n550,150,5000\n550,200,900\n600,100,3000\n600,150,600\n600,200,100\n",
            &["--order", "3"],
            vec!["order-3 master curve needs at least 4 distinct stresses; the tests have 3"],
        ),
        (
            "few_tests.csv",
            "temperature_c,stress_mpa,rupture_h\n550,100,20000\n550,150,5000\n600,100,3000\n600,150,600\n",
            &["--order", "2"],
            vec!["order-2 master curve with C fitted has 4 unknowns, so at least 5 tests are needed", "the file has 4"],
        ),
        (
            "rates_given.csv",
            "temperature_c,stress_mpa,rate_per_h\n600,100,1e-6\n",
            &[],
            vec!["line 1: header has no rupture-time column", "fit norton"],
        ),
        ("empty.csv", "", &[], vec!["empty.csv: line 1: the file is empty"]),
        ("header_only.csv", "temperature_c,stress_mpa,rupture_h\n", &[], vec!["no test data after the header on line 1"]),
    ];
    for (name, text, extra, needles) in cases {
        let path = write(d, name, text);
        let mut args = vec!["larson-miller", "--input", path.as_str()];
        args.extend_from_slice(extra);
        let e = run(&args).expect_err(name);
        for n in needles {
            assert!(e.contains(n), "{name}: error lacks {n:?}:\n{e}");
        }
    }
    let e = run(&["larson-miller", "--input", d.join("nope.csv").to_str().unwrap()]).unwrap_err();
    assert!(e.contains("cannot read test file") && e.contains("nope.csv"), "{e}");
}

#[test]
fn bad_norton_input_errors() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Stress rising with temperature in lock step, ln σ = ln 10 + 2000/T:
    // the columns ln σ and 1/T are collinear, so n and Q are not separable.
    let mut coupled = String::from("temperature_k,stress_mpa,rate_per_h\n");
    for t in [800.0f64, 850.0, 900.0, 950.0] {
        coupled.push_str(&format!("{t},{},1e-7\n", 10.0 * (2000.0 / t).exp()));
    }
    let cases: Vec<(&str, &str, Vec<&str>)> = vec![
        (
            "one_t.csv",
            "temperature_c,stress_mpa,rate_per_h\n600,80,1e-7\n600,100,3e-7\n600,140,2e-6\n",
            vec!["all 3 tests (lines 2-4) are at one temperature", "activation energy Q"],
        ),
        (
            "one_s.csv",
            "temperature_c,stress_mpa,rate_per_h\n550,100,1e-7\n575,100,3e-7\n600,100,2e-6\n",
            vec!["at one stress, 100 MPa", "stress exponent n"],
        ),
        (
            "two.csv",
            "temperature_c,stress_mpa,rate_per_h\n550,100,1e-7\n600,120,3e-7\n",
            vec!["at least 3 tests are needed; the file has 2"],
        ),
        (
            "coupled.csv",
            coupled.as_str(),
            vec!["stress and temperature vary together", "lines 2-5", "cannot be separated"],
        ),
        (
            "neg.csv",
            "temperature_c,stress_mpa,rate_per_s\n550,100,0\n",
            vec!["neg.csv: line 2: rate_per_s = 0", "positive"],
        ),
        (
            "rupture.csv",
            "temperature_c,stress_mpa,rupture_h\n550,100,1000\n",
            vec!["header has no creep-rate column", "fit larson-miller"],
        ),
        (
            "unit.csv",
            "temperature_c,stress_mpa,rate_per_min\n550,100,1e-6\n",
            vec!["line 1", "unknown creep-rate unit"],
        ),
    ];
    for (name, text, needles) in cases {
        let path = write(d, name, text);
        let r = run(&["norton", "--input", path.as_str()]);
        let e = r.expect_err(name);
        for n in needles {
            assert!(e.contains(n), "{name}: error lacks {n:?}:\n{e}");
        }
    }
}

#[test]
fn bad_options_are_refused() {
    let input = example("rupture-tests.csv");
    let i = input.to_str().unwrap();
    assert!(run(&["larson-miller", "--input", i, "--k=-1"]).unwrap_err().contains("--k -1"));
    assert!(run(&["larson-miller", "--input", i, "--constant", "0"]).unwrap_err().contains("--constant 0"));
    assert!(run(&["larson-miller", "--input", i, "--order", "4"]).is_err());
    assert!(run(&["larson-miller", "--input", i, "--grade", "x"]).is_err(), "--grade needs a melting point");
    assert!(run(&["larson-miller", "--input", i, "--melting-point-k", "1700", "--melting-point-c", "1400"]).is_err());
}

proptest::proptest! {
    // Never a panic: arbitrary lines under a valid header give a fit or an error.
    #[test]
    fn arbitrary_rows_never_panic(rows in proptest::collection::vec("[-0-9.eE,a\" ]{0,24}", 0..12)) {
        let text = format!("temperature_c,stress_mpa,rupture_h\n{}\n", rows.join("\n"));
        if let Ok(f) = lifeledger::fit::parse_rupture_tests(&text, "p.csv") {
            let _ = lifeledger::fit::fit_larson_miller(&f.tests, &Default::default());
        }
        let text = format!("temperature_k,stress_mpa,rate_per_h\n{}\n", rows.join("\n"));
        if let Ok(f) = lifeledger::fit::parse_rate_tests(&text, "p.csv") {
            let _ = lifeledger::fit::fit_norton(&f.tests, &Default::default());
        }
    }

    // Numeric rows (often degenerate: repeated temperatures or stresses) never panic either.
    #[test]
    fn numeric_rows_never_panic(rows in proptest::collection::vec((1u32..4, 1u32..4, 1u32..6), 0..9), order in 1usize..4) {
        let tests: Vec<lifeledger::fit::RuptureTest> = rows.iter().enumerate().map(|(i, (t, s, h))| lifeledger::fit::RuptureTest {
            line: i + 2, temperature_k: 800.0 + 25.0 * *t as f64, stress_mpa: 50.0 * *s as f64,
            rupture_h: 10f64.powi(*h as i32), heat: None, specimen: None,
        }).collect();
        let _ = lifeledger::fit::fit_larson_miller(&tests, &lifeledger::fit::LmOptions { order: Some(order), ..Default::default() });
        let _ = lifeledger::fit::fit_larson_miller(&tests, &Default::default());
    }
}

//! `lifeledger fit` on data in US customary units shows the input units
//! beside SI (report, JSON, plot), and a fitted grade file can be included
//! from a configuration directly (`[[material_file]]`), resolved relative
//! to the configuration file and checked by `check-config`.
//!
//! Real `lifeledger` runs on the shipped example files in
//! config/fit-examples. Conversions: NIST SP 811 (2008), appendix B.8:
//! 1 ksi = 6.894 757 MPa; T/K = (t/°F + 459.67)/1.8; T/°R = 1.8·T/K.

mod common;

use common::BoundedOutput;
use std::path::{Path, PathBuf};
use std::process::Command;

fn example(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("config/fit-examples").join(name)
}

fn run(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger")).args(args).bounded_output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into(),
        String::from_utf8_lossy(&o.stderr).into(),
    )
}

#[test]
fn fit_from_fahrenheit_and_ksi_reports_and_plots_the_input_units_too() {
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("lm.svg");
    let input = example("rupture-tests-us-units.csv");
    let (code, out, err) = run(&[
        "fit",
        "larson-miller",
        "--input",
        input.to_str().unwrap(),
        "--constant",
        "20",
        "--order",
        "2",
        "--plot",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    // The data range in the input units: the file spans 1000–1150 °F and
    // 10–42 ksi.
    let data = out.lines().find(|l| l.starts_with("Data")).unwrap_or_else(|| panic!("no Data line:\n{out}"));
    assert!(data.contains("1000–1150 °F"), "{data}");
    assert!(data.contains("10–42 ksi"), "{data}");
    assert!(data.contains("MPa") && data.contains(" K"), "SI stays: {data}");
    // Residual table: a column in each input unit, with the file's values
    // (first test: 1000 °F, 26 ksi).
    let head = out.lines().find(|l| l.contains("heat/specimen")).unwrap();
    assert!(head.contains("T, °F") && head.contains("σ, ksi") && head.contains("T, K"), "{head}");
    let first = out.lines().find(|l| l.contains("US-1")).unwrap();
    assert!(first.contains(" 1000.0 ") && first.contains(" 26.00 "), "{first}");
    // The plot: stress axis in ksi beside MPa, legend temperatures in °F.
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(s.contains("stress, MPa") && s.contains("stress, ksi"), "no ksi axis");
    assert!(s.contains("1000 °F"), "no °F in the legend");
    // P with T in °R beside P with T in K (the US form of the parameter).
    assert!(s.contains("°R"), "no P(°R) axis");

    // JSON names the input units.
    let (code, out, err) =
        run(&["fit", "larson-miller", "--input", input.to_str().unwrap(), "--constant", "20", "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["input_units"]["temperature"], "degF");
    assert_eq!(v["input_units"]["stress"], "ksi");
}

#[test]
fn fit_in_si_units_adds_no_second_unit() {
    let (code, out, err) =
        run(&["fit", "larson-miller", "--input", example("rupture-tests.csv").to_str().unwrap(), "--constant", "20"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("ksi") && !out.contains("°F"), "{out}");
}

#[test]
fn norton_fit_plot_shows_input_units() {
    // A rate file in °F and ksi, written from the SI example (same tests).
    let dir = tempfile::tempdir().unwrap();
    let si = std::fs::read_to_string(example("creep-rate-tests.csv")).unwrap();
    let mut lines = si.lines().filter(|l| !l.starts_with('#') && !l.trim().is_empty());
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let ti = header.iter().position(|h| *h == "temperature_c").expect("temperature_c column");
    let si_col = header.iter().position(|h| *h == "stress_mpa").expect("stress_mpa column");
    let mut us = header.iter().map(|h| h.replace("temperature_c", "temperature_f").replace("stress_mpa", "stress_ksi"));
    let mut text = us.by_ref().collect::<Vec<_>>().join(",") + "\n";
    for l in lines {
        let mut f: Vec<String> = l.split(',').map(String::from).collect();
        let c: f64 = f[ti].parse().unwrap();
        let mpa: f64 = f[si_col].parse().unwrap();
        f[ti] = format!("{}", c * 1.8 + 32.0);
        f[si_col] = format!("{}", mpa / 6.894757);
        text += &(f.join(",") + "\n");
    }
    let input = dir.path().join("rates-us.csv");
    std::fs::write(&input, text).unwrap();
    let svg = dir.path().join("n.svg");
    let (code, out, err) = run(&["fit", "norton", "--input", input.to_str().unwrap(), "--plot", svg.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    assert!(out.lines().any(|l| l.starts_with("Data") && l.contains("°F") && l.contains("ksi")), "{out}");
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(s.contains("stress, ksi") && s.contains("°F"), "{s}");
}

/// A plant whose casing uses a grade from an included file.
fn plant_with_material_file(path: &str) -> String {
    format!(
        r#"
[plant]
name = "Include Test Plant"

[[tag]]
name = "TE"
unit = "degC"
valid_range = [0.0, 700.0]

[[material_file]]
path = "{path}"

[[component]]
name = "CASING"
unit = "U1"
kind = "casing"
material = "MY-HEAT"
design_temperature = {{ value = 580.0, unit = "degC" }}
metal_temperature = "TE"
fixed_stress = {{ value = 120.0, unit = "MPa" }}
"#
    )
}

#[test]
fn a_fitted_grade_file_is_included_from_the_configuration() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("grades")).unwrap();
    let grade = dir.path().join("grades/my-heat.toml");
    let (code, _, err) = run(&[
        "fit",
        "larson-miller",
        "--input",
        example("rupture-tests.csv").to_str().unwrap(),
        "--melting-point-c",
        "1450",
        "--grade",
        "MY-HEAT",
        "--output",
        grade.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    // Relative to the configuration file, not to the working directory.
    let cfg = dir.path().join("plant.toml");
    std::fs::write(&cfg, plant_with_material_file("grades/my-heat.toml")).unwrap();
    let (code, out, err) = run(&["check-config", cfg.to_str().unwrap()]);
    assert_eq!(code, 0, "check-config refused the include:\n{out}\n{err}");
    // The grade in use is the file's, constants unchanged.
    let (code, out, err) =
        run(&["materials", "show", "MY-HEAT", "--config", cfg.to_str().unwrap(), "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    let shown: serde_json::Value = serde_json::from_str(&out).unwrap();
    let file: toml::Value = toml::from_str(&std::fs::read_to_string(&grade).unwrap()).unwrap();
    let coeffs: Vec<f64> =
        file["larson_miller"]["coefficients"].as_array().unwrap().iter().map(|v| v.as_float().unwrap()).collect();
    let shown_coeffs: Vec<f64> = shown
        .pointer("/material/larson_miller/coefficients")
        .or_else(|| shown.pointer("/larson_miller/coefficients"))
        .unwrap_or_else(|| panic!("no coefficients in {shown:#}"))
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(coeffs, shown_coeffs);
}

#[test]
fn include_problems_name_the_file_and_the_key() {
    let dir = tempfile::tempdir().unwrap();
    // A missing file.
    let cfg = dir.path().join("plant.toml");
    std::fs::write(&cfg, plant_with_material_file("grades/absent.toml")).unwrap();
    let (code, out, err) = run(&["check-config", cfg.to_str().unwrap()]);
    let all = format!("{out}{err}");
    assert_ne!(code, 0, "{all}");
    assert!(all.contains("absent.toml") && all.contains("path"), "{all}");
    // A misspelt key inside the included file: file, line and key named.
    let (code, _, e) = run(&[
        "fit",
        "larson-miller",
        "--input",
        example("rupture-tests.csv").to_str().unwrap(),
        "--melting-point-c",
        "1450",
        "--grade",
        "MY-HEAT",
        "--output",
        dir.path().join("my-heat.toml").to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{e}");
    let text = std::fs::read_to_string(dir.path().join("my-heat.toml")).unwrap().replace("constant_c", "costant_c");
    std::fs::write(dir.path().join("my-heat.toml"), &text).unwrap();
    let line = text.lines().position(|l| l.starts_with("costant_c")).unwrap() + 1;
    std::fs::write(&cfg, plant_with_material_file("my-heat.toml")).unwrap();
    let (code, out, err) = run(&["check-config", cfg.to_str().unwrap()]);
    let all = format!("{out}{err}");
    assert_ne!(code, 0, "{all}");
    assert!(all.contains("my-heat.toml"), "{all}");
    assert!(all.contains(&format!("line {line}")), "{all}");
    assert!(all.contains("costant_c") && all.contains("constant_c"), "did you mean: {all}");
    // A fragment (no grade) is not a grade file: say how to make one.
    let frag = dir.path().join("frag.toml");
    let (code, _, e) = run(&[
        "fit",
        "larson-miller",
        "--input",
        example("rupture-tests.csv").to_str().unwrap(),
        "--output",
        frag.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{e}");
    std::fs::write(&cfg, plant_with_material_file("frag.toml")).unwrap();
    let (code, out, err) = run(&["check-config", cfg.to_str().unwrap()]);
    let all = format!("{out}{err}");
    assert_ne!(code, 0, "{all}");
    assert!(all.contains("frag.toml") && all.contains("--melting-point"), "{all}");
}

#[test]
fn show_units_chooses_the_second_unit() {
    // SI data shown in US units too: the example spans 550–625 °C
    // (1022–1157 °F) and 80–300 MPa (11.6–43.5 ksi).
    let (code, out, err) = run(&[
        "fit",
        "larson-miller",
        "--input",
        example("rupture-tests.csv").to_str().unwrap(),
        "--constant",
        "20",
        "--show-units",
        "us",
    ]);
    assert_eq!(code, 0, "{err}");
    let data = out.lines().find(|l| l.starts_with("Data")).unwrap();
    assert!(data.contains("1022–1157 °F") && data.contains("ksi"), "{data}");
    // US data shown in SI only.
    let (code, out, err) = run(&[
        "fit",
        "larson-miller",
        "--input",
        example("rupture-tests-us-units.csv").to_str().unwrap(),
        "--constant",
        "20",
        "--show-units",
        "si",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("ksi") && !out.contains("°F"), "{out}");
}

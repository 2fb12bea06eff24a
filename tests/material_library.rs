//! Reference checks of the built-in material library (config/materials/*.toml).
//!
//! The library values are screening values, most of them written from
//! memory (each carries its own source text). These tests do not make them
//! authoritative. They check that
//! * every master curve reproduces the reference rupture strengths the file
//!   carries within 5 % in stress (a point may be dropped only with its
//!   reason written beside it), and that the reference set has more than one
//!   rupture time, so the Larson-Miller constant is tested by it;
//! * `config/materials/derive.py --check` passes: the files are what the
//!   derivation gives, and it applies the same 5 % rule;
//! * every curve agrees, within a stated band, with values from a second
//!   published source that is not the one its points come from (ASME
//!   allowable stresses; see `second_source_checks`), and says in which
//!   direction it departs (a curve above the second source is the
//!   non-conservative direction);
//! * the minimum curve lies below the mean, the curves are monotone,
//!   nothing is missing its source, and every Norton law states its basis.

use lifeledger::physics::larson_miller::{rupture_strength_mpa, CurveBasis};
use lifeledger::physics::material::Material;
use lifeledger::settings::library::MaterialLibrary;

/// Largest allowed deviation of the mean master curve from a reference
/// rupture strength the grade file carries (the library rule; derive.py
/// applies the same `ACCEPT_PCT`).
const FIT_TOLERANCE: f64 = 0.05;

fn grades() -> Vec<Material> {
    MaterialLibrary::embedded().grades().cloned().collect()
}

fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, a| acc * x + a)
}

#[test]
fn library_has_at_least_six_grades() {
    let all = grades();
    println!("{} grades: {:?}", all.len(), all.iter().map(|m| &m.grade).collect::<Vec<_>>());
    assert!(all.len() >= 6, "only {} grades", all.len());
}

#[test]
fn common_grades_are_found_by_grade_or_alias_case_insensitively() {
    let lib = MaterialLibrary::embedded();
    // (key asked for, grade expected)
    for (key, grade) in [
        ("P235GH", "P235GH"),
        ("sa-210 a1", "P235GH"),
        ("16Mo3", "16Mo3"),
        ("13CrMo4-5", "1.25Cr-0.5Mo"),
        ("t11", "1.25Cr-0.5Mo"),
        ("10CrMo9-10", "2.25Cr-1Mo"),
        ("P22", "2.25Cr-1Mo"),
        ("X10CrMoVNb9-1", "9Cr-1Mo-V"),
        ("t91", "9Cr-1Mo-V"),
        ("304h", "304H"),
        ("TP347H", "347H"),
        ("hp-nb", "HP-Nb"),
    ] {
        let m = lib.get(key).unwrap_or_else(|| panic!("{key} not in library"));
        assert_eq!(m.grade, grade, "{key}");
    }
    assert!(lib.get("no-such-grade").is_none());
}

#[test]
fn every_grade_and_alias_resolves_to_itself() {
    let lib = MaterialLibrary::embedded();
    for m in grades() {
        for key in std::iter::once(&m.grade).chain(m.aliases.iter()) {
            for k in [key.clone(), key.to_lowercase(), key.to_uppercase()] {
                let got = lib.get(&k).unwrap_or_else(|| panic!("{k} not found"));
                assert_eq!(got.grade, m.grade, "alias {k} of {} resolves to {}", m.grade, got.grade);
            }
        }
    }
}

#[test]
fn mean_curve_reproduces_reference_rupture_strengths() {
    // Reference values: mean creep rupture strengths from EN 10216-2 (informative
    // creep annex), the ECCC Grade 91 data sheet, NIMS creep data sheets
    // (SUS 304H TB, SUS 347H TB) and typical HP-Nb average curves, as recorded
    // with their individual sources in config/materials/*.toml; most of them
    // are recollections marked "from memory" there.
    let mut worst = (0.0f64, String::new());
    for m in grades() {
        assert!(
            m.reference_rupture_strengths.len() >= 4,
            "{}: only {} reference points",
            m.grade,
            m.reference_rupture_strengths.len()
        );
        for r in &m.reference_rupture_strengths {
            let t_k = r.temperature_c + 273.15;
            let s = rupture_strength_mpa(&m.larson_miller, t_k, r.hours, CurveBasis::Mean)
                .unwrap_or_else(|| panic!("{}: no strength at {} C {} h", m.grade, r.temperature_c, r.hours));
            let err = s / r.stress_mpa - 1.0;
            println!(
                "{:<14} {:>6.0} C {:>8.0} h  ref {:>6.1} MPa  curve {:>6.1} MPa  {:+6.2} %   [{}]{}",
                m.grade,
                r.temperature_c,
                r.hours,
                r.stress_mpa,
                s,
                100.0 * err,
                r.source,
                r.dropped.as_deref().map(|d| format!("  DROPPED: {d}")).unwrap_or_default()
            );
            if let Some(reason) = &r.dropped {
                assert!(
                    reason.trim().len() >= 20,
                    "{}: {} C {} h is dropped without a reason that says why ({reason:?})",
                    m.grade,
                    r.temperature_c,
                    r.hours
                );
                continue;
            }
            if err.abs() > worst.0 {
                worst = (err.abs(), format!("{} at {} C, {} h", m.grade, r.temperature_c, r.hours));
            }
            assert!(
                err.abs() <= FIT_TOLERANCE,
                "{}: {} C {} h: curve {s:.1} MPa vs reference {} MPa ({:+.1} %)",
                m.grade,
                r.temperature_c,
                r.hours,
                r.stress_mpa,
                100.0 * err
            );
        }
    }
    println!("worst fit error {:.2} % ({})", 100.0 * worst.0, worst.1);
}

#[test]
fn minimum_curve_lies_below_mean_curve() {
    for m in grades() {
        let lm = &m.larson_miller;
        let [t0, t1] = lm.temperature_range_k;
        for i in 0..=10 {
            let t = t0 + (t1 - t0) * i as f64 / 10.0;
            for hours in [1.0e3, 1.0e4, 1.0e5, 2.0e5] {
                let mean = rupture_strength_mpa(lm, t, hours, CurveBasis::Mean);
                let min = rupture_strength_mpa(lm, t, hours, CurveBasis::Minimum);
                if let (Some(mean), Some(min)) = (mean, min) {
                    assert!(min < mean, "{}: {t} K {hours} h: minimum {min} >= mean {mean}", m.grade);
                }
            }
        }
        // At every reference point both curves must exist.
        for r in &m.reference_rupture_strengths {
            let t = r.temperature_c + 273.15;
            let mean = rupture_strength_mpa(lm, t, r.hours, CurveBasis::Mean).unwrap();
            let min = rupture_strength_mpa(lm, t, r.hours, CurveBasis::Minimum).unwrap();
            assert!(min < mean, "{}: {} C {} h", m.grade, r.temperature_c, r.hours);
        }
    }
}

#[test]
fn master_curve_parameter_falls_with_stress_over_its_range() {
    for m in grades() {
        let lm = &m.larson_miller;
        let [s0, s1] = lm.stress_range_mpa;
        assert!(s0 > 0.0 && s1 > s0, "{}: stress range {s0}..{s1}", m.grade);
        let (x0, x1) = (s0.log10(), s1.log10());
        let n = 500;
        let mut prev = f64::INFINITY;
        for i in 0..=n {
            let x = x0 + (x1 - x0) * i as f64 / n as f64;
            let p = poly(&lm.coefficients, x);
            assert!(p < prev, "{}: P not decreasing at {:.2} MPa", m.grade, 10f64.powf(x));
            prev = p;
        }
    }
}

#[test]
fn every_value_has_a_source() {
    for m in grades() {
        let g = &m.grade;
        assert!(!g.trim().is_empty());
        assert!(!m.melting_point_k.source.trim().is_empty(), "{g}: melting point");
        if let Some(s) = &m.creep_threshold_k {
            assert!(!s.source.trim().is_empty(), "{g}: creep threshold");
        }
        if let Some(s) = &m.hardness_hv {
            assert!(!s.source.trim().is_empty(), "{g}: hardness");
        }
        assert!(!m.larson_miller.source.trim().is_empty(), "{g}: Larson-Miller");
        if let Some(n) = &m.norton {
            assert!(!n.source.trim().is_empty(), "{g}: Norton");
        }
        for r in &m.reference_rupture_strengths {
            assert!(!r.source.trim().is_empty(), "{g}: reference {} C {} h", r.temperature_c, r.hours);
        }
    }
}

#[test]
fn data_are_physically_sane() {
    for m in grades() {
        let g = &m.grade;
        let lm = &m.larson_miller;
        assert!((2..=4).contains(&lm.coefficients.len()), "{g}: {} coefficients", lm.coefficients.len());
        assert!((10.0..=40.0).contains(&lm.constant_c), "{g}: C = {}", lm.constant_c);
        let [t0, t1] = lm.temperature_range_k;
        assert!(t1 > t0, "{g}: temperature range");
        // The ranges are the span of the reference points (those not dropped).
        for r in m.reference_rupture_strengths.iter().filter(|r| r.dropped.is_none()) {
            let t = r.temperature_c + 273.15;
            assert!(t >= t0 - 1e-6 && t <= t1 + 1e-6, "{g}: {} C outside temperature range", r.temperature_c);
            assert!(
                r.stress_mpa >= lm.stress_range_mpa[0] && r.stress_mpa <= lm.stress_range_mpa[1],
                "{g}: {} MPa outside stress range",
                r.stress_mpa
            );
            assert!(r.hours > 0.0 && r.stress_mpa > 0.0);
        }
        let tm = m.melting_point_k.value;
        assert!((1400.0..2000.0).contains(&tm), "{g}: melting point {tm} K");
        let thr = m.creep_threshold_k();
        assert!(thr > 500.0 && thr < t0, "{g}: creep threshold {thr} K not below the data range {t0} K");
        if let Some(h) = &m.hardness_hv {
            assert!((80.0..400.0).contains(&h.value), "{g}: hardness {}", h.value);
        }
        if let Some(n) = &m.norton {
            assert!(n.a_per_h > 0.0 && n.n >= 1.0 && n.n <= 15.0 && n.q_j_per_mol > 1.0e5, "{g}: Norton {n:?}");
        }
    }
}

#[test]
fn reference_points_span_more_than_one_rupture_time() {
    // With every point at one rupture time, T·(C + log10 t) is the same
    // affine map of T for any C, so the points cannot test C, and every life
    // away from that time rests on the convention alone (the 1.25Cr-0.5Mo
    // curve fitted to its 100 000 h values alone came out 17-30 % above the
    // 10 000 h values recalled from the same table). Larson & Miller 1952.
    for m in grades() {
        let mut times: Vec<f64> =
            m.reference_rupture_strengths.iter().filter(|r| r.dropped.is_none()).map(|r| r.hours).collect();
        times.sort_by(f64::total_cmp);
        times.dedup();
        assert!(times.len() >= 2, "{}: reference points only at {times:?} h; C is not tested by them", m.grade);
    }
}

#[test]
fn derive_py_check_passes() {
    // The shipped files must be what config/materials/derive.py derives from
    // their reference points, and derive.py applies the 5 % rule itself.
    let (ok, out) = derive_py(&["--check"]);
    println!("{out}");
    assert!(
        ok,
        "config/materials/derive.py --check failed: a grade file is stale (run derive.py --write) or breaks the \
         library rule.\n--- stdout (tail) ---\n{}",
        out.lines().rev().take(15).collect::<Vec<_>>().into_iter().rev().collect::<Vec<_>>().join("\n")
    );
}

/// Runs `python3 config/materials/derive.py ARGS` from the repository root
/// with a bounded wait; returns (success, stdout).
fn derive_py(args: &[&str]) -> (bool, String) {
    let root = env!("CARGO_MANIFEST_DIR");
    let mut child = std::process::Command::new("python3")
        .arg("config/materials/derive.py")
        .args(args)
        .current_dir(root)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("python3 is needed to run config/materials/derive.py (tests/run installs numpy)");
    // Bounded wait: 3000 polls 100 ms apart.
    for _ in 0..3000 {
        if let Some(status) = child.try_wait().expect("waiting for derive.py") {
            let out = child.wait_with_output().expect("derive.py output");
            let stderr = String::from_utf8_lossy(&out.stderr);
            assert!(stderr.trim().is_empty() || status.success(), "derive.py {args:?}: {stderr}");
            return (status.success(), String::from_utf8_lossy(&out.stdout).into_owned());
        }
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
    let _ = child.kill();
    let _ = child.wait();
    panic!("config/materials/derive.py {args:?} did not finish after 3000 polls 100 ms apart; killed it");
}

#[test]
fn a_dropped_point_stays_out_of_the_fit_and_the_rule_but_is_still_shown() {
    // A 16Mo3 file with one extra point far off the curve. Marked dropped,
    // derive.py leaves the curve, ranges and Norton law exactly as shipped,
    // the file passes the rule, and the point stays listed with its reason;
    // the same point not dropped breaks the rule.
    let root = env!("CARGO_MANIFEST_DIR");
    let text = std::fs::read_to_string(format!("{root}/config/materials/0.5mo-16mo3.toml")).unwrap();
    let extra = "\n[[reference_rupture_strengths]]\ntemperature_c = 500.0\nhours = 100000.0\nstress_mpa = 150.0\n\
                 source = \"test point, 50 % above the annex value\"\n";
    let reason = "test: a point far off the curve, left out on purpose";
    let dir = tempfile::tempdir().unwrap();
    let dropped = dir.path().join("dropped.toml");
    std::fs::write(&dropped, format!("{text}{extra}dropped = \"{reason}\"\n")).unwrap();
    let (_, out) = derive_py(&["--write", dropped.to_str().unwrap()]);
    assert!(out.contains(&format!("dropped: {reason}")), "{out}");
    let (ok, out) = derive_py(&["--check", dropped.to_str().unwrap()]);
    assert!(ok, "a dropped point must not fail the rule:\n{out}");
    let load = |t: &str| MaterialLibrary::from_sources([("x.toml", t)]).unwrap().grades().next().unwrap().clone();
    let shipped = load(&text);
    let derived = load(&std::fs::read_to_string(&dropped).unwrap());
    assert_eq!(derived.larson_miller.coefficients, shipped.larson_miller.coefficients);
    assert_eq!(derived.larson_miller.stress_range_mpa, shipped.larson_miller.stress_range_mpa);
    assert_eq!(derived.larson_miller.temperature_range_k, shipped.larson_miller.temperature_range_k);
    let (a, b) = (derived.norton.unwrap(), shipped.norton.unwrap());
    assert_eq!((a.a_per_h, a.n, a.q_j_per_mol), (b.a_per_h, b.n, b.q_j_per_mol));
    assert!(derived.larson_miller.source.contains("1 more dropped, each with its reason"));
    assert_eq!(derived.reference_rupture_strengths.last().unwrap().dropped.as_deref(), Some(reason));

    let kept = dir.path().join("kept.toml");
    std::fs::write(&kept, format!("{text}{extra}")).unwrap();
    let (ok, out) = derive_py(&["--check", kept.to_str().unwrap()]);
    assert!(!ok, "the same point not dropped must fail --check:\n{out}");
    assert!(out.contains("FAILS ACCEPTANCE"), "{out}");
}

/// One value from a second published source, as the mean 100 000 h rupture
/// strength it implies.
struct SecondSource {
    grade: &'static str,
    temperature_f: f64,
    /// Allowable stress S, ksi.
    allowable_ksi: f64,
    source: &'static str,
}

/// ASME allowable stresses in the time-dependent range are the lowest of
/// 100 % of the average stress for 0.01 %/1000 h creep rate, 67 % of the
/// average stress for rupture in 100 000 h and 80 % of the minimum stress
/// for rupture in 100 000 h (ASME B31.3 302.3.2(d), the same rule as ASME
/// Section II-D Appendix 1 below 815 °C; a published rule of the codes).
/// So S / 0.67 is a lower bound of ASME's mean 100 000 h rupture strength,
/// and at the top temperatures of a table, where rupture governs, close to
/// it (up to ~8 % below it where the 80 %-of-minimum criterion governs).
/// Only the highest table temperatures inside a curve's data range are used
/// (the top two where both are known, else the top one known). The ASME
/// values come from US heats, a different data base from the EN / ECCC /
/// NIMS values the curves were fitted to.
const SECOND_SOURCES: &[SecondSource] = &[
    SecondSource {
        grade: "1.25Cr-0.5Mo",
        temperature_f: 1000.0,
        allowable_ksi: 6.3,
        source: "ASME B31.3 Table A-1 (and B31.1), A335 P11, as reproduced at metalspiping.com \
                 'ASTM A335 P11 Allowable Stress - Temperature Ratings' (read, not recalled); P11 is \
                 the US 1.25Cr-0.5Mo-Si grade, not 13CrMo4-5 itself",
    },
    SecondSource {
        grade: "1.25Cr-0.5Mo",
        temperature_f: 1050.0,
        allowable_ksi: 4.2,
        source: "ASME B31.3 Table A-1, A335 P11, as above (read)",
    },
    SecondSource {
        grade: "9Cr-1Mo-V",
        temperature_f: 1150.0,
        allowable_ksi: 7.0,
        source: "ASME B31.1 Table A-1 (t < 3 in; B31.3 the same), A335 P91, as reproduced at \
                 metalspiping.com 'The Allowable Stress - Temperature Chart for ASTM A335 P91' (read)",
    },
    SecondSource {
        grade: "9Cr-1Mo-V",
        temperature_f: 1200.0,
        allowable_ksi: 4.3,
        source: "ASME B31.1 Table A-1, A335 P91, as above (read)",
    },
    SecondSource {
        grade: "2.25Cr-1Mo",
        temperature_f: 1050.0,
        allowable_ksi: 5.7,
        source: "ASME Section II-D Table 1A, SA-213 T22 / SA-335 P22, from memory, low confidence \
                 (5.7-5.8 ksi recalled; the lower value is used, the stricter test of non-conservatism)",
    },
    SecondSource {
        grade: "2.25Cr-1Mo",
        temperature_f: 1100.0,
        allowable_ksi: 3.8,
        source: "ASME Section II-D Table 1A, SA-213 T22 / SA-335 P22, from memory, low confidence \
                 (3.8-4.2 ksi recalled; the lower value is used)",
    },
    SecondSource {
        grade: "304H",
        temperature_f: 1300.0,
        allowable_ksi: 3.7,
        source: "ASME Section II-D Table 1A, SA-213 TP304H, from memory",
    },
    SecondSource {
        grade: "304H",
        temperature_f: 1400.0,
        allowable_ksi: 2.3,
        source: "ASME Section II-D Table 1A, SA-213 TP304H, from memory",
    },
    SecondSource {
        grade: "347H",
        temperature_f: 1300.0,
        allowable_ksi: 4.4,
        source: "ASME Section II-D Table 1A, SA-213 TP347H, from memory, low confidence",
    },
    SecondSource {
        grade: "16Mo3",
        temperature_f: 950.0,
        allowable_ksi: 8.2,
        source: "ASME Section II-D Table 1A, SA-209 T1 / SA-335 P1 (C-0.5Mo), from memory, low \
                 confidence; the only table temperature inside the 16Mo3 data range where rupture governs",
    },
    SecondSource {
        grade: "P235GH",
        temperature_f: 850.0,
        allowable_ksi: 7.1,
        source: "ASME Section II-D (1998) Table 1A, SA-192 carbon steel seamless tube (47 ksi), read from \
                 a scanned copy found by search (line identified from the line list of a later edition, \
                 not certain); the next table temperature, 900 F, is above the P235GH data range",
    },
];

/// Grades without a second source, and why. Each must be named here, so a
/// gap is a visible decision, not an omission.
const NO_SECOND_SOURCE: &[(&str, &str)] = &[(
    "HP-Nb",
    "cast HP-Nb reformer tube alloy: no code allowable stress and no published average rupture curve other \
     than the manufacturers' (the kind of source the fit points already come from) could be recalled or \
     found; a value from a micro-alloyed or HK-40 grade would test a different alloy",
)];

/// How far the mean curve may sit above the second source (the
/// non-conservative direction: longer lives than the second source implies)
/// and below it. Screening data from two data bases scatter by ±20 % in
/// stress (common practice: the minimum curve is 0.8 × mean), so a curve
/// more than 15 % above is flagged as non-conservative and one more than
/// 20 % below as probably wrong (over-conservative).
const ABOVE_SECOND_SOURCE: f64 = 0.15;
const BELOW_SECOND_SOURCE: f64 = 0.20;

#[test]
fn mean_curve_agrees_with_a_second_published_source() {
    const MPA_PER_KSI: f64 = 6.894_757; // 1 ksi = 6.894757 MPa (exact to 7 digits)
    const F_AVG: f64 = 0.67; // ASME factor on the average 100 000 h rupture strength
    let lib = MaterialLibrary::embedded();
    let mut failures = vec![];
    for m in grades() {
        let checks: Vec<&SecondSource> = SECOND_SOURCES.iter().filter(|c| c.grade == m.grade).collect();
        if checks.is_empty() {
            assert!(
                NO_SECOND_SOURCE.iter().any(|(g, why)| *g == m.grade && !why.is_empty()),
                "{}: no second-source check and no stated reason why not",
                m.grade
            );
            println!(
                "{:<14} no second source: {}",
                m.grade,
                NO_SECOND_SOURCE.iter().find(|(g, _)| *g == m.grade).unwrap().1
            );
            continue;
        }
        for c in checks {
            let t_c = (c.temperature_f - 32.0) / 1.8;
            let t_k = t_c + 273.15;
            let lm = &lib.get(c.grade).unwrap().larson_miller;
            assert!(
                t_k >= lm.temperature_range_k[0] && t_k <= lm.temperature_range_k[1],
                "{}: {} F is outside the curve's data range",
                c.grade,
                c.temperature_f
            );
            let implied = c.allowable_ksi * MPA_PER_KSI / F_AVG;
            let curve = rupture_strength_mpa(lm, t_k, 1.0e5, CurveBasis::Mean).unwrap();
            let dev = curve / implied - 1.0;
            let direction = if dev > 0.0 { "ABOVE: non-conservative direction" } else { "below: conservative" };
            println!(
                "{:<14} {:>6.1} C  S {:>4.1} ksi -> mean >= {:>6.1} MPa  curve {:>6.1} MPa  {:+6.1} % ({direction})  [{}]",
                c.grade,
                t_c,
                c.allowable_ksi,
                implied,
                curve,
                100.0 * dev,
                c.source
            );
            if !(-BELOW_SECOND_SOURCE..=ABOVE_SECOND_SOURCE).contains(&dev) {
                failures.push(format!(
                    "{} at {:.1} C: curve {curve:.1} MPa vs {implied:.1} MPa implied by {} ({:+.1} %)",
                    c.grade,
                    t_c,
                    c.source,
                    100.0 * dev
                ));
            }
        }
    }
    for (g, _) in NO_SECOND_SOURCE {
        assert!(lib.get(g).is_some(), "NO_SECOND_SOURCE names {g}, which is not in the library");
    }
    assert!(
        failures.is_empty(),
        "mean curves outside +{:.0} % / -{:.0} % of a second source:\n{}",
        100.0 * ABOVE_SECOND_SOURCE,
        100.0 * BELOW_SECOND_SOURCE,
        failures.join("\n")
    );
}

#[test]
fn every_norton_law_states_its_basis() {
    use lifeledger::physics::material::NortonBasis;
    // The shipped Norton blocks are tangents to the rupture curves
    // (config/materials/derive.py), and must say so: strain computed with
    // them is no independent evidence.
    for m in grades() {
        if let Some(n) = &m.norton {
            assert_eq!(n.basis, NortonBasis::DerivedFromRupture, "{}: Norton basis", m.grade);
            assert!(n.basis.strain_note().unwrap().contains("not independent evidence"));
        }
    }
}

/// Elastic and thermal data of the grades that carry them are within the
/// ranges every steel handbook gives (common practice): E at 20 °C 190-220
/// GPa, falling with temperature; instantaneous α 10-20e-6 /K, rising;
/// ν = 0.3; thermal diffusivity 3-15 mm²/s. Each table has a source; a grade
/// with a fatigue block names a curve or says why not.
#[test]
fn elastic_and_fatigue_data_are_sane_and_sourced() {
    let grades = grades();
    let with: Vec<&Material> = grades.iter().filter(|m| m.elastic.is_some()).collect();
    assert!(with.len() >= 6, "most shipped steels carry elastic data");
    for m in with {
        let e = m.elastic.as_ref().unwrap();
        for t in [&e.youngs_modulus_mpa, &e.thermal_expansion_per_k, &e.thermal_diffusivity_mm2_per_s] {
            assert!(t.problem().is_none(), "{}: {:?}", m.grade, t.problem());
            assert!(t.source.len() > 20, "{}: source missing", m.grade);
        }
        let e20 = e.youngs_modulus_mpa.at_k(293.15);
        assert!((190_000.0..=220_000.0).contains(&e20), "{}: E(20 °C) = {e20}", m.grade);
        assert!(e.youngs_modulus_mpa.values.windows(2).all(|w| w[1] < w[0]), "{}: E must fall", m.grade);
        assert!(e.thermal_expansion_per_k.values.iter().all(|a| (10e-6..=20e-6).contains(a)), "{}", m.grade);
        assert!(e.thermal_expansion_per_k.values.windows(2).all(|w| w[1] > w[0]), "{}: α must rise", m.grade);
        assert_eq!(e.poisson_ratio.value, 0.3, "{}", m.grade);
        assert!(e.thermal_diffusivity_mm2_per_s.values.iter().all(|a| (3.0..=15.0).contains(a)), "{}", m.grade);
        let f = m.fatigue.as_ref().unwrap_or_else(|| panic!("{}: elastic data but no [fatigue] block", m.grade));
        assert!(!f.curve_source.is_empty());
        if let Some(p) = &f.creep_fatigue_envelope {
            assert!(p.fatigue > 0.0 && p.fatigue < 1.0 && p.creep > 0.0 && p.creep < 1.0, "{}", m.grade);
            assert!(p.source.contains("from memory") || p.source.contains("ASME"), "{}", m.grade);
        }
    }
}

/// A grade without a second-source check says so to its users: the grade
/// file carries the reason (`unchecked_curve`), `materials show` prints it
/// and check-config warns for a creep part that uses the grade. Common
/// practice: a curve nobody has checked independently is not used for a
/// life figure without the supplier's own data.
#[test]
fn a_grade_without_a_second_source_is_flagged_where_it_is_used() {
    for m in grades() {
        let listed = NO_SECOND_SOURCE.iter().any(|(g, _)| *g == m.grade);
        assert_eq!(
            listed,
            m.unchecked_curve.as_deref().is_some_and(|w| !w.trim().is_empty()),
            "{}: listed without a second source here ({listed}) but its file's unchecked_curve says otherwise",
            m.grade
        );
    }
    let bin = env!("CARGO_BIN_EXE_lifeledger");
    let show = std::process::Command::new(bin).args(["materials", "show", "HP-Nb"]).output().unwrap();
    let text = String::from_utf8_lossy(&show.stdout);
    assert!(text.contains("NOT CHECKED against a second published source"), "materials show HP-Nb:\n{text}");
    let dir = tempfile::tempdir().unwrap();
    let cfg = dir.path().join("plant.toml");
    std::fs::write(
        &cfg,
        "[plant]\nname = \"Eastmoor reformer\"\n\
         [[tag]]\nname = \"R1.TE-1\"\nunit = \"degC\"\nvalid_range = [0, 1200]\n\
         [[component]]\nname = \"R1-TUBE-07\"\nkind = \"furnace_tube\"\nmaterial = \"HP-Nb\"\n\
         metal_temperature = \"R1.TE-1\"\npressure = { value = 30, unit = \"bar\" }\n\
         design_temperature = { value = 900, unit = \"degC\" }\ndesign_pressure = { value = 30, unit = \"bar\" }\n\
         [component.geometry]\noutside_diameter = { value = 114, unit = \"mm\" }\nwall = { value = 12, unit = \"mm\" }\n",
    )
    .unwrap();
    let out = std::process::Command::new(bin).args(["check-config", "--file-only"]).arg(&cfg).output().unwrap();
    let all = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "check-config failed:\n{all}");
    assert!(all.contains("not checked against a second source") && all.contains("R1-TUBE-07"), "check-config:\n{all}");
}

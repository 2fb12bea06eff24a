//! Engine throughput: samples per second on one core, for a plant of
//! pressure parts fed by one temperature and one pressure tag each, sampled
//! together once a minute with slowly varying values (the common case).
//!
//! `ingest_ramping_fatigue_1min` is the ramping case with fatigue on
//! every part (`[component.fatigue]`, thermal stress from the temperature
//! tag's rate by the quasi-steady hollow cylinder): what the rainflow
//! counter and the stress at the location add per piece.
//!
//! Run: `cargo bench --bench engine`

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use lifeledger::engine::{Engine, Quality, Sample};
use lifeledger::settings::validate::plan_settings;

fn config(n: usize) -> String {
    let mut s = String::new();
    for i in 0..n {
        s.push_str(&format!(
            "[[tag]]\nname = \"TE{i}\"\nunit = \"degC\"\n[[tag]]\nname = \"PT{i}\"\nunit = \"bar\"\n\
             [[component]]\nname = \"C{i}\"\nkind = \"tube\"\nmaterial = \"2.25Cr-1Mo\"\n\
             design_temperature = {{ value = 570, unit = \"degC\" }}\ndesign_pressure = {{ value = 180, unit = \"bar\" }}\n\
             metal_temperature = \"TE{i}\"\npressure = \"PT{i}\"\n\
             [component.geometry]\noutside_diameter = {{ value = 44.5, unit = \"mm\" }}\nwall = {{ value = 6.3, unit = \"mm\" }}\n"
        ));
    }
    s
}

/// [`config`] with fatigue at a nozzle bore of every part.
fn config_fatigue(n: usize) -> String {
    let mut s = String::new();
    for (i, part) in config(n).split("[[tag]]\nname = \"TE").skip(1).enumerate() {
        s.push_str("[[tag]]\nname = \"TE");
        s.push_str(part);
        s.push_str(&format!(
            "[component.fatigue]\nlocation = \"nozzle bore\"\npressure_stress_factor = 2.5\n\
             thermal_stress_factor = 1.3\nfluid_temperature = \"TE{i}\"\nhysteresis_gate_mpa = 5\n"
        ));
    }
    s
}

fn samples(n_comp: usize, minutes: usize) -> Vec<Sample> {
    let mut v = Vec::with_capacity(n_comp * 2 * minutes);
    for m in 0..minutes {
        for c in 0..n_comp {
            let t = 545.0 + 10.0 * ((m as f64) / 240.0 + c as f64).sin();
            let p = 175.0 + 3.0 * ((m as f64) / 90.0).cos();
            let ms = m as i64 * 60_000;
            v.push(Sample { tag: (2 * c) as u32, time_ms: ms, value: t, quality: Quality::Good });
            v.push(Sample { tag: (2 * c + 1) as u32, time_ms: ms, value: p, quality: Quality::Good });
        }
    }
    v
}

fn bench(c: &mut Criterion) {
    let n_comp = 10;
    let plan = plan_settings("bench", toml::from_str(&config(n_comp)).unwrap()).unwrap().plan;
    let data = samples(n_comp, 10_000);
    let mut g = c.benchmark_group("engine");
    g.throughput(Throughput::Elements(data.len() as u64));
    g.bench_function("ingest_ramping_1min", |b| {
        b.iter_batched(
            || Engine::new(plan.clone()),
            |mut e| {
                for s in &data {
                    let _ = e.ingest(s);
                }
                e
            },
            criterion::BatchSize::LargeInput,
        )
    });
    let plan_fatigue = plan_settings("bench", toml::from_str(&config_fatigue(n_comp)).unwrap()).unwrap().plan;
    assert!(plan_fatigue.components.iter().all(|c| c.fatigue.is_some()));
    g.bench_function("ingest_ramping_fatigue_1min", |b| {
        b.iter_batched(
            || Engine::new(plan_fatigue.clone()),
            |mut e| {
                for s in &data {
                    let _ = e.ingest(s);
                }
                e
            },
            criterion::BatchSize::LargeInput,
        )
    });
    // Steady values: the exact constant-input path.
    let steady: Vec<Sample> =
        data.iter().map(|s| Sample { value: if s.tag % 2 == 0 { 545.0 } else { 175.0 }, ..*s }).collect();
    g.bench_function("ingest_steady_1min", |b| {
        b.iter_batched(
            || Engine::new(plan.clone()),
            |mut e| {
                for s in &steady {
                    let _ = e.ingest(s);
                }
                e
            },
            criterion::BatchSize::LargeInput,
        )
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

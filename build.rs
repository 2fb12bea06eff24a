//! Embeds the shipped material library (config/materials/*.toml) into the
//! binary so that the service runs on its defaults with no files beside it.

use std::{env, fs, path::Path};

fn main() {
    let dir = Path::new("config/materials");
    println!("cargo:rerun-if-changed=config/materials");
    let mut entries: Vec<_> =
        fs::read_dir(dir).map(|rd| rd.filter_map(|e| e.ok()).map(|e| e.path()).collect()).unwrap_or_default();
    entries.retain(|p| p.extension().is_some_and(|e| e == "toml"));
    entries.sort();
    let mut out = String::from("[\n");
    for p in entries {
        println!("cargo:rerun-if-changed={}", p.display());
        let abs = fs::canonicalize(&p).expect("material file path");
        let name = p.file_name().unwrap().to_string_lossy().to_string();
        out.push_str(&format!("    ({name:?}, include_str!({:?})),\n", abs.display().to_string()));
    }
    out.push(']');
    let dest = Path::new(&env::var("OUT_DIR").unwrap()).join("materials.rs");
    fs::write(dest, out).expect("write materials.rs");
}

//! Grade files included from a configuration:
//!
//! ```toml
//! [[material_file]]
//! path = "grades/my-heat.toml"
//! ```
//!
//! A grade file is one material in the library format (`config/materials`),
//! as `lifeledger fit larson-miller --melting-point-c … --grade NAME
//! --output FILE` writes it, so a fitted grade is used as written instead
//! of being copied into a `[[material]]` block by hand. A relative path is
//! resolved against the directory of the configuration file (not the
//! working directory, which differs between a shell and a service
//! manager). Every problem names the configuration key, the included file
//! and, for its content, the line and key inside it (with the nearest
//! known key for a misspelt one).

use super::schema_check::schema_problems_of;
use super::validate::ConfigProblem;
use crate::physics::material::Material;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// One `[[material_file]]` entry.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MaterialFileSettings {
    /// The grade file, relative to the configuration file's directory.
    pub path: String,
}

/// `path` resolved against the directory of `config_file`.
pub fn resolve(config_file: &Path, path: &str) -> PathBuf {
    let p = Path::new(path);
    if p.is_absolute() {
        p.to_path_buf()
    } else {
        config_file.parent().unwrap_or(Path::new(".")).join(p)
    }
}

/// Read every included grade file: the grades with the path they came
/// from (as resolved), and the problems found.
pub fn read_all(config_file: &str, files: &[MaterialFileSettings]) -> (Vec<(String, Material)>, Vec<ConfigProblem>) {
    let mut grades = vec![];
    let mut problems = vec![];
    for (i, f) in files.iter().enumerate() {
        let place = format!("[[material_file]] #{} \"{}\"", i + 1, f.path);
        let problem = |problem: String, fix: &str| ConfigProblem {
            place: place.clone(),
            key: "path".into(),
            problem,
            fix: fix.into(),
        };
        if f.path.trim().is_empty() {
            problems.push(problem("empty path".into(), "give the path of a grade file (TOML)"));
            continue;
        }
        let path = resolve(Path::new(config_file), &f.path);
        let shown = path.display().to_string();
        let text = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) => {
                problems.push(problem(
                    format!("cannot read {shown}: {e}"),
                    "a relative path is taken from the configuration file's directory",
                ));
                continue;
            }
        };
        // A `[larson_miller]` fragment is no grade: say how to get one.
        if let Ok(t) = toml::from_str::<toml::Table>(&text) {
            if !t.contains_key("grade") {
                problems.push(problem(
                    format!("{shown} is not a complete grade file (it has no `grade`)"),
                    "write one with `lifeledger fit larson-miller --input TESTS --melting-point-c C --grade NAME \
                     --output FILE`, or give the table a grade, melting_point_k and description",
                ));
                continue;
            }
        }
        let found = schema_problems_of::<Material>(&text);
        if !found.is_empty() {
            for mut p in found {
                p.place = format!("{place}: {shown} {}", p.place);
                problems.push(p);
            }
            continue;
        }
        match toml::from_str::<Material>(&text) {
            Ok(m) => grades.push((shown, m)),
            Err(e) => problems.push(problem(
                format!("{shown}: {}", e.message().trim()),
                "correct the grade file (format as in config/materials)",
            )),
        }
    }
    (grades, problems)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_paths_follow_the_configuration_file() {
        assert_eq!(resolve(Path::new("/etc/ll/plant.toml"), "grades/a.toml"), PathBuf::from("/etc/ll/grades/a.toml"));
        assert_eq!(resolve(Path::new("plant.toml"), "a.toml"), PathBuf::from("a.toml"));
        assert_eq!(resolve(Path::new("/etc/ll/plant.toml"), "/srv/a.toml"), PathBuf::from("/srv/a.toml"));
    }
}

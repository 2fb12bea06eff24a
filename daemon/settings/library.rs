//! The material library: grades shipped in `config/materials/*.toml`
//! (embedded in the binary, so the service runs with no files beside it),
//! plus the user's own grades from the configuration.

use crate::physics::material::Material;

/// The shipped grade files, embedded at build time.
const EMBEDDED: &[(&str, &str)] = &include!(concat!(env!("OUT_DIR"), "/materials.rs"));

/// A set of grades, looked up by grade name or alias (case-insensitive).
#[derive(Debug, Clone, Default)]
pub struct MaterialLibrary {
    grades: Vec<Material>,
}

/// A library file that does not parse.
#[derive(Debug, thiserror::Error)]
#[error("material file {file}: {message}")]
pub struct LibraryError {
    pub file: String,
    pub message: String,
}

impl MaterialLibrary {
    /// The grades shipped with lifeledger. Panics only if a shipped file is
    /// broken, which the test suite rules out.
    pub fn embedded() -> MaterialLibrary {
        Self::from_sources(EMBEDDED.iter().copied()).expect("shipped material files parse")
    }

    /// Parse grade files given as (file name, TOML text).
    pub fn from_sources<'a>(
        files: impl IntoIterator<Item = (&'a str, &'a str)>,
    ) -> Result<MaterialLibrary, LibraryError> {
        let mut lib = MaterialLibrary::default();
        for (file, text) in files {
            let m: Material =
                toml::from_str(text).map_err(|e| LibraryError { file: file.to_string(), message: e.to_string() })?;
            lib.grades.push(m);
        }
        lib.grades.sort_by(|a, b| a.grade.cmp(&b.grade));
        Ok(lib)
    }

    /// Add or replace a grade (user grades override shipped ones).
    pub fn insert(&mut self, m: Material) {
        self.grades.retain(|g| !g.grade.eq_ignore_ascii_case(&m.grade));
        self.grades.push(m);
    }

    /// Look a grade up by its name or an alias, ignoring case.
    pub fn get(&self, name: &str) -> Option<&Material> {
        let n = name.trim();
        self.grades
            .iter()
            .find(|m| m.grade.eq_ignore_ascii_case(n))
            .or_else(|| self.grades.iter().find(|m| m.aliases.iter().any(|a| a.eq_ignore_ascii_case(n))))
    }

    /// All grades, sorted by name.
    pub fn grades(&self) -> impl Iterator<Item = &Material> {
        self.grades.iter()
    }

    /// Grade names, for error hints.
    pub fn names(&self) -> Vec<String> {
        self.grades.iter().map(|m| m.grade.clone()).collect()
    }
}

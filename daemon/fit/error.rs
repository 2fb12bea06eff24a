//! Errors of `lifeledger fit`, written for the engineer who prepared the
//! test file: each names the file, the line and what to change.

/// Everything that can go wrong between a test CSV and a fitted constant.
/// Input problems carry the 1-based line number of the file; fit problems
/// say which tests (by line) or which unknown could not be determined.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    /// A problem with one line (or the header) of the input file.
    #[error("{file}: line {line}: {message}")]
    Input { file: String, line: usize, message: String },

    /// The file has a header but no data lines.
    #[error("{file}: no test data after the header on line {header_line}")]
    NoData { file: String, header_line: usize },

    /// Fewer tests than the model needs.
    #[error("too few tests: {message}")]
    TooFewTests { message: String },

    /// The data cannot separate two unknowns (all at one temperature, too
    /// few distinct stresses, or numerically collinear columns).
    #[error("the tests cannot determine the model: {message}")]
    Collinear { message: String },

    /// A command-line option is out of its meaningful range.
    #[error("invalid option: {message}")]
    InvalidOption { message: String },
}

impl FitError {
    pub(crate) fn input(file: &str, line: usize, message: impl Into<String>) -> Self {
        FitError::Input { file: file.to_string(), line, message: message.into() }
    }
}

/// Line numbers of tests as a short human list: `2, 3, 5-9`.
pub(crate) fn line_list(lines: &[usize]) -> String {
    let mut v: Vec<usize> = lines.to_vec();
    v.sort_unstable();
    v.dedup();
    let mut parts = Vec::new();
    let mut i = 0;
    while i < v.len() {
        let start = v[i];
        let mut end = start;
        while i + 1 < v.len() && v[i + 1] == end + 1 {
            i += 1;
            end = v[i];
        }
        parts.push(if end == start { start.to_string() } else { format!("{start}-{end}") });
        i += 1;
    }
    parts.join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_lists_collapse_runs() {
        assert_eq!(line_list(&[7, 2, 3, 4, 9, 10]), "2-4, 7, 9-10");
        assert_eq!(line_list(&[5]), "5");
        assert_eq!(line_list(&[]), "");
    }
}

//! Every schema problem of a configuration file in one pass: the TOML
//! reader stops at the first unknown key, so the text is read again with
//! each reported key set aside (commented out) until it reads or the
//! problem is not an unknown key. Each unknown key is reported with its
//! line and the nearest known key ("did you mean"); a problem is never
//! reported twice.

use super::schema::Settings;
use super::validate::ConfigProblem;

/// At most this many problems are collected from one file.
const MAX_PROBLEMS: usize = 50;

/// The schema problems of `text` (empty when it reads as [`Settings`]).
pub fn schema_problems(text: &str) -> Vec<ConfigProblem> {
    schema_problems_of::<Settings>(text)
}

/// The schema problems of `text` read as a `T` (an included grade file).
pub fn schema_problems_of<T: serde::de::DeserializeOwned>(text: &str) -> Vec<ConfigProblem> {
    let mut text = text.to_string();
    let mut problems: Vec<ConfigProblem> = vec![];
    while problems.len() < MAX_PROBLEMS {
        let Err(e) = toml::from_str::<T>(&text) else { break };
        let line = e.span().map(|s| line_of(&text, s.start));
        let message = e.message().trim().to_string();
        let place = line.map_or_else(|| "file".to_string(), |l| format!("line {l}"));
        match unknown_key(&message) {
            Some((key, expected)) => {
                let fix = match nearest(&key, &expected) {
                    Some(k) => format!("did you mean `{k}`? (known keys here: {})", list(&expected)),
                    None => format!("remove it, or use one of {}", list(&expected)),
                };
                let p = ConfigProblem { place, key: key.clone(), problem: format!("unknown key `{key}`"), fix };
                if !problems.contains(&p) {
                    problems.push(p);
                }
                // Set the key aside and read on; stop if that changed nothing.
                match line.and_then(|l| comment_out(&text, l)) {
                    Some(t) if t != text => text = t,
                    _ => break,
                }
            }
            None => {
                let p = ConfigProblem {
                    place,
                    key: "-".into(),
                    problem: one_line(&message),
                    fix: "correct the TOML at the line shown".into(),
                };
                if !problems.contains(&p) {
                    problems.push(p);
                }
                break;
            }
        }
    }
    problems
}

/// 1-based line of byte offset `at`.
fn line_of(text: &str, at: usize) -> usize {
    text[..at.min(text.len())].bytes().filter(|&b| b == b'\n').count() + 1
}

fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// From serde's "unknown field `x`, expected one of `a`, `b`" (or
/// "expected `a` or `b`", "expected `a`", "there are no fields"): the key
/// and the keys it could have been.
fn unknown_key(message: &str) -> Option<(String, Vec<String>)> {
    let rest = message.strip_prefix("unknown field `")?;
    let (key, rest) = rest.split_once('`')?;
    let expected = rest.split('`').skip(1).step_by(2).map(str::to_string).collect();
    Some((key.to_string(), expected))
}

fn list(keys: &[String]) -> String {
    if keys.is_empty() {
        "none".into()
    } else {
        keys.iter().map(|k| format!("`{k}`")).collect::<Vec<_>>().join(", ")
    }
}

/// The known key nearest to `key` by edit distance, if it is near enough
/// to be a slip (at most a third of the longer name, at least 1), or when
/// one name contains the other (`max_hold` for `max_hold_s`).
fn nearest(key: &str, known: &[String]) -> Option<String> {
    known
        .iter()
        .map(|k| (levenshtein(key, k), k))
        .filter(|(d, k)| {
            let longest = key.chars().count().max(k.chars().count());
            *d <= (longest / 3).max(1) || k.contains(key) || key.contains(k.as_str())
        })
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k.clone())
}

/// Edit distance (insertions, deletions, substitutions).
fn levenshtein(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != *cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

/// `text` with line `line` (1-based) commented out, and the lines after it
/// while its value's brackets are still open (a multi-line array).
fn comment_out(text: &str, line: usize) -> Option<String> {
    let mut lines: Vec<String> = text.split('\n').map(str::to_string).collect();
    let mut i = line.checked_sub(1)?;
    let mut depth: i64 = 0;
    loop {
        let l = lines.get_mut(i)?;
        depth += open_brackets(l);
        l.insert(0, '#');
        i += 1;
        if depth <= 0 || i >= lines.len() {
            break;
        }
    }
    Some(lines.join("\n"))
}

/// Opening minus closing brackets and braces outside strings and comments.
fn open_brackets(line: &str) -> i64 {
    let (mut depth, mut quote) = (0i64, None::<char>);
    for c in line.chars() {
        match (quote, c) {
            (Some(q), c) if c == q => quote = None,
            (Some(_), _) => {}
            (None, '"' | '\'') => quote = Some(c),
            (None, '#') => break,
            (None, '[' | '{') => depth += 1,
            (None, ']' | '}') => depth -= 1,
            _ => {}
        }
    }
    depth
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edit_distance_matches_hand_counts() {
        // Hand-counted: kitten → sitting is the textbook example (3 edits).
        assert_eq!(levenshtein("kitten", "sitting"), 3);
        assert_eq!(levenshtein("", "abc"), 3);
        assert_eq!(levenshtein("nam", "name"), 1);
    }

    #[test]
    fn serde_messages_are_read() {
        let (k, e) = unknown_key("unknown field `nam`, expected `name` or `allow_retiring_most`").unwrap();
        assert_eq!(k, "nam");
        assert_eq!(e, ["name", "allow_retiring_most"]);
        let (_, e) = unknown_key("unknown field `x`, there are no fields").unwrap();
        assert!(e.is_empty());
    }

    #[test]
    fn a_multi_line_value_is_set_aside_whole() {
        let t = "a = 1\nbad = [\n  1,\n  2,\n]\nb = 2";
        assert_eq!(comment_out(t, 2).unwrap(), "a = 1\n#bad = [\n#  1,\n#  2,\n#]\nb = 2");
    }

    #[test]
    fn three_typos_three_problems() {
        let p = schema_problems("[plant]\nnam = \"x\"\n[engine]\nmax_hold = 5\nreorder_windw_s = 3\n");
        let keys: Vec<&str> = p.iter().map(|p| p.key.as_str()).collect();
        assert_eq!(keys, ["nam", "max_hold", "reorder_windw_s"]);
        assert!(p[1].fix.starts_with("did you mean `max_hold_s`"), "{}", p[1].fix);
    }
}

//! Typed errors of the input stage. Every variant carries what a user needs to
//! fix the input: the file, the physical line (1-based, counting header and
//! preamble lines) and column where one exists, the offending value, and a hint.

use std::path::PathBuf;

/// An error while reading or validating inputs.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum IoError {
    /// A file could not be opened or read.
    #[error("{}: cannot read: {reason}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The operating-system error, written in the message (not a
        /// separate cause, so that a chain of causes names it once).
        reason: std::io::Error,
    },
    /// The study file is not valid TOML, or does not fit the schema.
    #[error("{}:{line}:{column}: {message}", path.display())]
    Toml {
        /// The study file.
        path: PathBuf,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// What the parser said (names unknown keys and the expected ones).
        message: String,
    },
    /// A value in the study file is well-formed but not acceptable.
    #[error("{}: `{key}`: {message}{}", path.display(), hint_suffix(hint))]
    Invalid {
        /// The study file.
        path: PathBuf,
        /// The key, with its section (`pots.x`, `logs[2].time_format`).
        key: String,
        /// What is wrong.
        message: String,
        /// How to fix it, if we can tell.
        hint: Option<String>,
    },
    /// A named column does not exist in a table.
    #[error("{}:{line}: no column `{column}`{}; the header has: {}", path.display(), suggestion_suffix(suggestion), available.join(", "))]
    MissingColumn {
        /// The table.
        path: PathBuf,
        /// The header's physical line.
        line: usize,
        /// The column asked for.
        column: String,
        /// The closest existing name, if one is close.
        suggestion: Option<String>,
        /// The columns present.
        available: Vec<String>,
    },
    /// A cell could not be used.
    #[error("{}:{line}: column `{column}`: {message}: `{value}`{}", path.display(), hint_suffix(hint))]
    BadValue {
        /// The table.
        path: PathBuf,
        /// Physical line of the row.
        line: usize,
        /// Column name.
        column: String,
        /// The cell's text.
        value: String,
        /// What is wrong with it.
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// A table has a header but no data rows, or nothing at all.
    #[error("{}: the file has no data rows{}", path.display(), hint_suffix(hint))]
    Empty {
        /// The table.
        path: PathBuf,
        /// How to fix it.
        hint: Option<String>,
    },
    /// A problem that concerns a whole table rather than one cell.
    #[error("{}: {message}", path.display())]
    Table {
        /// The table.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
}

fn hint_suffix(hint: &Option<String>) -> String {
    match hint {
        Some(h) => format!(" (hint: {h})"),
        None => String::new(),
    }
}

fn suggestion_suffix(s: &Option<String>) -> String {
    match s {
        Some(s) => format!(" (did you mean `{s}`?)"),
        None => String::new(),
    }
}

/// Result alias of the input stage.
pub type Result<T> = std::result::Result<T, IoError>;

/// Levenshtein edit distance, for "did you mean" hints.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for i in 1..=a.len() {
        cur[0] = i;
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            cur[j] = (prev[j] + 1).min(cur[j - 1] + 1).min(prev[j - 1] + cost);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// The candidate closest to `name` (case-insensitive edit distance), if it is
/// within a third of the name's length (at least 2 edits).
pub fn closest<'a>(name: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<String> {
    let lname = name.to_lowercase();
    let limit = (name.chars().count() / 3).max(2);
    candidates
        .into_iter()
        .map(|c| (edit_distance(&lname, &c.to_lowercase()), c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edit_distance_known_values() {
        // Classic textbook pair: kitten -> sitting needs 3 edits.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("same", "same"), 0);
    }

    #[test]
    fn closest_suggests_near_names_only() {
        let cols = ["temperature", "humidity", "time"];
        assert_eq!(closest("temprature", cols).as_deref(), Some("temperature"));
        assert_eq!(closest("Humidity", cols).as_deref(), Some("humidity"));
        assert_eq!(closest("zzzzzzzz", cols), None);
    }
}

//! The one error of a file the tool reads or writes: it could not be read or written, or its JSON is not
//! well-formed or not of the expected shape. Both name the file; a JSON error names the line and column.
//!
//! Every module that reads a file wraps this error in its own (as `File`), so a message about a file reads
//! the same whichever verb met it. [`load_json`] reads and parses a JSON file with these errors.

use std::path::Path;

use serde::de::DeserializeOwned;

/// A file that could not be read or written, or whose JSON is malformed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FileError {
    /// The file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: String,
        /// The I/O error.
        source: std::io::Error,
    },
    /// The file is not well-formed JSON of the expected shape.
    #[error("{path}: line {line}, column {column}: {message}")]
    Json {
        /// The file.
        path: String,
        /// Line of the defect (1-based).
        line: usize,
        /// Column of the defect (1-based).
        column: usize,
        /// What was wrong.
        message: String,
    },
}

impl FileError {
    /// An I/O error on `path`.
    pub fn io(path: &Path, source: std::io::Error) -> FileError {
        FileError::Io { path: path.display().to_string(), source }
    }

    /// A JSON error in the text named `path`.
    pub fn json(path: &str, e: &serde_json::Error) -> FileError {
        // serde_json's message ends with " at line L column C"; the position is said once, in front.
        let full = e.to_string();
        let tail = format!(" at line {} column {}", e.line(), e.column());
        let message = full.strip_suffix(&tail).unwrap_or(&full).to_string();
        FileError::Json { path: path.to_string(), line: e.line(), column: e.column(), message }
    }
}

/// Reads a text file.
pub fn read_text(path: &Path) -> Result<String, FileError> {
    std::fs::read_to_string(path).map_err(|source| FileError::io(path, source))
}

/// Parses JSON text; `path` only names the source in errors.
pub fn parse_json<T: DeserializeOwned>(text: &str, path: &str) -> Result<T, FileError> {
    serde_json::from_str(text).map_err(|e| FileError::json(path, &e))
}

/// Reads and parses a JSON file.
pub fn load_json<T: DeserializeOwned>(path: &Path) -> Result<T, FileError> {
    parse_json(&read_text(path)?, &path.display().to_string())
}

/// Pretty JSON of plain data, with a trailing newline.
pub fn to_json_line<T: serde::Serialize>(value: &T) -> String {
    // Plain data with string keys: serialising cannot fail.
    let mut s = crate::output::number::to_json_pretty(value).unwrap_or_default();
    s.push('\n');
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn errors_name_the_file_line_and_column() {
        let e = parse_json::<Vec<u32>>("[1,\n 2,,]", "list.json").unwrap_err();
        assert!(matches!(e, FileError::Json { line: 2, .. }), "{e}");
        assert!(e.to_string().starts_with("list.json: line 2, column 4: "), "{e}");
        let e = load_json::<Vec<u32>>(Path::new("/nonexistent/list.json")).unwrap_err();
        assert!(
            matches!(e, FileError::Io { .. }) && e.to_string().starts_with("/nonexistent/list.json: "),
            "{e}"
        );
        assert_eq!(to_json_line(&[1, 2]), "[\n  1,\n  2\n]\n");
    }

    #[test]
    fn a_json_error_names_its_position_once() {
        #[derive(Debug, serde::Deserialize)]
        #[serde(deny_unknown_fields)]
        #[allow(dead_code)]
        struct Two {
            a: u32,
            b: u32,
        }
        let e = parse_json::<Two>("{\n  \"a\": 1,\n  \"c\": 2\n}", "f.json").unwrap_err().to_string();
        assert!(e.starts_with("f.json: line 3, column 5: unknown field `c`"), "{e}");
        assert_eq!(e.matches("line").count(), 1, "{e}");
        assert_eq!(e.matches('3').count(), 1, "{e}");
    }
}

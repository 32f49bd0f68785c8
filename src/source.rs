//! The one span validator and the one error type of the hand-written TOML files (material
//! models, scenarios, fit jobs, test descriptions, ignition lists, milligram scenarios): a
//! file's path and text turn a `toml::Spanned` value's byte span into a line, and a bad value
//! into `FileError::Invalid` (`file:line: \`key\` problem`). `case`, `data` and `microscale`
//! use it; `data` and `microscale` carry a `FileError` in their own error enums, beside the
//! variants only they have (a CSV cell, an analysis that cannot be done).

use std::marker::PhantomData;
use std::ops::Range;
use std::path::{Path, PathBuf};

use toml::Spanned;

/// What went wrong with a file, and where.
#[derive(Debug, thiserror::Error)]
pub enum FileError {
    #[error("cannot read {}", path.display())]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// toml's own message carries the line, column and key.
    #[error("cannot parse {}", path.display())]
    Syntax {
        path: PathBuf,
        #[source]
        source: toml::de::Error,
    },
    /// A key with a value that cannot be used; `line` is 1-based.
    #[error("{}:{line}: `{field}` {problem}", path.display())]
    Invalid {
        path: PathBuf,
        line: usize,
        field: String,
        problem: String,
    },
    /// A value that is fine alone but not with the rest of the file.
    #[error("{}: {problem}", path.display())]
    Inconsistent { path: PathBuf, problem: String },
}

/// The 1-based line of byte offset `span.start` in `text`.
pub(crate) fn line_at(text: &str, span: &Range<usize>) -> usize {
    let end = span.start.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// Checks values of one file and makes its errors, as `E` (a `FileError`, or an error enum
/// of a module that carries one).
pub(crate) struct Spans<'a, E> {
    pub path: &'a Path,
    pub text: &'a str,
    error: PhantomData<E>,
}

impl<'a, E: From<FileError>> Spans<'a, E> {
    pub fn new(path: &'a Path, text: &'a str) -> Self {
        Spans {
            path,
            text,
            error: PhantomData,
        }
    }

    pub fn line(&self, span: &Range<usize>) -> usize {
        line_at(self.text, span)
    }

    pub fn invalid(&self, span: &Range<usize>, field: &str, problem: impl Into<String>) -> E {
        FileError::Invalid {
            path: self.path.to_path_buf(),
            line: self.line(span),
            field: field.to_string(),
            problem: problem.into(),
        }
        .into()
    }

    pub fn inconsistent(&self, problem: impl Into<String>) -> E {
        FileError::Inconsistent {
            path: self.path.to_path_buf(),
            problem: problem.into(),
        }
        .into()
    }

    /// The value, if it is > 0 and finite.
    pub fn positive(&self, value: &Spanned<f64>, field: &str) -> Result<f64, E> {
        let v = *value.get_ref();
        if v > 0.0 && v.is_finite() {
            Ok(v)
        } else {
            Err(self.invalid(&value.span(), field, format!("must be > 0, got {v}")))
        }
    }

    /// The value, if it is ≥ 0 and finite.
    pub fn non_negative(&self, value: &Spanned<f64>, field: &str) -> Result<f64, E> {
        let v = *value.get_ref();
        if v >= 0.0 && v.is_finite() {
            Ok(v)
        } else {
            Err(self.invalid(&value.span(), field, format!("must be ≥ 0, got {v}")))
        }
    }

    /// The value, if it lies within 0..1.
    pub fn fraction(&self, value: &Spanned<f64>, field: &str) -> Result<f64, E> {
        let v = *value.get_ref();
        if (0.0..=1.0).contains(&v) {
            Ok(v)
        } else {
            Err(self.invalid(
                &value.span(),
                field,
                format!("must be within 0..1, got {v}"),
            ))
        }
    }

    /// The value, if it is finite.
    pub fn finite(&self, value: &Spanned<f64>, field: &str) -> Result<f64, E> {
        let v = *value.get_ref();
        if v.is_finite() {
            Ok(v)
        } else {
            Err(self.invalid(
                &value.span(),
                field,
                format!("must be a finite number, got {v}"),
            ))
        }
    }

    /// The value, if it lies within `low..=high`.
    pub fn within(&self, value: &Spanned<f64>, field: &str, low: f64, high: f64) -> Result<f64, E> {
        let v = *value.get_ref();
        if (low..=high).contains(&v) {
            Ok(v)
        } else {
            Err(self.invalid(
                &value.span(),
                field,
                format!("must be between {low} and {high}, got {v}"),
            ))
        }
    }
}

/// Reads a hand-written TOML file through the input guard (`crate::input`).
pub(crate) fn read_toml_text(path: &Path) -> Result<String, FileError> {
    crate::input::read_text(path, crate::input::InputKind::Toml).map_err(|source| FileError::Read {
        path: path.to_path_buf(),
        source,
    })
}

/// Parses a file's text into its raw structs.
pub(crate) fn parse<T: serde::de::DeserializeOwned>(
    path: &Path,
    text: &str,
) -> Result<T, FileError> {
    toml::from_str(text).map_err(|source| FileError::Syntax {
        path: path.to_path_buf(),
        source,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(serde::Deserialize)]
    struct Raw {
        a: Spanned<f64>,
        b: Spanned<f64>,
    }

    /// The message format of docs/file-formats.md: `file:line: \`key\` problem`, with the
    /// line of the value (here the third line of the text).
    #[test]
    fn a_bad_value_is_named_by_file_line_and_key() {
        let text = "# a comment\na = 1.5\nb = -2\n";
        let path = Path::new("x.toml");
        let raw: Raw = parse(path, text).unwrap();
        let spans: Spans<'_, FileError> = Spans::new(path, text);
        assert_eq!(spans.positive(&raw.a, "a").unwrap(), 1.5);
        let err = spans.non_negative(&raw.b, "b").unwrap_err();
        assert_eq!(err.to_string(), "x.toml:3: `b` must be ≥ 0, got -2");
        let err = spans.within(&raw.a, "a", 2.0, 3.0).unwrap_err();
        assert_eq!(
            err.to_string(),
            "x.toml:2: `a` must be between 2 and 3, got 1.5"
        );
        assert!(parse::<Raw>(path, "a = 1").is_err());
    }
}

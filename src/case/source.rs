//! A file's text and path, for turning spans into line numbers and checks into errors.

use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::de::DeserializeOwned;
use toml::Spanned;

use super::CaseError;

pub(crate) struct Source {
    pub path: PathBuf,
    pub text: String,
}

impl Source {
    pub fn read(path: &Path) -> Result<Self, CaseError> {
        let text =
            crate::input::read_text(path, crate::input::InputKind::Toml).map_err(|source| {
                CaseError::Read {
                    path: path.to_path_buf(),
                    source,
                }
            })?;
        Ok(Source {
            path: path.to_path_buf(),
            text,
        })
    }

    pub fn parse<T: DeserializeOwned>(&self) -> Result<T, CaseError> {
        toml::from_str(&self.text).map_err(|source| CaseError::Syntax {
            path: self.path.clone(),
            source,
        })
    }

    pub fn line(&self, span: &Range<usize>) -> usize {
        let end = span.start.min(self.text.len());
        self.text[..end].bytes().filter(|&b| b == b'\n').count() + 1
    }

    pub fn invalid(
        &self,
        span: &Range<usize>,
        field: &str,
        problem: impl Into<String>,
    ) -> CaseError {
        CaseError::Invalid {
            path: self.path.clone(),
            line: self.line(span),
            field: field.to_string(),
            problem: problem.into(),
        }
    }

    pub fn inconsistent(&self, problem: impl Into<String>) -> CaseError {
        CaseError::Inconsistent {
            path: self.path.clone(),
            problem: problem.into(),
        }
    }

    /// The value, if it is > 0 and finite.
    pub fn positive(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        let v = *value.get_ref();
        if v > 0.0 && v.is_finite() {
            Ok(v)
        } else {
            Err(self.invalid(&value.span(), field, format!("must be > 0, got {v}")))
        }
    }

    /// The value, if it is ≥ 0 and finite.
    pub fn non_negative(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        let v = *value.get_ref();
        if v >= 0.0 && v.is_finite() {
            Ok(v)
        } else {
            Err(self.invalid(&value.span(), field, format!("must be ≥ 0, got {v}")))
        }
    }

    /// The value, if it lies within 0..1.
    pub fn fraction(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
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
    pub fn finite(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
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
}

/// An error and its causes as one line, `outer: cause: cause` (for errors that are folded into
/// another error's message rather than kept as its source).
pub(crate) fn error_chain(error: &dyn std::error::Error) -> String {
    let mut text = error.to_string();
    let mut source = error.source();
    while let Some(cause) = source {
        text.push_str(": ");
        text.push_str(&cause.to_string());
        source = cause.source();
    }
    text
}

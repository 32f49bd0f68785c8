//! A file's text and path (owned), for turning spans into line numbers and checks into
//! errors: the case reader's handle on the crate's one span validator, `crate::source::Spans`.

use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::de::DeserializeOwned;
use toml::Spanned;

use super::CaseError;
use crate::source::Spans;

pub(crate) struct Source {
    pub path: PathBuf,
    pub text: String,
}

impl Source {
    pub fn read(path: &Path) -> Result<Self, CaseError> {
        Ok(Source {
            path: path.to_path_buf(),
            text: crate::source::read_toml_text(path)?,
        })
    }

    pub fn parse<T: DeserializeOwned>(&self) -> Result<T, CaseError> {
        crate::source::parse(&self.path, &self.text)
    }

    /// The span validator of this file (`crate::source::Spans`).
    pub fn spans(&self) -> Spans<'_, CaseError> {
        Spans::new(&self.path, &self.text)
    }

    pub fn line(&self, span: &Range<usize>) -> usize {
        self.spans().line(span)
    }

    pub fn invalid(
        &self,
        span: &Range<usize>,
        field: &str,
        problem: impl Into<String>,
    ) -> CaseError {
        self.spans().invalid(span, field, problem)
    }

    pub fn inconsistent(&self, problem: impl Into<String>) -> CaseError {
        self.spans().inconsistent(problem)
    }

    /// The value, if it is > 0 and finite.
    pub fn positive(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        self.spans().positive(value, field)
    }

    /// The value, if it is ≥ 0 and finite.
    pub fn non_negative(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        self.spans().non_negative(value, field)
    }

    /// The value, if it lies within 0..1.
    pub fn fraction(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        self.spans().fraction(value, field)
    }

    /// The value, if it is finite.
    pub fn finite(&self, value: &Spanned<f64>, field: &str) -> Result<f64, CaseError> {
        self.spans().finite(value, field)
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

//! Errors that point into a text file: file, line, column and a source snippet (via miette).

use std::ops::Range;
use std::sync::Arc;

use miette::{Diagnostic, NamedSource, SourceSpan};

/// An error located in a named text source (a design file, a part library file).
#[derive(Debug, thiserror::Error, Diagnostic)]
#[error("{file}:{line}:{column}: {message}")]
#[diagnostic(code(slackmeter::input))]
pub struct SourceError {
    /// What is wrong, in one sentence.
    pub message: String,
    /// File name as the user gave it.
    pub file: String,
    /// 1-based line of the span start.
    pub line: usize,
    /// 1-based column (in characters) of the span start.
    pub column: usize,
    #[source_code]
    src: NamedSource<Arc<str>>,
    #[label("{label}")]
    span: SourceSpan,
    label: String,
    /// How to fix it.
    #[help]
    pub help: Option<String>,
}

/// A text source with its name, shared by the errors raised against it.
#[derive(Clone, Debug)]
pub struct Source {
    /// File name as shown to the user.
    pub name: String,
    /// Whole text.
    pub text: Arc<str>,
}

impl Source {
    /// Wrap a text under a display name.
    pub fn new(name: impl Into<String>, text: impl Into<Arc<str>>) -> Self {
        Source {
            name: name.into(),
            text: text.into(),
        }
    }

    /// 1-based line and column (in characters) of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let mut start = offset;
        while !self.text.is_char_boundary(start) {
            start -= 1;
        }
        let before = &self.text[..start];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = before[line_start..].chars().count() + 1;
        (line, column)
    }

    /// An error at a byte span, with a short label under the snippet and an optional fix.
    pub fn error(
        &self,
        span: Range<usize>,
        message: impl Into<String>,
        label: impl Into<String>,
        help: Option<String>,
    ) -> SourceError {
        let (line, column) = self.line_col(span.start);
        let end = span.end.max(span.start).min(self.text.len());
        let start = span.start.min(end);
        SourceError {
            message: message.into(),
            file: self.name.clone(),
            line,
            column,
            src: NamedSource::new(self.name.clone(), self.text.clone()),
            span: (start, end - start).into(),
            label: label.into(),
            help,
        }
    }

    /// [`Source::error`], boxed for `Result` (keeps `Result` small).
    pub fn fail(
        &self,
        span: Range<usize>,
        message: impl Into<String>,
        label: impl Into<String>,
        help: Option<String>,
    ) -> Box<SourceError> {
        Box::new(self.error(span, message, label, help))
    }

    /// Turn a TOML parse or type error into a located error.
    pub fn toml_error(&self, err: &toml::de::Error) -> SourceError {
        let span = err.span().unwrap_or(0..0);
        let message = err.message().trim().to_string();
        let help = toml_help(&message);
        self.error(span, message, "here", help)
    }
}

/// A hint for the commonest TOML type mistakes.
fn toml_help(message: &str) -> Option<String> {
    if message.starts_with("unknown field") {
        Some("remove the key or correct its spelling; the expected keys are listed above".into())
    } else if message.contains("missing field") {
        Some("add the key named above to this table".into())
    } else if message.contains("invalid type") {
        Some("quantities are strings with a unit, e.g. \"4.5 V\", \"150 ns\", \"25 °C\"".into())
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_and_column_count_characters() {
        let src = Source::new("x.toml", "a = 1\nb = \"µs\"\nc");
        assert_eq!(src.line_col(0), (1, 1));
        assert_eq!(src.line_col(6), (2, 1));
        // the byte after "µ" (2 bytes) is column 7 in characters
        assert_eq!(src.line_col(6 + 7), (2, 7));
        assert_eq!(src.line_col(999), (3, 2));
    }

    #[test]
    fn error_message_carries_location() {
        let src = Source::new("d.toml", "[x]\nkey = 3\n");
        let err = src.error(4..7, "bad key", "this one", Some("fix it".into()));
        assert_eq!(err.to_string(), "d.toml:2:1: bad key");
        assert_eq!((err.line, err.column), (2, 1));
    }
}

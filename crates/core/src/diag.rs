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

/// Largest design or part file read (4 MiB): a device or a huge file is refused, not read
/// without end.
pub const MAX_TEXT_BYTES: u64 = 4 << 20;

/// Read a text file of at most [`MAX_TEXT_BYTES`]; a larger one, or bytes that are not UTF-8,
/// are an error that says where (byte offset, line and column of the first bad byte).
pub fn read_text(path: &std::path::Path) -> std::io::Result<String> {
    use std::io::{Error, ErrorKind, Read};
    let mut bytes = Vec::new();
    std::fs::File::open(path)?
        .take(MAX_TEXT_BYTES + 1)
        .read_to_end(&mut bytes)?;
    if bytes.len() as u64 > MAX_TEXT_BYTES {
        return Err(Error::new(
            ErrorKind::InvalidData,
            format!(
                "larger than {} MiB: not a text file of this kind",
                MAX_TEXT_BYTES >> 20
            ),
        ));
    }
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let good = &e.as_bytes()[..at];
        let line = good.iter().filter(|&&b| b == b'\n').count() + 1;
        let column = at - good.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1) + 1;
        Error::new(
            ErrorKind::InvalidData,
            format!(
                "not UTF-8 text: byte {at} (line {line}, column {column}) is not valid UTF-8; \
                 save the file as UTF-8"
            ),
        )
    })
}

#[cfg(test)]
mod read_tests {
    use super::*;

    #[test]
    fn bad_bytes_are_located_and_devices_are_bounded() {
        let dir = std::env::temp_dir().join(format!("slackmeter-read-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("bad.toml");
        std::fs::write(&p, b"[design]\nname = \"a\xffb\"\n").unwrap();
        let e = read_text(&p).unwrap_err().to_string();
        assert!(e.contains("byte 18 (line 2, column 10)"), "{e}");
        std::fs::write(&p, "name = \"ok\"\n").unwrap();
        assert_eq!(read_text(&p).unwrap(), "name = \"ok\"\n");
        // the zero device never ends: refused after the bound
        let e = read_text(std::path::Path::new("/dev/zero")).unwrap_err();
        assert!(e.to_string().contains("larger than 4 MiB"), "{e}");
        let _ = std::fs::remove_dir_all(&dir);
    }
}

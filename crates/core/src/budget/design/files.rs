//! The files a design is read from (the top file and the ones it includes) and where errors
//! point: every file's spans are offset by its own base, so one byte offset names one place in
//! one file.

use std::ops::Range;
use std::path::Path;

use crate::diag::{Source, SourceError};

/// Where an included design file's text comes from.
pub trait IncludeReader {
    /// The text of `file`, named in the design `from`; an error says why it cannot be read.
    fn read(&self, from: &Source, file: &str) -> Result<Source, String>;

    /// What tells two files apart when looking for include loops (the name by default).
    fn identity(&self, src: &Source) -> String {
        src.name.clone()
    }
}

/// Included files are read from disk, relative to the folder of the file that names them.
pub struct FromDisk;

impl IncludeReader for FromDisk {
    fn read(&self, from: &Source, file: &str) -> Result<Source, String> {
        let dir = Path::new(&from.name).parent().unwrap_or(Path::new(""));
        let path = dir.join(file);
        crate::diag::read_text(&path)
            .map(|text| Source::new(path.display().to_string(), text))
            .map_err(|e| format!("{}: {e}", path.display()))
    }

    fn identity(&self, src: &Source) -> String {
        std::fs::canonicalize(&src.name)
            .map_or_else(|_| src.name.clone(), |p| p.display().to_string())
    }
}

/// No file may be included (designs read from a recording or from untrusted bytes).
pub struct NoIncludes;

impl IncludeReader for NoIncludes {
    fn read(&self, _from: &Source, _file: &str) -> Result<Source, String> {
        Err(
            "this design is read without its files (from a recording or from bytes alone); \
             give the design file with --design"
                .into(),
        )
    }
}

/// Included files from memory, by the name the design gives (tests, tools).
pub struct InMemory(pub Vec<(String, String)>);

impl IncludeReader for InMemory {
    fn read(&self, _from: &Source, file: &str) -> Result<Source, String> {
        self.0
            .iter()
            .find(|(n, _)| n == file)
            .map(|(n, t)| Source::new(n.clone(), t.clone()))
            .ok_or_else(|| format!("no file named \"{file}\""))
    }
}

/// Every file read so far with its span base and, for an included one, where it is included.
pub(super) struct Files {
    list: Vec<(usize, Source, Option<String>)>,
    next: usize,
}

impl Files {
    /// The top file, at base 0.
    pub fn new(top: &Source) -> Files {
        Files {
            list: vec![(0, top.clone(), None)],
            next: top.text.len() + 1,
        }
    }

    /// Add a file included at `from` (file:line:column); its spans are offset by the base
    /// returned.
    pub fn add(&mut self, src: Source, from: String) -> usize {
        let base = self.next;
        self.next = base + src.text.len() + 1;
        self.list.push((base, src, Some(from)));
        base
    }

    /// How many files are read.
    pub fn count(&self) -> usize {
        self.list.len()
    }

    /// An error at a span of whichever file it falls in.
    pub fn error(
        &self,
        span: Range<usize>,
        msg: impl Into<String>,
        label: &str,
        help: Option<String>,
    ) -> SourceError {
        let (base, src, from) = self
            .list
            .iter()
            .rev()
            .find(|(b, _, _)| *b <= span.start)
            .unwrap_or(&self.list[0]);
        let local = span.start - base..span.end.saturating_sub(*base);
        let help = match (help, from) {
            (Some(h), Some(f)) => Some(format!("{h} (this file is included at {f})")),
            (None, Some(f)) => Some(format!("this file is included at {f}")),
            (h, None) => h,
        };
        src.error(local, msg, label, help)
    }
}

//! The design option every command that judges or stores a design shares (`--design` with the
//! part library it is read with), which design that means (a file given, the built-in demo, or
//! the one a recording carries), and the design as a recording carries it.

use std::path::{Path, PathBuf};

use super::args::LibraryArgs;
use super::error::CliResult;
use crate::budget::{Design, Library};
use crate::diag::Source;
use crate::record::{EmbeddedDesign, Header};

/// A design file and the part library it is read with (each command words its own help).
#[derive(clap::Args, Debug, Clone)]
pub struct DesignArgs {
    /// Design file (TOML).
    #[arg(long, value_name = "FILE")]
    pub design: Option<PathBuf>,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
}

impl DesignArgs {
    /// The part library.
    pub fn library(&self) -> CliResult<Library> {
        self.library.load()
    }

    /// The design given, if any.
    pub fn given(&self, lib: &Library) -> CliResult<Option<Design>> {
        Ok(match &self.design {
            Some(p) => Some(Design::load(p, lib)?),
            None => None,
        })
    }

    /// The design given, or the built-in demo machine's.
    pub fn or_demo(&self, lib: &Library) -> CliResult<Design> {
        Ok(self.given(lib)?.unwrap_or_else(|| Design::demo(lib)))
    }

    /// The design given, else the one embedded in the recording `file` (whose header is
    /// `header`), else none.
    pub fn or_embedded(
        &self,
        header: &Header,
        file: &Path,
        lib: &Library,
    ) -> CliResult<Option<Design>> {
        if let Some(d) = self.given(lib)? {
            return Ok(Some(d));
        }
        embedded_in(header, file, lib)
    }
}

/// The design embedded in the recording `file` (whose header is `header`), if any.
pub fn embedded_in(header: &Header, file: &Path, lib: &Library) -> CliResult<Option<Design>> {
    Ok(match &header.design {
        Some(e) => {
            let name = format!("{} (embedded in {})", e.file, file.display());
            // the recording holds the top file alone: it includes nothing
            let files = crate::budget::design::NoIncludes;
            Some(Design::parse_with(
                Source::new(name, e.text.clone()),
                lib,
                &files,
            )?)
        }
        None => None,
    })
}

/// A loaded design as a recording's header carries it.
pub fn embedded(d: &Design) -> EmbeddedDesign {
    EmbeddedDesign {
        file: d.source.name.clone(),
        text: d.source.text.to_string(),
    }
}

//! The part library: logic families and parts with their data-sheet timing columns.
//!
//! Built-in data files are embedded in the binary; a user folder of the same format adds parts or
//! replaces built-in ones by type name. Every value carries its source string and a status
//! ("seen" in a data sheet, or "from memory" and still to verify). Loading reads the files
//! (`load`), then fits each family's voltage shape (`fit`); the types are in `model`.

use std::path::Path;

use crate::diag::{Source, SourceError};

pub(super) mod fit;
mod load;
pub(super) mod model;
pub mod pins;
mod raw;
pub mod sheet;

pub use model::{
    ActiveEdge, ArcKind, Bound, Column, DeratingKind, ErrStats, Family, Library, Part, Pin,
    PinRole, Pinout, Series, Shape, Status, TimingArc,
};

/// The embedded data files, by the name shown in diagnostics.
pub const BUILTIN_FILES: &[(&str, &str)] = &[
    (
        "builtin:families.toml",
        include_str!("library/families.toml"),
    ),
    ("builtin:74hc.toml", include_str!("library/74hc.toml")),
    ("builtin:74hct.toml", include_str!("library/74hct.toml")),
    ("builtin:74ls.toml", include_str!("library/74ls.toml")),
    ("builtin:74ac.toml", include_str!("library/74ac.toml")),
    ("builtin:memory.toml", include_str!("library/memory.toml")),
    ("builtin:timer.toml", include_str!("library/timer.toml")),
];

fn builtin_sources() -> Vec<Source> {
    BUILTIN_FILES
        .iter()
        .map(|(name, text)| Source::new(*name, *text))
        .collect()
}

impl Library {
    /// The built-in library (embedded data files).
    pub fn builtin() -> Library {
        Library::from_sources(&builtin_sources()).expect("built-in part library is valid (tested)")
    }

    /// Built-in parts plus every `*.toml` file in `dir` (user parts replace built-in ones).
    pub fn with_user_dir(dir: &Path) -> Result<Library, LibraryError> {
        let io = |path: &Path| {
            let path = path.display().to_string();
            move |err| LibraryError::Io { path, err }
        };
        let mut sources = builtin_sources();
        let entries = std::fs::read_dir(dir).map_err(io(dir))?;
        let mut paths: Vec<_> = entries
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "toml"))
            .collect();
        paths.sort();
        for path in paths {
            let text = crate::diag::read_text(&path).map_err(io(&path))?;
            sources.push(Source::new(path.display().to_string(), text));
        }
        Library::from_sources(&sources).map_err(LibraryError::Source)
    }

    /// Parse library files in order; later parts replace earlier ones of the same type.
    pub fn from_sources(sources: &[Source]) -> Result<Library, Box<SourceError>> {
        let mut lib = load::parse_sources(sources)?;
        fit::fit_library(&mut lib);
        let (name, text) = pins::PINS_FILE;
        match pins::load(&Source::new(name, text), &lib) {
            Ok(p) => lib.pinouts = p,
            // the built-in pins fit the built-in parts (tested); a user part that replaced one
            // may name its pins otherwise: the pin maps are left out, and the notes say why
            Err(e) if !lib.notes.is_empty() => lib.notes.push(format!(
                "pin maps left out: {e} (a part from the --parts folder names its pins otherwise)"
            )),
            Err(e) => return Err(e),
        }
        Ok(lib)
    }
}

/// Failure to read a user part library.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum LibraryError {
    /// A file or folder could not be read.
    #[error("cannot read part library {path}: {err}")]
    #[diagnostic(help("check the folder given to --parts exists and holds readable .toml files"))]
    Io {
        /// The path.
        path: String,
        /// The OS error.
        err: std::io::Error,
    },
    /// A file has an error at a location.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Source(Box<SourceError>),
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_library_loads_with_enough_parts() {
        let lib = Library::builtin();
        assert!(lib.parts.len() >= 25, "{} parts", lib.parts.len());
        for fam in ["74HC", "74HCT", "74LS"] {
            assert!(
                lib.parts.iter().any(|p| lib.families[p.family].name == fam),
                "no {fam} part"
            );
        }
        for needed in [
            "74HC04",
            "74HC161",
            "74HC163",
            "74HC574",
            "74HC374",
            "74HC377",
            "74HC173",
            "74HC138",
            "74HC157",
            "74HC283",
            "74HC245",
            "74HCT245",
            "74LS161",
            "NE555",
            "AT28C256-20",
            "IC61C256AH-25",
        ] {
            assert!(lib.part_index(needed).is_some(), "{needed} missing");
        }
        for p in &lib.parts {
            assert!(!p.source.is_empty(), "{} has no source", p.type_name);
            assert!(!p.arcs.is_empty(), "{} has no arcs", p.type_name);
        }
    }

    #[test]
    fn user_file_replaces_builtin_part() {
        let mut sources: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(n, t)| Source::new(*n, *t))
            .collect();
        sources.push(Source::new(
            "mine.toml",
            r#"
[[part]]
type = "74HC04"
family = "74HC"
function = "hex inverter, my measured batch"
source = "bench measurement"
status = "from-memory"
load_pf = 50
vcc_v = [5.0]
[[part.arc]]
name = "A->Y"
kind = "delay"
max_ns = { 25 = [11] }
"#,
        ));
        let lib = Library::from_sources(&sources).unwrap();
        let p = &lib.parts[lib.part_index("74HC04").unwrap()];
        assert_eq!(p.origin, "mine.toml");
        assert_eq!(lib.notes.len(), 1);
    }

    /// Numbers a user part file gives are checked: NaN, infinite and absurd loads and times
    /// are refused with the file, line and column, never turned into a 0 ns delay.
    #[test]
    fn absurd_numbers_in_a_part_file_are_refused_with_their_place() {
        for (load, max, want) in [
            ("nan", "[85, 17, 14]", "mine.toml:2:8: load NaN pF"),
            ("1e9", "[85, 17, 14]", "mine.toml:2:8: load 1000000000 pF"),
            ("50", "[85, nan, 14]", "mine.toml:12:17: time NaN ns"),
            ("50", "[85, 1e300, 14]", "mine.toml:12:17: time"),
            ("50", "[85, -1, 14]", "mine.toml:12:17: time -1 ns"),
        ] {
            let mut sources: Vec<Source> = BUILTIN_FILES
                .iter()
                .map(|(n, t)| Source::new(*n, *t))
                .collect();
            sources.push(Source::new(
                "mine.toml",
                format!(
                    "[[part]]\ntype = \"74HCX1\"\nfamily = \"74HC\"\nfunction = \"x\"\nsource = \"s\"\nstatus = \"seen\"\nload_pf = {load}\nvcc_v = [2.0, 4.5, 6.0]\n[[part.arc]]\nname = \"A->Y\"\nkind = \"delay\"\nmax_ns = {{ 25 = {max} }}\n"
                ),
            ));
            let e = Library::from_sources(&sources).expect_err(want).to_string();
            assert!(e.starts_with(want), "{e}");
        }
    }

    #[test]
    fn bad_library_file_points_at_the_problem() {
        let src = Source::new(
            "bad.toml",
            "[[part]]\ntype = \"X1\"\nfamily = \"74QQ\"\nfunction = \"x\"\nsource = \"s\"\nstatus = \"seen\"\nload_pf = 50\nvcc_v = [5.0]\n",
        );
        let mut all: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(n, t)| Source::new(*n, *t))
            .collect();
        all.push(src);
        let err = Library::from_sources(&all).unwrap_err();
        assert!(err.message.contains("unknown logic family \"74QQ\""));
        assert_eq!((err.line, err.column), (3, 10));
    }
}

//! `import`: a KiCad netlist as a design file in the compact syntax, with a TODO line (in the
//! file and on standard error) for everything the import cannot decide.

use std::collections::BTreeMap;
use std::io::Write as _;
use std::path::PathBuf;

use miette::miette;

use super::args::LibraryArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::diag::Source;
use crate::import::{self, Options, SectionRule};

/// Options of `import`.
#[derive(clap::Args, Debug)]
pub struct ImportArgs {
    /// The netlist (KiCad `.net`, S-expression format).
    pub netlist: PathBuf,
    /// The master clock's net, e.g. CLK (a leading "/" of the root sheet is optional).
    #[arg(long)]
    pub clock: String,
    /// Where to write the design (`-` or absent: standard output).
    #[arg(short = 'o', long = "out", value_name = "DESIGN")]
    pub out: Option<PathBuf>,
    /// A TOML file mapping component values to library types: `"SN74HC574N" = "74HC574"`.
    #[arg(long, value_name = "FILE")]
    pub map: Option<PathBuf>,
    /// Put the components a pattern matches into a section, in place of their sheet's name:
    /// PATTERN is a sheet path (/alu/, with its sub-sheets), a reference (U12) or a reference
    /// prefix (U6*); the most specific rule wins. Repeatable.
    #[arg(long = "section", value_name = "PATTERN=NAME")]
    pub sections: Vec<String>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
}

/// `slackmeter import`.
pub fn run(a: ImportArgs) -> CliResult<Outcome> {
    let sections = SectionRule::parse_all(&a.sections).map_err(|e| {
        CliError::input(miette!(
            help = "e.g. --section /alu/=far --section U12=near --section U6*=mid",
            "{e}"
        ))
    })?;
    let lib = a.library.load()?;
    let read = |p: &PathBuf, what: &str| {
        crate::diag::read_text(p).map_err(|e| {
            CliError::input(miette!(
                help = "check the path",
                "cannot read {what} {}: {e}",
                p.display()
            ))
        })
    };
    let map: BTreeMap<String, String> = match &a.map {
        Some(p) => {
            let src = Source::new(p.display().to_string(), read(p, "mapping file")?);
            import::read_map(&src)?
        }
        None => BTreeMap::new(),
    };
    let src = Source::new(
        a.netlist.display().to_string(),
        read(&a.netlist, "netlist")?,
    );
    let netlist = import::parse(&src)?;
    if let Some(r) = import::sections::unmatched(&sections, &netlist).first() {
        let mut sheets: Vec<&str> = netlist
            .components
            .iter()
            .map(|c| c.sheet.as_str())
            .collect();
        sheets.sort_unstable();
        sheets.dedup();
        return Err(CliError::input(miette!(
            help = format!(
                "the netlist's sheets are {}; a reference is matched exactly, a prefix needs a trailing *",
                sheets.join(", ")
            ),
            "--section {}: no component of {} matches it",
            r.text,
            src.name
        )));
    }
    let name = a
        .netlist
        .file_stem()
        .map_or("imported".into(), |s| s.to_string_lossy().to_string());
    let opts = Options {
        clock: &a.clock,
        map: &map,
        name: &name,
        source: &src.name,
        sections: &sections,
    };
    let done = import::import(&netlist, &lib, &opts).map_err(|e| {
        CliError::input(miette!(
            help = "give the clock net's name as the schematic shows it (--clock CLK)",
            "{e}"
        ))
    })?;
    let out = a.out.unwrap_or_else(|| PathBuf::from("-"));
    let mut w = super::output::create_or_stdout(&out, &[&a.netlist], a.force)?;
    w.write_all(done.design.as_bytes())
        .and_then(|_| w.flush())
        .map_err(|e| CliError::runtime(miette!("cannot write {}: {e}", out.display())))?;
    let mut err = std::io::stderr().lock();
    for t in &done.todos {
        let _ = writeln!(err, "TODO {t}");
    }
    if !done.skipped.is_empty() {
        let _ = writeln!(
            err,
            "left out {} passives, connectors and power symbols ({}): they add no delay here",
            done.skipped.len(),
            done.skipped.join(", ")
        );
    }
    Ok(Outcome::Done)
}

//! The design file (TOML): part instances, the signal graph, launches, captures, operating point.
//!
//! Loading checks everything against the part library and reports the first problem with
//! file:line:column and a hint. The result is a resolved graph in topological order, ready to
//! solve at any operating point without re-reading the file.

use std::ops::Range;

use crate::budget::library::model::Library;
use crate::diag::{Source, SourceError};

mod board;
mod chain;
mod compact;
mod contention;
mod expand;
mod files;
mod graph;
pub mod lint;
mod load;
pub(super) mod model;
mod moved;
mod overrides;
mod raw;
mod timing;

pub use files::{FromDisk, InMemory, IncludeReader, NoIncludes};
pub use lint::{Lint, Severity};
use load::{Loader, Res};
pub use model::{
    Capture, ClockPlan, Clocked, Delay, Design, Edge, GraphArc, Instance, Launch, Operating,
    Section,
};

/// The demo design (the invented Larkspur-8 machine), embedded so every command has a default.
pub const DEMO_DESIGN: &str = include_str!("../../../../designs/larkspur-8.toml");
/// Display name of the embedded demo design.
pub const DEMO_NAME: &str = "designs/larkspur-8.toml";

impl Design {
    /// The embedded demo design.
    pub fn demo(lib: &Library) -> Design {
        Design::parse(Source::new(DEMO_NAME, DEMO_DESIGN), lib)
            .expect("demo design is valid (tested)")
    }

    /// Read and resolve a design file from disk.
    pub fn load(path: &std::path::Path, lib: &Library) -> Result<Design, DesignError> {
        let text = crate::diag::read_text(path).map_err(|e| DesignError::Io {
            path: path.display().to_string(),
            err: e,
        })?;
        Design::parse(Source::new(path.display().to_string(), text), lib)
            .map_err(DesignError::Source)
    }

    /// Parse and resolve design text; included files are read from disk, relative to the
    /// folder of `src`'s name.
    pub fn parse(src: Source, lib: &Library) -> Res<Design> {
        Design::parse_with(src, lib, &FromDisk)
    }

    /// Parse and resolve design text, reading included files with `reader`: the file and its
    /// includes as long-form entries, then the board, the timing entries and overrides, then
    /// the graph's order; the first problem found is the error.
    pub fn parse_with(src: Source, lib: &Library, reader: &dyn IncludeReader) -> Res<Design> {
        let (design, files, _, first_capture) = resolve(src, lib, reader)?;
        if design.warnings.len() == design.captures.len() {
            return Err(nothing_reached(&files, &first_capture));
        }
        Ok(design)
    }

    /// Load design text as [`Design::parse_with`] does, then check it without solving
    /// (`lint`): every finding located; a file that does not load is its one error.
    pub fn check(src: Source, lib: &Library, reader: &dyn IncludeReader) -> Checked {
        let (design, files, sites, _) = match resolve(src, lib, reader) {
            Ok(x) => x,
            Err(e) => {
                return Checked {
                    design: None,
                    findings: vec![Finding {
                        lint: Lint::Load,
                        located: *e,
                    }],
                };
            }
        };
        let findings = lint::lint(&design, &sites)
            .into_iter()
            .chain(contention::lint(&sites.control))
            .map(|f| Finding {
                lint: f.lint,
                located: files.error(f.span, f.message, f.label, Some(f.help)),
            })
            .collect();
        Checked {
            design: Some(design),
            findings,
        }
    }
}

/// The named steps that resolve a design: the file and its includes as long-form entries, the
/// board, the timing entries and overrides, the graph's order; the first problem is the error.
/// With the design: its files, where each entry was written, and the first capture's name.
fn resolve(
    src: Source,
    lib: &Library,
    reader: &dyn IncludeReader,
) -> Res<(Design, files::Files, lint::Sites, toml::Spanned<String>)> {
    let raw: raw::RawDesign =
        toml::from_str(&src.text).map_err(|e| Box::new(src.toml_error(&e)))?;
    let mut ctx = expand::Ctx::new(&src, reader);
    let flat = expand::expand(&src, 0, &raw, &mut ctx)?;
    let files = ctx.files;
    let mut ld = Loader::new(&files, lib);
    let operating = ld.operating(raw.operating.as_ref().map(|o| o.get_ref()))?;
    let (clock, clock_name) = ld.clock(raw.clock.as_ref().map(|c| c.get_ref()))?;
    let sections = ld.sections(&raw.section)?;
    ld.instances(&flat.parts, &sections)?;
    let mut launches = ld.launches(&flat.launches)?;
    let (mut arcs, arc_spans) = ld.arcs(&flat.arcs)?;
    let mut captures = ld.captures(&flat.captures)?;
    let clocked = clocked_parts(&ld, &flat)?;
    ld.apply_overrides(&flat.overrides, &mut launches, &mut arcs, &mut captures)?;
    if launches.is_empty() || captures.is_empty() {
        return Err(nothing_to_time(&ld));
    }
    let graph = graph::topological_order(&arcs, ld.signals.len())
        .map_err(|cycle| loop_error(&ld, &arcs, &arc_spans, &cycle))?;
    let sites = lint::Sites {
        launch_to: flat.launches.iter().map(|l| l.to.span()).collect(),
        arc_from: flat.arcs.iter().map(|a| a.from.span()).collect(),
        arc_to: flat.arcs.iter().map(|a| a.to.span()).collect(),
        capture_signal: flat.captures.iter().map(|c| c.signal.span()).collect(),
        part_ref: flat.parts.iter().map(|p| p.reference.span()).collect(),
        control: lint::Control {
            drivers: flat
                .drivers
                .iter()
                .map(|d| lint::Driver {
                    bus: d.bus.get_ref().clone(),
                    part: d.part.get_ref().clone(),
                    part_span: d.part.span(),
                    when: d.when.as_ref().map(|w| (w.get_ref().clone(), w.span())),
                })
                .collect(),
            steps: raw
                .microstep
                .iter()
                .map(|s| lint::Step {
                    name: s.name.get_ref().clone(),
                    on: s
                        .on
                        .iter()
                        .map(|b| (b.get_ref().clone(), b.span()))
                        .collect(),
                })
                .collect(),
        },
    };
    let mut design = Design {
        name: raw.design.name,
        source: src.clone(),
        operating,
        clock,
        clock_name,
        sections,
        instances: ld.instances,
        signals: ld.signals,
        launches,
        arcs,
        captures,
        order: graph.order,
        fanout: graph.fanout,
        warnings: Vec::new(),
        clocked,
    };
    design.warnings = graph::unreached_captures(&design);
    let first_capture = flat.captures[0].signal.clone();
    Ok((design, files, sites, first_capture))
}

/// What `Design::check` found: the design when it loads, and every finding, located.
#[derive(Debug)]
pub struct Checked {
    /// The resolved design (none when the file does not load).
    pub design: Option<Design>,
    /// The problems, grouped by check, each group in file order.
    pub findings: Vec<Finding>,
}

impl Checked {
    /// Whether any finding is an error (`check` fails), not only warnings.
    pub fn has_errors(&self) -> bool {
        self.findings
            .iter()
            .any(|f| f.severity() == Severity::Error)
    }
}

/// One problem of a design: which check, and where (file:line:column, what, how to fix).
#[derive(Debug)]
pub struct Finding {
    /// The check that found it.
    pub lint: Lint,
    /// The located message, label and fix.
    pub located: SourceError,
}

impl Finding {
    /// Error or warning (by the check).
    pub fn severity(&self) -> Severity {
        self.lint.severity()
    }
}

impl std::fmt::Display for Finding {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let e = &self.located;
        let word = match self.severity() {
            Severity::Error => "error",
            Severity::Warning => "warning",
        };
        write!(
            f,
            "{}:{}:{}: {word}: {}",
            e.file, e.line, e.column, e.message
        )
    }
}

impl std::error::Error for Finding {}

/// The located error's snippet, label and fix, with the finding's own severity.
impl miette::Diagnostic for Finding {
    fn severity(&self) -> Option<miette::Severity> {
        Some(match Finding::severity(self) {
            Severity::Error => miette::Severity::Error,
            Severity::Warning => miette::Severity::Warning,
        })
    }
    fn help<'a>(&'a self) -> Option<Box<dyn std::fmt::Display + 'a>> {
        miette::Diagnostic::help(&self.located)
    }
    fn source_code(&self) -> Option<&dyn miette::SourceCode> {
        miette::Diagnostic::source_code(&self.located)
    }
    fn labels(&self) -> Option<Box<dyn Iterator<Item = miette::LabeledSpan> + '_>> {
        miette::Diagnostic::labels(&self.located)
    }
}

/// Every part a launch or a part-checked capture names, with its master edge and the pin the
/// clock enters by ("CLK" of "CLK->Q", "WE" of "D->WE"), once each.
fn clocked_parts(ld: &Loader, flat: &expand::Flat) -> Res<Vec<Clocked>> {
    let mut out: Vec<Clocked> = Vec::new();
    let pin_of = |arc: &str, first: bool| {
        let mut it = arc.split("->");
        let (a, b) = (it.next().unwrap_or(arc), it.next().unwrap_or(arc));
        (if first { a } else { b }).trim().to_string()
    };
    let named = flat
        .launches
        .iter()
        .map(|l| (&l.part, l.edge, pin_of(l.arc.get_ref(), true)))
        .chain(
            flat.captures
                .iter()
                .filter_map(|c| match (&c.part, &c.check) {
                    (Some(p), Some(ch)) => Some((p, c.edge, pin_of(ch.get_ref(), false))),
                    _ => None,
                }),
        );
    for (part, edge, pin) in named {
        let c = Clocked {
            instance: ld.instance(part)?,
            edge,
            pin,
        };
        if !out.contains(&c) {
            out.push(c);
        }
    }
    Ok(out)
}

/// The error for a design without a launch or without a capture.
fn nothing_to_time(ld: &Loader) -> Box<SourceError> {
    ld.err(
        0..0,
        "the design has nothing to time: it needs at least one [[launch]] and one [[capture]]",
        "here",
        Some("see the design file format in docs/DESIGN-FILE.md".into()),
    )
}

/// The error for a design whose captures no launch reaches, at the first capture.
fn nothing_reached(
    files: &files::Files,
    first_capture: &toml::Spanned<String>,
) -> Box<SourceError> {
    Box::new(files.error(
        first_capture.span(),
        "no capture is reached by any launch: nothing to time",
        "here",
        Some("connect the launch signals to the captured signals with [[arc]] entries".into()),
    ))
}

/// The error for a combinational loop, at the arc that closes it.
fn loop_error(
    ld: &Loader,
    arcs: &[GraphArc],
    arc_spans: &[Range<usize>],
    cycle: &[usize],
) -> Box<SourceError> {
    let names: Vec<&str> = cycle
        .iter()
        .map(|&ai| ld.signals[arcs[ai].from].as_str())
        .collect();
    ld.err(
        arc_spans[cycle[0]].clone(),
        format!(
            "combinational loop: {} -> {}",
            names.join(" -> "),
            names[0]
        ),
        "this arc closes the loop",
        Some(
            "a path must pass through a register (a [[launch]]) to feed back; remove or break the arc"
                .into(),
        ),
    )
}

/// Failure to load a design from disk.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum DesignError {
    /// The file could not be read.
    #[error("cannot read design file {path}: {err}")]
    #[diagnostic(
        code(slackmeter::io),
        help("check the path; without one the built-in demo design is used")
    )]
    Io {
        /// Path given.
        path: String,
        /// OS error.
        err: std::io::Error,
    },
    /// The file has an error at a location.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Source(Box<SourceError>),
}

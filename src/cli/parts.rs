//! `slackmeter parts`: the part library with each part's source and status.

use super::output::outln;
use miette::miette;

use super::args::LibraryArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::library::ArcKind;

/// Options of `parts`.
#[derive(clap::Args, Debug)]
pub struct PartsArgs {
    /// One part to show with every data-sheet column and its source, e.g. 74HC161/onsemi.
    pub name: Option<String>,
    /// Only parts of this family (e.g. 74HC).
    #[arg(long)]
    pub family: Option<String>,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

/// `slackmeter parts`.
pub fn run(a: PartsArgs) -> CliResult<Outcome> {
    let lib = a.library.load()?;
    if let Some(name) = &a.name {
        let Some(i) = lib.part_index(name) else {
            let similar = lib.similar_parts(name);
            return Err(CliError::input(miette!(
                help = if similar.is_empty() {
                    "list the library with `slackmeter parts`".to_string()
                } else {
                    format!("similar parts: {}", similar.join(", "))
                },
                "no part \"{name}\" in the library"
            )));
        };
        let sheet = crate::budget::library::sheet::sheet(&lib, i);
        if a.json {
            outln!("{}", serde_json::to_string_pretty(&sheet)?);
        } else {
            super::output::report_text(&crate::report::budget::render_part(&sheet))?;
        }
        return Ok(Outcome::Done);
    }
    let parts: Vec<_> = lib
        .parts
        .iter()
        .filter(|p| {
            a.family
                .as_ref()
                .is_none_or(|f| lib.families[p.family].name.eq_ignore_ascii_case(f))
        })
        .collect();
    if parts.is_empty() {
        let fams: Vec<&str> = lib.families.iter().map(|f| f.name.as_str()).collect();
        return Err(CliError::input(miette!(
            help = format!("families: {}", fams.join(", ")),
            "no parts in family {:?}",
            a.family.unwrap_or_default()
        )));
    }
    if a.json {
        let doc: Vec<_> = parts
            .iter()
            .map(|p| {
                serde_json::json!({
                    "type": p.type_name,
                    "family": lib.families[p.family].name,
                    "function": p.function,
                    "source": p.source,
                    "status": p.status,
                    "arcs": p.arcs.iter().map(|a| serde_json::json!({
                        "name": a.name, "kind": a.kind, "status": a.status,
                        "typ_status": a.typ.as_ref().map(|_| a.typ_status), "source": a.source,
                    })).collect::<Vec<_>>(),
                })
            })
            .collect();
        outln!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(Outcome::Done);
    }
    let mut text = format!(
        "{:<15} {:<7} {:<12} arcs — function — source\n",
        "type", "family", "status"
    );
    for p in parts {
        let arcs: Vec<String> = p
            .arcs
            .iter()
            .map(|a| match a.kind {
                ArcKind::Delay => a.name.clone(),
                k => format!("{}({})", a.name, format!("{k:?}").to_lowercase()),
            })
            .collect();
        let status = p.status.words();
        text.push_str(&format!(
            "{:<15} {:<7} {:<12} {} — {} — {}\n",
            p.type_name,
            lib.families[p.family].name,
            status,
            arcs.join(", "),
            p.function,
            p.source
        ));
    }
    for n in &lib.notes {
        text.push_str(&format!("note: {n}\n"));
    }
    super::output::report_text(&text)?;
    Ok(Outcome::Done)
}

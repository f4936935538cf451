//! `slackmeter ports`: the serial ports this system lists, with their identification.

use super::error::{CliResult, Outcome};
use super::output::outln;
use crate::link;

/// `slackmeter ports`.
pub fn run() -> CliResult<Outcome> {
    let ports = link::list_ports();
    if ports.is_empty() {
        outln!(
            "no serial ports found (a virtual probe's pseudo-terminal is not listed: `slackmeter sim --pty` prints its path)"
        );
    }
    for (name, what) in ports {
        outln!("{name}  {what}");
    }
    Ok(Outcome::Done)
}

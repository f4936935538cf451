//! `slackmeter ports`: the serial ports this system lists, with their identification.

use super::error::{CliResult, Outcome};
use crate::link;

/// `slackmeter ports`.
pub fn run() -> CliResult<Outcome> {
    let ports = link::list_ports();
    if ports.is_empty() {
        println!(
            "no serial ports found (a virtual probe's pseudo-terminal is not listed: `slackmeter sim --pty` prints its path)"
        );
    }
    for (name, what) in ports {
        println!("{name}  {what}");
    }
    Ok(Outcome::Done)
}

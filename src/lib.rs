//! slackmeter: timing budgets for clocked discrete-logic machines, held against bench measurement.
//!
//! This crate is the program: the command line, the session layer and the live view. The pure
//! computations live in `slackmeter-core`, the edges to ports and files in `slackmeter-io`; both
//! are re-exported here under their module names. Module map and dependency rules: DEVELOPERS.md.

pub use slackmeter_core::{budget, diag, import, margin, measure, power, probe, units};
pub use slackmeter_io::{export, link, record, report, sim};

pub mod cli;
pub mod session;
pub mod tui;

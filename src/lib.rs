//! slackmeter: timing budgets for clocked discrete-logic machines, held against bench measurement.
//!
//! Module map and dependency rules: see DEVELOPERS.md.

pub mod budget;
pub mod cli;
pub mod cli_probe;
pub mod cli_record;
pub mod cli_watch;
pub mod diag;
pub mod export;
pub mod link;
pub mod margin;
pub mod measure;
pub mod record;
pub mod report;
pub mod sim;
pub mod tui;
pub mod units;

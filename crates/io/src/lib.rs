//! slackmeter's edges to the world: the serial link, recordings, the virtual probe, exports,
//! and the reports and plots made from results.
//!
//! Module map and dependency rules: see DEVELOPERS.md.

pub mod export;
pub mod link;
pub mod record;
pub mod report;
pub mod sim;

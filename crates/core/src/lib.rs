//! slackmeter's pure computations: SI units, located diagnostics, the probe's self-description,
//! the timing budget, the measurement engine and the margin that joins them. No ports, no
//! terminals, no threads: files are read only by the design and part-library loaders.
//!
//! Module map and dependency rules: see DEVELOPERS.md.

pub mod budget;
pub mod diag;
pub mod import;
pub mod margin;
pub mod measure;
pub mod power;
pub mod probe;
pub mod units;

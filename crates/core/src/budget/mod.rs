//! Timing budget: part library, derating, design files and the static timing solver.
//!
//! Pure code: no I/O except the explicit file loaders (`Design::load`, `Library::with_user_dir`).
//! Layers, lowest first: `library::model` (the parts) ← `derate` (their delays at conditions) ←
//! `design::model` (the resolved graph) ← `solver`; the loaders (`library`, `design`) fill the
//! models and use nothing above them.

pub mod derate;
pub mod design;
pub mod library;
pub mod solver;

pub use derate::Corner;
pub use design::model::Design;
pub use library::model::Library;
pub use solver::{Budget, ClockInput, OperatingPoint, Phase, solve, sweep_vcc};

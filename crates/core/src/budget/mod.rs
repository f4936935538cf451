//! Timing budget: part library, derating, design files and the static timing solver.
//!
//! Pure code: no I/O except the explicit file loaders (`Design::load`, `Library::with_user_dir`).

pub mod derate;
pub mod design;
pub mod library;
pub mod solver;

pub use derate::Corner;
pub use design::Design;
pub use library::Library;
pub use solver::{Budget, ClockInput, OperatingPoint, Phase, solve, sweep_vcc};

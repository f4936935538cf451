//! The virtual probe: a bench model turned into protocol frames. It speaks only the protocol
//! (no link, no measurement), so tests that run sim → link → measurement prove something.

pub mod bench;
pub mod classes;
pub mod model;
pub mod probe;
pub mod pty;

pub use model::{BenchModel, FaultLimit, ProbeClass, RailModel, RippleShape, Sweep};
pub use probe::SimProbe;

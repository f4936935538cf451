//! Human-readable and machine-readable renderings of analysis results (pure).

pub mod budget;
pub mod margin;
pub mod plots;
pub mod recording;

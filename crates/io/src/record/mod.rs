//! Recordings: the `.smrec` format, the recorder thread, and replay through the same engine.

pub mod format;
pub mod note;
pub mod replay;
mod span_crc;
pub mod writer;

pub use format::{EmbeddedDesign, Header, RecordingError};
pub use note::{Continuity, LinkNote};
pub use replay::{Recording, ReplayOptions, ReplaySummary};
pub use writer::{RecCounts, Recorder};

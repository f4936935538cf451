//! The live bench view: a terminal UI for watching a probe (or the virtual probe) and for
//! replaying a recording. Keys are a pure table (keys.rs), updates are pure (state.rs), drawing
//! is a pure function of the state (view.rs); run.rs is the terminal loop.

pub mod bars;
pub mod items;
pub mod keys;
pub mod picture;
pub mod run;
pub mod state;
pub mod style;
pub mod text;
pub mod view;

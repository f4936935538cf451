//! Wire protocol between the slackmeter host and its probes.
//!
//! `no_std` and allocation-free so probe firmware written in Rust can share it.
#![no_std]

/// Protocol version this crate speaks.
pub const PROTOCOL_VERSION: u8 = 1;

//! rung: an offline planner for observers who measure distances — trigonometric
//! parallaxes, period–luminosity distances of pulsating stars, and
//! standardized-candle distances of thermonuclear supernovae.
//!
//! The engine is this library; the `rung` binary and its terminal UI are thin
//! shells over it. The library never prints and never touches the terminal.
//!
//! The terminal UI ([`tui`]: state, update and drawing into buffers) is the
//! `tui` cargo feature, on by default; `cargo build --no-default-features`
//! builds the engine without the terminal crates.

#![warn(missing_docs)]

pub mod astro;
pub mod bounds;
pub mod config;
pub mod error;
pub mod io;
pub mod ladder;
pub mod linalg;
pub mod output;
pub mod photometry;
pub mod plan;
pub mod programme;
pub mod sky;
#[cfg(test)]
mod test_rng;
#[cfg(feature = "tui")]
pub mod tui;

pub use error::{Result, RungError};

//! Targets, sites, instruments, and exports.

pub mod angles;
pub mod atomic;
pub mod csv_text;
pub mod kinds;
pub mod links;
pub mod merge;
pub mod session;
pub mod sites;
pub mod targets;
pub mod write_targets;

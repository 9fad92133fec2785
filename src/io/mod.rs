//! Targets, sites, instruments, and exports.

pub mod angles;
pub mod atomic;
pub mod sites;
pub mod targets;
pub mod write_targets;

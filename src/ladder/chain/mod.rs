//! The distance ladder: each distance's error carried up from the rung below.
//!
//! Parallaxes of nearby pulsating stars fix the zero point of their
//! period–luminosity relation; pulsators in the host fields of supernovae
//! then give the hosts' distances; supernovae in those hosts calibrate the
//! standardized peak; supernovae in the Hubble flow give distances far out
//! and the Hubble-constant-like intercept. [`model`] writes the whole chain
//! as one linear model and solves it by generalised least squares, so each
//! end point's error budget by rung and term is exact (docs/science.md,
//! The ladder).

pub mod build;
pub mod model;
pub mod next;
pub mod report;

pub use build::{
    HostDistance, HostModulus, Ladder, Member, Role, anchor_field, build, host_distance,
};
pub use model::{
    Budget, Chain, ChainError, EndPoint, Observation, Param, Rung, Share, Solution, Term,
    h0_from_intercept, parallax_modulus, parallax_modulus_bias_mag,
};
pub use next::{Change, Ranked, Step, rank};
pub use report::{
    CalibratorRow, DistanceRow, LadderReport, Section, calibrators_of, report, report_of,
};

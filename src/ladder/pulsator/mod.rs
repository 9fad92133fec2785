//! The pulsating-star method: phase ephemeris in BJD_TDB, phase coverage from
//! one site, and the distance precision a set of phase points buys through
//! the period–luminosity (Leavitt) relation.
//!
//! Models (SCIENCE.md, Pulsating stars; coefficients in `config/pulsator.toml`):
//! - phase φ = frac((BJD_TDB − E0)/P); its uncertainty from the period's error
//!   after n cycles is σ_φ = |n| σ_P / P (in cycles; the timing error is |n| σ_P
//!   days); past `stale_phase` (0.1) the ephemeris is stale;
//! - single-site day aliasing: beat period 1/|1/P − m/k|, m/k the alias nearest
//!   to 1/P with k ≤ `alias_max_denominator`;
//! - mean magnitude from a K-harmonic Fourier fit by weighted least squares;
//! - Leavitt law M = a (log10 P − 1) + b, μ = m̄ − M − A,
//!   σ_μ² = σ_PL² + σ_m̄² + σ_A², σ_d/d = (ln 10/5) σ_μ.

//!
//! Files by concern: `config` (coefficients and defaults), `ephemeris`
//! (phase, its uncertainty, the day alias, a star's checked data),
//! `coverage` (windows and visit plans), `discovery` (a cadence that finds
//! a period, the ephemeris from observed maxima), `relations` (period–luminosity
//! relations by class and band, the class of a star, its metallicity), `fit` (Fourier fits and mean
//! magnitudes), `distance` (distance modulus and its budget), `method` (the
//! phase analysis and the shared method face).

mod config;
mod coverage;
mod discovery;
mod distance;
mod ephemeris;
mod fit;
mod method;
pub mod relations;

pub use config::*;
pub use coverage::*;
pub use discovery::*;
pub use distance::*;
pub use ephemeris::*;
pub use fit::*;
pub use method::*;
pub use relations::{
    CLASS_NAMES, CLASSES, ClassDefaults, ClassFrom, PulsatorClass, Relation, RelationSpec,
    StarRelation, Wesenheit,
};

use std::f64::consts::LN_10;

/// Magnitude error per unit of inverse signal-to-noise, 2.5/ln 10 = 1.0857
/// (σ_m ≈ 1.0857/SNR for SNR ≫ 1; Howell, Handbook of CCD Astronomy).
pub const MAG_PER_INV_SNR: f64 = 2.5 / LN_10;

/// σ_d/d per magnitude of distance-modulus error: ln 10 / 5 ≈ 0.4605.
pub use super::DIST_FRAC_PER_MAG;

/// Longest span of nights one phase query may cover.
pub const MAX_RANGE_NIGHTS: i64 = 400;

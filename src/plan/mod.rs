//! See DESIGN.md.
//!
//! - [`season`]: observable hours, best airmass, transit and Moon distance for
//!   every target on every night of a range, streamed one night at a time.

pub mod season;

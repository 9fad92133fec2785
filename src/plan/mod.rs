//! Planning over nights and seasons.
//!
//! - [`season`]: observable hours, best airmass, transit and Moon distance for
//!   every target on every night of a range, streamed one night at a time.
//! - [`budget`]: what each target's distance goal costs, with a verdict.
//! - [`schedule`]: places the methods' epochs as visits on nights and times;
//!   [`pack`] is its packing core (no astronomy), checked against exact optima.
//! - [`night_table`]: one night, per target the row `rung night` and the UI show.
//! - [`file`]: plans saved and re-planned; [`export`]: CSV, iCalendar, night sheets;
//!   [`log`]: the observing log marks go to first; [`now`]: what to observe now, ranked.

pub mod budget;
pub mod export;
pub mod file;
pub mod log;
pub mod night_table;
pub mod now;
pub mod pack;
pub mod schedule;
pub mod season;

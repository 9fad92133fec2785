//! Planning over nights and seasons: the budget of a distance goal, the
//! scheduler that places visits, and the exports of a plan.

pub mod budget;
pub mod export;
pub mod file;
pub mod schedule;

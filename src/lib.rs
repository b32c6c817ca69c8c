//! # edgetherm
//!
//! Recover the temperature of a hidden edge of a plate from thermocouples inside it, and say
//! how sure the answer is.
//!
//! The crate is laid out the way the computation flows:
//!
//! | module | role |
//! |---|---|
//! | [`geometry`] | the plate, its edges and their conditions (SI units inside) |
//! | [`budget`] | pre-flight cost: the memory and time a run will need, checked against a budget before anything large is allocated; input size limits |
//! | [`case`] | the validated case a run takes: plate, sensors, fit / uncertainty / design / bounds settings, the field grid |
//! | [`forward`] | steady conduction by separation of variables: the linear map from the unknown edge coefficients to temperatures anywhere |
//! | [`inverse`] | weighted Tikhonov regularisation on that linear map (one SVD for every strength) and the rules that choose the strength |
//! | [`design`] | sensor-layout design: the uncertainty a layout will leave along the hidden edges, and greedy + exchange search for the best one |
//! | [`noise`] | the reading uncertainty: stated sigma, or thermocouple tolerance classes |
//! | [`estimate`] | the main job: fit, fault search, bands, hottest point, exceedance, resolution length |
//! | [`bounds`] | strict bounds on the hidden edges and their hottest temperature under a stated gradient limit (conic programs) |
//! | [`uncertainty`] | the bootstrap of the estimation error with re-chosen strength; bands |
//! | [`io`] | case files (`plate.toml`, `sensors.csv`, `readings.csv`, profiles, logger files) read into a [`case::Case`]; results written atomically |
//! | [`track`] | a logger file row by row: per-row estimate with a pattern cache, hottest point through time, alarms, failing sensors |
//! | [`report`] | every output in the case's units, one module per command (`estimate`, `design`, `track`, `check`) over shared drawing and number-format primitives: CSV tables, JSON, text summaries, SVG plots, the HTML page |
//! | [`simulate`] | synthetic readings from a known edge profile (demos, tests, what-if) |
//! | [`options`] | run settings given as plain values (command-line flags, Python keyword arguments), checked once for every front end |
//! | [`plausible`] | one documented plausibility range per physical quantity (temperatures 0 K to 5000 K, reading sigma, lengths, conductivity, gradient limits), checked by every command |
//! | [`units`] | the length and temperature units of a case, converted once at the edge |
//! | [`error`] | one error type whose messages name the file, line and field |
//!
//! Data flows one way, case → computation (`estimate`, `design`, `track`) → [`report`] →
//! the binary: the computing modules return typed results and import nothing from `report`.
//! The library never prints; the `edgetherm` binary is a thin layer over it.

pub mod bounds;
pub mod budget;
pub mod case;
pub mod design;
pub mod error;
pub mod estimate;
pub mod forward;
pub mod geometry;
pub mod inverse;
pub mod io;
pub mod its90;
pub mod noise;
pub mod options;
pub mod plausible;
pub mod report;
mod simd;
pub mod simulate;
#[cfg(test)]
mod testing;
pub mod track;
pub mod uncertainty;
pub mod units;

pub use error::{Error, Result};

//! The presentation layer: every output a person or a program reads, rendered from the
//! results of the computation in the case's units. Nothing below `report` renders, and
//! `report` computes nothing of its own: results come in typed, text and files go out.
//!
//! One module per command's outputs:
//!
//! | module | outputs |
//! |---|---|
//! | [`estimate`] | `profile.csv`, `field.csv`, `sensors.csv`, `summary.json`, `profile.svg`, `field.svg`, `report.html`, the text summary |
//! | [`design`] | `layout.csv`, `design.json`, `design.svg`, the text summary |
//! | [`track`] | `track.csv` rows, `alarms.csv`, `sensors-health.csv`, `summary.json`, `track.svg`, the text summary |
//! | [`check`] | the description of a validated case, as text or JSON |
//!
//! and the primitives they share:
//!
//! | module | role |
//! |---|---|
//! | `format` | SI back to the case's units, fixed precision and number formatting ([`num`]) |
//! | `draw` | SVG conventions: sizes, colours, fonts, markers, legends (with `plotters`) |
//! | `labels` | label placement without overlaps |
//! | `palette` | the colour scale of the field map |
//! | `contour` | isotherms by marching squares |
//!
//! Outputs that can drive decisions about hot equipment carry the safety caution
//! [`estimate::SAFETY_CAUTION`]. Nothing here prints; files are written only through
//! [`crate::io::write_atomic`].

pub mod check;
mod contour;
pub mod design;
mod draw;
pub mod estimate;
mod format;
mod labels;
mod palette;
pub mod track;

pub use format::num;

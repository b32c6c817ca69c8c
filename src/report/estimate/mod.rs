//! The outputs of `edgetherm estimate` (`docs/case-files.md`), made from an
//! [`EstimateResult`] and written in the case's units.
//!
//! | output | made by |
//! |---|---|
//! | `profile.csv`, `field.csv`, `sensors.csv` | `tables` (fixed precision, empty cells for missing values) |
//! | `summary.json` and the `--json` output | [`summary_json`] |
//! | the text summary on stdout | [`text_summary`] |
//! | `profile.svg` | `profile_plot` (with `plotters`) |
//! | `field.svg` | `field_plot`: colour map (`palette`), isotherms (`contour`) |
//! | `report.html` | `html`, with both pictures inlined |
//!
//! The strict bounds, when the estimate has them, are rendered by `bounds` into each of
//! these. Every output carries the safety caution [`SAFETY_CAUTION`]. Rendering happens in
//! memory ([`render_outputs`]); [`write_outputs`] writes each file atomically through
//! [`crate::io::write_atomic`] as soon as it is made, while the others are still being made
//! ([`OutputSet::write_as_produced`]). Nothing here prints.

mod bounds;
mod field_plot;
mod html;
mod profile_plot;
mod round_plot;
mod summary;
mod tables;

pub use bounds::bounds_hottest_interval;
pub use summary::{SAFETY_CAUTION, cautions, summary_json, text_summary};

use crate::error::{Error, Result};
use crate::estimate::EstimateResult;
use crate::io::{OUTPUT_FILE_NAMES, OutputSet};
use std::path::{Path, PathBuf};

/// One rendered output: its file name (one of [`OUTPUT_FILE_NAMES`]) and its bytes.
#[derive(Debug, Clone)]
pub struct Output {
    /// File name inside the output directory.
    pub name: &'static str,
    /// The file's content.
    pub bytes: Vec<u8>,
}

/// Render every output of `docs/case-files.md`, outputs in memory, in the order of [`OUTPUT_FILE_NAMES`].
pub fn render_outputs(result: &EstimateResult) -> Result<Vec<Output>> {
    let made = std::sync::Mutex::new(Vec::with_capacity(OUTPUT_FILE_NAMES.len()));
    render_each(result, &|name, bytes| {
        made.lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .push(Output { name, bytes });
    })?;
    let mut made = made
        .into_inner()
        .unwrap_or_else(std::sync::PoisonError::into_inner);
    let mut out = Vec::with_capacity(OUTPUT_FILE_NAMES.len());
    for name in OUTPUT_FILE_NAMES {
        match made.iter().position(|o| o.name == name) {
            Some(i) => out.push(made.swap_remove(i)),
            None => {
                return Err(Error::Internal(format!(
                    "the report has no renderer for the output file {name}"
                )));
            }
        }
    }
    Ok(out)
}

/// Render every output, handing each to `emit` (from whichever thread made it) as soon as it
/// is made: the tables, `summary.json` and the two pictures side by side, then the page that
/// inlines the pictures. The first error in the order of the tasks below is returned.
fn render_each(
    result: &EstimateResult,
    emit: &(dyn Fn(&'static str, Vec<u8>) + Sync),
) -> Result<()> {
    use rayon::prelude::*;
    let pictures = || -> Result<()> {
        let (profile_svg, field_svg) = rayon::join(
            || profile_plot::profile_svg(result),
            || field_plot::field_svg(result),
        );
        let (profile_svg, field_svg) = (profile_svg?, field_svg?);
        emit("profile.svg", profile_svg.clone().into_bytes());
        emit("field.svg", field_svg.clone().into_bytes());
        let html = html::report_html(result, &profile_svg, &field_svg);
        emit("report.html", html.into_bytes());
        Ok(())
    };
    let summary = || -> Result<()> {
        let json = serde_json::to_string_pretty(&summary_json(result))
            .map_err(|e| Error::Internal(format!("cannot format summary.json: {e}")))?;
        emit("summary.json", format!("{json}\n").into_bytes());
        Ok(())
    };
    let field_csv = || tables::field_csv(result).map(|b| emit("field.csv", b));
    let profile_csv = || tables::profile_csv(result).map(|b| emit("profile.csv", b));
    let sensors_csv = || tables::sensors_csv(result).map(|b| emit("sensors.csv", b));
    let tasks: [&(dyn Fn() -> Result<()> + Sync); 5] =
        [&pictures, &field_csv, &profile_csv, &sensors_csv, &summary];
    let outcomes: Vec<Result<()>> = tasks.par_iter().map(|task| task()).collect();
    outcomes.into_iter().collect()
}

/// Render every output and write it into `out_dir` (created if needed) as one set
/// ([`OutputSet`]: a reader never sees a mix of an earlier set and this one). Returns the paths written, in the order of [`OUTPUT_FILE_NAMES`].
///
/// Nothing reaches `out_dir` unless every output rendered (the files already written stay in
/// the set's staging folder, which goes with the set). The caller must first check with
/// [`crate::io::check_output_dir`] that no output would replace an input.
pub fn write_outputs(result: &EstimateResult, out_dir: &Path) -> Result<Vec<PathBuf>> {
    let mut set = OutputSet::begin(out_dir, "estimate")?;
    // each file is written as soon as it is made, while the others are still being made
    set.write_as_produced(&OUTPUT_FILE_NAMES, |emit| render_each(result, emit))?;
    set.commit()
}

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
//! memory ([`render_outputs`]); [`write_outputs`] then writes each file atomically through
//! [`crate::io::write_atomic`]. Nothing here prints.

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
    // the pictures (and the page that inlines them) and the tables are independent: made
    // side by side
    let ((pictures, json), (field_csv, (profile_csv, sensors_csv))) = rayon::join(
        || {
            rayon::join(
                || -> Result<_> {
                    let (profile_svg, field_svg) = rayon::join(
                        || profile_plot::profile_svg(result),
                        || field_plot::field_svg(result),
                    );
                    let (profile_svg, field_svg) = (profile_svg?, field_svg?);
                    let html = html::report_html(result, &profile_svg, &field_svg);
                    Ok((profile_svg, field_svg, html))
                },
                || {
                    serde_json::to_string_pretty(&summary_json(result))
                        .map_err(|e| Error::Internal(format!("cannot format summary.json: {e}")))
                },
            )
        },
        || {
            rayon::join(
                || tables::field_csv(result),
                || {
                    rayon::join(
                        || tables::profile_csv(result),
                        || tables::sensors_csv(result),
                    )
                },
            )
        },
    );
    let (profile_svg, field_svg, html) = pictures?;
    let mut rendered = [
        ("profile.csv", profile_csv?),
        ("field.csv", field_csv?),
        ("sensors.csv", sensors_csv?),
        ("summary.json", format!("{}\n", json?).into_bytes()),
        ("profile.svg", profile_svg.into_bytes()),
        ("field.svg", field_svg.into_bytes()),
        ("report.html", html.into_bytes()),
    ];
    let mut out = Vec::with_capacity(OUTPUT_FILE_NAMES.len());
    for name in OUTPUT_FILE_NAMES {
        let bytes = match rendered.iter_mut().find(|(n, _)| *n == name) {
            Some((_, bytes)) => std::mem::take(bytes),
            None => {
                return Err(Error::Internal(format!(
                    "the report has no renderer for the output file {name}"
                )));
            }
        };
        out.push(Output { name, bytes });
    }
    Ok(out)
}

/// Render every output and write it into `out_dir` (created if needed) as one set
/// ([`OutputSet`]: a reader never sees a mix of an earlier set and this one). Returns the paths written, in the order of [`OUTPUT_FILE_NAMES`].
///
/// Nothing is written unless every output rendered. The caller must first check with
/// [`crate::io::check_output_dir`] that no output would replace an input.
pub fn write_outputs(result: &EstimateResult, out_dir: &Path) -> Result<Vec<PathBuf>> {
    let outputs = render_outputs(result)?;
    let mut set = OutputSet::begin(out_dir, "estimate")?;
    let files: Vec<(&str, &[u8])> = outputs.iter().map(|o| (o.name, &o.bytes[..])).collect();
    set.write_all(&files)?;
    set.commit()
}

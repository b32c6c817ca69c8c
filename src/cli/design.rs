//! `edgetherm design CASE_DIR --count K`: choose a sensor layout before anything is drilled;
//! `--add K` adds to the sensors already in `sensors.csv`; `--evaluate LAYOUT.csv` scores a
//! layout instead; `--against OTHER.csv` compares with another. Writes `layout.csv`,
//! `design.json` and `design.svg` to `--out` and prints a summary.
//!
//! Exit status: 0 done; 2 invalid input (including constraints no layout can meet); 1
//! internal error.

use super::{GlobalOptions, print_stdout};
use edgetherm::case::CandidateSource;
use edgetherm::design::{Criterion, DesignSpace, LayoutSensor};
use edgetherm::io::case::{load_design_case, read_candidates, read_layout};
use edgetherm::io::output::check_output_names;
use edgetherm::report::design::{
    DESIGN_OUTPUT_FILE_NAMES, design_json, design_text, write_design_outputs,
};
use edgetherm::{Error, Result};
use std::path::PathBuf;

/// Arguments of `edgetherm design`.
#[derive(Debug, clap::Args)]
pub struct DesignArgs {
    /// The case directory (plate.toml; its [design] section is optional, every setting has
    /// a default; sensors.csv only for --add).
    #[arg(value_name = "CASE_DIR")]
    pub case_dir: PathBuf,
    /// Number of sensors to choose.
    #[arg(long, value_name = "K", conflicts_with_all = ["add", "evaluate"], allow_negative_numbers = true, value_parser = super::count_arg)]
    pub count: Option<usize>,
    /// Keep the sensors of sensors.csv where they are and add K new ones.
    #[arg(long, value_name = "K", conflicts_with = "evaluate", allow_negative_numbers = true, value_parser = super::count_arg)]
    pub add: Option<usize>,
    /// Score this layout (`sensor,x,y`, case units) instead of choosing one.
    #[arg(long, value_name = "LAYOUT.csv")]
    pub evaluate: Option<PathBuf>,
    /// Compare with this layout (`sensor,x,y`, case units).
    #[arg(long, value_name = "OTHER.csv")]
    pub against: Option<PathBuf>,
    /// Criterion: information (D-optimal), edge (mean posterior variance along the hidden
    /// edges) or worst (largest posterior standard deviation along them) [default: the
    /// case's [design] criterion, else edge].
    #[arg(long, value_name = "C", value_parser = ["information", "edge", "worst"])]
    pub criterion: Option<String>,
    /// Expected variation of the hidden profile about its level, as a standard deviation in
    /// the case's temperature unit (e.g. 4 for "about ±4 degrees") [default: [design]
    /// variation, else 10 times the reading noise].
    #[arg(long, value_name = "V", allow_negative_numbers = true)]
    pub variation: Option<f64>,
    /// Directory for layout.csv, design.json and design.svg (created if needed).
    #[arg(long, value_name = "DIR", default_value = "edgetherm-design")]
    pub out: PathBuf,
}

/// Run `design`.
pub fn run(args: &DesignArgs, global: &GlobalOptions) -> Result<i32> {
    if args.count.is_none() && args.add.is_none() && args.evaluate.is_none() {
        return Err(Error::invalid_field(
            "--count",
            "say how many sensors to choose (--count K), how many to add to sensors.csv \
             (--add K), or which layout to score (--evaluate LAYOUT.csv)",
        ));
    }
    let files = global.case_files(&args.case_dir, false, false, None)?;
    let mut case = load_design_case(&files)?;
    if let Some(v) = args.variation {
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::invalid_field(
                "--variation",
                format!(
                    "the expected variation is a standard deviation, a positive temperature \
                     difference in the case's unit ({}), not {v}",
                    case.units.temperature.symbol()
                ),
            ));
        }
    }
    let variation_k = args.variation.map(|v| case.units.dtemp_to_k(v));
    let defaults = edgetherm::design::apply_defaults(&mut case, variation_k)?;
    if args.add.is_some() && case.sensors.is_empty() {
        return Err(Error::invalid_at(
            &case.files.sensors,
            None,
            None,
            "--add keeps the sensors of this file and adds new ones, but the file does not \
             exist; use --count K to design a layout from scratch",
        ));
    }
    let candidate_points = match &case.design.candidates {
        CandidateSource::File(path) => Some(read_candidates(path, &case)?),
        CandidateSource::Grid(_) => None,
    };
    let criterion = args.criterion.as_deref().and_then(Criterion::parse);
    // the grid's size before it is built: a tiny candidate_spacing asks for billions
    let (candidates, spacing_stated) = match (&case.design.candidates, &candidate_points) {
        (_, Some(points)) => (points.len() as f64, false),
        (CandidateSource::Grid(Some(h)), None) => {
            let shape = case.plate.shape();
            let y_top = case
                .design
                .allowed
                .iter()
                .map(|r| r.y_max)
                .fold(0.0, f64::max);
            let y_top = if y_top > 0.0 {
                y_top
            } else {
                shape.height().unwrap_or(shape.width())
            };
            ((shape.width() / h).floor() * (y_top / h).floor(), true)
        }
        (_, None) => (edgetherm::design::candidates::DEFAULT_CANDIDATES, false),
    };
    let count = args.count.or(args.add).unwrap_or(case.sensors.len());
    global.check_budget(
        &edgetherm::budget::design_cost(&case, candidates, count, spacing_stated),
        &case,
    )?;
    let space = DesignSpace::new(&case, candidate_points.as_deref(), criterion)?;
    let mut inputs = case.files.inputs();
    if let CandidateSource::File(p) = &case.design.candidates {
        inputs.push(p);
    }
    for p in [&args.evaluate, &args.against].into_iter().flatten() {
        inputs.push(p);
    }
    check_output_names(
        &args.out,
        &DESIGN_OUTPUT_FILE_NAMES,
        &inputs,
        global.overwrite,
    )?;
    let against = args
        .against
        .as_ref()
        .map(|p| -> Result<(String, Vec<LayoutSensor>)> {
            let l = read_layout(p, &case)?;
            // the file name, unless it would read like this run's own layout (`layout.csv`,
            // or the --evaluate file's name): then the path as given
            let name = p
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .filter(|n| {
                    n != "layout.csv"
                        && args
                            .evaluate
                            .as_ref()
                            .and_then(|e| e.file_name())
                            .is_none_or(|e| e.to_string_lossy() != *n)
                })
                .unwrap_or_else(|| p.display().to_string());
            Ok((
                name,
                l.iter()
                    .map(|s| LayoutSensor::from_sensor(s, false))
                    .collect(),
            ))
        })
        .transpose()?;

    let mut result = if let Some(path) = &args.evaluate {
        let layout: Vec<LayoutSensor> = read_layout(path, &case)?
            .iter()
            .map(|s| LayoutSensor::from_sensor(s, false))
            .collect();
        space.result(&case, layout, None, against)?
    } else {
        let (count, flag, fixed) = match (args.count, args.add) {
            (Some(k), _) => (k, "--count", Vec::new()),
            (None, Some(k)) => (
                k,
                "--add",
                case.sensors
                    .iter()
                    .map(|s| LayoutSensor::from_sensor(s, true))
                    .collect(),
            ),
            (None, None) => unreachable!("checked above"),
        };
        space.check_count(count, flag)?;
        let bar = super::progress_bar(
            global,
            Some((2 * count) as u64),
            "design search {bar:32} {pos}/{len} steps",
        );
        let tick = |done: usize, total: usize| {
            if let Some(b) = &bar {
                b.set_length(total as u64);
                b.set_position(done as u64);
            }
        };
        let (layout, summary) = space.design(&fixed, count, flag, &tick)?;
        if let Some(b) = &bar {
            b.finish_and_clear();
        }
        space.result(&case, layout, Some(summary), against)?
    };
    result.defaults = defaults;
    let written = write_design_outputs(&result, &args.out)?;
    if global.json {
        print_stdout(&format!("{:#}\n", design_json(&result)))?;
    } else if !global.quiet {
        let mut text = design_text(&result);
        text.push_str(&format!(
            "\nWrote {} files to {}.\n",
            written.len(),
            args.out.display()
        ));
        print_stdout(&text)?;
    }
    Ok(0)
}

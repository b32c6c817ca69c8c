//! `edgetherm estimate CASE_DIR`: the main job. Reconstruct the hidden edges and the field
//! from one set of readings, with uncertainty, and write the outputs of `docs/case-files.md`, outputs.
//!
//! Exit status: 0 done; 3 when `--limit` is given and either the probability that a hidden
//! edge exceeds it passes `--probability`, or the strict bounds under a stated gradient limit
//! put the hottest temperature above it (its lower bound exceeds the limit); 2 invalid input;
//! 1 internal error. Strict bounds that rule the limit out never lower the exit status: the
//! alarm stays with the estimate's exceedance probability.

use super::{
    GlobalOptions, parse_alarm, parse_grid, parse_max_gradient, parse_strength, print_stdout,
    progress_bar,
};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::io::{check_output_dir, load_case, load_readings_as};
use edgetherm::report::estimate::{
    bounds_hottest_interval, summary_json, text_summary, write_outputs,
};
use edgetherm::uncertainty::BootstrapMode;
use edgetherm::{Error, Result};
use std::path::PathBuf;

/// Arguments of `edgetherm estimate`.
#[derive(Debug, clap::Args)]
pub struct EstimateArgs {
    /// The case directory (plate.toml, sensors.csv, readings.csv).
    #[arg(value_name = "CASE_DIR")]
    pub case_dir: PathBuf,
    /// Readings to use instead of CASE_DIR/readings.csv.
    #[arg(long, value_name = "FILE")]
    pub readings: Option<PathBuf>,
    /// Directory for the output files (created if needed; never an input's directory if an
    /// output would replace an input).
    #[arg(long, value_name = "DIR", default_value = "edgetherm-estimate")]
    pub out: PathBuf,
    /// Alarm limit for the hidden edges: a number in the case's temperature unit (no unit
    /// suffix; negative values are limits too): report the probability that any point of a
    /// hidden edge exceeds it.
    #[arg(long, value_name = "T", allow_negative_numbers = true, value_parser = super::temperature_arg)]
    pub limit: Option<f64>,
    /// Exit with status 3 when the probability of exceeding --limit is above this (a
    /// fraction between 0 and 1: 0.05 for 5 %).
    #[arg(
        long,
        value_name = "P",
        default_value_t = 0.05,
        allow_negative_numbers = true
    )]
    pub probability: f64,
    /// Keep every sensor: do not leave out sensors that look faulty.
    #[arg(long)]
    pub keep_all: bool,
    /// Sensors known to be faulty, left out whatever they read (comma-separated ids). By
    /// default a sensor that stands out is kept when a hot spot under it would explain its
    /// reading; name it here only when you know it is bad.
    #[arg(long, value_name = "ID,ID", value_delimiter = ',')]
    pub exclude: Vec<String>,
    /// Bootstrap noise: `parametric` (Gaussian with the stated sigma) or `residual`
    /// (resampled residuals) [default: parametric when sigma is stated, else residual].
    #[arg(long, value_name = "MODE", value_parser = ["parametric", "residual"])]
    pub bootstrap: Option<String>,
    /// Bootstrap replicates [default: the case's [uncertainty] replicates, else 2000].
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = super::count_arg)]
    pub replicates: Option<usize>,
    /// Seed of the bootstrap [default: the case's [uncertainty] seed].
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = super::seed_arg)]
    pub seed: Option<u64>,
    /// Smoothing strength rule, overriding the case: gcv, discrepancy, evidence, lcurve, or a
    /// positive number (fixed).
    #[arg(long, value_name = "RULE")]
    pub strength: Option<String>,
    /// Field grid: NX,NY points, edges included (a round part: NX angles round the circle by NY radii across it) [default: 41,41].
    #[arg(long, value_name = "NX,NY")]
    pub grid: Option<String>,
    /// Steepest credible change of a hidden edge's temperature along it, in the case's
    /// temperature unit per length unit: strict bounds that hold for every edge obeying it
    /// [default: the case's [bounds] max_gradient].
    #[arg(long, value_name = "G", allow_negative_numbers = true)]
    pub max_gradient: Option<f64>,
    /// Skip the strict bounds and the gradient study (they cost a few seconds).
    #[arg(long)]
    pub no_bounds: bool,
    /// How readings.csv is written, when detection should not decide.
    #[command(flatten)]
    pub dialect: super::dialect::DialectArgs,
}

/// Run `estimate`.
pub fn run(args: &EstimateArgs, global: &GlobalOptions) -> Result<i32> {
    let files = global.case_files(&args.case_dir, true, true, args.readings.clone())?;
    let mut case = load_case(&files)?;
    let (readings, read_as) =
        load_readings_as(&case.files.readings, &case, &args.dialect.options(None)?)?;
    case.read_as.push(read_as);
    check_output_dir(&args.out, &case.files.inputs(), global.overwrite)?;
    let limit = parse_alarm(args.limit, args.probability, &case)?;
    if args.replicates == Some(0) {
        return Err(Error::invalid_field("--replicates", "must be at least 1"));
    }
    let strength = args.strength.as_deref().map(parse_strength).transpose()?;
    let exclude = edgetherm::options::exclude(&args.exclude, &case)?;
    let max_gradient_k_per_m = parse_max_gradient(args.max_gradient, &case)?;
    if args.no_bounds && args.max_gradient.is_some() {
        return Err(Error::invalid_field(
            "--no-bounds",
            "--no-bounds and --max-gradient ask for opposite things; give one of them",
        ));
    }
    let options = EstimateOptions {
        mode: args.bootstrap.as_deref().map(|m| {
            if m == "residual" {
                BootstrapMode::Residual
            } else {
                BootstrapMode::Parametric
            }
        }),
        limit,
        alarm_probability: args.probability,
        keep_all: args.keep_all,
        grid: match &args.grid {
            Some(g) => parse_grid(g)?,
            None => edgetherm::case::DEFAULT_GRID,
        },
        replicates: args.replicates,
        seed: args.seed,
        strength,
        exclude,
        strict_bounds: !args.no_bounds,
        max_gradient_k_per_m,
    };

    let total = options.replicates.unwrap_or(case.uncertainty.replicates) as u64;
    global.check_budget(
        &edgetherm::budget::estimate_cost(
            &case,
            total as usize,
            args.replicates.is_some(),
            options.grid,
            case.sensors.len(),
        ),
        &case,
    )?;
    let bar = progress_bar(
        global,
        Some(total),
        "bootstrap {bar:32} {pos}/{len} replicates ({eta})",
    );
    let tick = |n: usize| {
        if let Some(b) = &bar {
            b.set_position(n as u64);
        }
    };
    let result = estimate(
        &case,
        &readings,
        &options,
        bar.as_ref().map(|_| &tick as &(dyn Fn(usize) + Sync)),
    )?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let written = write_outputs(&result, &args.out)?;
    if global.json {
        print_stdout(&format!("{:#}\n", summary_json(&result)))?;
    } else if !global.quiet {
        let mut text = text_summary(&result);
        text.push_str(&format!(
            "\nWrote {} files to {}.\n",
            written.len(),
            args.out.display()
        ));
        print_stdout(&text)?;
    }
    let bounds_exceed = match (limit, bounds_hottest_interval(&result)) {
        (Some(t), Some([lo, _])) => lo > t,
        _ => false,
    };
    Ok(
        if result.exceedance.is_some_and(|e| e.alarm) || bounds_exceed {
            3
        } else {
            0
        },
    )
}

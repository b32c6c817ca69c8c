//! `edgetherm check CASE_DIR`: validate the inputs and describe the case, without fitting.
//!
//! Loading the case runs every input check of the library; this command adds the readings
//! (when a readings file exists or `--readings` names one) and then reports, in the case's
//! units: the plate outline, each edge and its condition, the unknown edges, each sensor's
//! position and depth below each unknown edge, the readings count and the settings. The
//! description is built and rendered by [`edgetherm::report::check`]; this file reads the
//! flags, loads the case and prints.

use super::{GlobalOptions, print_stdout};
use edgetherm::Result;
use edgetherm::io::{load_case, load_readings_as};
use edgetherm::report::check::CheckReport;
use std::path::PathBuf;

/// Arguments of `edgetherm check`.
#[derive(Debug, clap::Args)]
pub struct CheckArgs {
    /// The case directory (plate.toml, sensors.csv and optionally readings.csv).
    #[arg(value_name = "CASE_DIR")]
    pub case_dir: PathBuf,
    /// Readings to use instead of CASE_DIR/readings.csv.
    #[arg(long, value_name = "FILE")]
    pub readings: Option<PathBuf>,
    /// How readings.csv is written, when detection should not decide.
    #[command(flatten)]
    pub dialect: super::dialect::DialectArgs,
}

/// Run `check`; exit status 0 when every input is valid (errors carry their own status).
pub fn run(args: &CheckArgs, global: &GlobalOptions) -> Result<i32> {
    let files = global.case_files(&args.case_dir, true, false, args.readings.clone())?;
    let mut case = load_case(&files)?;
    // Readings are optional for `check`, but a file that exists (or is named by --readings)
    // must be valid.
    let readings = if args.readings.is_some() || case.files.readings.exists() {
        let (r, read_as) =
            load_readings_as(&case.files.readings, &case, &args.dialect.options(None)?)?;
        case.read_as.push(read_as);
        Some(r)
    } else {
        None
    };
    let report = CheckReport::new(&case, readings.as_deref())?;
    if global.json {
        let json = serde_json::to_string_pretty(&report)
            .map_err(|e| edgetherm::Error::Internal(format!("cannot write JSON: {e}")))?;
        print_stdout(&format!("{json}\n"))?;
    } else if !global.quiet {
        print_stdout(&report.text())?;
    }
    Ok(0)
}

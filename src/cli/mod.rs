//! Command-line interface: the flags (clap), the dispatch to each command, and the mapping
//! of errors to messages on stderr and exit statuses.
//!
//! Commands are thin: they build a [`CaseFiles`] from the flags, call the library and print.
//! Results go to stdout (text, or JSON with `--json`); errors go to stderr as
//! `edgetherm: <message>`.

mod check;
mod design;
mod dialect;
mod estimate;
mod simulate;
mod track;

use clap::{Args, Parser, Subcommand};
use edgetherm::case::CaseFiles;
use edgetherm::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Recover the temperature of a hidden plate edge from interior thermocouples, with
/// uncertainty.
///
/// Lengths and temperatures are read and written in the units `plate.toml` states.
#[derive(Debug, Parser)]
#[command(name = "edgetherm", version, about, long_about = None)]
struct Cli {
    #[command(flatten)]
    global: GlobalOptions,
    #[command(subcommand)]
    command: Command,
}

/// The help heading of the options every command takes (listed apart from each command's
/// own).
const GLOBAL: &str = "Options of every command";

/// Flags that every command accepts.
#[derive(Debug, Args)]
pub struct GlobalOptions {
    /// Plate file to use instead of CASE_DIR/plate.toml.
    #[arg(long, global = true, value_name = "FILE", help_heading = GLOBAL)]
    pub plate: Option<PathBuf>,
    /// Sensor layout to use instead of CASE_DIR/sensors.csv.
    #[arg(long, global = true, value_name = "FILE", help_heading = GLOBAL)]
    pub sensors: Option<PathBuf>,
    /// Print the summary as JSON on stdout instead of text.
    #[arg(long, global = true, help_heading = GLOBAL)]
    pub json: bool,
    /// Print no progress and no text (errors still go to stderr).
    #[arg(long, global = true, help_heading = GLOBAL)]
    pub quiet: bool,
    /// Replace existing output files that no earlier run of edgetherm wrote (by default
    /// they are refused; an input of the run is never replaced).
    #[arg(long, global = true, help_heading = GLOBAL)]
    pub overwrite: bool,
    /// Memory the run may use, in MB (10^6 bytes); a run estimated to need more is refused
    /// before it starts, naming the setting to change [default: 2147, i.e. 2 GiB].
    #[arg(long, global = true, value_name = "MB", allow_negative_numbers = true, help_heading = GLOBAL)]
    pub memory_budget: Option<f64>,
    /// Computing time the run may take, in seconds; a run estimated to take longer is
    /// refused before it starts [default: 600].
    #[arg(long, global = true, value_name = "S", allow_negative_numbers = true, help_heading = GLOBAL)]
    pub time_budget: Option<f64>,
}

impl GlobalOptions {
    /// Check the estimated `cost` of a run against `--memory-budget` / `--time-budget`
    /// ([`edgetherm::budget`]); a long run says so on stderr before it starts (unless
    /// `--quiet`).
    pub fn check_budget(
        &self,
        cost: &edgetherm::budget::Cost,
        case: &edgetherm::case::Case,
    ) -> Result<()> {
        use edgetherm::budget::{ANNOUNCE_SECONDS, Budget, human_bytes, human_seconds};
        let mut budget = Budget::default();
        for (flag, value, slot) in [
            (
                "--memory-budget",
                self.memory_budget,
                &mut budget.memory_bytes,
            ),
            ("--time-budget", self.time_budget, &mut budget.seconds),
        ] {
            if let Some(v) = value {
                if !(v.is_finite() && v > 0.0) {
                    return Err(Error::invalid_field(
                        flag,
                        format!("must be a positive number, not {v}"),
                    ));
                }
                *slot = if flag == "--memory-budget" {
                    v * 1e6
                } else {
                    v
                };
            }
        }
        budget.check(cost, case).map_err(|e| match e {
            // a setting of the plate file (a flag has no file): add its line
            Error::Invalid {
                mut location,
                message,
            } => {
                if let (Some(file), Some(field), None) =
                    (&location.file, &location.field, location.line)
                {
                    location.line = edgetherm::io::plate_line_of(file, field);
                }
                Error::Invalid { location, message }
            }
            other => other,
        })?;
        if cost.seconds() > ANNOUNCE_SECONDS && !self.quiet {
            let _ = writeln!(
                std::io::stderr(),
                "edgetherm: this run needs about {} of computation and {} of memory",
                human_seconds(cost.seconds()),
                human_bytes(cost.bytes())
            );
        }
        Ok(())
    }

    /// The files of the case in `dir`, with the `--plate/--sensors/--readings` overrides,
    /// checked to exist before anything is read, so that a wrong path gets a message that
    /// says which file is missing and what to do (not a bare "No such file"): the case folder
    /// itself, `plate.toml`, and `sensors.csv` / `readings.csv` when the command needs them.
    ///
    /// `readings_override` is the command's `--readings FILE` (`check` and `estimate`, the
    /// commands that read a readings file).
    pub fn case_files(
        &self,
        dir: &Path,
        sensors: bool,
        readings: bool,
        readings_override: Option<PathBuf>,
    ) -> Result<CaseFiles> {
        let files = CaseFiles::in_dir(dir).with_overrides(
            self.plate.clone(),
            self.sensors.clone(),
            readings_override,
        );
        check_case_files(dir, &files, sensors, readings)?;
        Ok(files)
    }
}

/// The checks of [`GlobalOptions::case_files`].
fn check_case_files(dir: &Path, files: &CaseFiles, sensors: bool, readings: bool) -> Result<()> {
    let folder_needed = [
        (true, &files.plate),
        (sensors, &files.sensors),
        (readings, &files.readings),
    ]
    .iter()
    .any(|(needed, p)| *needed && p.starts_with(dir));
    if dir.is_file() {
        let parent = dir
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        return Err(Error::invalid_at(
            dir,
            None,
            Some("CASE_DIR"),
            format!(
                "this is a file, but CASE_DIR is the folder that holds plate.toml, sensors.csv \
                 and readings.csv; give the folder (here perhaps `{}`), or name single files \
                 with --plate, --sensors and --readings",
                parent.display()
            ),
        ));
    }
    if folder_needed && !dir.exists() {
        let cwd = std::env::current_dir()
            .map(|d| format!(" (relative paths start from {})", d.display()))
            .unwrap_or_default();
        return Err(Error::invalid_at(
            dir,
            None,
            Some("CASE_DIR"),
            format!(
                "the case folder does not exist{cwd}; check the path, e.g. \
                 `sample-measurements/cold-plate` from the repository's top folder"
            ),
        ));
    }
    let missing = |path: &Path, what: &str, fix: &str| -> Result<()> {
        if path.exists() {
            return Ok(());
        }
        Err(Error::invalid_at(
            path,
            None,
            None,
            format!("not found: {what}; {fix}"),
        ))
    };
    missing(
        &files.plate,
        "every case needs plate.toml (the plate's size, units and edge conditions; \
         docs/case-files.md)",
        "write one in the case folder, or name one with --plate FILE",
    )?;
    if sensors {
        missing(
            &files.sensors,
            "this command needs the sensor positions, one row `sensor,x,y` per thermocouple \
             in the case's length unit (docs/case-files.md)",
            "write sensors.csv in the case folder or name the file with --sensors FILE \
             (to choose positions first, run `edgetherm design CASE_DIR --count K`)",
        )?;
    }
    if readings {
        missing(
            &files.readings,
            "this command needs the readings, one row `sensor,temperature` per sensor in the \
             case's temperature unit (docs/case-files.md)",
            "write readings.csv in the case folder or name the file with --readings FILE \
             (`edgetherm simulate` makes synthetic ones from a truth profile; a logger file \
             of many rows goes to `edgetherm track --log`)",
        )?;
    }
    Ok(())
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Reconstruct the hidden edge(s) and the field from one set of readings, with
    /// uncertainty (the main job).
    Estimate(estimate::EstimateArgs),
    /// Validate the inputs and print what the model will be, without fitting.
    Check(check::CheckArgs),
    /// Synthetic readings for a known edge profile (demos, what-if studies, tests).
    Simulate(simulate::SimulateArgs),
    /// Choose a sensor layout before drilling, or score one (--evaluate), with the
    /// uncertainty it will leave along the hidden edges.
    Design(design::DesignArgs),
    /// Run the estimate on every row of a logger file: the hottest point through time,
    /// alarms over a limit, and failing sensors.
    Track(track::TrackArgs),
}

/// Parse the command line, run the command and return the process exit status.
pub fn run() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // clap prints help and version to stdout (status 0) and usage errors to stderr
            // (status 2, as for any invalid input).
            let _ = e.print();
            return e.exit_code();
        }
    };
    let result = match &cli.command {
        Command::Estimate(args) => estimate::run(args, &cli.global),
        Command::Check(args) => check::run(args, &cli.global),
        Command::Simulate(args) => simulate::run(args, &cli.global),
        Command::Design(args) => design::run(args, &cli.global),
        Command::Track(args) => track::run(args, &cli.global),
    };
    match result.map_err(with_flag_names) {
        Ok(code) => code,
        Err(e) => {
            let _ = writeln!(std::io::stderr(), "edgetherm: {e}");
            e.exit_code()
        }
    }
}

/// clap value parser of a temperature flag (`--limit T`): a number, in the case's
/// temperature unit. A number with a unit attached (`400F`, `70°C`) is refused with a message
/// saying that the unit comes from the case.
pub fn temperature_arg(text: &str) -> std::result::Result<f64, String> {
    let t = text.trim();
    if let Ok(v) = t.parse::<f64>() {
        return if v.is_finite() {
            Ok(v)
        } else {
            Err(format!("`{text}` is not a finite temperature"))
        };
    }
    let lower = t.to_ascii_lowercase();
    let number = lower
        .trim_end_matches(['c', 'f', 'k'])
        .trim_end_matches("deg")
        .trim_end_matches('°')
        .trim_end();
    match number.parse::<f64>() {
        Ok(v) if v.is_finite() && number.len() < lower.len() => Err(format!(
            "give the number alone (`{}`): the unit is the case's, `temperature_unit` in \
             plate.toml's [plate] section; convert the value to that unit first if it differs",
            number
        )),
        _ => Err(format!(
            "expected a number in the case's temperature unit (`temperature_unit` in \
             plate.toml), got `{text}`"
        )),
    }
}

/// clap value parser of a count flag (`--replicates N`, `--count K`, ...): a whole number 0
/// or more, with a message that says so for a negative or fractional value.
pub fn count_arg(text: &str) -> std::result::Result<usize, String> {
    let t = text.trim();
    t.parse::<usize>().map_err(|_| {
        if t.starts_with('-') {
            format!("`{text}` is negative; this is a count, a whole number 0 or more")
        } else {
            format!("expected a whole number 0 or more, got `{text}`")
        }
    })
}

/// clap value parser of a seed (`--seed N`): a whole number 0 to 2^64 − 1.
pub fn seed_arg(text: &str) -> std::result::Result<u64, String> {
    let t = text.trim();
    t.parse::<u64>().map_err(|_| {
        format!("expected a whole number from 0 to 18446744073709551615 as a seed, got `{text}`")
    })
}

/// Parse `--grid NX,NY` (each between 2 and [`edgetherm::case::MAX_GRID`]).
pub fn parse_grid(text: &str) -> Result<(usize, usize)> {
    use edgetherm::case::MAX_GRID;
    let bad = || {
        Error::invalid_field(
            "--grid",
            format!("expected two whole numbers NX,NY between 2 and {MAX_GRID}, got `{text}`"),
        )
    };
    let (a, b) = text.split_once(',').ok_or_else(bad)?;
    let nx: usize = a.trim().parse().map_err(|_| bad())?;
    let ny: usize = b.trim().parse().map_err(|_| bad())?;
    if !(2..=MAX_GRID).contains(&nx) || !(2..=MAX_GRID).contains(&ny) {
        return Err(bad());
    }
    Ok((nx, ny))
}

/// The library names a setting that came from the command line `option.NAME` (it knows no
/// flags); the message says `--NAME`, the flag the user typed.
fn with_flag_names(e: Error) -> Error {
    match e {
        Error::Invalid {
            mut location,
            message,
        } => {
            if let Some(f) = location.field.as_deref() {
                if let Some(name) = f.strip_prefix("option.") {
                    location.field = Some(format!("--{}", name.replace('_', "-")));
                }
            }
            Error::Invalid { location, message }
        }
        other => other,
    }
}

/// `--limit T` (case temperature unit, as kelvin) and `--probability P` of `estimate` and
/// `track`, checked.
pub fn parse_alarm(
    limit: Option<f64>,
    probability: f64,
    case: &edgetherm::case::Case,
) -> Result<Option<f64>> {
    edgetherm::options::alarm(limit, probability, case)
}

/// A progress bar on stderr when it is a terminal and `--quiet` is off: a bar to `len`, or a
/// spinner without a length.
pub fn progress_bar(
    global: &GlobalOptions,
    len: Option<u64>,
    template: &str,
) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    (!global.quiet && std::io::stderr().is_terminal()).then(|| {
        let (bar, fallback) = match len {
            Some(n) => (
                indicatif::ProgressBar::new(n),
                indicatif::ProgressStyle::default_bar(),
            ),
            None => (
                indicatif::ProgressBar::new_spinner(),
                indicatif::ProgressStyle::default_spinner(),
            ),
        };
        bar.set_style(indicatif::ProgressStyle::with_template(template).unwrap_or(fallback));
        bar
    })
}

/// `--max-gradient G` in the case's temperature unit per length unit (per degree on a round part), as K/m.
pub fn parse_max_gradient(g: Option<f64>, case: &edgetherm::case::Case) -> Result<Option<f64>> {
    edgetherm::options::max_gradient(g, case)
}

/// Parse `--strength`: a rule name or a positive number (a fixed strength).
pub fn parse_strength(s: &str) -> Result<edgetherm::case::StrengthRule> {
    edgetherm::options::strength(s)
}

/// Write `text` to stdout. A closed pipe (`edgetherm check . | head`) is not an error.
pub fn print_stdout(text: &str) -> Result<()> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(Error::Io {
            path: PathBuf::from("<stdout>"),
            source: e,
            input: false,
        }),
        _ => Ok(()),
    }
}

#[cfg(test)]
mod flag_tests {
    use super::*;

    #[test]
    fn grid_parses_and_rejects() {
        assert_eq!(parse_grid("41,21").unwrap(), (41, 21));
        assert_eq!(parse_grid(" 3 , 2 ").unwrap(), (3, 2));
        for bad in ["41", "1,5", "a,b", "5,99999", "-3,4", ""] {
            assert!(parse_grid(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn temperature_flag_takes_negatives_and_refuses_units() {
        // parsing is exact: compare the bits
        assert_eq!(
            temperature_arg("-10").unwrap().to_bits(),
            (-10.0f64).to_bits()
        );
        assert_eq!(
            temperature_arg(" 70.5 ").unwrap().to_bits(),
            70.5f64.to_bits()
        );
        for with_unit in ["400F", "70C", "70 °C", "70degC", "300K", "-5 c"] {
            let e = temperature_arg(with_unit).unwrap_err();
            assert!(e.contains("give the number alone"), "{with_unit}: {e}");
            assert!(e.contains("temperature_unit"), "{with_unit}: {e}");
        }
        let e = temperature_arg("hot").unwrap_err();
        assert!(e.contains("expected a number"), "{e}");
        assert!(temperature_arg("inf").is_err());
        assert!(temperature_arg("NaN").is_err());
    }

    #[test]
    fn count_flag_explains_a_negative() {
        assert_eq!(count_arg("8").unwrap(), 8);
        assert!(count_arg("-1").unwrap_err().contains("is negative"));
        assert!(count_arg("2.5").unwrap_err().contains("whole number"));
        assert!(seed_arg("-3").unwrap_err().contains("whole number"));
    }

    #[test]
    fn library_option_fields_become_flags() {
        let e = with_flag_names(Error::invalid_field("option.ignore_extra", "x"));
        assert!(e.to_string().contains("field `--ignore-extra`"), "{e}");
        let e = with_flag_names(Error::invalid_field("fit.strength", "x"));
        assert!(e.to_string().contains("field `fit.strength`"), "{e}");
    }
}

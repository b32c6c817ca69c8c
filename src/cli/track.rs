//! `edgetherm track CASE_DIR --log LOG.csv`: the estimate on every row of a logger file, the
//! hottest point through time, alarms and failing sensors (`docs/track.md`).
//!
//! The log is read on a second thread (CSV parsing and the fits then run side by side) and
//! handed over in bounded batches, so memory stays constant. `track.csv` is written row by
//! row into a staging folder (see [`edgetherm::io::StreamWriter`]); the whole set is moved
//! into place at the end ([`edgetherm::io::OutputSet`]), so a reader never sees a mix of an
//! earlier run's files and this one's. With `--follow`, `track.csv` is written in place and
//! the other outputs are rewritten whenever the log goes quiet; the manifest is removed at
//! the start and written at the end.
//!
//! Exit status: 0 done; 3 when `--limit` is given and an alarm episode occurred; 2 invalid
//! input; 1 internal error.

use super::{
    GlobalOptions, parse_alarm, parse_max_gradient, parse_strength, print_stdout, progress_bar,
};
use edgetherm::case::Case;
use edgetherm::io::logger::Follow;
use edgetherm::io::{
    LoggerOptions, LoggerReader, LoggerRow, OutputSet, StreamWriter, check_track_outputs,
    load_case, write_atomic,
};
use edgetherm::report::track::{
    TRACK_CSV_HEADER, alarms_csv, health_csv, plot, summary_json, text_summary, track_csv_row,
};
use edgetherm::track::{RowRecord, TrackOptions, Tracker};
use edgetherm::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// Rows per batch handed from the reading thread (1 with `--follow`, so each row is handled
/// as soon as it is complete).
const BATCH: usize = 512;

/// Arguments of `edgetherm track`.
#[derive(Debug, clap::Args)]
pub struct TrackArgs {
    /// The case directory (plate.toml, sensors.csv).
    #[arg(value_name = "CASE_DIR")]
    pub case_dir: PathBuf,
    /// The logger file, CSV or Parquet: `time` and one column per sensor id (ISO 8601 or
    /// seconds; readings in the case's temperature unit).
    #[arg(long, value_name = "LOG.csv")]
    pub log: PathBuf,
    /// Directory for the outputs (track.csv, alarms.csv, sensors-health.csv, track.svg,
    /// summary.json).
    #[arg(long, value_name = "DIR", default_value = "edgetherm-track")]
    pub out: PathBuf,
    /// Alarm limit for the hidden edges: a number in the case's temperature unit (no unit
    /// suffix; negative values are limits too).
    #[arg(long, value_name = "T", allow_negative_numbers = true, value_parser = super::temperature_arg)]
    pub limit: Option<f64>,
    /// A row is in alarm when the probability of exceeding --limit is above this (a
    /// fraction between 0 and 1: 0.05 for 5 %).
    #[arg(
        long,
        value_name = "P",
        default_value_t = 0.05,
        allow_negative_numbers = true
    )]
    pub probability: f64,
    /// An alarm episode ends after this many rows in a row at or below --probability.
    #[arg(long, value_name = "N", default_value_t = 10, allow_negative_numbers = true, value_parser = super::count_arg)]
    pub clear: usize,
    /// Choose the smoothing and its strength once, on the first N usable rows, then keep
    /// them fixed [default: chosen on every row].
    #[arg(long, value_name = "FIRST_N_ROWS", allow_negative_numbers = true, value_parser = super::count_arg)]
    pub calibrate: Option<usize>,
    /// Smoothing strength rule, overriding the case: gcv, discrepancy, evidence, lcurve, or
    /// a positive number (fixed).
    #[arg(long, value_name = "RULE")]
    pub strength: Option<String>,
    /// Bands from the bootstrap on every row (as `estimate`; slow) instead of the linear
    /// (Gaussian posterior) band.
    #[arg(long)]
    pub bootstrap: bool,
    /// Bootstrap replicates per row with --bootstrap [default: the case's].
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = super::count_arg)]
    pub replicates: Option<usize>,
    /// Posterior draws per sensor pattern for the exceedance probability.
    #[arg(long, value_name = "N", default_value_t = edgetherm::track::engine::DEFAULT_DRAWS, allow_negative_numbers = true, value_parser = super::count_arg)]
    pub draws: usize,
    /// Seed of the draws and of the bootstrap [default: the case's [uncertainty] seed].
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = super::seed_arg)]
    pub seed: Option<u64>,
    /// Never leave out a sensor that has a reading (problems are still reported).
    #[arg(long)]
    pub keep_all: bool,
    /// Strict bounds on the hottest temperature of rows, for every hidden edge changing by
    /// at most G (case temperature unit per length unit) along it [default: the case's
    /// [bounds] max_gradient, else none]. A row bounded above --limit is in alarm.
    #[arg(long, value_name = "G", allow_negative_numbers = true)]
    pub max_gradient: Option<f64>,
    /// With strict bounds: bound every N-th fitted row (and each row that opens an alarm
    /// episode); each bounded row costs conic programs (tenths of a second).
    #[arg(long, value_name = "N", default_value_t = edgetherm::track::bounds::DEFAULT_BOUNDS_EVERY, allow_negative_numbers = true, value_parser = super::count_arg)]
    pub bounds_every: usize,
    /// Ignore logger columns that are not sensors of the case (else they are an error).
    #[arg(long)]
    pub ignore_extra: bool,
    /// Keep reading the log as the logger appends to it, until interrupted.
    #[arg(long)]
    pub follow: bool,
    /// With --follow: stop after this many seconds without new rows [default: never].
    #[arg(
        long,
        value_name = "SECONDS",
        requires = "follow",
        allow_negative_numbers = true
    )]
    pub idle_exit: Option<f64>,
    /// How the log is written, when detection should not decide.
    #[command(flatten)]
    pub dialect: super::dialect::DialectArgs,
    /// Format of the log's time column; `excel-days` (spreadsheet serial days) and an
    /// ambiguous `mm/dd/yyyy` or `dd/mm/yyyy` must be declared [default: detected from the
    /// first rows].
    #[arg(long, value_name = "FORMAT", value_parser = ["seconds", "iso", "dd.mm.yyyy", "dd/mm/yyyy", "mm/dd/yyyy", "excel-days"])]
    pub time_format: Option<String>,
}

/// Run `track`: validate the flags, open the log, stream its rows through the tracker
/// (a reading thread feeds batches), then write the summaries and print the verdict.
/// Rows an unknown `h` is estimated from when `--calibrate` is not given.
const H_DEFAULT_ROWS: usize = 200;

pub fn run(args: &TrackArgs, global: &GlobalOptions) -> Result<i32> {
    let files = global.case_files(&args.case_dir, true, false, None)?;
    // (a device or a pipe is a log too: only a path that is missing or a folder is refused)
    if !args.log.exists() || args.log.is_dir() {
        return Err(Error::invalid_at(
            &args.log,
            None,
            Some("--log"),
            if args.log.is_dir() {
                "this is a folder; --log takes the logger file itself (a CSV or Parquet \
                 file with a `time` column and one column per sensor id, docs/track.md)"
            } else {
                "not found: --log takes the logger file (a CSV or Parquet file with a `time` \
                 column and one column per sensor id, docs/track.md); check the path"
            },
        ));
    }
    let mut case = load_case(&files)?;
    let mut inputs = case.files.inputs();
    inputs.push(&args.log);
    check_track_outputs(&args.out, &inputs, global.overwrite)?;
    let (mut options, idle_exit) = track_options(args, &case)?;
    if !case.plate.unknown_heat_transfer().is_empty() {
        // h = "unknown": estimated once from the first rows (the calibration rows with
        // --calibrate), then fixed for the whole log (docs/track.md)
        let wanted = args.calibrate.unwrap_or(H_DEFAULT_ROWS).max(1);
        let mut first = LoggerReader::open(
            &args.log,
            &case,
            &LoggerOptions {
                ignore_extra: true,
                follow: None,
                dialect: args.dialect.options(args.time_format.as_deref())?,
            },
        )?;
        let mut row = edgetherm::io::LoggerRow::default();
        let mut rows = Vec::new();
        while rows.len() < wanted && first.next_row(&mut row)? {
            rows.push(row.values.clone());
        }
        let conv = edgetherm::track::estimate_h_from_rows(&case, &rows)
            .map_err(|e| e.in_file(&args.log, |_| None))?;
        if !global.quiet {
            eprintln!(
                "edgetherm: h of the {} edge estimated from the first {} rows: {} W/(m^2 K)",
                conv.edge,
                rows.len(),
                edgetherm::estimate::convection::three_digits(conv.h)
            );
        }
        case.plate = case.plate.with_heat_transfer(conv.edge, conv.h)?;
        options.convection = Some(conv);
    }
    let limit = options.limit;
    let cost = edgetherm::budget::track_run_cost(&case, &options, args.replicates.is_some());
    global.check_budget(&cost, &case)?;
    let reader = open_log(args, &case, global, idle_exit)?;
    case.read_as.push(reader.read_as());
    let mut tracker = Tracker::new(&case, options)?;
    // the whole set is staged and moved into place at the end (io::OutputSet); with
    // --follow, track.csv is written where it can be watched while the log grows
    let mut set = OutputSet::begin(&args.out, "track")?;
    let csv_path = if args.follow {
        set.live_path("track.csv")?
    } else {
        set.staging_path("track.csv")
    };
    let writer = StreamWriter::create(&csv_path, TRACK_CSV_HEADER, args.follow)?;
    let (rx, handle, recycle) = spawn_reader(reader, if args.follow { 1 } else { BATCH });
    let mut rows_out = RowsOut {
        case: tracker.case().clone(),
        writer,
    };
    if args.follow {
        stop::install();
    }
    let interrupted = stream_rows(args, global, &mut tracker, &mut rows_out, (&rx, &recycle))?;
    tracker.finish(&mut |rec| rows_out.write(rec))?;
    if !interrupted {
        // (after a signal the reading thread may be waiting for the log to grow: it is left
        // to end with the process)
        let _ = handle.join();
    }
    let writer = rows_out.writer;
    writer.finish()?;
    set.record("track.csv")?;
    let summary = write_summaries(&tracker, &mut set)?;
    set.commit()?;
    if global.json {
        print_stdout(&format!("{:#}\n", summary_json(&case, &summary)))?;
    } else if !global.quiet {
        let mut text = text_summary(&case, &summary);
        text.push_str(&format!("Wrote 5 files to {}.\n", args.out.display()));
        print_stdout(&text)?;
    }
    Ok(if limit.is_some() && tracker.any_alarm() {
        3
    } else {
        0
    })
}

/// The validated settings of a run (raw flags → [`TrackOptions`]) and the idle time after
/// which `--follow` stops.
fn track_options(args: &TrackArgs, case: &Case) -> Result<(TrackOptions, Option<Duration>)> {
    let limit = parse_alarm(args.limit, args.probability, case)?;
    for (flag, v) in [
        ("--clear", Some(args.clear)),
        ("--calibrate", args.calibrate),
        ("--replicates", args.replicates),
        ("--draws", Some(args.draws)),
        ("--bounds-every", Some(args.bounds_every)),
    ] {
        if v == Some(0) {
            return Err(Error::invalid_field(flag, "must be at least 1"));
        }
    }
    let idle_exit = match args.idle_exit {
        Some(s) if s.is_finite() && s >= 0.0 => Some(Duration::from_secs_f64(s)),
        Some(s) => {
            return Err(Error::invalid_field(
                "--idle-exit",
                format!("must be a number of seconds >= 0, not {s}"),
            ));
        }
        None => None,
    };
    let strength = args.strength.as_deref().map(parse_strength).transpose()?;
    let max_gradient_k_per_m = parse_max_gradient(args.max_gradient, case)?;
    let options = TrackOptions {
        strength,
        calibrate: args.calibrate,
        limit,
        probability: args.probability,
        clear_rows: args.clear,
        draws: args.draws,
        seed: args.seed,
        keep_all: args.keep_all,
        bootstrap: args.bootstrap,
        replicates: args.replicates,
        max_gradient_k_per_m,
        bounds_every: args.bounds_every,
        ..TrackOptions::default()
    };
    Ok((options, idle_exit))
}

/// Open the logger file, naming the flag that helps when it has extra columns, and say on
/// stderr which columns are ignored and which sensors have none.
fn open_log(
    args: &TrackArgs,
    case: &Case,
    global: &GlobalOptions,
    idle_exit: Option<Duration>,
) -> Result<LoggerReader> {
    let reader = LoggerReader::open(
        &args.log,
        case,
        &LoggerOptions {
            ignore_extra: args.ignore_extra,
            follow: args.follow.then_some(Follow {
                poll: Duration::from_millis(250),
                idle_exit,
            }),
            dialect: args.dialect.options(args.time_format.as_deref())?,
        },
    )
    .map_err(|e| match e {
        Error::Invalid {
            location,
            mut message,
        } if message.ends_with(edgetherm::io::logger::IGNORE_EXTRA_HINT) => {
            message.push_str(" (--ignore-extra)");
            Error::Invalid { location, message }
        }
        other => other,
    })?;
    if !global.quiet && !reader.ignored_columns.is_empty() {
        eprintln!(
            "edgetherm: ignoring columns that are not sensors: {}",
            reader.ignored_columns.join(", ")
        );
    }
    if !global.quiet && !reader.absent_sensors.is_empty() {
        let ids: Vec<&str> = reader
            .absent_sensors
            .iter()
            .map(|&i| case.sensors[i].id.as_str())
            .collect();
        eprintln!(
            "edgetherm: the log has no column for {}; tracking without {}",
            ids.join(", "),
            if ids.len() == 1 { "it" } else { "them" }
        );
    }
    Ok(reader)
}

/// Batches of rows from the log, read on their own thread over a bounded channel.
type RowBatches = mpsc::Receiver<Result<Vec<LoggerRow>>>;

/// Start the reading thread: it sends batches of `batch` rows and stops at the end of the
/// log, at the first error (sent), or when the receiver is gone.
///
/// Batches the tracker is done with come back through the second channel (at most two wait):
/// their rows are filled again, so that a row's buffers are not allocated anew on this
/// thread and freed on another for every row of the log.
fn spawn_reader(
    mut reader: LoggerReader,
    batch: usize,
) -> (
    RowBatches,
    std::thread::JoinHandle<()>,
    mpsc::SyncSender<Vec<LoggerRow>>,
) {
    let (tx, rx) = mpsc::sync_channel::<Result<Vec<LoggerRow>>>(8);
    let (recycle, spent) = mpsc::sync_channel::<Vec<LoggerRow>>(2);
    let handle = std::thread::spawn(move || {
        loop {
            let mut rows = Vec::with_capacity(batch);
            let mut spare = spent.try_recv().unwrap_or_default();
            let mut row = spare.pop().unwrap_or_default();
            let mut done = false;
            while rows.len() < batch {
                match reader.next_row(&mut row) {
                    Ok(true) => {
                        let next = spare.pop().unwrap_or_default();
                        rows.push(std::mem::replace(&mut row, next));
                    }
                    Ok(false) => {
                        done = true;
                        break;
                    }
                    Err(e) => {
                        let _ = tx.send(Err(e));
                        return;
                    }
                }
            }
            if !rows.is_empty() && tx.send(Ok(rows)).is_err() {
                return;
            }
            if done {
                return;
            }
        }
    });
    (rx, handle, recycle)
}

/// Push every row through the tracker into `track.csv`, with a progress bar; with
/// `--follow`, keep every output current while the log is quiet and at most every 2 s, and
/// stop after the row in hand on SIGINT or SIGTERM (returns `true` then).
fn stream_rows(
    args: &TrackArgs,
    global: &GlobalOptions,
    tracker: &mut Tracker,
    rows_out: &mut RowsOut,
    (rx, recycle): (&RowBatches, &mpsc::SyncSender<Vec<LoggerRow>>),
) -> Result<bool> {
    let bar = progress_bar(global, None, "track {spinner} {pos} rows ({per_sec})");
    let mut last_write = Instant::now();
    let mut dirty = false;
    let mut rows_seen: u64 = 0;
    // without a progress bar (stderr not a terminal), a line every 30 s says the run is alive
    let mut last_note = Instant::now();
    let mut interrupted = false;
    loop {
        if args.follow && stop::requested() {
            interrupted = true;
            if !global.quiet {
                let _ = writeln!(
                    std::io::stderr(),
                    "edgetherm: track: stopped by a signal after {rows_seen} rows; writing the \
                     outputs and the summary"
                );
            }
            break;
        }
        let msg = if args.follow {
            match rx.recv_timeout(Duration::from_millis(500)) {
                Ok(m) => Some(m),
                Err(mpsc::RecvTimeoutError::Timeout) => {
                    // the log is quiet: make every output current (once)
                    if dirty {
                        rows_out.writer.flush()?;
                        write_live_summaries(tracker, &args.out)?;
                        last_write = Instant::now();
                        dirty = false;
                    }
                    continue;
                }
                Err(mpsc::RecvTimeoutError::Disconnected) => None,
            }
        } else {
            rx.recv().ok()
        };
        let Some(msg) = msg else { break };
        let rows = msg?;
        let count = rows.len() as u64;
        if args.follow {
            // row by row, so that each alarm is announced as its row is read
            for row in &rows {
                let (was_open, closed_before) = (
                    tracker.open_alarm().is_some(),
                    tracker.closed_alarms().len(),
                );
                tracker.push(row, &mut |rec| rows_out.write(rec))?;
                if !global.quiet {
                    alarm_news(tracker, was_open, closed_before, bar.as_ref());
                }
            }
        } else {
            // fitted ahead on a helper thread while the batch before is finished
            tracker.push_batch(rows, &mut |rec| rows_out.write(rec))?;
            if let Some(spent) = tracker.take_spent_rows() {
                // the reader fills them again; if two batches already wait, these go
                let _ = recycle.try_send(spent);
            }
        }
        rows_seen += count;
        if let Some(b) = &bar {
            b.set_position(rows_seen);
        } else if !global.quiet && last_note.elapsed() >= Duration::from_secs(30) {
            let _ = writeln!(
                std::io::stderr(),
                "edgetherm: track: {rows_seen} rows processed so far"
            );
            last_note = Instant::now();
        }
        if args.follow {
            rows_out.writer.flush()?;
            dirty = true;
            if last_write.elapsed() >= Duration::from_secs(2) {
                write_live_summaries(tracker, &args.out)?;
                last_write = Instant::now();
                dirty = false;
            }
        }
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    Ok(interrupted)
}

/// SIGINT and SIGTERM during `track --follow`: the handler only records the request (an
/// atomic store, safe in a signal handler) and restores the default action, so a second
/// signal ends the process at once; the loop stops after the row in hand and the run ends
/// as usual (outputs, summary, exit status).
mod stop {
    use std::sync::atomic::{AtomicBool, Ordering};

    static STOP: AtomicBool = AtomicBool::new(false);

    #[cfg(unix)]
    extern "C" fn on_signal(sig: libc::c_int) {
        STOP.store(true, Ordering::SeqCst);
        // SAFETY: signal(2) is async-signal-safe; SIG_DFL is a valid disposition.
        unsafe {
            libc::signal(sig, libc::SIG_DFL);
        }
    }

    /// Install the handlers (a no-op off Unix: Ctrl-C then ends the process as before).
    pub fn install() {
        #[cfg(unix)]
        {
            let handler = on_signal as extern "C" fn(libc::c_int) as libc::sighandler_t;
            // SAFETY: the handler only touches an atomic and calls signal(2).
            unsafe {
                libc::signal(libc::SIGINT, handler);
                libc::signal(libc::SIGTERM, handler);
            }
        }
    }

    /// Whether a stop was requested.
    pub fn requested() -> bool {
        STOP.load(Ordering::SeqCst)
    }
}

/// With `--follow`: a line on stderr when an alarm episode starts or ends, as it happens
/// (through the progress bar when there is one, so that the two do not overprint).
fn alarm_news(
    tracker: &Tracker,
    was_open: bool,
    closed_before: usize,
    bar: Option<&indicatif::ProgressBar>,
) {
    let case = tracker.case();
    let sym = match case.units.temperature.symbol() {
        "K" => "K".to_string(),
        s => format!("°{s}"),
    };
    let show = |k: f64| format!("{:.2} {sym}", case.units.temp_from_k(k));
    let mut lines = Vec::new();
    for ep in tracker.closed_alarms().iter().skip(closed_before) {
        lines.push(format!(
            "edgetherm: ALARM ENDED: the episode that started at {} ended at {} (peak {} at {})",
            ep.start,
            ep.end.as_deref().unwrap_or("-"),
            show(ep.peak_temperature),
            ep.peak_time
        ));
    }
    let now_open = tracker.open_alarm();
    // an episode open now that was not open before, or one that closed and reopened
    if let Some(ep) = now_open {
        if !was_open || tracker.closed_alarms().len() > closed_before {
            lines.push(format!(
                "edgetherm: ALARM STARTED at {} (log line {}): the probability of exceeding the \
                 limit is above P; hottest {} (these are estimates, not measurements)",
                ep.start,
                ep.start_line,
                show(ep.peak_temperature)
            ));
        }
    }
    for l in lines {
        match bar {
            Some(b) => b.println(&l),
            None => {
                let _ = writeln!(std::io::stderr(), "{l}");
            }
        }
    }
}

/// Where `track.csv` rows go.
struct RowsOut {
    case: Case,
    writer: StreamWriter,
}

impl RowsOut {
    fn write(&mut self, rec: &RowRecord<'_>) -> Result<()> {
        track_csv_row(&self.case, rec, self.writer.buffer());
        self.writer.maybe_flush()
    }
}

/// With `--follow`, while the log is read: alarms.csv, sensors-health.csv, summary.json and
/// track.svg written straight into the output directory, each atomically (the set's
/// manifest is absent until the run ends, which tells a reader that the set is live).
fn write_live_summaries(tracker: &Tracker, out: &Path) -> Result<()> {
    let case = tracker.case();
    let s = tracker.snapshot();
    write_atomic(&out.join("alarms.csv"), &alarms_csv(case, &s))?;
    write_atomic(&out.join("sensors-health.csv"), &health_csv(case, &s))?;
    let json = format!("{:#}\n", summary_json(case, &s));
    write_atomic(&out.join("summary.json"), json.as_bytes())?;
    let svg = plot::track_svg(case, &s, &tracker.series().bins())?;
    write_atomic(&out.join("track.svg"), svg.as_bytes())?;
    Ok(())
}

/// Write alarms.csv, sensors-health.csv, summary.json and track.svg into the set.
fn write_summaries(
    tracker: &Tracker,
    set: &mut OutputSet,
) -> Result<edgetherm::track::TrackSummary> {
    let case = tracker.case();
    let s = tracker.snapshot();
    set.write("alarms.csv", &alarms_csv(case, &s))?;
    set.write("sensors-health.csv", &health_csv(case, &s))?;
    let json = format!("{:#}\n", summary_json(case, &s));
    set.write("summary.json", json.as_bytes())?;
    let svg = plot::track_svg(case, &s, &tracker.series().bins())?;
    set.write("track.svg", svg.as_bytes())?;
    Ok(s)
}

//! `edgetherm._edgetherm`: the native half of the Python package `edgetherm` (PyO3).
//!
//! Thin, as the command line is: every function loads or takes a case, calls the library
//! (`edgetherm::estimate::estimate`, the track engine, the design search), renders the same
//! outputs as the command line with `edgetherm::report`, and hands them to the Python half
//! (`python/edgetherm/__init__.py`), which builds the result objects and DataFrames. The
//! computation runs with the GIL released (`Python::detach`), so a thread pool scales.
//!
//! Errors: an invalid input raises `edgetherm.InputError` (a `ValueError`) whose message is
//! the command line's (file, line, field, what to do; a setting named by its keyword
//! argument instead of its flag), with `file`, `line` and `field` attributes; anything else
//! raises `edgetherm.EdgethermError` (a `RuntimeError`).

use edgetherm::case::{Case, CaseFiles};
use edgetherm::io::LoggerRow;
use edgetherm::io::columnar::{ColumnarRows, TimeCell};
use edgetherm::track::{RowRecord, TrackOptions, Tracker};
use edgetherm::{Error, Result};
use numpy::PyReadonlyArray1;
use pyo3::create_exception;
use pyo3::exceptions::{PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyDict};
use std::path::{Path, PathBuf};

create_exception!(
    _edgetherm,
    InputError,
    PyValueError,
    "Invalid input: the message names the file, line and field, as the command line's does."
);
create_exception!(
    _edgetherm,
    EdgethermError,
    PyRuntimeError,
    "A failure the inputs do not explain (an output that cannot be written, an internal error)."
);

/// The library names a setting `option.NAME`; from Python it is the keyword argument `NAME`.
fn python_error(py: Python<'_>, e: Error) -> PyErr {
    let e = match e {
        Error::Invalid {
            mut location,
            message,
        } => {
            if let Some(name) = location
                .field
                .as_deref()
                .and_then(|f| f.strip_prefix("option."))
            {
                location.field = Some(name.to_string());
            }
            Error::Invalid { location, message }
        }
        other => other,
    };
    let mut message = e.to_string();
    if message.ends_with(edgetherm::io::logger::IGNORE_EXTRA_HINT) {
        // the command line names its flag here; Python, the keyword argument
        message.push_str(" (ignore_extra=True)");
    }
    let err = match &e {
        Error::Invalid { .. } | Error::Io { input: true, .. } => InputError::new_err(message),
        _ => EdgethermError::new_err(message),
    };
    let value = err.value(py);
    let (file, line, field) = match &e {
        Error::Invalid { location, .. } => (
            location.file.as_ref().map(|p| p.display().to_string()),
            location.line,
            location.field.clone(),
        ),
        Error::Io { path, .. } => (Some(path.display().to_string()), None, None),
        _ => (None, None, None),
    };
    let _ = value.setattr("file", file);
    let _ = value.setattr("line", line);
    let _ = value.setattr("field", field);
    err
}

/// A case: the files of a case folder (plate.toml, sensors.csv, readings.csv), loaded and
/// checked anew by each run, as the command line does.
#[pyclass(name = "Case", module = "edgetherm._edgetherm", frozen)]
#[derive(Clone)]
struct PyCase {
    files: CaseFiles,
}

#[pymethods]
impl PyCase {
    /// Load the case in folder `path`; `plate`, `sensors` and `readings` replace its files
    /// (as `--plate`, `--sensors`, `--readings`). The plate and, when present, the sensors
    /// and readings are read and checked now.
    #[staticmethod]
    #[pyo3(signature = (path, plate=None, sensors=None, readings=None))]
    fn from_dir(
        py: Python<'_>,
        path: PathBuf,
        plate: Option<PathBuf>,
        sensors: Option<PathBuf>,
        readings: Option<PathBuf>,
    ) -> PyResult<Self> {
        let files = CaseFiles::in_dir(&path).with_overrides(plate, sensors, readings);
        let checked = files.clone();
        py.detach(move || -> Result<()> {
            if !checked.dir.is_dir() && checked.plate.starts_with(&checked.dir) {
                return Err(Error::invalid_at(
                    &checked.dir,
                    None,
                    Some("CASE_DIR"),
                    "the case folder does not exist; give the folder that holds plate.toml, \
                     sensors.csv and readings.csv",
                ));
            }
            if checked.sensors.exists() {
                let case = edgetherm::io::load_case(&checked)?;
                if checked.readings.exists() {
                    edgetherm::io::load_readings(&checked.readings, &case)?;
                }
            } else {
                edgetherm::io::case::load_design_case(&checked)?;
            }
            Ok(())
        })
        .map_err(|e| python_error(py, e))?;
        Ok(PyCase { files })
    }

    /// The case folder.
    #[getter]
    fn path(&self) -> PathBuf {
        self.files.dir.clone()
    }

    /// The file paths: plate, sensors, readings.
    #[getter]
    fn files(&self) -> (PathBuf, PathBuf, PathBuf) {
        (
            self.files.plate.clone(),
            self.files.sensors.clone(),
            self.files.readings.clone(),
        )
    }

    /// The sensor ids, in the order of sensors.csv.
    #[getter]
    fn sensor_ids(&self, py: Python<'_>) -> PyResult<Vec<String>> {
        let case = self.load(py)?;
        Ok(case.sensors.iter().map(|s| s.id.clone()).collect())
    }

    /// The case's units: (length, temperature), as plate.toml writes them.
    #[getter]
    fn units(&self, py: Python<'_>) -> PyResult<(String, String)> {
        let case = self.load(py)?;
        Ok((
            case.units.length.symbol().to_string(),
            case.units.temperature.symbol().to_string(),
        ))
    }

    fn __repr__(&self) -> String {
        format!("Case.from_dir({:?})", self.files.dir.display().to_string())
    }
}

impl PyCase {
    fn load(&self, py: Python<'_>) -> PyResult<Case> {
        let files = self.files.clone();
        py.detach(move || edgetherm::io::load_case(&files))
            .map_err(|e| python_error(py, e))
    }
}

/// Run the estimate. `readings`: `None` (the case's readings file) or one value per sensor
/// in sensors.csv order (case unit; NaN: no reading). Returns the rendered outputs (the
/// command line's files, by name), the exit status the command line would give, and the
/// summary as JSON text.
#[pyfunction]
#[pyo3(signature = (case, readings=None, *, limit=None, probability=0.05, keep_all=false,
    exclude=Vec::new(), bootstrap=None, replicates=None, seed=None, strength=None, grid=None,
    max_gradient=None, no_bounds=false))]
#[allow(clippy::too_many_arguments)]
fn estimate<'py>(
    py: Python<'py>,
    case: &PyCase,
    readings: Option<PyReadonlyArray1<'py, f64>>,
    limit: Option<f64>,
    probability: f64,
    keep_all: bool,
    exclude: Vec<String>,
    bootstrap: Option<String>,
    replicates: Option<usize>,
    seed: Option<u64>,
    strength: Option<String>,
    grid: Option<(usize, usize)>,
    max_gradient: Option<f64>,
    no_bounds: bool,
) -> PyResult<Bound<'py, PyDict>> {
    let values: Option<Vec<Option<f64>>> = readings
        .as_ref()
        .map(|a| a.as_array().iter().map(|&v| Some(v)).collect());
    let files = case.files.clone();
    let run = py.detach(move || -> Result<(Rendered, i32)> {
        let mut case = edgetherm::io::load_case(&files)?;
        let readings = match values {
            Some(v) => {
                edgetherm::io::readings_from_values(&case, &v, Path::new("readings (from Python)"))?
            }
            None => {
                let (r, read_as) = edgetherm::io::load_readings_as(
                    &case.files.readings,
                    &case,
                    &edgetherm::io::DialectOptions::default(),
                )?;
                case.read_as.push(read_as);
                r
            }
        };
        let limit = edgetherm::options::alarm(limit, probability, &case)?;
        edgetherm::options::at_least_one("replicates", replicates)?;
        let strength = strength
            .as_deref()
            .map(edgetherm::options::strength)
            .transpose()?;
        let exclude = edgetherm::options::exclude(&exclude, &case)?;
        let max_gradient_k_per_m = edgetherm::options::max_gradient(max_gradient, &case)?;
        if no_bounds && max_gradient.is_some() {
            return Err(Error::invalid_field(
                "option.no_bounds",
                "no_bounds and max_gradient ask for opposite things; give one of them",
            ));
        }
        let mode = match bootstrap.as_deref() {
            None => None,
            Some("parametric") => Some(edgetherm::uncertainty::BootstrapMode::Parametric),
            Some("residual") => Some(edgetherm::uncertainty::BootstrapMode::Residual),
            Some(other) => {
                return Err(Error::invalid_field(
                    "option.bootstrap",
                    format!("expected parametric or residual, not `{other}`"),
                ));
            }
        };
        let grid = match grid {
            Some((nx, ny)) => edgetherm::options::grid(nx, ny)?,
            None => edgetherm::case::DEFAULT_GRID,
        };
        let options = edgetherm::estimate::EstimateOptions {
            mode,
            limit,
            alarm_probability: probability,
            keep_all,
            grid,
            replicates,
            seed,
            strength,
            exclude,
            strict_bounds: !no_bounds,
            max_gradient_k_per_m,
        };
        let total = options.replicates.unwrap_or(case.uncertainty.replicates);
        edgetherm::budget::Budget::default().check(
            &edgetherm::budget::estimate_cost(
                &case,
                total,
                replicates.is_some(),
                options.grid,
                case.sensors.len(),
            ),
            &case,
        )?;
        let result = edgetherm::estimate::estimate(&case, &readings, &options, None)?;
        let outputs = edgetherm::report::estimate::render_outputs(&result)?;
        let bounds_exceed = match (
            limit,
            edgetherm::report::estimate::bounds_hottest_interval(&result),
        ) {
            (Some(t), Some([lo, _])) => lo > t,
            _ => false,
        };
        let status = if result.exceedance.is_some_and(|e| e.alarm) || bounds_exceed {
            3
        } else {
            0
        };
        Ok((
            outputs.into_iter().map(|o| (o.name, o.bytes)).collect(),
            status,
        ))
    });
    let (outputs, status) = run.map_err(|e| python_error(py, e))?;
    let d = PyDict::new(py);
    let files = PyDict::new(py);
    for (name, bytes) in outputs {
        files.set_item(name, PyBytes::new(py, &bytes))?;
    }
    d.set_item("files", files)?;
    d.set_item("exit_status", status)?;
    Ok(d)
}

/// Rendered output files: (file name, bytes).
type Rendered = Vec<(&'static str, Vec<u8>)>;

/// An opened row source, how it is read, the sensors with no column, the ignored columns.
type Opened<'a> = (
    Box<dyn RowSource + 'a>,
    edgetherm::case::ReadAs,
    Vec<usize>,
    Vec<String>,
);

/// Where a track run's rows come from.
enum Rows<'a> {
    /// A logger file (CSV or Parquet).
    File(PathBuf),
    /// Columns handed over from Python (no copies: slices of the NumPy arrays).
    Columns {
        source: PathBuf,
        names: Vec<String>,
        time: TimeValues<'a>,
        columns: Vec<&'a [f64]>,
    },
}

/// The time column handed over from Python.
enum TimeValues<'a> {
    Seconds(&'a [f64]),
    /// Nanoseconds since 1970 (NumPy datetime64[ns] viewed as int64; NaT is i64::MIN).
    Nanos(&'a [i64], bool),
    Text(Vec<String>),
}

impl TimeValues<'_> {
    fn cell(&self, i: usize) -> TimeCell<'_> {
        match self {
            TimeValues::Seconds(v) if v[i].is_nan() => TimeCell::Missing,
            TimeValues::Seconds(v) => TimeCell::Seconds(v[i]),
            TimeValues::Nanos(v, _) if v[i] == i64::MIN => TimeCell::Missing,
            TimeValues::Nanos(v, zoned) => TimeCell::Nanos {
                nanos: v[i],
                zoned: *zoned,
            },
            TimeValues::Text(v) => TimeCell::Text(&v[i]),
        }
    }

    fn len(&self) -> usize {
        match self {
            TimeValues::Seconds(v) => v.len(),
            TimeValues::Nanos(v, _) => v.len(),
            TimeValues::Text(v) => v.len(),
        }
    }
}

/// A source of checked rows.
trait RowSource {
    fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool>;
}

impl RowSource for edgetherm::io::LoggerReader {
    fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool> {
        edgetherm::io::LoggerReader::next_row(self, row)
    }
}

/// Rows of columns handed over from Python, checked by the logger's rules.
struct ColumnSource<'a> {
    rows: ColumnarRows,
    time: &'a TimeValues<'a>,
    columns: &'a [&'a [f64]],
    next: usize,
}

impl RowSource for ColumnSource<'_> {
    fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool> {
        let i = self.next;
        if i >= self.time.len() {
            return Ok(false);
        }
        let columns = self.columns;
        let time_column = self.rows.time_column();
        self.rows.row(
            i as u64,
            self.time.cell(i),
            &|k| {
                // the time is not a column of numbers here: columns are the others, in order
                let j = if k > time_column { k - 1 } else { k };
                let v = columns[j][i];
                (!v.is_nan()).then_some(v)
            },
            row,
        )?;
        self.next += 1;
        Ok(true)
    }
}

/// Settings of a track run, as keyword arguments.
#[derive(Clone)]
struct TrackSettings {
    limit: Option<f64>,
    probability: f64,
    clear: usize,
    calibrate: Option<usize>,
    strength: Option<String>,
    bootstrap: bool,
    replicates: Option<usize>,
    draws: usize,
    seed: Option<u64>,
    keep_all: bool,
    max_gradient: Option<f64>,
    bounds_every: usize,
    ignore_extra: bool,
    rows: bool,
}

/// What a track run gives back.
struct TrackRun {
    outputs: Rendered,
    exit_status: i32,
    absent: Vec<String>,
    ignored: Vec<String>,
}

/// Rows an unknown `h` is estimated from when `calibrate` is not given (as the command line).
const H_DEFAULT_ROWS: usize = 200;

fn open_source<'a>(rows: &'a Rows<'a>, case: &Case, ignore_extra: bool) -> Result<Opened<'a>> {
    match rows {
        Rows::File(path) => {
            let reader = edgetherm::io::LoggerReader::open(
                path,
                case,
                &edgetherm::io::LoggerOptions {
                    ignore_extra,
                    ..Default::default()
                },
            )?;
            let read_as = reader.read_as();
            let absent = reader.absent_sensors.clone();
            let ignored = reader.ignored_columns.clone();
            Ok((Box::new(reader), read_as, absent, ignored))
        }
        Rows::Columns {
            source,
            names,
            time,
            columns,
        } => {
            let rows = ColumnarRows::new(source, names.clone(), case, ignore_extra)?;
            let read_as = rows.read_as("in-memory table");
            let absent = rows.absent_sensors().to_vec();
            let ignored = rows.ignored_columns().to_vec();
            Ok((
                Box::new(ColumnSource {
                    rows,
                    time,
                    columns,
                    next: 0,
                }),
                read_as,
                absent,
                ignored,
            ))
        }
    }
}

fn run_track(files: &CaseFiles, rows: &Rows<'_>, s: &TrackSettings) -> Result<TrackRun> {
    if let Rows::File(path) = rows {
        if !path.exists() || path.is_dir() {
            // (the command line's messages, with the argument's name for the flag)
            return Err(Error::invalid_at(
                path,
                None,
                Some("log"),
                if path.is_dir() {
                    "this is a folder; log takes the logger file itself (a CSV or Parquet \
                     file with a `time` column and one column per sensor id, docs/track.md)"
                } else {
                    "not found: log takes the logger file (a CSV or Parquet file with a `time` \
                     column and one column per sensor id, docs/track.md); check the path"
                },
            ));
        }
    }
    let mut case = edgetherm::io::load_case(files)?;
    let limit = edgetherm::options::alarm(s.limit, s.probability, &case)?;
    edgetherm::options::at_least_one("clear", Some(s.clear))?;
    edgetherm::options::at_least_one("calibrate", s.calibrate)?;
    edgetherm::options::at_least_one("replicates", s.replicates)?;
    edgetherm::options::at_least_one("draws", Some(s.draws))?;
    edgetherm::options::at_least_one("bounds_every", Some(s.bounds_every))?;
    let strength = s
        .strength
        .as_deref()
        .map(edgetherm::options::strength)
        .transpose()?;
    let max_gradient_k_per_m = edgetherm::options::max_gradient(s.max_gradient, &case)?;
    let mut options = TrackOptions {
        strength,
        calibrate: s.calibrate,
        limit,
        probability: s.probability,
        clear_rows: s.clear,
        draws: s.draws,
        seed: s.seed,
        keep_all: s.keep_all,
        bootstrap: s.bootstrap,
        replicates: s.replicates,
        max_gradient_k_per_m,
        bounds_every: s.bounds_every,
        ..TrackOptions::default()
    };
    if !case.plate.unknown_heat_transfer().is_empty() {
        // h = "unknown": estimated once from the first rows, then fixed (docs/track.md)
        let wanted = s.calibrate.unwrap_or(H_DEFAULT_ROWS).max(1);
        let (mut first, ..) = open_source(rows, &case, true)?;
        let mut row = LoggerRow::default();
        let mut values = Vec::new();
        while values.len() < wanted && first.next_row(&mut row)? {
            values.push(row.values.clone());
        }
        let source = match rows {
            Rows::File(p) => p.clone(),
            Rows::Columns { source, .. } => source.clone(),
        };
        let conv = edgetherm::track::estimate_h_from_rows(&case, &values)
            .map_err(|e| e.in_file(&source, |_| None))?;
        case.plate = case.plate.with_heat_transfer(conv.edge, conv.h)?;
        options.convection = Some(conv);
    }
    let cost = edgetherm::budget::track_run_cost(&case, &options, s.replicates.is_some());
    edgetherm::budget::Budget::default().check(&cost, &case)?;
    let (mut source, read_as, absent, ignored) = open_source(rows, &case, s.ignore_extra)?;
    case.read_as.push(read_as);
    let mut tracker = Tracker::new(&case, options)?;
    let report_case = tracker.case().clone();
    let mut table: Option<Vec<u8>> = s.rows.then(|| {
        let mut t = Vec::with_capacity(1 << 16);
        t.extend_from_slice(edgetherm::report::track::TRACK_CSV_HEADER.as_bytes());
        t.push(b'\n');
        t
    });
    let mut sink = |rec: &RowRecord<'_>| -> Result<()> {
        if let Some(t) = table.as_mut() {
            edgetherm::report::track::track_csv_row(&report_case, rec, t);
        }
        Ok(())
    };
    // batches, fitted ahead on a second thread as on the command line (same records)
    const BATCH: usize = 512;
    let mut batch: Vec<LoggerRow> = Vec::with_capacity(BATCH);
    loop {
        let mut row = LoggerRow::default();
        if !source.next_row(&mut row)? {
            break;
        }
        batch.push(row);
        if batch.len() == BATCH {
            tracker.push_batch(
                std::mem::replace(&mut batch, Vec::with_capacity(BATCH)),
                &mut sink,
            )?;
        }
    }
    if !batch.is_empty() {
        tracker.push_batch(batch, &mut sink)?;
    }
    tracker.finish(&mut sink)?;
    let case = tracker.case();
    let summary = tracker.snapshot();
    let json = format!(
        "{:#}\n",
        edgetherm::report::track::summary_json(case, &summary)
    );
    let svg = edgetherm::report::track::plot::track_svg(case, &summary, &tracker.series().bins())?;
    let mut outputs: Rendered = Vec::new();
    if let Some(t) = table {
        outputs.push(("track.csv", t));
    }
    outputs.push((
        "alarms.csv",
        edgetherm::report::track::alarms_csv(case, &summary),
    ));
    outputs.push((
        "sensors-health.csv",
        edgetherm::report::track::health_csv(case, &summary),
    ));
    outputs.push(("track.svg", svg.into_bytes()));
    outputs.push(("summary.json", json.into_bytes()));
    let exit_status = if limit.is_some() && tracker.any_alarm() {
        3
    } else {
        0
    };
    Ok(TrackRun {
        outputs,
        exit_status,
        absent: absent.iter().map(|&i| case.sensors[i].id.clone()).collect(),
        ignored,
    })
}

fn track_result<'py>(py: Python<'py>, run: TrackRun) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    let files = PyDict::new(py);
    for (name, bytes) in run.outputs {
        files.set_item(name, PyBytes::new(py, &bytes))?;
    }
    d.set_item("files", files)?;
    d.set_item("exit_status", run.exit_status)?;
    d.set_item("absent_sensors", run.absent)?;
    d.set_item("ignored_columns", run.ignored)?;
    Ok(d)
}

/// Track a logger file (CSV or Parquet), as `edgetherm track CASE --log LOG` does.
#[pyfunction]
#[pyo3(signature = (case, log, *, limit=None, probability=0.05, clear=10, calibrate=None,
    strength=None, bootstrap=false, replicates=None,
    draws=edgetherm::track::engine::DEFAULT_DRAWS, seed=None, keep_all=false,
    max_gradient=None, bounds_every=edgetherm::track::bounds::DEFAULT_BOUNDS_EVERY,
    ignore_extra=false, rows=true))]
#[allow(clippy::too_many_arguments)]
fn track_file<'py>(
    py: Python<'py>,
    case: &PyCase,
    log: PathBuf,
    limit: Option<f64>,
    probability: f64,
    clear: usize,
    calibrate: Option<usize>,
    strength: Option<String>,
    bootstrap: bool,
    replicates: Option<usize>,
    draws: usize,
    seed: Option<u64>,
    keep_all: bool,
    max_gradient: Option<f64>,
    bounds_every: usize,
    ignore_extra: bool,
    rows: bool,
) -> PyResult<Bound<'py, PyDict>> {
    let settings = TrackSettings {
        limit,
        probability,
        clear,
        calibrate,
        strength,
        bootstrap,
        replicates,
        draws,
        seed,
        keep_all,
        max_gradient,
        bounds_every,
        ignore_extra,
        rows,
    };
    let files = case.files.clone();
    let run = py
        .detach(move || run_track(&files, &Rows::File(log), &settings))
        .map_err(|e| python_error(py, e))?;
    track_result(py, run)
}

/// Track a table handed over as columns: `names` (every column, the time's included, in
/// order), the time as `time_seconds` (float seconds, NaN missing), `time_nanos`
/// (datetime64[ns] as int64, NaT missing; `zoned` when it had a zone) or `time_text`, and
/// one float64 array per other column (NaN: no reading), read without copies.
#[pyfunction]
#[pyo3(signature = (case, names, columns, *, time_seconds=None, time_nanos=None, zoned=false,
    time_text=None, source="DataFrame".to_string(), limit=None, probability=0.05, clear=10,
    calibrate=None, strength=None, bootstrap=false, replicates=None,
    draws=edgetherm::track::engine::DEFAULT_DRAWS, seed=None, keep_all=false,
    max_gradient=None, bounds_every=edgetherm::track::bounds::DEFAULT_BOUNDS_EVERY,
    ignore_extra=false, rows=true))]
#[allow(clippy::too_many_arguments)]
fn track_columns<'py>(
    py: Python<'py>,
    case: &PyCase,
    names: Vec<String>,
    columns: Vec<PyReadonlyArray1<'py, f64>>,
    time_seconds: Option<PyReadonlyArray1<'py, f64>>,
    time_nanos: Option<PyReadonlyArray1<'py, i64>>,
    zoned: bool,
    time_text: Option<Vec<String>>,
    source: String,
    limit: Option<f64>,
    probability: f64,
    clear: usize,
    calibrate: Option<usize>,
    strength: Option<String>,
    bootstrap: bool,
    replicates: Option<usize>,
    draws: usize,
    seed: Option<u64>,
    keep_all: bool,
    max_gradient: Option<f64>,
    bounds_every: usize,
    ignore_extra: bool,
    rows: bool,
) -> PyResult<Bound<'py, PyDict>> {
    let bad = |m: String| InputError::new_err(m);
    let slices: Vec<&[f64]> = columns
        .iter()
        .map(|c| c.as_slice())
        .collect::<std::result::Result<_, _>>()
        .map_err(|e| bad(format!("a column is not a contiguous float64 array: {e}")))?;
    let time = match (&time_seconds, &time_nanos, time_text) {
        (Some(t), None, None) => TimeValues::Seconds(
            t.as_slice()
                .map_err(|e| bad(format!("time is not contiguous: {e}")))?,
        ),
        (None, Some(t), None) => TimeValues::Nanos(
            t.as_slice()
                .map_err(|e| bad(format!("time is not contiguous: {e}")))?,
            zoned,
        ),
        (None, None, Some(t)) => TimeValues::Text(t),
        _ => {
            return Err(bad(
                "give the time once: as seconds, as nanoseconds or as text".into(),
            ));
        }
    };
    if names.len() != slices.len() + 1 {
        return Err(bad(format!(
            "{} column names for the time and {} other columns",
            names.len(),
            slices.len()
        )));
    }
    if slices.iter().any(|c| c.len() != time.len()) {
        return Err(bad(
            "every column must have as many values as the time column".into(),
        ));
    }
    let settings = TrackSettings {
        limit,
        probability,
        clear,
        calibrate,
        strength,
        bootstrap,
        replicates,
        draws,
        seed,
        keep_all,
        max_gradient,
        bounds_every,
        ignore_extra,
        rows,
    };
    let files = case.files.clone();
    let run = py
        .detach(|| {
            let rows = Rows::Columns {
                source: PathBuf::from(&source),
                names,
                time,
                columns: slices,
            };
            run_track(&files, &rows, &settings)
        })
        .map_err(|e| python_error(py, e))?;
    track_result(py, run)
}

/// Choose `count` sensor positions (as `edgetherm design CASE --count K`), or with `add`
/// add `count` to those of sensors.csv.
#[pyfunction]
#[pyo3(signature = (case, count, *, add=false, criterion=None, variation=None))]
fn design<'py>(
    py: Python<'py>,
    case: &PyCase,
    count: usize,
    add: bool,
    criterion: Option<String>,
    variation: Option<f64>,
) -> PyResult<Bound<'py, PyDict>> {
    let files = case.files.clone();
    let run = py
        .detach(move || -> Result<Rendered> {
            use edgetherm::design::{Criterion, DesignSpace, LayoutSensor};
            let mut case = edgetherm::io::case::load_design_case(&files)?;
            if let Some(v) = variation {
                if !(v.is_finite() && v > 0.0) {
                    return Err(Error::invalid_field(
                        "option.variation",
                        format!(
                            "the expected variation is a standard deviation, a positive \
                             temperature difference in the case's unit ({}), not {v}",
                            case.units.temperature.symbol()
                        ),
                    ));
                }
            }
            let variation_k = variation.map(|v| case.units.dtemp_to_k(v));
            let defaults = edgetherm::design::apply_defaults(&mut case, variation_k)?;
            if add && case.sensors.is_empty() {
                return Err(Error::invalid_at(
                    &case.files.sensors,
                    None,
                    None,
                    "add keeps the sensors of this file and adds new ones, but the file does \
                     not exist; design a layout from scratch without add",
                ));
            }
            let crit = match criterion.as_deref() {
                None => None,
                Some(c) => Some(Criterion::parse(c).ok_or_else(|| {
                    Error::invalid_field(
                        "option.criterion",
                        format!("expected information, edge or worst, not `{c}`"),
                    )
                })?),
            };
            let candidate_points = match &case.design.candidates {
                edgetherm::case::CandidateSource::File(path) => {
                    Some(edgetherm::io::case::read_candidates(path, &case)?)
                }
                edgetherm::case::CandidateSource::Grid(_) => None,
            };
            let space = DesignSpace::new(&case, candidate_points.as_deref(), crit)?;
            let (flag, fixed) = if add {
                (
                    "option.count",
                    case.sensors
                        .iter()
                        .map(|s| LayoutSensor::from_sensor(s, true))
                        .collect(),
                )
            } else {
                ("option.count", Vec::new())
            };
            space.check_count(count, flag)?;
            let (layout, summary) = space.design(&fixed, count, flag, &|_, _| {})?;
            let mut result = space.result(&case, layout, Some(summary), None)?;
            result.defaults = defaults;
            edgetherm::report::design::render_design_outputs(&result)
        })
        .map_err(|e| python_error(py, e))?;
    let d = PyDict::new(py);
    let files = PyDict::new(py);
    for (name, bytes) in run {
        files.set_item(name, PyBytes::new(py, &bytes))?;
    }
    d.set_item("files", files)?;
    d.set_item("exit_status", 0)?;
    Ok(d)
}

/// Write rendered outputs into `out` as one set, atomically (as the command line does):
/// refused where an output would replace one of `inputs`, or an existing file no earlier run
/// wrote unless `overwrite`.
#[pyfunction]
#[pyo3(signature = (out, command, files, inputs, overwrite=false))]
fn write_outputs(
    py: Python<'_>,
    out: PathBuf,
    command: String,
    files: Vec<(String, Vec<u8>)>,
    inputs: Vec<PathBuf>,
    overwrite: bool,
) -> PyResult<Vec<PathBuf>> {
    py.detach(move || -> Result<Vec<PathBuf>> {
        let names: Vec<&str> = files.iter().map(|(n, _)| n.as_str()).collect();
        let inputs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
        edgetherm::io::output::check_output_names(&out, &names, &inputs, overwrite)?;
        let mut set = edgetherm::io::OutputSet::begin(&out, &command)?;
        for (name, bytes) in &files {
            set.write(name, bytes)?;
        }
        set.commit()
    })
    .map_err(|e| python_error(py, e))
}

/// The native module.
#[pymodule]
fn _edgetherm(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyCase>()?;
    m.add_function(wrap_pyfunction!(estimate, m)?)?;
    m.add_function(wrap_pyfunction!(track_file, m)?)?;
    m.add_function(wrap_pyfunction!(track_columns, m)?)?;
    m.add_function(wrap_pyfunction!(design, m)?)?;
    m.add_function(wrap_pyfunction!(write_outputs, m)?)?;
    m.add("InputError", m.py().get_type::<InputError>())?;
    m.add("EdgethermError", m.py().get_type::<EdgethermError>())?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("SAFETY_CAUTION", edgetherm::estimate::SAFETY_CAUTION)?;
    Ok(())
}

//! Logger files for `track` (`docs/case-files.md`, logger files): a wide CSV with a `time` column and one column per
//! sensor, read record by record in constant memory; and the incremental writer of
//! `track.csv`.
//!
//! ## What a logger file may hold
//!
//! * A header: `time` (any case) and sensor ids from `sensors.csv`, in any order. A column
//!   for a sensor that is not in `sensors.csv` is an error unless extra columns are allowed
//!   (`--ignore-extra`); a sensor with no column simply has no readings.
//! * `time`: seconds (any real number, e.g. seconds since the logger started or since 1970),
//!   or ISO 8601 `YYYY-MM-DDTHH:MM[:SS[.fff]]` (a space may replace the `T`) with or without a
//!   zone (`Z`, `±HH:MM`, `±HHMM`). The first row fixes the kind; every row must use the same
//!   kind. Times never go backwards (equal times are allowed: some loggers write two rows in
//!   one second).
//! * Readings in the case's temperature unit. Missing readings for that row: an empty cell,
//!   and the markers in [`FAULT_MARKERS`] (case-insensitive) and [`FAULT_CODES`]. Those lists
//!   are what data loggers commonly write for an open or shorted thermocouple, an input over
//!   or under its range, or no sample (common practice; no standard fixes them). Any other
//!   text, a non-finite number, a temperature below absolute zero or above
//!   [`MAX_PLAUSIBLE_K`] is an error naming the line and the column.
//!
//! Every problem is an [`Error::Invalid`] with the file, the 1-based line and the column, so
//! the binary exits with status 2.
//!
//! ## Following a file that is still being written
//!
//! With [`Follow`], reaching the end of the file is not the end: the reader waits and reads
//! again, so rows appended by the logger are processed as they arrive, until the process is
//! interrupted (or, when asked, after a stretch with no new data). A row is parsed only when
//! its line is complete, because the CSV parser keeps waiting for the rest of the line.

use crate::case::Case;
use crate::error::{Error, Result};
use crate::io::dialect::{ColumnUnit, Dialect};
use std::collections::HashMap;
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Text markers read as "no reading" (compared case-insensitively after trimming): the
/// words and symbols loggers write for an open circuit, an over- or under-range input, a
/// fault, or no sample.
pub const FAULT_MARKERS: [&str; 26] = [
    "nan", "-nan", "na", "n/a", "null", "none", "-", "--", "---", "----", "*", "****", "*****",
    "open", "oc", "o/c", "ol", "+ol", "-ol", "over", "under", "ovr", "err", "error", "fault",
    "burnout",
];

/// Numeric codes read as "no reading": the sentinel values loggers write for an
/// over-range or open input (±9999, ±99999 and their one-decimal forms) and the saturated
/// values of a 16-bit converter (32767, −32768).
pub const FAULT_CODES: [f64; 10] = [
    9999.0, -9999.0, 9999.9, -9999.9, 99999.0, -99999.0, 99999.9, -99999.9, 32767.0, -32768.0,
];

/// Every number in [`FAULT_CODES`] is at least this large in size, so a smaller reading is
/// none of them without a look at the list.
pub const FAULT_CODE_MIN: f64 = 9999.0;

/// Readings above this many kelvin are refused as implausible (no thermocouple type in
/// IEC 60584-1 reaches it; a number this large is a corrupted cell, not a temperature).
pub const MAX_PLAUSIBLE_K: f64 = crate::plausible::MAX_TEMPERATURE_K;

pub use crate::io::times::{TimeFormat, TimeKind};

/// The end of the message for a column that is not a sensor: what to do besides fixing the
/// header. The command line appends the flag that does it.
pub const IGNORE_EXTRA_HINT: &str = "or ask for columns that are not sensors to be ignored";

/// Options of the logger reader.
#[derive(Debug, Clone, Default)]
pub struct LoggerOptions {
    /// Allow columns for sensors that are not in `sensors.csv` (they are ignored).
    pub ignore_extra: bool,
    /// Keep reading a file that is still being written.
    pub follow: Option<Follow>,
    /// What is declared about the file's dialect (the rest is detected).
    pub dialect: crate::io::dialect::DialectOptions,
}

/// Live-monitoring settings.
#[derive(Debug, Clone, Copy)]
pub struct Follow {
    /// How often to look for new data.
    pub poll: Duration,
    /// Stop after this long without new data (`None`: until interrupted).
    pub idle_exit: Option<Duration>,
}

/// One row of a logger file, reused from row to row.
#[derive(Debug, Clone, Default)]
pub struct LoggerRow {
    /// 1-based line of the row in the file.
    pub line: u64,
    /// The time as written.
    pub time_text: String,
    /// The time in seconds (since 1970-01-01 for ISO times; as written for seconds).
    pub time_s: f64,
    /// Readings in kelvin, indexed like `case.sensors`; `None`: missing in this row.
    pub values: Vec<Option<f64>>,
}

/// A reader that waits for more data at the end of a file instead of ending.
struct FollowRead<R> {
    inner: R,
    follow: Option<Follow>,
    last_data: Instant,
    /// Bytes since the last line end: a line longer than
    /// [`crate::budget::MAX_LINE_BYTES`] (a device such as `/dev/zero`, a binary file) is an
    /// error, so the CSV reader never buffers without limit.
    line_bytes: usize,
}

impl<R: Read> Read for FollowRead<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        loop {
            let n = self.inner.read(buf)?;
            if n > 0 || buf.is_empty() {
                self.last_data = Instant::now();
                self.line_bytes = match buf[..n].iter().rposition(|&b| b == b'\n') {
                    Some(k) => n - k - 1,
                    None => self.line_bytes + n,
                };
                if self.line_bytes > crate::budget::MAX_LINE_BYTES {
                    return Err(std::io::Error::new(
                        std::io::ErrorKind::InvalidData,
                        format!(
                            "a line longer than {} MiB: this is not a logger file (a device or \
                             binary data?)",
                            crate::budget::MAX_LINE_BYTES / (1024 * 1024)
                        ),
                    ));
                }
                return Ok(n);
            }
            let Some(f) = self.follow else {
                return Ok(0);
            };
            if f.idle_exit.is_some_and(|d| self.last_data.elapsed() >= d) {
                return Ok(0);
            }
            std::thread::sleep(f.poll);
        }
    }
}

/// A streaming reader of a logger file: CSV (any dialect, see [`crate::io::dialect`]) or
/// Parquet ([`crate::io::columnar`]), told apart by the file's first bytes. Both are checked by
/// the same rules, so the same table gives the same rows.
#[derive(Debug)]
pub struct LoggerReader {
    source: Source,
    /// Sensors of the case with no column in the file.
    pub absent_sensors: Vec<usize>,
    /// Columns that were ignored (with `ignore_extra`).
    pub ignored_columns: Vec<String>,
}

#[derive(Debug)]
enum Source {
    Csv(Box<CsvLog>),
    Parquet(Box<crate::io::columnar::ParquetLog>),
}

impl LoggerReader {
    /// Open a logger file (CSV, or Parquet when it starts with Parquet's magic bytes) and
    /// check its header against the case's sensors.
    ///
    /// # Errors
    /// [`Error::Io`] (an input) when the file cannot be opened; [`Error::Invalid`] for a
    /// header without `time`, a duplicated column, (without `ignore_extra`) a column for an
    /// unknown sensor, a Parquet file with `follow` or with a column of the wrong type.
    pub fn open(path: &Path, case: &Case, options: &LoggerOptions) -> Result<Self> {
        if crate::io::columnar::is_parquet(path) {
            if options.follow.is_some() {
                return Err(Error::invalid_at(
                    path,
                    None,
                    None,
                    "this is a Parquet file, which is written whole: following a log as it \
                     grows reads CSV logger files only",
                ));
            }
            let log = crate::io::columnar::ParquetLog::open(path, case, options.ignore_extra)?;
            return Ok(LoggerReader {
                absent_sensors: log.rows().absent_sensors().to_vec(),
                ignored_columns: log.rows().ignored_columns().to_vec(),
                source: Source::Parquet(Box::new(log)),
            });
        }
        let mut log = CsvLog::open(path, case, options)?;
        Ok(LoggerReader {
            absent_sensors: std::mem::take(&mut log.absent_sensors),
            ignored_columns: std::mem::take(&mut log.ignored_columns),
            source: Source::Csv(Box::new(log)),
        })
    }

    /// The kind of the time column, once the first row is read.
    pub fn time_kind(&self) -> Option<TimeKind> {
        match &self.source {
            Source::Csv(c) => c.time_kind(),
            Source::Parquet(p) => p.rows().time_kind(),
        }
    }

    /// The format of the time column (from the first rows, or declared); `None` until a row
    /// is read when the file had no rows when it was opened.
    pub fn time_format(&self) -> Option<TimeFormat> {
        match &self.source {
            Source::Csv(c) => c.time_format(),
            Source::Parquet(p) => p.rows().time_format(),
        }
    }

    /// How the file is read (separator, decimal mark, time format, ...; or Parquet), for the
    /// outputs.
    pub fn read_as(&self) -> crate::case::ReadAs {
        match &self.source {
            Source::Csv(c) => c.read_as(),
            Source::Parquet(p) => p.read_as(),
        }
    }

    /// Read the next row into `row`; `Ok(false)` at the end of the file.
    ///
    /// # Errors
    /// [`Error::Invalid`] naming the line and column for a ragged row, an unreadable time, a
    /// time before the previous row's, text that is neither a number nor a fault marker, or
    /// an implausible temperature.
    pub fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool> {
        match &mut self.source {
            Source::Csv(c) => c.next_row(row),
            Source::Parquet(p) => p.next_row(row),
        }
    }
}

/// A streaming reader of a CSV logger file (the CSV half of [`LoggerReader`]).
struct CsvLog {
    path: PathBuf,
    reader: csv::Reader<FollowRead<std::fs::File>>,
    record: csv::ByteRecord,
    /// Column → sensor index (`None`: the time column or an ignored column).
    column_sensor: Vec<Option<usize>>,
    time_column: usize,
    column_names: Vec<String>,
    /// The case, for voltage conversion and sensor offsets.
    case: Case,
    /// The `cold_junction` column, when the case takes the cold junction from one.
    cold_junction_column: Option<usize>,
    /// The kind of time of the first row, and the previous row's time.
    times: TimeOrder,
    /// The dialect (separator, decimal mark, lines before the header, units row).
    dialect: Dialect,
    /// The time format (found from the first rows, declared, or from the first row read).
    time_format: Option<TimeFormat>,
    /// Lines of the file before the header (added to the csv reader's line numbers).
    line_offset: u64,
    sensor_count: usize,
    /// Sensors of the case with no column in the file.
    pub absent_sensors: Vec<usize>,
    /// Header columns that were ignored (with `ignore_extra`).
    pub ignored_columns: Vec<String>,
}

impl std::fmt::Debug for CsvLog {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CsvLog").field("path", &self.path).finish()
    }
}

impl CsvLog {
    /// Open a CSV logger file and check its header against the case's sensors.
    ///
    /// # Errors
    /// [`Error::Io`] (an input) when the file cannot be opened; [`Error::Invalid`] for a
    /// header without `time`, a duplicated column, or (without `ignore_extra`) a column for
    /// an unknown sensor.
    pub fn open(path: &Path, case: &Case, options: &LoggerOptions) -> Result<Self> {
        let io_err = |source| Error::Io {
            path: path.to_path_buf(),
            source,
            input: true,
        };
        let mut file = std::fs::File::open(path).map_err(io_err)?;
        let (prefix, complete) = read_prefix(&mut file, options.follow).map_err(io_err)?;
        let dialect = crate::io::dialect::detect(
            path,
            &prefix,
            complete,
            &crate::io::dialect::Expect {
                keys: &["time"],
                header: "`time,<sensor ids>`",
                declarable: true,
            },
            &options.dialect,
        )?;
        file.seek(SeekFrom::Start(dialect.header_offset as u64))
            .map_err(io_err)?;
        let follow = FollowRead {
            inner: file,
            follow: options.follow,
            last_data: Instant::now(),
            line_bytes: 0,
        };
        // flexible: a units row may be shorter than the header; row lengths are checked in
        // `next_row`
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(true)
            .delimiter(dialect.separator.byte())
            // the header trimmed here, each cell where it is read (`cell`: without a new
            // record per row)
            .trim(csv::Trim::Headers)
            .from_reader(follow);
        // The csv reader numbers a record by where it starts looking for it, which after a
        // CRLF line end is still on the line before (it counts the `\n` with the next
        // record): one more line in CRLF files.
        let line_offset = dialect.header_line as u64 - 1 + u64::from(dialect.crlf);
        let header_line = dialect.header_line;
        let header = reader
            .byte_headers()
            .map_err(|e| csv_error(path, e, line_offset))?
            .clone();
        if header.is_empty() || (header.len() == 1 && header[0].is_empty()) {
            return Err(Error::invalid_at(
                path,
                Some(dialect.header_line),
                None,
                "the file is empty; a logger file starts with a header `time,<sensor ids>`",
            ));
        }
        if dialect.units_row.is_some() {
            let mut units = csv::ByteRecord::new();
            reader
                .read_byte_record(&mut units)
                .map_err(|e| csv_error(path, e, line_offset))?;
        }
        if !header.iter().any(|c| {
            std::str::from_utf8(c).is_ok_and(|n| {
                n.trim_start_matches('\u{feff}')
                    .eq_ignore_ascii_case("time")
            })
        }) {
            return Err(no_time_column(path, Some(header_line)));
        }
        let mut names = Vec::with_capacity(header.len());
        for (k, raw) in header.iter().enumerate() {
            let name = std::str::from_utf8(raw)
                .map_err(|_| {
                    Error::invalid_at(
                        path,
                        Some(header_line),
                        Some(&format!("column {}", k + 1)),
                        "the header is not UTF-8 text; is this a logger CSV file?",
                    )
                })?
                .trim_start_matches('\u{feff}')
                .to_string();
            names.push(name);
        }
        let ColumnMap {
            column_sensor,
            column_names,
            time_column,
            cold_junction_column,
            absent_sensors,
            ignored_columns: ignored,
        } = match_columns(path, Some(header_line), names, case, options.ignore_extra)?;
        if let Some(units) = &dialect.units_row {
            let temperature = ColumnUnit::Temperature(case.units.temperature);
            let reading = if case.conversion().is_some() {
                ColumnUnit::Millivolt
            } else {
                temperature
            };
            crate::io::dialect::check_units(
                path,
                dialect.header_line + 1,
                &column_names,
                units,
                |c| {
                    if Some(c) == cold_junction_column.map(|k| column_names[k].as_str()) {
                        Some(temperature)
                    } else {
                        let k = column_names.iter().position(|n| n == c)?;
                        column_sensor[k].map(|_| reading)
                    }
                },
            )?;
        }
        let time_format = match options.dialect.time_format {
            Some(f) => Some(f),
            None => {
                let cells: Vec<&str> = dialect
                    .sample_rows
                    .iter()
                    .filter_map(|r| r.get(time_column).map(String::as_str))
                    .collect();
                if cells.is_empty() {
                    None
                } else {
                    Some(
                        crate::io::times::detect(&cells, dialect.decimal_comma).map_err(|m| {
                            Error::invalid_at(
                                path,
                                Some(
                                    dialect.header_line
                                        + 1
                                        + usize::from(dialect.units_row.is_some()),
                                ),
                                Some("time"),
                                format!("{m}{TIME_FORMAT_HINT}"),
                            )
                        })?,
                    )
                }
            }
        };
        Ok(CsvLog {
            path: path.to_path_buf(),
            reader,
            record: csv::ByteRecord::new(),
            column_sensor,
            time_column,
            column_names,
            case: case.clone(),
            cold_junction_column,
            times: TimeOrder::default(),
            dialect,
            time_format,
            line_offset,
            sensor_count: case.sensors.len(),
            absent_sensors,
            ignored_columns: ignored,
        })
    }

    /// The kind of the time column, once the first row is read.
    pub fn time_kind(&self) -> Option<TimeKind> {
        self.times.kind
    }

    /// The format of the time column (from the first rows, or declared); `None` until a row
    /// is read when the file had no rows when it was opened.
    pub fn time_format(&self) -> Option<TimeFormat> {
        self.time_format
    }

    /// How the file is read (separator, decimal mark, time format, ...), for the outputs.
    pub fn read_as(&self) -> crate::case::ReadAs {
        self.dialect.read_as(&self.path, self.time_format)
    }

    /// Read the next row into `row`; `Ok(false)` at the end of the file.
    ///
    /// # Errors
    /// [`Error::Invalid`] naming the line and column for a ragged row, an unreadable time, a
    /// time before the previous row's, text that is neither a number nor a fault marker, or
    /// an implausible temperature.
    pub fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool> {
        match self.reader.read_byte_record(&mut self.record) {
            Ok(false) => return Ok(false),
            Ok(true) => {}
            Err(e) => return Err(csv_error(&self.path, e, self.line_offset)),
        }
        let line = self.record.position().map_or(0, |p| p.line()) + self.line_offset;
        if self.record.len() != self.column_names.len() {
            return Err(Error::invalid_at(
                &self.path,
                Some(line as usize),
                None,
                format!(
                    "this row has {} cells but the header has {}; every row needs one cell per \
                     column (leave a cell empty for a missing reading)",
                    self.record.len(),
                    self.column_names.len()
                ),
            ));
        }
        row.line = line;
        row.values.clear();
        row.values.resize(self.sensor_count, None);
        let time_raw = cell(&self.record, self.time_column);
        let time_text = std::str::from_utf8(time_raw).map_err(|_| self.not_text(line, "time"))?;
        let format = match self.time_format {
            Some(f) => f,
            None => {
                let f = crate::io::times::detect(&[time_text], self.dialect.decimal_comma)
                    .map_err(|m| {
                        Error::invalid_at(
                            &self.path,
                            Some(line as usize),
                            Some("time"),
                            format!("{m}{TIME_FORMAT_HINT}"),
                        )
                    })?;
                self.time_format = Some(f);
                f
            }
        };
        let (t, kind) = format
            .parse(time_text, self.dialect.decimal_comma)
            .ok_or_else(|| {
                Error::invalid_at(
                    &self.path,
                    Some(line as usize),
                    Some("time"),
                    format!(
                        "`{}` is not a time in the file's format, {}{}; use one kind of time \
                         throughout the file{TIME_FORMAT_HINT}",
                        shorten(time_text),
                        format.label(),
                        if self.dialect.declared.contains(&"time format") {
                            " (declared)"
                        } else {
                            " (found from the first rows)"
                        },
                    ),
                )
            })?;
        self.times.check(&self.path, line, time_text, t, kind)?;
        row.time_s = t;
        row.time_text.clear();
        row.time_text.push_str(time_text);
        // A row without its cold junction has no temperatures (the voltages cannot be
        // converted): its readings are all missing.
        let cold_junction = match self.cold_junction_column {
            Some(c) => match self.cell_value(cell(&self.record, c), line, c)? {
                Some(v) => Some(crate::io::convert::cold_junction_k(&self.case, v).map_err(
                    |m| {
                        Error::invalid_at(&self.path, Some(line as usize), Some("cold_junction"), m)
                    },
                )?),
                None => return Ok(true),
            },
            None => None,
        };
        // The common cell in a few operations: a plain decimal (no fault code is under
        // FAULT_CODE_MIN in size), a temperature in the plausible range, no voltage to convert: the
        // same number `reading` gives, which also handles (and words the message for) the rest.
        let plain = !self.dialect.decimal_comma && self.case.conversion().is_none();
        let plausible = crate::plausible::MIN_TEMPERATURE_K..=MAX_PLAUSIBLE_K;
        for (k, raw) in self.record.iter().enumerate() {
            let Some(i) = self.column_sensor[k] else {
                continue;
            };
            let cell = raw.trim_ascii();
            if plain {
                if let Some(v) = short_decimal(cell).filter(|v| v.abs() < FAULT_CODE_MIN) {
                    let kelvin = self.case.units.temp_to_k(v);
                    if plausible.contains(&kelvin) {
                        row.values[i] =
                            Some(crate::io::convert::with_offset(&self.case, i, kelvin));
                        continue;
                    }
                }
            }
            row.values[i] = self.reading(cell, line, k, i, cold_junction)?;
        }
        Ok(true)
    }

    fn not_text(&self, line: u64, field: &str) -> Error {
        Error::invalid_at(
            &self.path,
            Some(line as usize),
            Some(field),
            "the cell is not text (binary data?); a logger file is plain CSV text",
        )
    }

    /// A cell as a number: `None` for an empty cell or a fault marker (see the module
    /// documentation); an error for anything else that is not a finite number.
    fn cell_value(&self, cell: &[u8], line: u64, k: usize) -> Result<Option<f64>> {
        if cell.is_empty() {
            return Ok(None);
        }
        let name = &self.column_names[k];
        let err = |msg: String| Error::invalid_at(&self.path, Some(line as usize), Some(name), msg);
        let what = if self.cold_junction_column != Some(k) && self.case.conversion().is_some() {
            "voltage"
        } else {
            "temperature"
        };
        // most readings: a plain decimal read straight from the bytes (digits, one point, a
        // leading minus: valid text, and no fault marker looks like that)
        if !self.dialect.decimal_comma {
            if let Some(v) = short_decimal(cell) {
                let text = || String::from_utf8_lossy(cell).into_owned();
                return checked_number(v, &text, what).map_err(err);
            }
        }
        let text = std::str::from_utf8(cell).map_err(|_| self.not_text(line, name))?;
        // no marker starts with a digit: a cell that does (most readings) skips the list
        if !cell[0].is_ascii_digit() && FAULT_MARKERS.iter().any(|m| m.eq_ignore_ascii_case(text)) {
            return Ok(None);
        }
        let number = self.dialect.number_text(text).map_err(err)?;
        let v = match short_decimal(number.as_bytes()).map_or_else(|| number.parse::<f64>(), Ok) {
            Ok(v) => v,
            Err(_) => {
                return Err(err(format!(
                    "`{}` is neither a {what} nor a known fault marker (empty, NaN, OPEN, \
                     OVER, ERR, ... see docs/track.md){}",
                    shorten(text),
                    self.dialect.number_hint(text)
                )));
            }
        };
        checked_number(v, &|| text.to_string(), what).map_err(err)
    }

    fn reading(
        &self,
        cell: &[u8],
        line: u64,
        k: usize,
        sensor: usize,
        cold_junction_k: Option<f64>,
    ) -> Result<Option<f64>> {
        let Some(v) = self.cell_value(cell, line, k)? else {
            return Ok(None);
        };
        let name = &self.column_names[k];
        checked_reading(&self.case, v, sensor, cold_junction_k)
            .map(Some)
            .map_err(|msg| Error::invalid_at(&self.path, Some(line as usize), Some(name), msg))
    }
}

/// Cell `k` of a record without the ASCII white space around it (what the csv crate's
/// `Trim::All` gives, without rebuilding the record).
fn cell(record: &csv::ByteRecord, k: usize) -> &[u8] {
    record.get(k).map_or(&[], <[u8]>::trim_ascii)
}

/// The times of a log, row after row: one kind throughout (the first row's), never going
/// backwards (equal times are allowed); shared by CSV and columnar logs.
#[derive(Debug, Clone, Default)]
pub(crate) struct TimeOrder {
    /// The first row's kind of time.
    pub kind: Option<TimeKind>,
    /// The previous row's time and line.
    last: Option<(f64, u64)>,
}

impl TimeOrder {
    /// Check the time `t` (of kind `kind`, written `time_text`) of the row on `line`.
    pub(crate) fn check(
        &mut self,
        path: &Path,
        line: u64,
        time_text: &str,
        t: f64,
        kind: TimeKind,
    ) -> Result<()> {
        match self.kind {
            None => self.kind = Some(kind),
            Some(k) if k != kind => {
                return Err(Error::invalid_at(
                    path,
                    Some(line as usize),
                    Some("time"),
                    format!(
                        "`{time_text}` is written as {} but the first row's time is {}; use \
                         one kind of time throughout the file",
                        kind.name(),
                        k.name()
                    ),
                ));
            }
            _ => {}
        }
        if let Some((prev, prev_line)) = self.last {
            if t < prev {
                return Err(Error::invalid_at(
                    path,
                    Some(line as usize),
                    Some("time"),
                    format!(
                        "time `{time_text}` is earlier than the previous row's (line \
                         {prev_line}); rows must be in time order (was the logger clock \
                         reset, or two files joined?)"
                    ),
                ));
            }
        }
        self.last = Some((t, line));
        Ok(())
    }
}

/// The checks of a number read from a logger cell, shared by CSV and columnar logs: NaN and
/// the [`FAULT_CODES`] are "no reading"; any other non-finite number is an error (the message,
/// to which the caller adds file, line and column). `text` gives the cell as written (only
/// called for the message).
pub(crate) fn checked_number(
    v: f64,
    text: &dyn Fn() -> String,
    what: &str,
) -> Result<Option<f64>, String> {
    if v.is_nan() || (v.abs() >= FAULT_CODE_MIN && FAULT_CODES.contains(&v)) {
        return Ok(None);
    }
    if !v.is_finite() {
        return Err(format!(
            "`{}` is not a finite number; write a {what}, or leave the cell empty when there \
             is no reading",
            shorten(&text())
        ));
    }
    Ok(Some(v))
}

/// A sensor's reading (case unit, or millivolts for a voltage log) in kelvin, after the
/// plausibility check, the thermocouple conversion and the sensor's offset: shared by CSV and
/// columnar logs (the message, to which the caller adds file, line and column).
pub(crate) fn checked_reading(
    case: &Case,
    v: f64,
    sensor: usize,
    cold_junction_k: Option<f64>,
) -> Result<f64, String> {
    if case.conversion().is_none() && case.units.temp_to_k(v) > MAX_PLAUSIBLE_K {
        return Err(format!(
            "{} {} is not a plausible reading (above {MAX_PLAUSIBLE_K} K); if the logger \
             writes it as an over-range code, replace it with an empty cell",
            crate::plausible::short(v),
            case.units.temperature
        ));
    }
    let kelvin = crate::io::convert::reading_k(case, v, cold_junction_k)?;
    Ok(crate::io::convert::with_offset(case, sensor, kelvin))
}

/// The error for a header without a `time` column.
fn no_time_column(path: &Path, line: Option<usize>) -> Error {
    Error::invalid_at(
        path,
        line,
        Some("time"),
        "the header has no `time` column; a logger file is `time,<sensor ids>` with the time \
         in ISO 8601 or seconds",
    )
}

/// Which column of a logger file holds what: the time, the cold junction, which sensor.
#[derive(Debug, Clone)]
pub(crate) struct ColumnMap {
    /// Column → sensor index (`None`: the time column or an ignored column).
    pub column_sensor: Vec<Option<usize>>,
    /// The column names as written (a byte-order mark removed).
    pub column_names: Vec<String>,
    pub time_column: usize,
    /// The `cold_junction` column, when the case takes the cold junction from one.
    pub cold_junction_column: Option<usize>,
    /// Sensors of the case with no column.
    pub absent_sensors: Vec<usize>,
    /// Columns that were ignored (with `ignore_extra`).
    pub ignored_columns: Vec<String>,
}

/// Match the column names of a logger file (CSV header or columnar schema) against the
/// case's sensors: one `time` column (any case), a `cold_junction` column when the case
/// takes the cold junction from one, sensor ids; a duplicated name, or (without
/// `ignore_extra`) a column that is not a sensor, is an error naming the column. `line` is
/// the header's line (none in a columnar file).
pub(crate) fn match_columns(
    path: &Path,
    line: Option<usize>,
    names: Vec<String>,
    case: &Case,
    ignore_extra: bool,
) -> Result<ColumnMap> {
    if !names.iter().any(|n| n.eq_ignore_ascii_case("time")) {
        return Err(no_time_column(path, line));
    }
    let index: HashMap<&str, usize> = case
        .sensors
        .iter()
        .enumerate()
        .map(|(i, s)| (s.id.as_str(), i))
        .collect();
    let mut column_sensor = Vec::with_capacity(names.len());
    let mut time_column = None;
    let mut seen: HashMap<&str, usize> = HashMap::new();
    let mut ignored = Vec::new();
    let want_cj = crate::io::convert::cold_junction_column(case);
    let mut cold_junction_column = None;
    for (k, name) in names.iter().enumerate() {
        if let Some(first) = seen.insert(name.as_str(), k) {
            return Err(Error::invalid_at(
                path,
                line,
                Some(name),
                format!(
                    "column `{name}` appears twice (columns {} and {}); give each sensor one \
                     column",
                    first + 1,
                    k + 1
                ),
            ));
        }
        if name.eq_ignore_ascii_case("time") {
            time_column = Some(k);
            column_sensor.push(None);
        } else if want_cj && name.eq_ignore_ascii_case("cold_junction") {
            cold_junction_column = Some(k);
            column_sensor.push(None);
        } else if let Some(&i) = index.get(name.as_str()) {
            column_sensor.push(Some(i));
        } else if ignore_extra {
            ignored.push(name.clone());
            column_sensor.push(None);
        } else {
            return Err(Error::invalid_at(
                path,
                line,
                Some(name),
                format!(
                    "column `{name}` is not a sensor in {}; check the header (it must be \
                     `time` and sensor ids), {IGNORE_EXTRA_HINT}",
                    case.files.sensors.display()
                ),
            ));
        }
    }
    let Some(time_column) = time_column else {
        return Err(no_time_column(path, line));
    };
    if want_cj && cold_junction_column.is_none() {
        return Err(Error::invalid_at(
            path,
            line,
            Some("cold_junction"),
            "plate.toml says cold_junction = \"column\", but the header has no \
             `cold_junction` column; add the reference-junction temperature of every row, or \
             give it once in [thermocouple] cold_junction",
        ));
    }
    let absent_sensors = (0..case.sensors.len())
        .filter(|i| !column_sensor.contains(&Some(*i)))
        .collect();
    Ok(ColumnMap {
        column_sensor,
        column_names: names,
        time_column,
        cold_junction_column,
        absent_sensors,
        ignored_columns: ignored,
    })
}

fn shorten(s: &str) -> String {
    if s.chars().count() > 40 {
        format!("{}…", s.chars().take(40).collect::<String>())
    } else {
        s.to_string()
    }
}

fn csv_error(path: &Path, e: csv::Error, line_offset: u64) -> Error {
    let line = e.position().map(|p| (p.line() + line_offset) as usize);
    let message = match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => format!(
            "this row has {len} cells but the header has {expected_len}; every row needs one \
             cell per column (leave a cell empty for a missing reading)"
        ),
        csv::ErrorKind::Io(err) => {
            return Error::Io {
                path: path.to_path_buf(),
                source: std::io::Error::new(err.kind(), err.to_string()),
                input: true,
            };
        }
        _ => format!("not a readable CSV row: {e}"),
    };
    Error::invalid_at(path, line, None, message)
}

/// Parse a logger time the way a file without a declared format is read when its first
/// row is seconds or ISO 8601: seconds (as written), or ISO 8601 with or without a zone
/// (seconds since 1970-01-01T00:00:00, UTC when a zone is given). Other formats:
/// [`TimeFormat::parse`].
pub fn parse_time(s: &str) -> Option<(f64, TimeKind)> {
    TimeFormat::Seconds
        .parse(s, false)
        .or_else(|| TimeFormat::Iso.parse(s, false))
}

/// The end of a message about the time column: how to declare the format.
pub const TIME_FORMAT_HINT: &str =
    " (time formats: seconds, iso, dd.mm.yyyy, dd/mm/yyyy, mm/dd/yyyy, excel-days)";

/// The first [`PREFIX_BYTES`](crate::io::dialect::PREFIX_BYTES) of the file, for the dialect,
/// and whether they are the whole file. When following a file that is still being written,
/// wait (as [`Follow`] says) until it holds at least three whole lines (a header, perhaps a
/// units row, a row), so that the dialect is found from real rows.
fn read_prefix(
    file: &mut std::fs::File,
    follow: Option<Follow>,
) -> std::io::Result<(Vec<u8>, bool)> {
    let limit = crate::io::dialect::PREFIX_BYTES;
    let mut buf = Vec::with_capacity(8192);
    let start = Instant::now();
    loop {
        let mut chunk = [0u8; 8192];
        let want = (limit - buf.len()).min(chunk.len());
        let n = file.read(&mut chunk[..want])?;
        buf.extend_from_slice(&chunk[..n]);
        if buf.len() >= limit {
            return Ok((buf, false));
        }
        if n > 0 {
            continue;
        }
        let Some(f) = follow else {
            return Ok((buf, true));
        };
        let lines = buf.iter().filter(|&&b| b == b'\n').count();
        if lines >= 3 || f.idle_exit.is_some_and(|d| start.elapsed() >= d) {
            // a growing file: a last line without its end is not looked at
            return Ok((buf, false));
        }
        std::thread::sleep(f.poll);
    }
}

/// A CSV output written row by row.
///
/// In the ordinary (atomic) mode the rows go to a temporary file beside the destination,
/// which [`StreamWriter::finish`] syncs and renames into place: an interrupted run leaves the
/// previous file or none, never half a file. In live mode (`--follow`) the rows go straight
/// to the destination, and only whole lines are ever written: rows are collected in memory
/// and handed to the operating system in one write per [`StreamWriter::flush`], so a run
/// that is killed leaves a file of complete rows (a reader should ignore a last line without
/// a line end, which only a kill in the middle of that one write could leave).
#[derive(Debug)]
pub struct StreamWriter {
    path: PathBuf,
    file: Option<tempfile::NamedTempFile>,
    live: Option<std::fs::File>,
    buf: Vec<u8>,
}

/// Rows are handed to the operating system when this many bytes are waiting.
const STREAM_BUFFER: usize = 1 << 16;

impl StreamWriter {
    /// Start writing `path` (its directory must exist) with `header` as the first line.
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be created.
    pub fn create(path: &Path, header: &str, live: bool) -> Result<Self> {
        let io_err = |source: std::io::Error| Error::Io {
            path: path.to_path_buf(),
            source,
            input: false,
        };
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        let (file, live_file) = if live {
            (None, Some(std::fs::File::create(path).map_err(io_err)?))
        } else {
            let tmp = tempfile::Builder::new()
                .prefix(&crate::io::output::temp_prefix())
                .suffix(".tmp")
                .tempfile_in(dir)
                .map_err(io_err)?;
            (Some(tmp), None)
        };
        let mut w = StreamWriter {
            path: path.to_path_buf(),
            file,
            live: live_file,
            buf: Vec::with_capacity(STREAM_BUFFER * 2),
        };
        w.buf.extend_from_slice(header.as_bytes());
        w.buf.push(b'\n');
        w.flush()?;
        Ok(w)
    }

    /// Append one complete row (without its line end).
    ///
    /// # Errors
    /// [`Error::Io`] when writing fails.
    pub fn row(&mut self, text: &str) -> Result<()> {
        self.buf.extend_from_slice(text.as_bytes());
        self.buf.push(b'\n');
        if self.buf.len() >= STREAM_BUFFER {
            self.flush()?;
        }
        Ok(())
    }

    /// The buffer that rows are written into: append whole lines ending in `\n`, then call
    /// [`Self::maybe_flush`].
    pub fn buffer(&mut self) -> &mut Vec<u8> {
        &mut self.buf
    }

    /// Flush when enough bytes are waiting.
    ///
    /// # Errors
    /// [`Error::Io`] when writing fails.
    pub fn maybe_flush(&mut self) -> Result<()> {
        if self.buf.len() >= STREAM_BUFFER {
            self.flush()?;
        }
        Ok(())
    }

    /// Hand every complete row collected so far to the operating system, in one write.
    ///
    /// # Errors
    /// [`Error::Io`] when writing fails.
    pub fn flush(&mut self) -> Result<()> {
        if self.buf.is_empty() {
            return Ok(());
        }
        let res = match (&mut self.file, &mut self.live) {
            (Some(f), _) => f.as_file_mut().write_all(&self.buf),
            (None, Some(f)) => f.write_all(&self.buf),
            (None, None) => Ok(()),
        };
        res.map_err(|source| Error::Io {
            path: self.path.clone(),
            source,
            input: false,
        })?;
        self.buf.clear();
        Ok(())
    }

    /// Flush, sync and (in atomic mode) rename into place.
    ///
    /// # Errors
    /// [`Error::Io`] when writing or renaming fails.
    pub fn finish(mut self) -> Result<()> {
        self.flush()?;
        let io_err = |source: std::io::Error| Error::Io {
            path: self.path.clone(),
            source,
            input: false,
        };
        if let Some(tmp) = self.file.take() {
            #[cfg(unix)]
            {
                use std::os::unix::fs::PermissionsExt;
                tmp.as_file()
                    .set_permissions(std::fs::Permissions::from_mode(0o644))
                    .map_err(io_err)?;
            }
            tmp.as_file().sync_all().map_err(io_err)?;
            tmp.persist(&self.path).map_err(|e| io_err(e.error))?;
        } else if let Some(f) = self.live.take() {
            f.sync_all().map_err(io_err)?;
        }
        Ok(())
    }
}

/// The files `track` writes into its output directory.
pub const TRACK_OUTPUT_FILE_NAMES: [&str; 5] = [
    "track.csv",
    "alarms.csv",
    "sensors-health.csv",
    "track.svg",
    "summary.json",
];

/// Refuse an output directory where a `track` output would replace one of `inputs`, or an
/// existing file no earlier run wrote unless `overwrite` ([`crate::io::output::check_output_names`]).
///
/// # Errors
/// [`Error::Invalid`] naming `--out`.
pub fn check_track_outputs(out: &Path, inputs: &[&Path], overwrite: bool) -> Result<()> {
    crate::io::output::check_output_names(out, &TRACK_OUTPUT_FILE_NAMES, inputs, overwrite)
}

/// A plain decimal (`-?digits[.digits]`, at most 15 digits in all) read as `str::parse`
/// reads it, without its general machinery: the digits as an integer below 10^15 (exact in
/// f64) divided by an exact power of ten, one correctly rounded division, hence the correctly
/// rounded value of the decimal (Clinger 1990, "How to read floating point numbers
/// accurately", PLDI, the exact fast path), which is what `parse` returns. `None` for
/// anything else (the caller parses it the general way).
fn short_decimal(b: &[u8]) -> Option<f64> {
    const POW10: [f64; 16] = [
        1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
    ];
    let (neg, digits) = match b.first() {
        Some(b'-') => (true, &b[1..]),
        _ => (false, b),
    };
    let (mut int, mut count, mut frac, mut point) = (0u64, 0usize, 0usize, false);
    for &c in digits {
        match c {
            b'0'..=b'9' => {
                int = int * 10 + u64::from(c - b'0');
                count += 1;
                frac += usize::from(point);
                if count > 15 {
                    return None;
                }
            }
            b'.' if !point => point = true,
            _ => return None,
        }
    }
    if count == 0 {
        return None;
    }
    let v = int as f64 / POW10[frac];
    Some(if neg { -v } else { v })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_fault_code_passes_the_size_check_before_the_list() {
        // `checked_number` looks a number up in FAULT_CODES only when it is at least
        // FAULT_CODE_MIN in size
        assert!(FAULT_CODES.iter().all(|c| c.abs() >= FAULT_CODE_MIN));
        for &c in &FAULT_CODES {
            assert_eq!(checked_number(c, &String::new, "temperature"), Ok(None));
        }
        assert_eq!(
            checked_number(9998.5, &String::new, "temperature"),
            Ok(Some(9998.5))
        );
    }

    #[test]
    fn short_decimals_read_as_parse_reads_them() {
        // the fast path against the standard library's parser, bit for bit, on readings of
        // every length up to its 15 digits and on what it must leave to the parser
        let mut cases: Vec<String> = vec![
            "0".into(),
            "-0".into(),
            "0.0".into(),
            "-0.0".into(),
            "5.".into(),
            ".5".into(),
            "-.5".into(),
            "007.10".into(),
            "999999999999999".into(),
            "0.00000000000001".into(),
            "123456789.012345".into(),
            "-32768".into(),
            "99999.9".into(),
        ];
        let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
        for _ in 0..20_000 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let digits = (x % 15 + 1) as usize;
            let mut s: String = (0..digits)
                .map(|k| char::from(b'0' + ((x >> (4 * k)) % 10) as u8))
                .collect();
            let point = ((x >> 60) as usize) % (digits + 1);
            if point < digits {
                s.insert(point, '.');
            }
            if x & 1 == 1 {
                s.insert(0, '-');
            }
            cases.push(s);
        }
        for s in &cases {
            let fast = short_decimal(s.as_bytes()).unwrap_or_else(|| panic!("{s} not read"));
            assert_eq!(fast.to_bits(), s.parse::<f64>().unwrap().to_bits(), "{s}");
        }
        for s in [
            "",
            "-",
            ".",
            "1e3",
            "+5",
            "1.2.3",
            "1,5",
            "nan",
            "inf",
            "1234567890123456",
            "0.1234567890123456",
            " 1",
            "--1",
            "0.000000000000001",
        ] {
            assert!(short_decimal(s.as_bytes()).is_none(), "{s}");
        }
    }

    #[test]
    fn no_fault_marker_starts_with_a_digit() {
        // `cell_value` skips the marker list for a cell that starts with a digit
        for m in FAULT_MARKERS {
            assert!(!m.as_bytes()[0].is_ascii_digit(), "{m}");
        }
    }

    #[test]
    fn times_in_every_form() {
        assert_eq!(parse_time("12.5"), Some((12.5, TimeKind::Seconds)));
        // 2000-03-01 is day 11017 after 1970-01-01 (common practice: Unix day numbers).
        let (t, k) = parse_time("2000-03-01T00:00:00").unwrap();
        assert_eq!((t, k), (11017.0 * 86400.0, TimeKind::Naive));
        let (t2, k2) = parse_time("2000-03-01 01:30:00+01:30").unwrap();
        assert_eq!((t2, k2), (11017.0 * 86400.0, TimeKind::Zoned));
        let (t3, _) = parse_time("2000-03-01T00:00:00.25Z").unwrap();
        assert!((t3 - (11017.0 * 86400.0 + 0.25)).abs() < 1e-6);
        assert!(parse_time("2000-03-01T00:00").is_some());
        assert!(parse_time("2001-02-29T00:00:00").is_none());
        assert!(parse_time("2000-13-01T00:00:00").is_none());
        assert!(parse_time("yesterday").is_none());
        assert!(parse_time("2000-03-01T00:00:00+0100").is_some());
        assert!(parse_time("2000-03-01T00:00:00 UTC").is_none());
        assert!(parse_time("inf").is_none());
    }
}

//! Columnar logger files for `track`: Parquet files, and tables handed over in memory as
//! columns of numbers (the Python module's DataFrames).
//!
//! A columnar log holds the same table as a CSV logger file (`docs/track.md`): a `time`
//! column and one column per sensor id (and `cold_junction` when the case takes the cold
//! junction from a column). Its rows are checked by the same rules as CSV rows, through the
//! same code ([`crate::io::logger`]): the same column matching (a duplicated column, a column
//! that is not a sensor), the same "no reading" values (null, NaN and the logger fault codes),
//! the same plausibility checks, thermocouple conversion and sensor offsets, and the same
//! time order. So a Parquet file and the CSV of the same data give the same `track` results,
//! byte for byte (`tests/integration/track_parquet.rs`).
//!
//! * **Time**: a timestamp column (any unit; with a zone: instants, written back in UTC with
//!   `Z`; without: the logger's local time, counted as if UTC, as a CSV time without a zone),
//!   a number of seconds (float or integer), or text read as a CSV logger's times are.
//! * **Readings**: float (or integer) columns; a null is a missing reading.
//! * **Row numbers**: a row's `line` (in messages and in the outputs' `start_line` columns)
//!   is the line the row has in the CSV export of the same table, with its header on line 1:
//!   the table's row *r* (counted from 1) is line *r* + 1. Messages also name the table row.
//!
//! Parquet is read with the `parquet` crate's Arrow reader in batches of
//! [`PARQUET_BATCH_ROWS`] rows, only the columns that are used, so memory stays constant
//! whatever the file's length. Uncompressed and Snappy-compressed files are read (Snappy is
//! what pyarrow, pandas and Dask write by default); other codecs are refused with a message.

use crate::case::{Case, ReadAs};
use crate::error::{Error, Result};
use crate::io::logger::{
    ColumnMap, LoggerRow, TIME_FORMAT_HINT, TimeOrder, checked_number, checked_reading,
    match_columns,
};
use crate::io::times::{TimeFormat, TimeKind};
use arrow_array::cast::AsArray;
use arrow_array::types::{
    Float32Type, Float64Type, Int8Type, Int16Type, Int32Type, Int64Type, UInt8Type, UInt16Type,
    UInt32Type, UInt64Type,
};
use arrow_array::{Array, RecordBatch};
use arrow_schema::{DataType, TimeUnit};
use std::path::{Path, PathBuf};

/// Rows decoded at a time from a Parquet file.
pub const PARQUET_BATCH_ROWS: usize = 8192;

/// The four bytes a Parquet file starts (and ends) with.
pub const PARQUET_MAGIC: &[u8; 4] = b"PAR1";

/// One row's time as a columnar log holds it.
#[derive(Debug, Clone, Copy)]
pub enum TimeCell<'a> {
    /// A number of seconds.
    Seconds(f64),
    /// An instant in nanoseconds since 1970-01-01T00:00:00 UTC; `zoned`: the column has a
    /// zone (written back in UTC with `Z`), else a naive local time counted as if UTC.
    Nanos {
        /// Nanoseconds since 1970-01-01T00:00:00.
        nanos: i64,
        /// Whether the column has a zone.
        zoned: bool,
    },
    /// Text, read as a CSV logger's time is.
    Text(&'a str),
    /// No time (a null): an error.
    Missing,
}

/// The rows of a columnar log, checked as CSV rows are. Built from the column names; each
/// row is then handed over as its time and a function giving the number in a column (`None`
/// for a null).
#[derive(Debug, Clone)]
pub struct ColumnarRows {
    path: PathBuf,
    map: ColumnMap,
    case: Case,
    times: TimeOrder,
    time_format: Option<TimeFormat>,
    sensor_count: usize,
}

impl ColumnarRows {
    /// Match `names` against the case's sensors (the rules of a CSV header, see
    /// [`crate::io::logger`]); `path` names the table in messages.
    ///
    /// # Errors
    /// [`Error::Invalid`] naming the column: no `time` column, a duplicated column, a column
    /// that is not a sensor (unless `ignore_extra`), no `cold_junction` column when the case
    /// needs one.
    pub fn new(path: &Path, names: Vec<String>, case: &Case, ignore_extra: bool) -> Result<Self> {
        let map = match_columns(path, None, names, case, ignore_extra)?;
        Ok(ColumnarRows {
            path: path.to_path_buf(),
            map,
            case: case.clone(),
            times: TimeOrder::default(),
            time_format: None,
            sensor_count: case.sensors.len(),
        })
    }

    /// The index of the `time` column.
    pub fn time_column(&self) -> usize {
        self.map.time_column
    }

    /// The columns that are read (time, cold junction, sensors), in order.
    pub fn used_columns(&self) -> Vec<usize> {
        (0..self.map.column_names.len())
            .filter(|&k| {
                k == self.map.time_column
                    || Some(k) == self.map.cold_junction_column
                    || self.map.column_sensor[k].is_some()
            })
            .collect()
    }

    /// The column names.
    pub fn column_names(&self) -> &[String] {
        &self.map.column_names
    }

    /// Sensors of the case with no column.
    pub fn absent_sensors(&self) -> &[usize] {
        &self.map.absent_sensors
    }

    /// Columns that are not sensors and were ignored.
    pub fn ignored_columns(&self) -> &[String] {
        &self.map.ignored_columns
    }

    /// The kind of time, once a row is read.
    pub fn time_kind(&self) -> Option<TimeKind> {
        self.times.kind
    }

    /// The format of text times (from the first rows), or of the time column's type.
    pub fn time_format(&self) -> Option<TimeFormat> {
        self.time_format
    }

    /// The line a row has in the CSV export of the table (header on line 1): `index + 2` for
    /// the 0-based row `index`.
    pub fn line_of(index: u64) -> u64 {
        index + 2
    }

    /// Settle the format of text times from the first rows' cells (as a CSV logger's are).
    ///
    /// # Errors
    /// [`Error::Invalid`] on the `time` column when the cells are in no known format or the
    /// slashed dates are ambiguous.
    pub fn detect_text_times(&mut self, cells: &[&str]) -> Result<()> {
        if self.time_format.is_none() && !cells.is_empty() {
            self.time_format = Some(detect_format(&self.path, cells)?);
        }
        Ok(())
    }

    /// Check row `index` (0-based) into `out`: its time (`time`) and its numbers (`cell(k)`
    /// for column `k`, `None` for a null).
    ///
    /// # Errors
    /// [`Error::Invalid`] naming the line, the table row and the column: a missing or
    /// unreadable time, a time of another kind than the first row's or earlier than the
    /// previous row's, a non-finite number, an implausible reading or voltage.
    pub fn row(
        &mut self,
        index: u64,
        time: TimeCell<'_>,
        cell: &dyn Fn(usize) -> Option<f64>,
        out: &mut LoggerRow,
    ) -> Result<()> {
        let line = Self::line_of(index);
        let at = |field: &str, msg: String| row_error(&self.path, index, field, msg);
        out.line = line;
        out.values.clear();
        out.values.resize(self.sensor_count, None);
        let (text, t, kind) = match time {
            TimeCell::Seconds(v) if v.is_finite() => (format!("{v}"), v, TimeKind::Seconds),
            TimeCell::Seconds(v) => {
                return Err(at(
                    "time",
                    format!("`{v}` is not a time; write a finite number of seconds"),
                ));
            }
            TimeCell::Nanos { nanos, zoned } => {
                let text = iso_text(nanos, zoned).ok_or_else(|| {
                    at(
                        "time",
                        format!("{nanos} ns since 1970 is outside the years 0001 to 9999"),
                    )
                })?;
                // the seconds the CSV reader gets from that text (`times::parse_iso`: jiff's
                // instant, `as_secs_f64`), without parsing it back (unit test below)
                let t = instant_seconds(nanos)
                    .ok_or_else(|| Error::Internal(format!("the time {text} has no instant")))?;
                let kind = if zoned {
                    TimeKind::Zoned
                } else {
                    TimeKind::Naive
                };
                self.time_format.get_or_insert(TimeFormat::Iso);
                (text, t, kind)
            }
            TimeCell::Text(s) => {
                if self.time_format.is_none() {
                    self.time_format = Some(detect_format(&self.path, &[s])?);
                }
                let format = self.time_format.unwrap_or(TimeFormat::Iso);
                let (t, kind) = format.parse(s, false).ok_or_else(|| {
                    at(
                        "time",
                        format!(
                            "`{s}` is not a time in the table's format, {}; use one kind of \
                             time throughout the table{TIME_FORMAT_HINT}",
                            format.label()
                        ),
                    )
                })?;
                (s.to_string(), t, kind)
            }
            TimeCell::Missing => {
                return Err(at(
                    "time",
                    "the time is missing (null); every row needs its time".to_string(),
                ));
            }
        };
        if matches!(time, TimeCell::Seconds(_)) {
            self.time_format.get_or_insert(TimeFormat::Seconds);
        }
        self.times
            .check(&self.path, line, &text, t, kind)
            .map_err(|e| match e {
                Error::Invalid { location, message } => Error::Invalid {
                    location,
                    message: format!("{message} (table row {})", index + 1),
                },
                other => other,
            })?;
        out.time_s = t;
        out.time_text = text;
        let what = if self.case.conversion().is_some() {
            "voltage"
        } else {
            "temperature"
        };
        let cold_junction = match self.map.cold_junction_column {
            Some(c) => {
                let v = match cell(c) {
                    Some(v) => checked_number(v, &|| format!("{v}"), "temperature")
                        .map_err(|m| at("cold_junction", m))?,
                    None => None,
                };
                match v {
                    Some(v) => Some(
                        crate::io::convert::cold_junction_k(&self.case, v)
                            .map_err(|m| at("cold_junction", m))?,
                    ),
                    // a row without its cold junction has no temperatures
                    None => return Ok(()),
                }
            }
            None => None,
        };
        for (k, sensor) in self.map.column_sensor.iter().enumerate() {
            let Some(i) = *sensor else { continue };
            let Some(v) = cell(k) else { continue };
            let name = &self.map.column_names[k];
            let Some(v) = checked_number(v, &|| format!("{v}"), what).map_err(|m| at(name, m))?
            else {
                continue;
            };
            out.values[i] =
                Some(checked_reading(&self.case, v, i, cold_junction).map_err(|m| at(name, m))?);
        }
        Ok(())
    }

    /// How the table was read, for the outputs (`inputs_read_as`).
    pub fn read_as(&self, form: &str) -> ReadAs {
        let file = self
            .path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let time_format = self.time_format.map(|f| f.label().to_string());
        let mut description = form.to_string();
        if let Some(t) = &time_format {
            description.push_str(&format!(", times {t}"));
        }
        ReadAs {
            file,
            separator: "none".into(),
            decimal_mark: "none".into(),
            byte_order_mark: false,
            line_ends: "none".into(),
            lines_before_header: 0,
            units_row: None,
            time_format,
            declared: Vec::new(),
            description,
        }
    }
}

/// The format of text times from the first rows' cells (as a CSV logger's are found).
fn detect_format(path: &Path, cells: &[&str]) -> Result<TimeFormat> {
    crate::io::times::detect(cells, false).map_err(|m| {
        Error::invalid_at(
            path,
            Some(2),
            Some("time"),
            format!("{m}{TIME_FORMAT_HINT}"),
        )
    })
}

/// An error about row `index` (0-based) of a columnar log: its CSV line, the field, and the
/// table row in the message.
fn row_error(path: &Path, index: u64, field: &str, msg: String) -> Error {
    Error::invalid_at(
        path,
        Some(ColumnarRows::line_of(index) as usize),
        Some(field),
        format!("{msg} (table row {})", index + 1),
    )
}

/// Seconds since 1970 of an instant given in nanoseconds, as the CSV reader computes them
/// from its ISO 8601 text.
fn instant_seconds(nanos: i64) -> Option<f64> {
    let ts = jiff::Timestamp::from_nanosecond(i128::from(nanos)).ok()?;
    Some(ts.as_duration().as_secs_f64())
}

/// An instant as ISO 8601 text, as a CSV logger would write it: `YYYY-MM-DDThh:mm:ss`, the
/// fraction of a second only when there is one (trailing zeros dropped), `Z` when `zoned`.
/// `None` outside the years 0001–9999.
pub fn iso_text(nanos: i64, zoned: bool) -> Option<String> {
    let ts = jiff::Timestamp::from_nanosecond(i128::from(nanos)).ok()?;
    let dt = jiff::tz::TimeZone::UTC.to_datetime(ts);
    if dt.year() < 1 {
        return None;
    }
    let mut s = format!(
        "{:04}-{:02}-{:02}T{:02}:{:02}:{:02}",
        dt.year(),
        dt.month(),
        dt.day(),
        dt.hour(),
        dt.minute(),
        dt.second()
    );
    let frac = dt.subsec_nanosecond();
    if frac != 0 {
        let digits = format!("{frac:09}");
        s.push('.');
        s.push_str(digits.trim_end_matches('0'));
    }
    if zoned {
        s.push('Z');
    }
    Some(s)
}

/// The time column of a decoded batch.
enum TimeColumn {
    Seconds(Vec<Option<f64>>),
    Nanos(Vec<Option<i64>>, bool),
    Text(Vec<Option<String>>),
}

/// A decoded batch: the time, and the numbers of each used column (indexed by column; `None`
/// for a column that is not read).
struct Batch {
    time: TimeColumn,
    numbers: Vec<Option<Vec<Option<f64>>>>,
    len: usize,
}

/// A Parquet logger file, read batch by batch.
pub struct ParquetLog {
    path: PathBuf,
    rows: ColumnarRows,
    reader: parquet::arrow::arrow_reader::ParquetRecordBatchReader,
    /// The used columns of `rows`, in the order the batches hold them.
    read_columns: Vec<usize>,
    batch: Option<Batch>,
    /// Whether a batch was asked for.
    started: bool,
    pos: usize,
    index: u64,
}

impl std::fmt::Debug for ParquetLog {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ParquetLog")
            .field("path", &self.path)
            .finish()
    }
}

/// Whether `path` starts like a Parquet file.
pub fn is_parquet(path: &Path) -> bool {
    use std::io::Read;
    let mut head = [0u8; 4];
    std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok_and(|()| &head == PARQUET_MAGIC)
}

/// The message for a Parquet file the reader refuses.
fn parquet_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::invalid_at(
        path,
        None,
        None,
        format!(
            "not a readable Parquet logger file: {e} (edgetherm reads uncompressed and \
             Snappy-compressed Parquet, the default of pyarrow, pandas and Dask)"
        ),
    )
}

impl ParquetLog {
    /// Open a Parquet logger file and match its columns against the case's sensors.
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be opened; [`Error::Invalid`] for a file that is
    /// not Parquet, the column problems of [`ColumnarRows::new`], or a column whose type is
    /// not a time (time) or a number (the others).
    pub fn open(path: &Path, case: &Case, ignore_extra: bool) -> Result<Self> {
        use parquet::arrow::ProjectionMask;
        use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
        let file = std::fs::File::open(path).map_err(|source| Error::Io {
            path: path.to_path_buf(),
            source,
            input: true,
        })?;
        let builder =
            ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| parquet_error(path, e))?;
        let schema = builder.schema().clone();
        // pandas writes a non-default index as `__index_level_N__`: not a column of the log
        let schema_column: Vec<usize> = (0..schema.fields().len())
            .filter(|&i| !schema.field(i).name().starts_with("__index_level_"))
            .collect();
        let names = schema_column
            .iter()
            .map(|&i| schema.field(i).name().clone())
            .collect();
        let rows = ColumnarRows::new(path, names, case, ignore_extra)?;
        let read_columns = rows.used_columns();
        for &k in &read_columns {
            let field = schema.field(schema_column[k]);
            let name = field.name();
            let ok = if k == rows.time_column() {
                time_type(field.data_type()).is_some()
            } else {
                number_type(field.data_type())
            };
            if !ok {
                let want = if k == rows.time_column() {
                    "a timestamp, a number of seconds or text"
                } else {
                    "numbers (float; a missing reading is a null)"
                };
                return Err(Error::invalid_at(
                    path,
                    None,
                    Some(name),
                    format!(
                        "the column holds {} values; it must hold {want}",
                        field.data_type()
                    ),
                ));
            }
        }
        let mask = ProjectionMask::roots(
            builder.parquet_schema(),
            read_columns.iter().map(|&k| schema_column[k]),
        );
        let time_type = schema
            .field(schema_column[rows.time_column()])
            .data_type()
            .clone();
        let reader = builder
            .with_projection(mask)
            .with_batch_size(PARQUET_BATCH_ROWS)
            .build()
            .map_err(|e| parquet_error(path, e))?;
        let mut log = ParquetLog {
            path: path.to_path_buf(),
            rows,
            reader,
            read_columns,
            batch: None,
            started: false,
            pos: 0,
            index: 0,
        };
        // the time format is known from the column's type, or (text) from the first rows
        match time_type {
            DataType::Timestamp(..) => log.rows.time_format = Some(TimeFormat::Iso),
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Utf8View => {
                log.started = true;
                log.next_batch()?;
            }
            _ => log.rows.time_format = Some(TimeFormat::Seconds),
        }
        Ok(log)
    }

    /// Decode the next batch (text times: settle their format from its first rows); at the
    /// end of the file, no batch.
    fn next_batch(&mut self) -> Result<()> {
        self.batch = None;
        self.pos = 0;
        match self.reader.next() {
            None => Ok(()),
            Some(Err(e)) => Err(parquet_error(&self.path, e)),
            Some(Ok(rb)) => {
                let batch = self.decode(&rb)?;
                if let TimeColumn::Text(cells) = &batch.time {
                    let first: Vec<&str> = cells
                        .iter()
                        .flatten()
                        .take(50)
                        .map(String::as_str)
                        .collect();
                    self.rows.detect_text_times(&first)?;
                }
                self.batch = Some(batch);
                Ok(())
            }
        }
    }

    /// The checked rows (column matching, time kind and format).
    pub fn rows(&self) -> &ColumnarRows {
        &self.rows
    }

    /// How the file was read, for the outputs.
    pub fn read_as(&self) -> ReadAs {
        self.rows.read_as("Parquet")
    }

    /// Read the next row into `row`; `Ok(false)` at the end of the file.
    ///
    /// # Errors
    /// As [`ColumnarRows::row`]; [`Error::Invalid`] when a page cannot be decoded.
    pub fn next_row(&mut self, row: &mut LoggerRow) -> Result<bool> {
        loop {
            match &self.batch {
                Some(b) if self.pos < b.len => break,
                Some(_) => self.next_batch()?,
                // (the batch read at open for text times, or none yet)
                None if self.index == 0 && self.pos == 0 && !self.started => {
                    self.started = true;
                    self.next_batch()?;
                }
                None => return Ok(false),
            }
            if self.batch.is_none() {
                return Ok(false);
            }
        }
        let b = self.batch.as_ref().expect("a batch with rows");
        let p = self.pos;
        let time = match &b.time {
            TimeColumn::Seconds(v) => v[p].map_or(TimeCell::Missing, TimeCell::Seconds),
            TimeColumn::Nanos(v, zoned) => {
                v[p].map_or(TimeCell::Missing, |nanos| TimeCell::Nanos {
                    nanos,
                    zoned: *zoned,
                })
            }
            TimeColumn::Text(v) => v[p].as_deref().map_or(TimeCell::Missing, TimeCell::Text),
        };
        let numbers = &b.numbers;
        self.rows.row(
            self.index,
            time,
            &|k| numbers[k].as_ref().and_then(|c| c[p]),
            row,
        )?;
        self.pos += 1;
        self.index += 1;
        Ok(true)
    }

    /// Decode a record batch into plain columns.
    fn decode(&self, rb: &RecordBatch) -> Result<Batch> {
        let n_columns = self.rows.column_names().len();
        let mut numbers: Vec<Option<Vec<Option<f64>>>> = vec![None; n_columns];
        let mut time = None;
        let row_offset = self.index;
        for (j, &k) in self.read_columns.iter().enumerate() {
            let array = rb.column(j);
            if k == self.rows.time_column() {
                time = Some(time_values(array.as_ref()).ok_or_else(|| {
                    Error::invalid_at(
                        &self.path,
                        Some(ColumnarRows::line_of(row_offset) as usize),
                        Some("time"),
                        "a timestamp outside the years 1677 to 2262 (nanoseconds since 1970 \
                         overflow)",
                    )
                })?);
            } else {
                numbers[k] = Some(number_values(array.as_ref()));
            }
        }
        Ok(Batch {
            time: time.ok_or_else(|| Error::Internal("the time column was not read".into()))?,
            numbers,
            len: rb.num_rows(),
        })
    }
}

/// Whether a column type holds numbers edgetherm reads as readings.
fn number_type(t: &DataType) -> bool {
    matches!(
        t,
        DataType::Float64
            | DataType::Float32
            | DataType::Int8
            | DataType::Int16
            | DataType::Int32
            | DataType::Int64
            | DataType::UInt8
            | DataType::UInt16
            | DataType::UInt32
            | DataType::UInt64
            | DataType::Null
    )
}

/// How a time column's type is read: `Some(())` for a timestamp, a number or text.
fn time_type(t: &DataType) -> Option<()> {
    match t {
        DataType::Timestamp(..) | DataType::Utf8 | DataType::LargeUtf8 | DataType::Utf8View => {
            Some(())
        }
        t if number_type(t) && !matches!(t, DataType::Null) => Some(()),
        _ => None,
    }
}

/// A number column as `f64` (`None` for a null).
fn number_values(a: &dyn Array) -> Vec<Option<f64>> {
    fn conv<T: arrow_array::ArrowPrimitiveType>(
        a: &dyn Array,
        f: impl Fn(T::Native) -> f64,
    ) -> Vec<Option<f64>> {
        a.as_primitive::<T>().iter().map(|v| v.map(&f)).collect()
    }
    match a.data_type() {
        DataType::Float64 => a.as_primitive::<Float64Type>().iter().collect(),
        DataType::Float32 => conv::<Float32Type>(a, f64::from),
        DataType::Int8 => conv::<Int8Type>(a, f64::from),
        DataType::Int16 => conv::<Int16Type>(a, f64::from),
        DataType::Int32 => conv::<Int32Type>(a, f64::from),
        // (integers beyond 2^53 lose digits, as they would written in a CSV and parsed)
        DataType::Int64 => conv::<Int64Type>(a, |v| v as f64),
        DataType::UInt8 => conv::<UInt8Type>(a, f64::from),
        DataType::UInt16 => conv::<UInt16Type>(a, f64::from),
        DataType::UInt32 => conv::<UInt32Type>(a, f64::from),
        DataType::UInt64 => conv::<UInt64Type>(a, |v| v as f64),
        _ => vec![None; a.len()],
    }
}

/// The time column of a batch; `None` when a timestamp overflows nanoseconds.
fn time_values(a: &dyn Array) -> Option<TimeColumn> {
    use arrow_array::types::{
        TimestampMicrosecondType, TimestampMillisecondType, TimestampNanosecondType,
        TimestampSecondType,
    };
    Some(match a.data_type() {
        DataType::Timestamp(unit, tz) => {
            let zoned = tz.is_some();
            let scale: i64 = match unit {
                TimeUnit::Second => 1_000_000_000,
                TimeUnit::Millisecond => 1_000_000,
                TimeUnit::Microsecond => 1_000,
                TimeUnit::Nanosecond => 1,
            };
            let raw: Vec<Option<i64>> = match unit {
                TimeUnit::Second => a.as_primitive::<TimestampSecondType>().iter().collect(),
                TimeUnit::Millisecond => a
                    .as_primitive::<TimestampMillisecondType>()
                    .iter()
                    .collect(),
                TimeUnit::Microsecond => a
                    .as_primitive::<TimestampMicrosecondType>()
                    .iter()
                    .collect(),
                TimeUnit::Nanosecond => {
                    a.as_primitive::<TimestampNanosecondType>().iter().collect()
                }
            };
            let mut nanos = Vec::with_capacity(raw.len());
            for v in raw {
                nanos.push(match v {
                    Some(v) => Some(v.checked_mul(scale)?),
                    None => None,
                });
            }
            TimeColumn::Nanos(nanos, zoned)
        }
        DataType::Utf8 => TimeColumn::Text(
            a.as_string::<i32>()
                .iter()
                .map(|v| v.map(str::to_string))
                .collect(),
        ),
        DataType::LargeUtf8 => TimeColumn::Text(
            a.as_string::<i64>()
                .iter()
                .map(|v| v.map(str::to_string))
                .collect(),
        ),
        DataType::Utf8View => TimeColumn::Text(
            a.as_string_view()
                .iter()
                .map(|v| v.map(str::to_string))
                .collect(),
        ),
        _ => TimeColumn::Seconds(number_values(a)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn instants_are_written_as_a_logger_writes_them() {
        // 2000-03-01 is day 11017 after 1970-01-01 (common practice: Unix day numbers)
        let day = 11017_i64 * 86_400 * 1_000_000_000;
        assert_eq!(iso_text(day, true).unwrap(), "2000-03-01T00:00:00Z");
        assert_eq!(iso_text(day, false).unwrap(), "2000-03-01T00:00:00");
        assert_eq!(
            iso_text(day + 250_000_000, true).unwrap(),
            "2000-03-01T00:00:00.25Z"
        );
        assert_eq!(
            iso_text(-1_000_000_000, true).unwrap(),
            "1969-12-31T23:59:59Z"
        );
        // and they read back as the CSV reader reads the same text
        let (t, k) = TimeFormat::Iso
            .parse(&iso_text(day + 250_000_000, true).unwrap(), false)
            .unwrap();
        assert_eq!(k, TimeKind::Zoned);
        assert!((t - (11017.0 * 86400.0 + 0.25)).abs() < 1e-6);
    }

    #[test]
    fn instant_seconds_are_the_csv_readers_bit_for_bit() {
        // the seconds a columnar row gets are those the CSV reader parses from the text the
        // row writes, zoned and naive, whole and fractional seconds, before and after 1970
        let mut x: u64 = 0x2545_f491_4f6c_dd1d;
        let mut cases = vec![
            0_i64,
            -1,
            1,
            999_999_999,
            -1_500_000_000,
            1_772_348_400_123_456_789,
        ];
        for _ in 0..2000 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            cases.push((x % 4_000_000_000_000_000_000) as i64 - 1_000_000_000_000_000_000);
        }
        for n in cases {
            for zoned in [true, false] {
                let text = iso_text(n, zoned).unwrap();
                let (t, _) = TimeFormat::Iso.parse(&text, false).unwrap();
                assert_eq!(
                    t.to_bits(),
                    instant_seconds(n).unwrap().to_bits(),
                    "{n} {text}"
                );
            }
        }
    }
}

//! The CSV inputs: `sensors.csv`, `readings.csv`, fixed-edge profiles and truth profiles.
//!
//! Each file is read whole, checked to be UTF-8 text, split into a header and rows (with the
//! 1-based line of each row kept for messages), and then checked column by column. Values
//! are converted to metres and kelvin here, once. Every problem is an
//! [`Error::Invalid`] naming the file, the line and the column.

use crate::case::{Case, ReadAs, Sensor};
use crate::error::{Error, Result};
use crate::geometry::{Edge, EdgeProfile, Point, Shape};
use crate::io::dialect::{self, ColumnUnit, Dialect, DialectOptions};
use crate::units::Units;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// Profile positions within this fraction of the edge length of an end count as that end
/// (a CSV written with a few decimals, say); they are moved onto the end exactly.
pub(crate) const PROFILE_SPAN_TOLERANCE: f64 = 1e-6;

/// The columns a CSV file may have.
pub(crate) struct Columns<'a> {
    /// Columns every file must have.
    pub required: &'a [&'a str],
    /// Columns a file may have.
    pub optional: &'a [&'a str],
}

impl Columns<'_> {
    fn describe(&self) -> String {
        let mut s = format!("`{}`", self.required.join(","));
        if !self.optional.is_empty() {
            s.push_str(&format!(
                " (optional columns: {})",
                self.optional.join(", ")
            ));
        }
        s
    }
}

/// One data row: its 1-based line and its trimmed cells, one per header column.
pub(crate) struct CsvRow {
    pub line: usize,
    pub cells: Vec<String>,
}

/// A CSV file read into a header and rows.
pub(crate) struct CsvTable {
    pub path: PathBuf,
    /// Lower-case column names, in file order.
    pub columns: Vec<String>,
    pub rows: Vec<CsvRow>,
    /// How the file is written.
    pub dialect: Dialect,
}

/// Read a whole input file; a missing or unreadable file is an input error (exit status 2).
pub(crate) fn read_input(path: &Path) -> Result<Vec<u8>> {
    use crate::budget::MAX_INPUT_BYTES;
    use std::io::Read;
    let io_err = |source| Error::Io {
        path: path.to_path_buf(),
        source,
        input: true,
    };
    let file = std::fs::File::open(path).map_err(io_err)?;
    if file.metadata().is_ok_and(|m| m.is_dir()) {
        return Err(Error::invalid_at(
            path,
            None,
            None,
            "this is a directory, not a file; give the path of the file",
        ));
    }
    // read at most one byte past the limit, so a device or an endless pipe stops here
    let mut bytes = Vec::new();
    file.take(MAX_INPUT_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(io_err)?;
    if bytes.len() as u64 > MAX_INPUT_BYTES {
        return Err(Error::invalid_at(
            path,
            None,
            None,
            format!(
                "this file is larger than {} MiB (or a device that never ends), far larger \
                 than any case file; check the path",
                MAX_INPUT_BYTES / (1024 * 1024)
            ),
        ));
    }
    Ok(bytes)
}

/// Check that `bytes` are UTF-8 text; the error names the line of the first bad byte.
pub(crate) fn utf8_text<'a>(path: &Path, bytes: &'a [u8], expect: &str) -> Result<&'a str> {
    match std::str::from_utf8(bytes) {
        Ok(s) => Ok(s.strip_prefix('\u{feff}').unwrap_or(s)),
        Err(e) => {
            let line = bytes[..e.valid_up_to()]
                .iter()
                .filter(|&&b| b == b'\n')
                .count()
                + 1;
            Err(Error::invalid_at(
                path,
                Some(line),
                None,
                format!(
                    "this is not UTF-8 text (binary data or another encoding); expected {expect} \
                     saved as UTF-8"
                ),
            ))
        }
    }
}

impl CsvTable {
    /// Read and split a CSV file, checking its header against `columns`; the dialect is
    /// detected (`crate::io::dialect`).
    pub(crate) fn read(path: &Path, columns: &Columns<'_>) -> Result<CsvTable> {
        Self::read_with(path, columns, &DialectOptions::default(), false)
    }

    /// [`CsvTable::read`] with the dialect declared in part (`options`); `declarable`: the
    /// command line can declare it (the messages then say so).
    pub(crate) fn read_with(
        path: &Path,
        columns: &Columns<'_>,
        options: &DialectOptions,
        declarable: bool,
    ) -> Result<CsvTable> {
        let bytes = read_input(path)?;
        let what = format!("a CSV file with the header {}", columns.describe());
        utf8_text(path, &bytes, &what)?;
        let err = |line: Option<usize>, field: Option<&str>, msg: String| {
            Error::invalid_at(path, line, field, msg)
        };
        let prefix = &bytes[..bytes.len().min(dialect::PREFIX_BYTES)];
        let dialect = dialect::detect(
            path,
            prefix,
            prefix.len() == bytes.len(),
            &dialect::Expect {
                keys: columns.required,
                header: &columns.describe(),
                declarable,
            },
            options,
        )?;
        // the header starts a line, so this is a character boundary of valid UTF-8
        let text = std::str::from_utf8(&bytes[dialect.header_offset..]).unwrap_or_default();
        let line_of = |offset: usize| record_line(text, offset) + dialect.header_line - 1;
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .delimiter(dialect.separator.byte())
            .trim(csv::Trim::All)
            .comment(Some(b'#'))
            .from_reader(text.as_bytes());
        let mut header: Option<(usize, Vec<String>)> = None;
        let mut units_skipped = dialect.units_row.is_none();
        let mut rows = Vec::new();
        for record in reader.records() {
            let record = record.map_err(|e| {
                let line = e.position().map(|p| line_of(p.byte() as usize));
                err(line, None, format!("cannot read this CSV line: {e}"))
            })?;
            let line = record.position().map_or(0, |p| line_of(p.byte() as usize));
            let cells: Vec<String> = record.iter().map(|c| c.trim().to_string()).collect();
            if cells.iter().all(String::is_empty) {
                continue;
            }
            if header.is_none() {
                header = Some((line, cells.iter().map(|c| c.to_lowercase()).collect()));
            } else if !units_skipped {
                units_skipped = true;
            } else {
                rows.push(CsvRow { line, cells });
            }
        }
        let Some((header_line, names)) = header else {
            return Err(err(
                None,
                None,
                format!(
                    "the file has no header line; it must start with {}",
                    columns.describe()
                ),
            ));
        };
        check_header(path, header_line, &names, columns)?;
        for row in &rows {
            if row.cells.len() != names.len() {
                return Err(err(
                    Some(row.line),
                    None,
                    format!(
                        "this row has {} cells but the header names {} columns ({}); give one \
                         value per column",
                        row.cells.len(),
                        names.len(),
                        names.join(",")
                    ),
                ));
            }
        }
        Ok(CsvTable {
            path: path.to_path_buf(),
            columns: names,
            rows,
            dialect,
        })
    }

    /// How the file was read, for the outputs.
    pub(crate) fn read_as(&self) -> ReadAs {
        self.dialect.read_as(&self.path, None)
    }

    /// Check the units row, if any, against what each column holds (`expected`).
    pub(crate) fn check_units(
        &self,
        expected: impl Fn(&str) -> Option<dialect::ColumnUnit>,
    ) -> Result<()> {
        match &self.dialect.units_row {
            Some(u) => dialect::check_units(
                &self.path,
                self.dialect.header_line + 1,
                &self.columns,
                u,
                expected,
            ),
            None => Ok(()),
        }
    }

    /// Index of a column, if the file has it.
    pub(crate) fn col(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c == name)
    }

    /// An invalid-input error at a row and column of this file.
    pub(crate) fn error(&self, line: usize, field: &str, message: impl Into<String>) -> Error {
        Error::invalid_at(&self.path, Some(line), Some(field), message)
    }

    /// The text of a required column (present: the header was checked).
    pub(crate) fn text<'r>(&self, row: &'r CsvRow, name: &str) -> &'r str {
        self.col(name).map_or("", |i| row.cells[i].as_str())
    }

    /// A required number: present, parseable and finite.
    pub(crate) fn number(&self, row: &CsvRow, name: &str) -> Result<f64> {
        self.parse_number(row, name, self.text(row, name))
    }

    /// A cell as a finite number in the file's decimal mark.
    fn parse_number(&self, row: &CsvRow, name: &str, cell: &str) -> Result<f64> {
        let text = self
            .dialect
            .number_text(cell)
            .map_err(|m| self.error(row.line, name, m))?;
        parse_finite(&text).map_err(|m| {
            self.error(
                row.line,
                name,
                format!("{m}{}", self.dialect.number_hint(cell)),
            )
        })
    }

    /// An optional number: `None` when the column is absent or the cell empty.
    pub(crate) fn opt_number(&self, row: &CsvRow, name: &str) -> Result<Option<f64>> {
        match self.col(name) {
            None => Ok(None),
            Some(i) if row.cells[i].is_empty() => Ok(None),
            Some(i) => self.parse_number(row, name, &row.cells[i]).map(Some),
        }
    }
}

/// The 1-based line where the record that the csv reader places at byte `offset` starts.
///
/// The reader reports the position where it began looking for the record, which lies before
/// any blank or comment lines it then skipped; skip them here too.
fn record_line(text: &str, offset: usize) -> usize {
    let mut off = offset.min(text.len());
    while let Some(rest) = text.get(off..).filter(|r| !r.is_empty()) {
        let len = rest.find('\n').map_or(rest.len(), |i| i + 1);
        let line = rest[..len].trim_end_matches(['\n', '\r']);
        if line.is_empty() || line.starts_with('#') {
            off += len;
        } else {
            break;
        }
    }
    text.as_bytes()[..off]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

fn check_header(path: &Path, line: usize, names: &[String], columns: &Columns<'_>) -> Result<()> {
    let err = |field: Option<&str>, msg: String| Error::invalid_at(path, Some(line), field, msg);
    let known = |n: &str| columns.required.contains(&n) || columns.optional.contains(&n);
    if !columns
        .required
        .iter()
        .any(|r| names.iter().any(|n| n == r))
    {
        let found = names.join(",");
        return Err(err(
            None,
            format!(
                "this line must be the header {}; found `{found}`",
                columns.describe()
            ),
        ));
    }
    for (i, n) in names.iter().enumerate() {
        if n.is_empty() {
            return Err(err(
                None,
                format!(
                    "column {} of the header has no name; expected {}",
                    i + 1,
                    columns.describe()
                ),
            ));
        }
        if names[..i].contains(n) {
            return Err(err(
                Some(n),
                format!("the column `{n}` appears twice in the header"),
            ));
        }
        if !known(n) {
            return Err(err(
                Some(n),
                format!(
                    "unknown column `{n}`; the header must be {}; check the spelling",
                    columns.describe()
                ),
            ));
        }
    }
    for r in columns.required {
        if !names.iter().any(|n| n == r) {
            return Err(err(
                Some(r),
                format!(
                    "missing column `{r}`; the header must be {}",
                    columns.describe()
                ),
            ));
        }
    }
    Ok(())
}

/// Parse a finite number; the error says what was found.
pub(crate) fn parse_finite(cell: &str) -> std::result::Result<f64, String> {
    if cell.is_empty() {
        return Err("empty cell where a number is required".into());
    }
    match cell.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "`{cell}` is not a finite number (NaN, infinite or too large); give a finite value"
        )),
        Err(_) => Err(format!("`{cell}` is not a number")),
    }
}

/// A value converted back to the case unit, without the round-off of the conversion
/// (`150`, not `149.99999999999997`).
fn tidy(v: f64) -> String {
    format!("{v:.9e}").parse::<f64>().unwrap_or(v).to_string()
}

/// An absolute temperature in the case unit, checked against the plausible range
/// ([`crate::plausible::temperature_k`]: absolute zero to 5000 K), in kelvin.
pub(crate) fn absolute_temperature(units: &Units, t: f64) -> std::result::Result<f64, String> {
    crate::plausible::temperature_k(units, t)
}

/// Read `sensors.csv`: `sensor,x,y` with optional `sigma`, `position_sigma` and `offset` (a
/// calibration offset in the temperature unit, subtracted from every reading of the sensor).
pub(crate) fn read_sensors(path: &Path, units: &Units, shape: &Shape) -> Result<Vec<Sensor>> {
    read_sensors_as(path, units, shape).map(|(s, _)| s)
}

/// [`read_sensors`], with how the file was read.
#[allow(clippy::float_cmp)] // a position exactly on the right edge, as written in the file
pub(crate) fn read_sensors_as(
    path: &Path,
    units: &Units,
    shape: &Shape,
) -> Result<(Vec<Sensor>, ReadAs)> {
    let table = CsvTable::read(
        path,
        &Columns {
            required: &["sensor", "x", "y"],
            optional: &["sigma", "position_sigma", "offset"],
        },
    )?;
    table.check_units(|c| match c {
        "x" | "y" | "position_sigma" => Some(ColumnUnit::Length(units.length)),
        "sigma" | "offset" => Some(ColumnUnit::Temperature(units.temperature)),
        _ => None,
    })?;
    if table.rows.is_empty() {
        return Err(Error::invalid_at(
            path,
            None,
            None,
            "the file lists no sensors; add one row `id,x,y` per thermocouple",
        ));
    }
    let l = units.length;
    let mut seen: HashMap<String, usize> = HashMap::new();
    let mut sensors = Vec::with_capacity(table.rows.len());
    for row in &table.rows {
        let id = table.text(row, "sensor").to_string();
        if id.is_empty() {
            return Err(table.error(
                row.line,
                "sensor",
                "the sensor id is empty; give every sensor a name",
            ));
        }
        if let Some(first) = seen.insert(id.clone(), row.line) {
            return Err(table.error(
                row.line,
                "sensor",
                format!(
                    "the sensor id `{id}` is used twice (lines {first} and {}); ids must be unique",
                    row.line
                ),
            ));
        }
        let x = table.number(row, "x")?;
        let y = table.number(row, "y")?;
        let position = Point::new(units.length_to_m(x), units.length_to_m(y));
        if !shape.contains_strictly(position) {
            let w = tidy(units.length_from_m(shape.width()));
            let extent = match shape.height() {
                Some(h) => format!(
                    "0 < x < {w} {l} and 0 < y < {} {l}",
                    tidy(units.length_from_m(h))
                ),
                None => format!("0 < x < {w} {l} and y > 0"),
            };
            let x_bad = !(position.x > 0.0 && position.x < shape.width());
            let on_edge = if x_bad {
                (position.x == 0.0)
                    .then_some(Edge::Left)
                    .or((position.x == shape.width()).then_some(Edge::Right))
            } else {
                (position.y == 0.0)
                    .then_some(Edge::Bottom)
                    .or((shape.height() == Some(position.y)).then_some(Edge::Top))
            };
            let where_ = match on_edge {
                Some(edge) => format!("exactly on an edge (the {edge} edge)"),
                None => "outside the plate".to_string(),
            };
            // a position that fits when read in another length unit: likely a unit mix-up
            use crate::units::LengthUnit;
            let fits_in = [LengthUnit::Millimetre, LengthUnit::Inch, LengthUnit::Metre]
                .into_iter()
                .filter(|u| *u != units.length)
                .find(|u| shape.contains_strictly(Point::new(u.metres() * x, u.metres() * y)));
            let hint = match (on_edge, fits_in) {
                (None, Some(u)) => format!(
                    "; it would lie inside if the file were in {}: a unit mistake is the likely \
                     cause (the case's length_unit in plate.toml is {l}); convert the positions \
                     or correct length_unit",
                    u.symbol()
                ),
                _ => String::new(),
            };
            return Err(table.error(
                row.line,
                if x_bad { "x" } else { "y" },
                format!(
                    "sensor `{id}` at ({x}, {y}) {l} is {where_}; a sensor must lie strictly \
                     inside the plate ({extent}){hint}"
                ),
            ));
        }
        if matches!(shape, Shape::Strip { .. }) && position.y > crate::plausible::MAX_LENGTH_M {
            return Err(table.error(
                row.line,
                "y",
                format!(
                    "sensor `{id}` is {} {l} deep in the strip, beyond the plausible {} m; \
                     check the value and length_unit",
                    crate::plausible::short(y),
                    crate::plausible::MAX_LENGTH_M
                ),
            ));
        }
        let sigma_k = match table.opt_number(row, "sigma")? {
            Some(s) if s <= 0.0 => {
                return Err(table.error(
                    row.line,
                    "sigma",
                    format!(
                        "the standard uncertainty must be positive, not {s}; leave the cell \
                         empty to use [noise]"
                    ),
                ));
            }
            Some(s) => Some(crate::plausible::sigma_k(units, s).map_err(|m| {
                table.error(
                    row.line,
                    "sigma",
                    format!("{m}; leave the cell empty to use [noise]"),
                )
            })?),
            None => None,
        };
        let position_sigma_m = match table.opt_number(row, "position_sigma")? {
            Some(s) if s < 0.0 => {
                return Err(table.error(
                    row.line,
                    "position_sigma",
                    format!("the position uncertainty cannot be negative ({s})"),
                ));
            }
            Some(0.0) => Some(0.0),
            Some(s) => Some(
                crate::plausible::length_m(units, s, "the position uncertainty")
                    .map_err(|m| table.error(row.line, "position_sigma", m))?,
            ),
            None => None,
        };
        let offset_k = table
            .opt_number(row, "offset")?
            .map(|o| units.dtemp_to_k(o));
        sensors.push(Sensor {
            id,
            position,
            sigma_k,
            position_sigma_m,
            offset_k,
            line: row.line,
        });
    }
    Ok((sensors, table.read_as()))
}

/// Read `readings.csv` (`sensor,temperature`, one reading per row) into kelvin, aligned with
/// `case.sensors`; a sensor with no row gets `None`. The dialect is detected, except what
/// `options` declares; how the file was read is returned for the outputs.
pub(crate) fn read_readings(
    path: &Path,
    case: &Case,
    options: &DialectOptions,
) -> Result<(Vec<Option<f64>>, ReadAs)> {
    let value = super::convert::value_column(case);
    let with_cj = super::convert::cold_junction_column(case);
    let required: &[&str] = if with_cj {
        &["sensor", value, "cold_junction"]
    } else {
        &["sensor", value]
    };
    let table = CsvTable::read_with(
        path,
        &Columns {
            required,
            optional: &[],
        },
        options,
        true,
    )?;
    let temperature = ColumnUnit::Temperature(case.units.temperature);
    table.check_units(|c| match c {
        "temperature" | "cold_junction" => Some(temperature),
        "emf_mv" => Some(ColumnUnit::Millivolt),
        _ => None,
    })?;
    if table.rows.is_empty() {
        return Err(Error::invalid_at(
            path,
            None,
            None,
            format!("the file holds no readings; add one row `sensor,{value}` per reading"),
        ));
    }
    let index: HashMap<&str, usize> = case
        .sensors
        .iter()
        .enumerate()
        .map(|(i, s)| (s.id.as_str(), i))
        .collect();
    let mut values: Vec<Option<f64>> = vec![None; case.sensors.len()];
    let mut lines: Vec<usize> = vec![0; case.sensors.len()];
    for row in &table.rows {
        let id = table.text(row, "sensor");
        let Some(&i) = index.get(id) else {
            return Err(table.error(
                row.line,
                "sensor",
                format!(
                    "a reading for `{id}`, which is not in {}{}; check the id or add the sensor",
                    case.files.sensors.display(),
                    super::suggest::did_you_mean(id, case.sensors.iter().map(|s| s.id.as_str()))
                ),
            ));
        };
        if values[i].is_some() {
            return Err(table.error(
                row.line,
                "sensor",
                format!(
                    "a second reading for `{id}` (the first is on line {}); give one reading per \
                     sensor",
                    lines[i]
                ),
            ));
        }
        let v = table
            .number(row, value)
            .map_err(|e| add_hint(e, "; leave the sensor's row out if it has no reading"))?;
        let cj = if with_cj {
            let c = table.number(row, "cold_junction")?;
            Some(
                super::convert::cold_junction_k(case, c)
                    .map_err(|m| table.error(row.line, "cold_junction", m))?,
            )
        } else {
            None
        };
        let k =
            super::convert::reading_k(case, v, cj).map_err(|m| table.error(row.line, value, m))?;
        values[i] = Some(super::convert::with_offset(case, i, k));
        lines[i] = row.line;
    }
    Ok((values, table.read_as()))
}

fn add_hint(e: Error, hint: &str) -> Error {
    match e {
        Error::Invalid { location, message } => Error::Invalid {
            location,
            message: format!("{message}{hint}"),
        },
        other => other,
    }
}

/// Rows of a profile for one edge: `(line, position, temperature)` in case units.
type ProfileRows = Vec<(usize, f64, f64)>;

/// `read_edge_profile_as` without the dialect (the tests' shorthand).
#[cfg(test)]
pub(crate) fn read_edge_profile(
    path: &Path,
    units: &Units,
    edge: Edge,
    length: Option<f64>,
) -> Result<EdgeProfile> {
    read_edge_profile_as(path, units, edge, length, None).map(|(p, _)| p)
}

/// Read one fixed-edge profile file (`position,temperature`) for `edge`, and how it was read
/// (for the outputs' echo). `length` is the edge's length in the case unit (`None` for a side
/// of a strip, whose checks the plate makes).
pub(crate) fn read_edge_profile_as(
    path: &Path,
    units: &Units,
    edge: Edge,
    length: Option<f64>,
    radius_m: Option<f64>,
) -> Result<(EdgeProfile, ReadAs)> {
    let table = CsvTable::read(
        path,
        &Columns {
            required: &["position", "temperature"],
            optional: &[],
        },
    )?;
    let mut rows = ProfileRows::new();
    for row in &table.rows {
        let s = table.number(row, "position")?;
        let t = table.number(row, "temperature")?;
        rows.push((row.line, s, t));
    }
    let profile = match radius_m {
        Some(r) => build_circle_profile(&table, units, edge, r, rows)?,
        None => build_profile(&table, units, edge, length, rows)?,
    };
    Ok((profile, table.read_as()))
}

/// Read truth profiles (`edge,position,temperature`; the `edge` column may be left out when
/// exactly one edge is unknown), one per unknown edge of the case.
pub(crate) fn read_truth_profiles(path: &Path, case: &Case) -> Result<Vec<(Edge, EdgeProfile)>> {
    let table = CsvTable::read(
        path,
        &Columns {
            required: &["position", "temperature"],
            optional: &["edge"],
        },
    )?;
    let unknown = case.plate.unknown_edges();
    let names: Vec<&str> = unknown.iter().map(|e| e.name()).collect();
    let has_edge_col = table.col("edge").is_some();
    if !has_edge_col && unknown.len() != 1 {
        return Err(Error::invalid_at(
            path,
            Some(1),
            Some("edge"),
            format!(
                "the case has {} unknown edges ({}), so every row needs an `edge` column saying \
                 which edge it belongs to",
                unknown.len(),
                names.join(", ")
            ),
        ));
    }
    let mut per_edge: Vec<(Edge, ProfileRows)> = unknown.iter().map(|&e| (e, Vec::new())).collect();
    for row in &table.rows {
        let edge = if has_edge_col {
            let name = table.text(row, "edge");
            let edge = Edge::parse(name).ok_or_else(|| {
                table.error(
                    row.line,
                    "edge",
                    format!(
                        "`{name}` is not an edge; use {}",
                        shape_edge_names(case.plate.shape())
                    ),
                )
            })?;
            if !unknown.contains(&edge) {
                return Err(table.error(
                    row.line,
                    "edge",
                    format!(
                        "the {edge} edge is not unknown in the case; truth profiles are given for \
                         the unknown edges only ({})",
                        names.join(", ")
                    ),
                ));
            }
            edge
        } else {
            unknown[0]
        };
        let s = table.number(row, "position")?;
        let t = table.number(row, "temperature")?;
        if let Some((_, rows)) = per_edge.iter_mut().find(|(e, _)| *e == edge) {
            rows.push((row.line, s, t));
        }
    }
    let shape = case.plate.shape();
    let mut out = Vec::with_capacity(per_edge.len());
    for (edge, rows) in per_edge {
        if rows.is_empty() {
            return Err(Error::invalid_at(
                path,
                None,
                Some("edge"),
                format!("no rows for the unknown {edge} edge; give its profile too"),
            ));
        }
        let length = shape.edge_length(edge).map(|m| case.units.length_from_m(m));
        let profile = match shape.radius_of(edge) {
            Some(r) => build_circle_profile(&table, &case.units, edge, r, rows)?,
            None => build_profile(&table, &case.units, edge, length, rows)?,
        };
        out.push((edge, profile));
    }
    Ok(out)
}

/// The names of a shape's edges, for messages (`bottom, right, top or left`).
fn shape_edge_names(shape: &crate::geometry::Shape) -> String {
    let names: Vec<&str> = shape.edges().iter().map(|e| e.name()).collect();
    match names.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} or {last}", rest.join(", ")),
        Some((last, _)) => (*last).to_string(),
        None => String::new(),
    }
}

/// Check and convert the profile rows of a circular edge of radius `radius_m`: the
/// `position` column holds angles in degrees, counter-clockwise from `+x`, strictly
/// increasing within `[0, 360)`; the profile is periodic (it wraps from the last angle back to
/// the first through 0°) and is stored against the arc length.
fn build_circle_profile(
    table: &CsvTable,
    units: &Units,
    edge: Edge,
    radius_m: f64,
    rows: ProfileRows,
) -> Result<EdgeProfile> {
    if rows.len() < 2 {
        return Err(Error::invalid_at(
            &table.path,
            rows.first().map(|r| r.0),
            Some("position"),
            format!(
                "the {edge} circle's profile needs at least two rows (angles in degrees); for a \
                 constant temperature write `temperature = ...` in plate.toml"
            ),
        ));
    }
    for &(line, a, _) in &rows {
        if !(0.0..360.0).contains(&a) {
            return Err(table.error(
                line,
                "position",
                format!(
                    "along the {edge} circle the position is the angle in degrees, \
                     counter-clockwise from +x, from 0 up to (not including) 360; {a} is outside \
                     (the profile wraps from the last angle back to the first by itself)"
                ),
            ));
        }
    }
    for w in rows.windows(2) {
        if w[1].1 <= w[0].1 {
            return Err(table.error(
                w[1].0,
                "position",
                format!(
                    "angles along the {edge} circle must increase from row to row: {}° follows \
                     {}° (line {})",
                    w[1].1, w[0].1, w[0].0
                ),
            ));
        }
    }
    let mut temps = Vec::with_capacity(rows.len());
    for &(line, _, t) in &rows {
        temps
            .push(absolute_temperature(units, t).map_err(|m| table.error(line, "temperature", m))?);
    }
    let positions = rows.iter().map(|r| r.1.to_radians() * radius_m).collect();
    EdgeProfile::periodic(positions, temps, std::f64::consts::TAU * radius_m)
        .map_err(|m| Error::invalid_at(&table.path, None, Some("position"), m))
}

/// Check and convert one edge's profile rows: positions strictly increasing and spanning
/// the edge (ends moved onto the edge within [`PROFILE_SPAN_TOLERANCE`]), temperatures not
/// below absolute zero.
fn build_profile(
    table: &CsvTable,
    units: &Units,
    edge: Edge,
    length: Option<f64>,
    mut rows: ProfileRows,
) -> Result<EdgeProfile> {
    let l = units.length;
    if rows.len() < 2 {
        return Err(Error::invalid_at(
            &table.path,
            rows.first().map(|r| r.0),
            Some("position"),
            format!(
                "the {edge} edge's profile needs at least two rows, at both ends of the edge; for \
                 a constant temperature write `temperature = ...` in plate.toml"
            ),
        ));
    }
    for w in rows.windows(2) {
        if w[1].1 <= w[0].1 {
            return Err(table.error(
                w[1].0,
                "position",
                format!(
                    "positions along the {edge} edge must increase from row to row: {} {l} follows \
                     {} {l} (line {})",
                    w[1].1, w[0].1, w[0].0
                ),
            ));
        }
    }
    let mut temps = Vec::with_capacity(rows.len());
    for &(line, _, t) in &rows {
        temps
            .push(absolute_temperature(units, t).map_err(|m| table.error(line, "temperature", m))?);
    }
    if let Some(len) = length {
        let tol = PROFILE_SPAN_TOLERANCE * len;
        let n = rows.len();
        let (first_line, first, _) = rows[0];
        let (last_line, last, _) = rows[n - 1];
        let span_msg = |what: &str| {
            format!(
                "the {edge} edge's profile {what}: it covers {first} to {last} {l} but the edge \
                 runs from 0 to {} {l}; give rows at both ends of the edge (positions are \
                 measured along the edge, in {})",
                tidy(len),
                if l == crate::units::LengthUnit::Inch {
                    "inches"
                } else {
                    l.symbol()
                }
            )
        };
        if first.abs() <= tol {
            rows[0].1 = 0.0;
        } else if first > 0.0 {
            return Err(table.error(first_line, "position", span_msg("does not span the edge")));
        } else {
            return Err(table.error(first_line, "position", span_msg("runs past the edge")));
        }
        if (last - len).abs() <= tol {
            rows[n - 1].1 = len;
        } else if last < len {
            return Err(table.error(last_line, "position", span_msg("does not span the edge")));
        } else {
            return Err(table.error(last_line, "position", span_msg("runs past the edge")));
        }
    }
    let positions = rows.iter().map(|r| units.length_to_m(r.1)).collect();
    EdgeProfile::piecewise_linear(positions, temps)
        .map_err(|m| Error::invalid_at(&table.path, None, Some("position"), m))
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;
    use crate::units::{LengthUnit, TemperatureUnit};
    use std::io::Write;

    fn file(dir: &tempfile::TempDir, name: &str, text: &str) -> PathBuf {
        let p = dir.path().join(name);
        std::fs::File::create(&p)
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
        p
    }

    fn mm_c() -> Units {
        Units {
            length: LengthUnit::Millimetre,
            temperature: TemperatureUnit::Celsius,
        }
    }

    fn rect() -> Shape {
        Shape::Rectangle {
            width_m: 0.15,
            height_m: 0.06,
        }
    }

    fn location(e: &Error) -> (Option<usize>, Option<String>, String) {
        match e {
            Error::Invalid { location, message } => {
                (location.line, location.field.clone(), message.clone())
            }
            other => panic!("expected an invalid-input error, got {other:?}"),
        }
    }

    #[test]
    fn reads_sensors_with_lines_and_units() {
        let d = tempfile::tempdir().unwrap();
        let p = file(
            &d,
            "s.csv",
            "# layout\nsensor, X ,y,sigma\nTC01,20,8,0.5\n\n\r\n\"TC02\",130.5,30,\n",
        );
        let s = read_sensors(&p, &mm_c(), &rect()).unwrap();
        assert_eq!(s.len(), 2);
        assert_eq!(s[0].id, "TC01");
        assert!((s[0].position.x - 0.020).abs() < 1e-15);
        assert_eq!(s[0].sigma_k, Some(0.5));
        assert_eq!(s[1].sigma_k, None);
        assert_eq!(s[0].line, 3);
        assert_eq!(s[1].line, 6);
    }

    /// Positions written in mm in an inch case (150 mm × 60 mm is 5.9 in × 2.36 in): the
    /// message names the unit mix-up; a position outside in every unit does not.
    #[test]
    fn sensors_in_the_wrong_length_unit_are_called_a_unit_mistake() {
        let d = tempfile::tempdir().unwrap();
        let inch = Units {
            length: LengthUnit::Inch,
            temperature: TemperatureUnit::Celsius,
        };
        let p = file(&d, "s.csv", "sensor,x,y\nA,2,1\nB,120,20\n");
        let e = read_sensors(&p, &inch, &rect()).unwrap_err().to_string();
        assert!(e.contains("line 3"), "{e}");
        assert!(e.contains("if the file were in mm"), "{e}");
        assert!(e.contains("unit mistake"), "{e}");
        let p = file(&d, "t.csv", "sensor,x,y\nA,-5,1\n");
        let e = read_sensors(&p, &inch, &rect()).unwrap_err().to_string();
        assert!(!e.contains("unit mistake"), "{e}");
    }

    #[test]
    fn sensor_errors_name_line_and_column() {
        let d = tempfile::tempdir().unwrap();
        let cases = [
            ("sensor,x,y\nA,1,2\nA,3,4\n", 3, "sensor", "used twice"),
            ("sensor,x,y\nA,150,2\n", 2, "x", "exactly on an edge"),
            ("sensor,x,y\nA,10,-2\n", 2, "y", "outside the plate"),
            ("sensor,x,y\nA,10,NaN\n", 2, "y", "not a finite number"),
            ("sensor,x,y\nA,10,\n", 2, "y", "empty cell"),
            ("sensor,x,y\nA,10,1e999\n", 2, "y", "not a finite number"),
            ("sensor,x,y\nA,10\n", 2, "", "2 cells"),
            ("sensor,x,z\nA,10,3\n", 1, "z", "unknown column"),
            ("sensor,x\nA,10\n", 1, "y", "missing column `y`"),
            ("sensor,x,y,sigma\nA,10,3,0\n", 2, "sigma", "positive"),
            (
                "sensor,x,y,sigma\nA,10,3,1e-300\n",
                2,
                "sigma",
                "plausible range",
            ),
            (
                "sensor,x,y,position_sigma\nA,10,3,1e300\n",
                2,
                "position_sigma",
                "plausible range",
            ),
        ];
        for (text, line, field, gist) in cases {
            let p = file(&d, "s.csv", text);
            let e = read_sensors(&p, &mm_c(), &rect()).unwrap_err();
            let (l, f, m) = location(&e);
            assert_eq!(l, Some(line), "{text}: {e}");
            assert_eq!(f.unwrap_or_default(), field, "{text}: {e}");
            assert!(m.contains(gist), "{text}: {e}");
        }
    }

    #[test]
    fn profile_must_span_its_edge() {
        let d = tempfile::tempdir().unwrap();
        let u = mm_c();
        let ok = file(
            &d,
            "p.csv",
            "position,temperature\n0,20\n75,30\n150.0000001,25\n",
        );
        let p = read_edge_profile(&ok, &u, Edge::Top, Some(150.0)).unwrap();
        assert_eq!(p.positions().len(), 3);
        // the end within rounding is moved onto the edge's end exactly
        assert_eq!(*p.positions().last().unwrap(), u.length_to_m(150.0));
        assert!((p.temperatures()[0] - 293.15).abs() < 1e-12);
        let short = file(&d, "q.csv", "position,temperature\n0,20\n140,30\n");
        let e = read_edge_profile(&short, &u, Edge::Top, Some(150.0)).unwrap_err();
        let (l, f, m) = location(&e);
        assert_eq!((l, f.as_deref()), (Some(3), Some("position")));
        assert!(m.contains("does not span"), "{m}");
        let cold = file(&d, "r.csv", "position,temperature\n0,20\n150,-300\n");
        let e = read_edge_profile(&cold, &u, Edge::Top, Some(150.0)).unwrap_err();
        assert!(e.to_string().contains("below absolute zero"), "{e}");
        let back = file(
            &d,
            "b.csv",
            "position,temperature\n0,20\n100,3\n50,2\n150,3\n",
        );
        let e = read_edge_profile(&back, &u, Edge::Top, Some(150.0)).unwrap_err();
        assert_eq!(location(&e).0, Some(4));
    }

    #[test]
    fn binary_and_empty_files_are_invalid_not_panics() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("bin.csv");
        std::fs::write(&p, [0u8, 159, 146, 150, 10, 255, 254, 0]).unwrap();
        let e = read_sensors(&p, &mm_c(), &rect()).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let p = file(&d, "empty.csv", "");
        let e = read_sensors(&p, &mm_c(), &rect()).unwrap_err();
        assert!(e.to_string().contains("empty"), "{e}");
        let p = file(&d, "head.csv", "sensor,x,y\n");
        let e = read_sensors(&p, &mm_c(), &rect()).unwrap_err();
        assert!(e.to_string().contains("no sensors"), "{e}");
        let e = read_sensors(&d.path().join("missing.csv"), &mm_c(), &rect()).unwrap_err();
        assert!(matches!(e, Error::Io { input: true, .. }));
        assert_eq!(e.exit_code(), 2);
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(300))]
        /// Any text, CSV-like or not, is read or refused with an input error; never a panic.
        #[test]
        fn any_sensors_text_never_panics(text in "[a-zA-Z0-9,.#;\\-+eE\"\r\n ]{0,160}") {
            let d = tempfile::tempdir().unwrap();
            let p = file(&d, "s.csv", &format!("sensor,x,y\n{text}"));
            if let Err(e) = read_sensors(&p, &mm_c(), &rect()) {
                proptest::prop_assert_eq!(e.exit_code(), 2, "{}", e);
            }
        }

        #[test]
        fn any_bytes_never_panic(bytes in proptest::collection::vec(proptest::prelude::any::<u8>(), 0..200)) {
            let d = tempfile::tempdir().unwrap();
            let p = d.path().join("s.csv");
            std::fs::write(&p, &bytes).unwrap();
            if let Err(e) = read_sensors(&p, &mm_c(), &rect()) {
                proptest::prop_assert_eq!(e.exit_code(), 2, "{}", e);
            }
        }
    }

    #[test]
    fn number_parsing() {
        assert_eq!(parse_finite("1e3"), Ok(1000.0));
        assert!(parse_finite("inf").is_err());
        assert!(parse_finite("nan").is_err());
        assert!(parse_finite("").is_err());
        assert!(parse_finite("1,5").is_err());
        assert!(absolute_temperature(&mm_c(), -273.16).is_err());
        assert!(absolute_temperature(&mm_c(), -273.15).is_ok());
    }
}

//! CSV dialects: how a table file is written (separator, decimal mark, byte-order mark, line
//! ends, lines before the header, a units row), found from the start of the file or declared.
//!
//! ## The detection rule (`docs/case-files.md`, CSV dialects)
//!
//! Only the first [`PREFIX_BYTES`] of a file are looked at (a logger file is then read as a
//! stream from its header on, in constant memory).
//!
//! 1. A UTF-8 byte-order mark at the start is skipped. Line ends may be LF or CRLF.
//! 2. **Header.** The header is the first line that, split at commas, semicolons or tabs,
//!    has a cell equal to one of the file's key words (case-insensitive): `time` for a
//!    logger file, `sensor` for `sensors.csv` and `readings.csv`, `position` or
//!    `temperature` for profile files, `x` or `y` for candidate files. Every line before it
//!    is metadata and is skipped (its count is echoed). When skip lines are declared, the
//!    header is the first non-blank line after them, whatever it holds.
//! 3. **Separator.** The one of comma, semicolon and tab that splits the header into cells
//!    containing the key word; when several do, the one giving the most cells (a tie keeps
//!    the earlier in that order). A declared separator is used as given.
//! 4. **Units row.** The line directly under the header is a units row when none of its
//!    cells is a number and at least one is a unit word (`s`, `°C`, `K`,
//!    `°F`, `mV`, `mm`, ...). It is skipped, echoed, and checked: a temperature unit that is
//!    not the case's, or volts where temperatures are expected (and the reverse), is refused.
//! 5. **Decimal mark.** A comma when the separator is not a comma and a data cell in the
//!    first rows is a number written with a decimal comma (`21,5`); a point otherwise. With a
//!    decimal comma, a number with a point is refused (thousands separators are not read).
//!
//! Quoted cells (`"TC 01"`, `"21,5"`) are read as the `csv` crate reads them. What was found
//! is reported as a [`ReadAs`] for the outputs.

use crate::case::ReadAs;
use crate::error::{Error, Result};
use crate::io::times::TimeFormat;
use crate::units::{LengthUnit, TemperatureUnit};
use std::path::Path;

/// How many bytes at the start of a file the detection looks at.
pub const PREFIX_BYTES: usize = 64 * 1024;

/// How many data rows under the header the detection looks at.
const SAMPLE_ROWS: usize = 200;

/// The column separator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Separator {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// a tab
    Tab,
}

impl Separator {
    /// Every separator, in the order detection prefers them.
    pub const ALL: [Separator; 3] = [Separator::Comma, Separator::Semicolon, Separator::Tab];

    /// The byte that separates the cells.
    pub fn byte(self) -> u8 {
        match self {
            Separator::Comma => b',',
            Separator::Semicolon => b';',
            Separator::Tab => b'\t',
        }
    }

    /// The name used on the command line and in the outputs.
    pub fn name(self) -> &'static str {
        match self {
            Separator::Comma => "comma",
            Separator::Semicolon => "semicolon",
            Separator::Tab => "tab",
        }
    }

    /// The separator from its name (`comma`, `semicolon`, `tab`; case-insensitive).
    pub fn from_name(name: &str) -> Option<Self> {
        Self::ALL
            .into_iter()
            .find(|s| s.name().eq_ignore_ascii_case(name.trim()))
    }
}

/// The decimal mark of numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DecimalMark {
    /// `21.5`
    Point,
    /// `21,5` (only with a semicolon or tab separator)
    Comma,
}

impl DecimalMark {
    /// The mark from its name (`point`, `comma`).
    pub fn from_name(name: &str) -> Option<Self> {
        match name.trim().to_ascii_lowercase().as_str() {
            "point" => Some(DecimalMark::Point),
            "comma" => Some(DecimalMark::Comma),
            _ => None,
        }
    }
}

/// What the command line declares about a file's dialect; `None` fields are detected.
#[derive(Debug, Clone, Default)]
pub struct DialectOptions {
    /// The column separator.
    pub separator: Option<Separator>,
    /// The decimal mark.
    pub decimal_mark: Option<DecimalMark>,
    /// The number of lines before the header.
    pub skip_lines: Option<usize>,
    /// The format of a logger's time column.
    pub time_format: Option<TimeFormat>,
}

/// The dialect of one file, as detected (or declared) from its first bytes.
#[derive(Debug, Clone)]
pub(crate) struct Dialect {
    pub separator: Separator,
    pub decimal_comma: bool,
    pub bom: bool,
    pub crlf: bool,
    /// Byte offset of the header line in the file.
    pub header_offset: usize,
    /// 1-based line of the header.
    pub header_line: usize,
    /// The units row under the header, if there is one (trimmed cells).
    pub units_row: Option<Vec<String>>,
    /// Cells of the first data rows (at most [`SAMPLE_ROWS`]), for the time format.
    pub sample_rows: Vec<Vec<String>>,
    /// What the command line declared (names, for the echo).
    pub declared: Vec<&'static str>,
}

/// What a file must be called and hold, for the messages of [`detect`].
pub(crate) struct Expect<'a> {
    /// Key words of the header (any one marks the header line).
    pub keys: &'a [&'a str],
    /// The header the file should have, in words (`` `time,<sensor ids>` ``).
    pub header: &'a str,
    /// Whether the command line can declare the dialect of this file (the messages then say
    /// how).
    pub declarable: bool,
}

/// Split one line into trimmed cells with `sep`, quotes as the csv crate reads them.
fn split(line: &str, sep: Separator) -> Vec<String> {
    // One parser per separator and thread, reset per line: building a CSV parser (its state
    // machine) costs more than reading a short line, and detection splits every line of the
    // prefix up to three times.
    thread_local! {
        static PARSERS: std::cell::RefCell<[csv_core::Reader; 3]> = std::cell::RefCell::new(
            Separator::ALL.map(|s| csv_core::ReaderBuilder::new().delimiter(s.byte()).build()),
        );
    }
    let which = Separator::ALL.iter().position(|&s| s == sep).unwrap_or(0);
    PARSERS.with(|parsers| {
        let parser = &mut parsers.borrow_mut()[which];
        parser.reset();
        // unquoting only shortens, and a line has at most one more cell than it has bytes
        let mut out = vec![0u8; line.len()];
        let mut ends = vec![0usize; line.len() + 1];
        let (mut input, mut nout, mut nend) = (line.as_bytes(), 0, 0);
        loop {
            let (res, nin, o, e) = parser.read_record(input, &mut out[nout..], &mut ends[nend..]);
            input = &input[nin..];
            nout += o;
            nend += e;
            match res {
                csv_core::ReadRecordResult::InputEmpty => {} // next call sees the end
                csv_core::ReadRecordResult::Record => break,
                // cannot happen with the buffer sizes above; no record rather than a panic
                _ => return Vec::new(),
            }
        }
        let mut start = 0;
        ends[..nend]
            .iter()
            .map(|&end| {
                let cell = String::from_utf8_lossy(&out[start..end]).trim().to_string();
                start = end;
                cell
            })
            .collect()
    })
}

/// A number in either decimal mark (for "is this row numbers or units?").
fn any_number(cell: &str) -> bool {
    let c = cell.trim();
    c.parse::<f64>().is_ok() || (!c.contains('.') && c.replacen(',', ".", 1).parse::<f64>().is_ok())
}

/// A number written with a decimal comma (`21,5`, `-0,25e3`).
fn decimal_comma_number(cell: &str) -> bool {
    let c = cell.trim();
    c.matches(',').count() == 1
        && !c.contains('.')
        && c.split(',').all(|p| !p.is_empty())
        && c.bytes()
            .next()
            .is_some_and(|b| b.is_ascii_digit() || b == b'-' || b == b'+')
        && c.replacen(',', ".", 1)
            .parse::<f64>()
            .is_ok_and(f64::is_finite)
}

/// What a unit word in a units row means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum UnitWord {
    /// A temperature unit.
    Temperature(TemperatureUnit),
    /// Millivolts.
    Millivolt,
    /// Another voltage unit (V, µV).
    OtherVoltage,
    /// A length unit of the case.
    Length(LengthUnit),
    /// Another known word (time units, cm, ...), accepted as it is.
    Other,
}

/// The meaning of a units-row cell, if it is a unit word (brackets and case ignored).
pub(crate) fn unit_word(cell: &str) -> Option<UnitWord> {
    let w = cell
        .trim()
        .trim_start_matches(['[', '('])
        .trim_end_matches([']', ')'])
        .trim()
        .to_lowercase()
        .replace('º', "°");
    let t = |u| Some(UnitWord::Temperature(u));
    match w.as_str() {
        "°c" | "c" | "degc" | "deg c" | "deg.c" | "celsius" => t(TemperatureUnit::Celsius),
        "k" | "kelvin" => t(TemperatureUnit::Kelvin),
        "°f" | "f" | "degf" | "deg f" | "deg.f" | "fahrenheit" => t(TemperatureUnit::Fahrenheit),
        "mv" => Some(UnitWord::Millivolt),
        "v" | "µv" | "μv" | "uv" => Some(UnitWord::OtherVoltage),
        "mm" => Some(UnitWord::Length(LengthUnit::Millimetre)),
        "m" => Some(UnitWord::Length(LengthUnit::Metre)),
        "in" | "inch" => Some(UnitWord::Length(LengthUnit::Inch)),
        "s" | "sec" | "ms" | "min" | "h" | "hh:mm:ss" | "date" | "datetime" | "cm" | "%" => {
            Some(UnitWord::Other)
        }
        _ => None,
    }
}

/// The lines of a prefix: `(byte offset in the file, text without its line end, had CR)`.
fn lines(prefix: &[u8], start: usize, complete: bool) -> Vec<(usize, String, bool)> {
    let body = &prefix[start..];
    let mut out = Vec::new();
    let mut off = 0;
    while off < body.len() {
        let (len, ended) = match body[off..].iter().position(|&b| b == b'\n') {
            Some(i) => (i + 1, true),
            None => (body.len() - off, false),
        };
        if !ended && !complete {
            break; // a partial last line: not looked at
        }
        let mut raw = &body[off..off + len];
        if ended {
            raw = &raw[..raw.len() - 1];
        }
        let cr = raw.last() == Some(&b'\r');
        if cr {
            raw = &raw[..raw.len() - 1];
        }
        out.push((start + off, String::from_utf8_lossy(raw).into_owned(), cr));
        off += len;
    }
    out
}

/// Detect (or take as declared) the dialect of a file from its first bytes. `complete`: the
/// prefix is the whole file.
///
/// # Errors
/// [`Error::Invalid`] naming the file and line when no header is found, and a declared
/// decimal comma with a comma separator (`option.decimal_mark`).
pub(crate) fn detect(
    path: &Path,
    prefix: &[u8],
    complete: bool,
    expect: &Expect<'_>,
    options: &DialectOptions,
) -> Result<Dialect> {
    let bom = prefix.starts_with(b"\xEF\xBB\xBF");
    let lines = lines(prefix, if bom { 3 } else { 0 }, complete);
    let blank = |s: &str| s.trim().is_empty();
    let seps: Vec<Separator> = match options.separator {
        Some(s) => vec![s],
        None => Separator::ALL.to_vec(),
    };
    let is_key = |c: &str| {
        let c = c.trim_start_matches('\u{feff}').trim();
        expect.keys.iter().any(|k| c.eq_ignore_ascii_case(k))
    };
    // the separator that makes `line` a header: most cells among those that show a key word
    let keys_lower: Vec<String> = expect.keys.iter().map(|k| k.to_ascii_lowercase()).collect();
    let header_sep = |line: &str| -> Option<Separator> {
        // a cell equal to a key word needs the word somewhere in the raw line: lines without
        // one are passed over without building a CSV reader per separator
        let lower = line.to_ascii_lowercase();
        if !keys_lower.iter().any(|k| lower.contains(k.as_str())) {
            return None;
        }
        let mut best: Option<(Separator, usize)> = None;
        for &s in &seps {
            let cells = split(line, s);
            if cells.iter().any(|c| is_key(c)) && best.is_none_or(|(_, n)| cells.len() > n) {
                best = Some((s, cells.len()));
            }
        }
        best.map(|(s, _)| s)
    };
    let how = if expect.declarable {
        "; if the header comes after more lines, declare how many to skip (skip lines N), and \
         declare the separator if it is not a comma, semicolon or tab"
    } else {
        ""
    };
    if lines.is_empty() && prefix.len() > usize::from(bom) * 3 {
        // bytes, but no complete line in the whole prefix
        return Err(Error::invalid_at(
            path,
            Some(1),
            None,
            format!(
                "no line ends in the first {} KB: this is not a text table read line by line \
                 (binary data, a device, or one enormous line); it must start with the header {}",
                PREFIX_BYTES / 1024,
                expect.header
            ),
        ));
    }
    let first_text = lines.iter().find(|l| !blank(&l.1));
    let Some((first_idx, _)) = lines.iter().enumerate().find(|(_, l)| !blank(&l.1)) else {
        return Err(Error::invalid_at(
            path,
            Some(1),
            None,
            format!(
                "the file is empty; it must start with the header {}",
                expect.header
            ),
        ));
    };
    let (idx, separator) = match options.skip_lines {
        Some(n) => {
            let Some((i, l)) = lines.iter().enumerate().skip(n).find(|(_, l)| !blank(&l.1)) else {
                return Err(Error::invalid_at(
                    path,
                    Some(n + 1),
                    Some("option.skip_lines"),
                    format!(
                        "after skipping {n} lines there is no header line in the first {} KB \
                         of the file; count the lines before the header {} again",
                        PREFIX_BYTES / 1024,
                        expect.header
                    ),
                ));
            };
            let sep = header_sep(&l.1).unwrap_or_else(|| {
                // no key word: the separator giving most cells (the header check then says
                // what is wrong with the line)
                seps.iter()
                    .copied()
                    .max_by_key(|&s| (split(&l.1, s).len(), std::cmp::Reverse(s.byte())))
                    .unwrap_or(Separator::Comma)
            });
            (i, sep)
        }
        None => match lines
            .iter()
            .enumerate()
            .find_map(|(i, l)| header_sep(&l.1).map(|s| (i, s)))
        {
            Some(found) => found,
            None => {
                let seen = first_text.map_or(String::new(), |l| shorten(&l.1));
                let keys: Vec<String> = expect.keys.iter().map(|k| format!("`{k}`")).collect();
                let seps_text = match options.separator {
                    Some(s) => format!("split at the declared {} separator", s.name()),
                    None => "split at commas, semicolons or tabs".to_string(),
                };
                return Err(Error::invalid_at(
                    path,
                    Some(first_idx + 1),
                    expect.keys.first().copied(),
                    format!(
                        "no header found: no {} column on any line of the first {} KB \
                         ({seps_text}); the first line reads `{seen}`; the header must be \
                         {}{how}",
                        keys.join(" or "),
                        PREFIX_BYTES / 1024,
                        expect.header
                    ),
                ));
            }
        },
    };
    let header = &lines[idx];
    let mut next = idx + 1;
    let units_row = lines.get(next).and_then(|(_, l, _)| {
        let cells = split(l, separator);
        let units = !blank(l)
            && !l.trim_start().starts_with('#')
            && cells.iter().all(|c| !any_number(c))
            && cells.iter().any(|c| unit_word(c).is_some());
        units.then_some(cells)
    });
    if units_row.is_some() {
        next += 1;
    }
    let sample_rows: Vec<Vec<String>> = lines[next.min(lines.len())..]
        .iter()
        .filter(|(_, l, _)| !blank(l) && !l.trim_start().starts_with('#'))
        .take(SAMPLE_ROWS)
        .map(|(_, l, _)| split(l, separator))
        .collect();
    let decimal_comma = match options.decimal_mark {
        Some(DecimalMark::Comma) if separator == Separator::Comma => {
            return Err(Error::invalid_field(
                "option.decimal_mark",
                format!(
                    "{}: a decimal comma cannot be read in a comma-separated file; declare \
                     the separator (semicolon or tab) as well, or leave the decimal mark out",
                    path.display()
                ),
            ));
        }
        Some(m) => m == DecimalMark::Comma,
        None => {
            separator != Separator::Comma
                && sample_rows
                    .iter()
                    .any(|r| r.iter().any(|c| decimal_comma_number(c)))
        }
    };
    let mut declared = Vec::new();
    if options.separator.is_some() {
        declared.push("separator");
    }
    if options.decimal_mark.is_some() {
        declared.push("decimal mark");
    }
    if options.skip_lines.is_some() {
        declared.push("lines before the header");
    }
    if options.time_format.is_some() {
        declared.push("time format");
    }
    Ok(Dialect {
        separator,
        decimal_comma,
        bom,
        crlf: header.2,
        header_offset: header.0,
        header_line: idx + 1,
        units_row,
        sample_rows,
        declared,
    })
}

impl Dialect {
    /// A number cell in this dialect's decimal mark. With a decimal comma, the comma becomes
    /// a point and a cell with a point is refused (a thousands separator would be misread).
    pub(crate) fn number_text<'a>(
        &self,
        cell: &'a str,
    ) -> std::result::Result<std::borrow::Cow<'a, str>, String> {
        if !self.decimal_comma {
            return Ok(std::borrow::Cow::Borrowed(cell));
        }
        if cell.contains('.') && cell.trim().parse::<f64>().is_ok() {
            return Err(format!(
                "`{cell}` is written with a decimal point, but the file was read with a decimal \
                 comma (detected from other cells, or declared); write every number one way, \
                 or declare the decimal mark"
            ));
        }
        Ok(std::borrow::Cow::Owned(cell.replacen(',', ".", 1)))
    }

    /// A hint for a cell that did not read as a number: a decimal comma not expected.
    pub(crate) fn number_hint(&self, cell: &str) -> &'static str {
        if !self.decimal_comma && decimal_comma_number(cell) {
            if self.separator == Separator::Comma {
                "; a decimal comma needs a semicolon or tab separator (in a comma-separated \
                 file, quote nothing and write decimal points)"
            } else {
                "; it looks like a decimal comma: declare the decimal mark (comma)"
            }
        } else {
            ""
        }
    }

    /// What was read, for the outputs.
    pub(crate) fn read_as(&self, path: &Path, time: Option<TimeFormat>) -> ReadAs {
        let mut parts = vec![
            format!("{}-separated", self.separator.name()),
            if self.decimal_comma {
                "decimal comma".to_string()
            } else {
                "decimal point".to_string()
            },
        ];
        if let Some(t) = time {
            parts.push(format!("times {}", t.label()));
        }
        if let Some(u) = &self.units_row {
            parts.push(format!("units row ({})", u.join(", ")));
        }
        if self.header_line > 1 {
            let n = self.header_line - 1;
            parts.push(format!(
                "{n} line{} before the header skipped",
                if n == 1 { "" } else { "s" }
            ));
        }
        if self.bom {
            parts.push("byte-order mark".into());
        }
        if self.crlf {
            parts.push("CRLF line ends".into());
        }
        let mut description = parts.join(", ");
        if !self.declared.is_empty() {
            description.push_str(&format!(" (declared: {})", self.declared.join(", ")));
        }
        ReadAs {
            file: path.file_name().map_or_else(
                || path.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            ),
            separator: self.separator.name().to_string(),
            decimal_mark: if self.decimal_comma { "comma" } else { "point" }.to_string(),
            byte_order_mark: self.bom,
            line_ends: if self.crlf { "CRLF" } else { "LF" }.to_string(),
            lines_before_header: self.header_line - 1,
            units_row: self.units_row.clone(),
            time_format: time.map(|t| t.label().to_string()),
            declared: self.declared.iter().map(|s| s.to_string()).collect(),
            description,
        }
    }
}

/// What a column's units-row cell must agree with.
#[derive(Debug, Clone, Copy)]
pub(crate) enum ColumnUnit {
    /// A temperature (or a temperature difference) in the case's unit.
    Temperature(TemperatureUnit),
    /// A thermoelectric voltage in millivolts.
    Millivolt,
    /// A length in the case's unit.
    Length(LengthUnit),
}

/// Check a units row against what each column holds; `expected(column)` is `None` for a
/// column with no unit to check (ids, times). The error names the units row's line and the
/// column.
pub(crate) fn check_units(
    path: &Path,
    line: usize,
    columns: &[String],
    units_row: &[String],
    expected: impl Fn(&str) -> Option<ColumnUnit>,
) -> Result<()> {
    for (name, cell) in columns.iter().zip(units_row) {
        let (Some(want), Some(word)) = (expected(name), unit_word(cell)) else {
            continue;
        };
        let problem = match (want, word) {
            (ColumnUnit::Temperature(u), UnitWord::Temperature(v)) if u != v => Some(format!(
                "the units row says `{cell}` but plate.toml gives temperatures in {}; convert \
                 the file or change temperature_unit",
                crate::case::degree_symbol(&crate::units::Units {
                    length: LengthUnit::Metre,
                    temperature: u
                })
            )),
            (ColumnUnit::Temperature(_), UnitWord::Millivolt | UnitWord::OtherVoltage) => {
                Some(format!(
                    "the units row says `{cell}` (a voltage) where temperatures are read; for \
                     thermocouple voltages set [thermocouple] signal = \"emf_mv\" in plate.toml"
                ))
            }
            (ColumnUnit::Millivolt, UnitWord::Temperature(_)) => Some(format!(
                "the units row says `{cell}` (a temperature) where plate.toml says the \
                 readings are voltages in mV ([thermocouple] signal = \"emf_mv\"); check \
                 which the logger wrote"
            )),
            (ColumnUnit::Millivolt, UnitWord::OtherVoltage) => Some(format!(
                "the units row says `{cell}`, but voltages are read in mV; convert the column \
                 to millivolts"
            )),
            (ColumnUnit::Length(u), UnitWord::Length(v)) if u != v => Some(format!(
                "the units row says `{cell}` but plate.toml gives lengths in {}; convert the \
                 file or change length_unit",
                u.symbol()
            )),
            _ => None,
        };
        if let Some(m) = problem {
            return Err(Error::invalid_at(path, Some(line), Some(name), m));
        }
    }
    Ok(())
}

fn shorten(s: &str) -> String {
    if s.chars().count() > 60 {
        format!("{}…", s.chars().take(60).collect::<String>())
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The line splitter agrees with the `csv` crate's own reader (trimmed, flexible, no
    /// headers) on quoted cells, empty cells, spaces, non-ASCII text and stray quotes.
    #[test]
    fn split_agrees_with_the_csv_reader() {
        fn reference(line: &str, sep: Separator) -> Vec<String> {
            let mut r = csv::ReaderBuilder::new()
                .has_headers(false)
                .flexible(true)
                .delimiter(sep.byte())
                .trim(csv::Trim::All)
                .from_reader(line.as_bytes());
            let mut rec = csv::StringRecord::new();
            match r.read_record(&mut rec) {
                Ok(true) => rec.iter().map(|c| c.trim().to_string()).collect(),
                _ => Vec::new(),
            }
        }
        let lines = [
            "",
            "   ",
            "time,TC01,TC02",
            " time ; TC01 ;TC02 ",
            "time\tTC01\t\tTC02\t",
            "\"a, b\",c,\"d \"\"quoted\"\"\"",
            "x,\"unterminated",
            "  \"late\" quote,y",
            "Zeit;Fühler 1;温度",
            ",,,",
            "a,b\r",
            "a,b\nc,d",
            "\u{feff}time,TC01",
            "\u{a0}time\u{a0},TC01",
        ];
        for line in lines {
            for sep in Separator::ALL {
                assert_eq!(split(line, sep), reference(line, sep), "{line:?} {sep:?}");
            }
        }
        // and on random lines over the characters that matter to a CSV parser
        proptest::proptest!(|(line in "[a ,;\t\"\r\nü]{0,24}")| {
            for sep in Separator::ALL {
                proptest::prop_assert_eq!(split(&line, sep), reference(&line, sep));
            }
        });
    }

    const LOG: Expect<'static> = Expect {
        keys: &["time"],
        header: "`time,<sensor ids>`",
        declarable: true,
    };

    fn det(text: &str, options: &DialectOptions) -> Result<Dialect> {
        detect(Path::new("log.csv"), text.as_bytes(), true, &LOG, options)
    }

    #[test]
    fn finds_separator_decimal_mark_metadata_units_bom_crlf() {
        let d = det(
            "\u{feff}Logger 7;serial 123\r\nexported 01.03.2026\r\n\r\nTime;TC01;TC02\r\ns;°C;°C\r\n\
             01.03.2026 07:00:00;21,5;22\r\n",
            &DialectOptions::default(),
        )
        .unwrap();
        assert_eq!(d.separator, Separator::Semicolon);
        assert!(d.decimal_comma && d.bom && d.crlf);
        assert_eq!(d.header_line, 4);
        assert_eq!(
            d.units_row.as_deref(),
            Some(&["s".into(), "°C".into(), "°C".into()][..])
        );
        assert_eq!(d.sample_rows.len(), 1);
        let text = "\u{feff}Logger 7;serial 123\r\nexported 01.03.2026\r\n\r\n";
        assert_eq!(d.header_offset, text.len());
        let tab = det("time\tA\tB\n1\t2,5\t3\n", &DialectOptions::default()).unwrap();
        assert_eq!(tab.separator, Separator::Tab);
        assert!(tab.decimal_comma && !tab.bom && !tab.crlf && tab.units_row.is_none());
        // a comma file never has a decimal comma; integers alone keep the decimal point
        let c = det("time,A\n1,2\n", &DialectOptions::default()).unwrap();
        assert!(!c.decimal_comma && c.separator == Separator::Comma);
        let s = det("time;A\n1;2\n", &DialectOptions::default()).unwrap();
        assert!(!s.decimal_comma);
        // quoted header cells
        let q = det(
            "\"time\";\"TC 01\"\n1;\"2,5\"\n",
            &DialectOptions::default(),
        )
        .unwrap();
        assert_eq!(q.separator, Separator::Semicolon);
        assert!(q.decimal_comma);
    }

    #[test]
    fn declared_values_win() {
        let o = DialectOptions {
            skip_lines: Some(2),
            separator: Some(Separator::Semicolon),
            decimal_mark: Some(DecimalMark::Point),
            time_format: None,
        };
        // the first line would be taken as the header by the rule; two are declared metadata
        let d = det("time;x\nmore\ntime;A\n1;2,5\n", &o).unwrap();
        assert_eq!(d.header_line, 3);
        assert!(!d.decimal_comma);
        assert!(
            d.read_as(Path::new("a/log.csv"), None)
                .description
                .contains("declared")
        );
        let e = det(
            "time,A\n1,2\n",
            &DialectOptions {
                decimal_mark: Some(DecimalMark::Comma),
                ..DialectOptions::default()
            },
        )
        .unwrap_err();
        assert!(
            e.to_string().contains("decimal comma cannot be read"),
            "{e}"
        );
    }

    #[test]
    fn no_header_is_refused_with_what_was_seen() {
        let e = det("Logger 7\nstamp;A\n1;2\n", &DialectOptions::default()).unwrap_err();
        let m = e.to_string();
        assert!(m.contains("log.csv, line 1"), "{m}");
        assert!(m.contains("`Logger 7`") && m.contains("skip lines"), "{m}");
        let e = det("\n\n", &DialectOptions::default()).unwrap_err();
        assert!(e.to_string().contains("empty"), "{e}");
    }

    #[test]
    fn units_rows() {
        let u = |s| unit_word(s);
        assert_eq!(
            u("[°C]"),
            Some(UnitWord::Temperature(TemperatureUnit::Celsius))
        );
        assert_eq!(
            u("degF"),
            Some(UnitWord::Temperature(TemperatureUnit::Fahrenheit))
        );
        assert_eq!(u("mV"), Some(UnitWord::Millivolt));
        assert_eq!(u("TC01"), None);
        // a row of fault markers is data, not units
        let d = det(
            "time,A\n2026-03-01T07:00:00,OPEN\n",
            &DialectOptions::default(),
        )
        .unwrap();
        assert!(d.units_row.is_none());
        let cols = vec!["time".to_string(), "A".to_string()];
        let c =
            |name: &str| (name == "A").then_some(ColumnUnit::Temperature(TemperatureUnit::Celsius));
        let p = Path::new("log.csv");
        assert!(check_units(p, 2, &cols, &["s".into(), "°C".into()], c).is_ok());
        let e = check_units(p, 2, &cols, &["s".into(), "°F".into()], c).unwrap_err();
        assert!(e.to_string().contains("line 2, field `A`"), "{e}");
        let e = check_units(p, 2, &cols, &["s".into(), "mV".into()], c).unwrap_err();
        assert!(e.to_string().contains("emf_mv"), "{e}");
    }
}

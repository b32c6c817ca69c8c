//! The time column of a logger file: which way it is written ([`TimeFormat`]), found from
//! the first rows or declared, and each cell turned into seconds.
//!
//! Calendar work (month lengths, leap years, days between dates, zone offsets) is done by the
//! `jiff` crate; this module only chooses the format and checks the shape of the text. The
//! formats (`docs/track.md`, the logger file):
//!
//! | format | example | kind |
//! |---|---|---|
//! | [`TimeFormat::Seconds`] | `12.5` | seconds as written |
//! | [`TimeFormat::Iso`] | `2026-03-01T07:00:00Z`, `2026-03-01 07:00:00.5`, `…+01:00` | ISO 8601 (the `T` may be a space; seconds, a fraction and a zone are optional) |
//! | [`TimeFormat::DayMonthYearDot`] | `01.03.2026 07:00:00` | day first, dots |
//! | [`TimeFormat::DayMonthYearSlash`] | `01/03/2026 07:00:00` | day first, slashes |
//! | [`TimeFormat::MonthDayYearSlash`] | `03/01/2026 07:00:00` | month first, slashes |
//! | [`TimeFormat::ExcelDays`] | `46082.2916667` | spreadsheet serial days, declared only |
//!
//! Slashed dates are read month-first or day-first only when the rows seen settle it (a
//! first number above 12 means day-first, a second number above 12 month-first) or when the
//! format is declared; otherwise the file is refused with a message saying how to declare it.
//!
//! Spreadsheet serial days (the 1900 date system) count days from 1899-12-30, so that serial
//! 1 is 1900-01-01 for dates from 1900-03-01 on (the system counts a 29 February 1900 that did
//! not exist; Microsoft, "Excel incorrectly assumes that the year 1900 is a leap year",
//! support article 214326, recalled from memory). Serials before 61 (1900-03-01) are refused.
//! A number is read as serial days only when declared: undeclared, a number is seconds.

use jiff::civil::{DateTime, date};
use jiff::fmt::strtime;
use jiff::tz::Offset;
use jiff::{SignedDuration, Timestamp};

/// How a logger's time column is written once read: seconds as written, a local (zoneless)
/// date and time, or an instant with a zone.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeKind {
    /// A plain number of seconds.
    Seconds,
    /// A date and time without a zone (the logger's local time), counted as if UTC.
    Naive,
    /// A date and time with a zone, converted to UTC.
    Zoned,
}

impl TimeKind {
    /// The kind in words, for messages.
    pub fn name(self) -> &'static str {
        match self {
            TimeKind::Seconds => "seconds",
            TimeKind::Naive => "a date and time without a zone",
            TimeKind::Zoned => "a date and time with a zone",
        }
    }
}

/// The ways a logger's time column may be written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeFormat {
    /// A plain number of seconds (since the logger started, since 1970, ...).
    Seconds,
    /// ISO 8601 `YYYY-MM-DDThh:mm[:ss[.fff]]` with an optional zone; a space may replace `T`.
    Iso,
    /// `DD.MM.YYYY hh:mm[:ss[.fff]]`.
    DayMonthYearDot,
    /// `DD/MM/YYYY hh:mm[:ss[.fff]]`.
    DayMonthYearSlash,
    /// `MM/DD/YYYY hh:mm[:ss[.fff]]`.
    MonthDayYearSlash,
    /// Spreadsheet serial days of the 1900 date system (day 0 is 1899-12-30).
    ExcelDays,
}

/// Every format with its command-line name, for parsing and for messages.
pub const TIME_FORMAT_NAMES: [(&str, TimeFormat); 6] = [
    ("seconds", TimeFormat::Seconds),
    ("iso", TimeFormat::Iso),
    ("dd.mm.yyyy", TimeFormat::DayMonthYearDot),
    ("dd/mm/yyyy", TimeFormat::DayMonthYearSlash),
    ("mm/dd/yyyy", TimeFormat::MonthDayYearSlash),
    ("excel-days", TimeFormat::ExcelDays),
];

/// Seconds from 1970-01-01T00:00:00 to a date and time read as UTC (jiff does the calendar).
fn seconds_since_1970(dt: DateTime) -> Option<f64> {
    let ts = Offset::UTC.to_timestamp(dt).ok()?;
    Some(ts.as_duration().as_secs_f64())
}

/// The first serial day of the 1900 date system read without the 1900 leap-year slip.
pub const EXCEL_FIRST_SERIAL: f64 = 61.0;

impl TimeFormat {
    /// The format from its name (`iso`, `dd.mm.yyyy`, ... case-insensitive).
    pub fn from_name(name: &str) -> Option<Self> {
        let n = name.trim().to_ascii_lowercase();
        TIME_FORMAT_NAMES
            .iter()
            .find(|(k, _)| *k == n)
            .map(|(_, f)| *f)
    }

    /// The format as written in the outputs ("DD.MM.YYYY hh:mm:ss").
    pub fn label(self) -> &'static str {
        match self {
            TimeFormat::Seconds => "seconds",
            TimeFormat::Iso => "ISO 8601 (YYYY-MM-DD hh:mm:ss)",
            TimeFormat::DayMonthYearDot => "DD.MM.YYYY hh:mm:ss",
            TimeFormat::DayMonthYearSlash => "DD/MM/YYYY hh:mm:ss",
            TimeFormat::MonthDayYearSlash => "MM/DD/YYYY hh:mm:ss",
            TimeFormat::ExcelDays => "spreadsheet serial days (1900 date system)",
        }
    }

    /// Read one time cell: seconds (since 1970-01-01T00:00:00 for dates, UTC when a zone is
    /// given; as written for [`TimeFormat::Seconds`]) and its kind. `decimal_comma`: numbers
    /// are written with a decimal comma. `None` when the text is not in this format.
    pub fn parse(self, text: &str, decimal_comma: bool) -> Option<(f64, TimeKind)> {
        let s = text.trim();
        match self {
            TimeFormat::Seconds => number(s, decimal_comma).map(|v| (v, TimeKind::Seconds)),
            TimeFormat::ExcelDays => {
                let days = number(s, decimal_comma)?;
                if !(EXCEL_FIRST_SERIAL..=2_958_465.0).contains(&days) {
                    return None;
                }
                let epoch = seconds_since_1970(date(1899, 12, 30).at(0, 0, 0, 0))?;
                let day = SignedDuration::from_hours(24).as_secs_f64();
                Some((epoch + days * day, TimeKind::Naive))
            }
            TimeFormat::Iso => parse_iso(s),
            TimeFormat::DayMonthYearDot => parse_civil(s, "%d.%m.%Y"),
            TimeFormat::DayMonthYearSlash => parse_civil(s, "%d/%m/%Y"),
            TimeFormat::MonthDayYearSlash => parse_civil(s, "%m/%d/%Y"),
        }
    }
}

/// A finite number, with a decimal comma when asked.
fn number(s: &str, decimal_comma: bool) -> Option<f64> {
    let v: f64 = if decimal_comma {
        if s.contains('.') {
            return None;
        }
        s.replacen(',', ".", 1).parse().ok()?
    } else {
        s.parse().ok()?
    };
    v.is_finite().then_some(v)
}

/// ISO 8601: at least `YYYY-MM-DDThh:mm` (a space or `t` may replace the `T`), then optional
/// seconds, fraction and zone (`Z`, `±hh:mm`, `±hhmm`). jiff reads it; the shape check keeps
/// out what jiff also accepts but a logger time should not be (a date alone, an hour alone, a
/// bracketed zone name).
fn parse_iso(s: &str) -> Option<(f64, TimeKind)> {
    let b = s.as_bytes();
    let digits =
        |r: std::ops::Range<usize>| b.get(r).is_some_and(|d| d.iter().all(u8::is_ascii_digit));
    let shape = b.len() >= 16
        && digits(0..4)
        && b[4] == b'-'
        && digits(5..7)
        && b[7] == b'-'
        && digits(8..10)
        && matches!(b[10], b'T' | b't' | b' ')
        && digits(11..13)
        && b[13] == b':'
        && digits(14..16)
        && !s.contains('[');
    if !shape {
        return None;
    }
    if let Ok(ts) = s.parse::<Timestamp>() {
        return Some((ts.as_duration().as_secs_f64(), TimeKind::Zoned));
    }
    let dt: DateTime = s.parse().ok()?;
    seconds_since_1970(dt).map(|t| (t, TimeKind::Naive))
}

/// A date in `date_format` followed by a space and `hh:mm[:ss[.fff]]`.
fn parse_civil(s: &str, date_format: &str) -> Option<(f64, TimeKind)> {
    let (day, time) = s.split_once(' ')?;
    let time = time.trim();
    let colons = time.bytes().filter(|&c| c == b':').count();
    let time_format = match colons {
        1 => "%H:%M",
        2 => "%H:%M:%S%.f",
        _ => return None,
    };
    let dt = strtime::parse(
        format!("{date_format} {time_format}"),
        format!("{day} {time}"),
    )
    .ok()?
    .to_datetime()
    .ok()?;
    seconds_since_1970(dt).map(|t| (t, TimeKind::Naive))
}

/// Find the format of a time column from its first cells (`cells`, in file order, at least
/// one). The first cell chooses the family; slashed dates are settled by all the cells.
///
/// # Errors
/// A message (the caller adds file, line and field) when the first cell is in no format, or
/// when slashed dates could be either day-first or month-first.
pub fn detect(cells: &[&str], decimal_comma: bool) -> Result<TimeFormat, String> {
    let Some(first) = cells.first().map(|c| c.trim()) else {
        return Ok(TimeFormat::Iso);
    };
    for f in [
        TimeFormat::Seconds,
        TimeFormat::Iso,
        TimeFormat::DayMonthYearDot,
    ] {
        if f.parse(first, decimal_comma).is_some() {
            return Ok(f);
        }
    }
    let dmy = TimeFormat::DayMonthYearSlash;
    let mdy = TimeFormat::MonthDayYearSlash;
    if dmy.parse(first, false).is_none() && mdy.parse(first, false).is_none() {
        return Err(format!(
            "`{}` is not a time in a format edgetherm reads: seconds, ISO 8601 \
             (2026-03-01T07:00:00, a space may replace the T, a zone is optional), \
             DD.MM.YYYY hh:mm:ss, DD/MM/YYYY or MM/DD/YYYY hh:mm:ss; declare the format if it \
             is one of these ({})",
            shorten(first),
            format_names()
        ));
    }
    let slashed: Vec<&str> = cells.iter().map(|c| c.trim()).collect();
    let day_first = slashed.iter().all(|c| dmy.parse(c, false).is_some());
    let month_first = slashed.iter().all(|c| mdy.parse(c, false).is_some());
    match (day_first, month_first) {
        (true, false) => Ok(dmy),
        (false, true) => Ok(mdy),
        (true, true) => Err(format!(
            "times such as `{}` could be DD/MM/YYYY or MM/DD/YYYY (no day above 12 in the \
             first {} rows); declare which (time format dd/mm/yyyy or mm/dd/yyyy)",
            shorten(first),
            cells.len()
        )),
        (false, false) => Err(format!(
            "the slashed dates of the first {} rows are neither all DD/MM/YYYY nor all \
             MM/DD/YYYY (first `{}`); declare the format (time format dd/mm/yyyy or \
             mm/dd/yyyy) to see which row differs",
            cells.len(),
            shorten(first)
        )),
    }
}

/// The names a time format may be declared with, for messages.
pub fn format_names() -> String {
    TIME_FORMAT_NAMES
        .iter()
        .map(|(n, _)| *n)
        .collect::<Vec<_>>()
        .join(", ")
}

fn shorten(s: &str) -> String {
    if s.chars().count() > 40 {
        format!("{}…", s.chars().take(40).collect::<String>())
    } else {
        s.to_string()
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // whole seconds and binary fractions are exact
mod tests {
    use super::*;

    /// The instant of an ISO text as jiff reads it directly (the independent statement).
    fn jiff_utc(iso: &str) -> f64 {
        iso.parse::<Timestamp>()
            .unwrap()
            .as_duration()
            .as_secs_f64()
    }

    #[test]
    fn each_format_against_the_iso_instant() {
        let cases = [
            (
                TimeFormat::Iso,
                "2026-03-01T07:00:00",
                "2026-03-01T07:00:00Z",
            ),
            (
                TimeFormat::Iso,
                "2026-03-01 07:00:00.5",
                "2026-03-01T07:00:00.5Z",
            ),
            (
                TimeFormat::Iso,
                "2026-03-01T08:30:00+01:30",
                "2026-03-01T07:00:00Z",
            ),
            (TimeFormat::Iso, "2026-03-01T07:00", "2026-03-01T07:00:00Z"),
            (
                TimeFormat::DayMonthYearDot,
                "01.03.2026 07:00:00",
                "2026-03-01T07:00:00Z",
            ),
            (
                TimeFormat::DayMonthYearDot,
                "1.3.2026 07:00",
                "2026-03-01T07:00:00Z",
            ),
            (
                TimeFormat::DayMonthYearDot,
                "29.02.2024 23:59:59.25",
                "2024-02-29T23:59:59.25Z",
            ),
            (
                TimeFormat::DayMonthYearSlash,
                "13/03/2026 07:00:00",
                "2026-03-13T07:00:00Z",
            ),
            (
                TimeFormat::MonthDayYearSlash,
                "03/13/2026 07:00:00",
                "2026-03-13T07:00:00Z",
            ),
        ];
        for (f, text, iso) in cases {
            let (t, _) = f.parse(text, false).unwrap_or_else(|| panic!("{text}"));
            assert_eq!(t, jiff_utc(iso), "{text}");
        }
        // Stated epoch seconds, independent of jiff: `date -u -d @1772348400` (GNU coreutils)
        // prints Sun Mar  1 07:00:00 UTC 2026.
        let (t, k) = TimeFormat::Iso
            .parse("2026-03-01T07:00:00Z", false)
            .unwrap();
        assert_eq!((t, k), (1_772_348_400.0, TimeKind::Zoned));
        let (t, k) = TimeFormat::DayMonthYearDot
            .parse("01.03.2026 07:00:00", false)
            .unwrap();
        assert_eq!((t, k), (1_772_348_400.0, TimeKind::Naive));
    }

    #[test]
    fn spreadsheet_serial_days_count_from_1899_12_30() {
        // The 1900 date system counts days from 1899-12-30 (Microsoft support article
        // 214326, recalled from memory): serial 0.5 would be 1899-12-30T12:00, so serial
        // 46082.25 is 46082 days and 6 hours after it. The instant of 1899-12-30T00:00Z is
        // stated independently: `date -u -d 1899-12-30 +%s` (GNU coreutils) prints
        // -2209161600.
        let (t, k) = TimeFormat::ExcelDays.parse("46082.25", false).unwrap();
        assert_eq!(t, -2_209_161_600.0 + 46_082.0 * 86_400.0 + 6.0 * 3600.0);
        assert_eq!(k, TimeKind::Naive);
        // ... which is 2026-03-01T06:00 (jiff's own reading of the ISO form)
        assert_eq!(t, jiff_utc("2026-03-01T06:00:00Z"));
        let (t2, _) = TimeFormat::ExcelDays.parse("46082,25", true).unwrap();
        assert_eq!(t2, t);
        assert!(TimeFormat::ExcelDays.parse("60", false).is_none());
    }

    #[test]
    fn refusals() {
        for bad in [
            "2001-02-29T00:00:00",
            "2000-13-01T00:00:00",
            "2000-03-01",
            "2000-03-01T00",
            "2000-03-01T00:00:00 UTC",
            "2000-03-01T00:00:00[UTC]",
            "yesterday",
        ] {
            assert!(TimeFormat::Iso.parse(bad, false).is_none(), "{bad}");
        }
        assert!(TimeFormat::Seconds.parse("inf", false).is_none());
        assert!(TimeFormat::Seconds.parse("1.5", true).is_none());
        assert_eq!(
            TimeFormat::Seconds.parse("1,5", true),
            Some((1.5, TimeKind::Seconds))
        );
        assert!(
            TimeFormat::DayMonthYearDot
                .parse("31.02.2026 07:00:00", false)
                .is_none()
        );
        assert!(
            TimeFormat::DayMonthYearDot
                .parse("01.03.2026 07:00:00 x", false)
                .is_none()
        );
    }

    #[test]
    fn detection() {
        assert_eq!(detect(&["12.5", "13"], false), Ok(TimeFormat::Seconds));
        assert_eq!(detect(&["2026-03-01 07:00:00"], false), Ok(TimeFormat::Iso));
        assert_eq!(
            detect(&["01.03.2026 07:00:00"], false),
            Ok(TimeFormat::DayMonthYearDot)
        );
        assert_eq!(
            detect(&["03/04/2026 07:00:00", "13/04/2026 07:00:00"], false),
            Ok(TimeFormat::DayMonthYearSlash)
        );
        assert_eq!(
            detect(&["03/04/2026 07:00:00", "04/13/2026 07:00:00"], false),
            Ok(TimeFormat::MonthDayYearSlash)
        );
        let e = detect(&["03/04/2026 07:00:00", "04/05/2026 07:00:00"], false).unwrap_err();
        assert!(e.contains("could be DD/MM/YYYY or MM/DD/YYYY"), "{e}");
        let e = detect(&["noon"], false).unwrap_err();
        assert!(e.contains("`noon` is not a time"), "{e}");
        for (name, f) in TIME_FORMAT_NAMES {
            assert_eq!(TimeFormat::from_name(&name.to_uppercase()), Some(f));
        }
    }
}

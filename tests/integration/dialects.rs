//! CSV dialects (issue 14, part 2): the busbar-clamp sample log and the cold-plate readings
//! and sensors, rewritten in the test as semicolon / decimal-comma / tab files with metadata
//! lines, a units row, a byte-order mark, CRLF line ends, quoted cells and other time
//! formats, read exactly as their comma versions; `track` gives the same track.csv and
//! alarms.csv; what cannot be read exits 2 naming the file, line and field.
//!
//! The comma files are the reference (the library's own reading of them, checked elsewhere);
//! the time formats are checked against independent statements of the instant in
//! `src/io/times.rs`.

use assert_cmd::cargo::cargo_bin_cmd;
use edgetherm::case::{Case, CaseFiles};
use edgetherm::io::{
    DialectOptions, LoggerOptions, LoggerReader, LoggerRow, TimeFormat, load_case, load_readings_as,
};
use predicates::prelude::*;
use std::path::{Path, PathBuf};

fn sample(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-measurements")
        .join(name)
}

/// The first `n` data rows of the busbar-clamp log, as comma text.
fn short_log(n: usize) -> String {
    let text = std::fs::read_to_string(sample("busbar-clamp/log.csv")).unwrap();
    text.lines().take(n + 1).map(|l| format!("{l}\n")).collect()
}

/// How to rewrite a comma file.
#[derive(Clone, Copy)]
struct Style {
    sep: &'static str,
    decimal_comma: bool,
    crlf: bool,
    bom: bool,
    metadata: &'static [&'static str],
    units: Option<&'static str>,
    quote_first_column: bool,
}

const PLAIN: Style = Style {
    sep: ",",
    decimal_comma: false,
    crlf: false,
    bom: false,
    metadata: &[],
    units: None,
    quote_first_column: false,
};

/// Rewrite comma text (no quotes in it) in `style`; `time` rewrites the first cell of data
/// rows.
fn rewrite(text: &str, style: Style, time: &dyn Fn(&str) -> String) -> String {
    let end = if style.crlf { "\r\n" } else { "\n" };
    let mut out = String::new();
    if style.bom {
        out.push('\u{feff}');
    }
    for m in style.metadata {
        out.push_str(m);
        out.push_str(end);
    }
    for (i, line) in text.lines().enumerate() {
        let cells: Vec<String> = line
            .split(',')
            .enumerate()
            .map(|(k, c)| {
                let mut c = if i > 0 && k == 0 {
                    time(c)
                } else if i > 0 && style.decimal_comma && c.parse::<f64>().is_ok() {
                    c.replace('.', ",")
                } else {
                    c.to_string()
                };
                if k == 0 && style.quote_first_column {
                    c = format!("\"{c}\"");
                }
                c
            })
            .collect();
        out.push_str(&cells.join(style.sep));
        out.push_str(end);
        if i == 0 {
            if let Some(u) = style.units {
                out.push_str(&u.replace(',', style.sep));
                out.push_str(end);
            }
        }
    }
    out
}

fn same(t: &str) -> String {
    t.to_string()
}

fn read_log(case: &Case, path: &Path, dialect: DialectOptions) -> (Vec<LoggerRow>, String) {
    let mut reader = LoggerReader::open(
        path,
        case,
        &LoggerOptions {
            dialect,
            ..LoggerOptions::default()
        },
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let mut rows = Vec::new();
    let mut row = LoggerRow::default();
    while reader.next_row(&mut row).unwrap_or_else(|e| panic!("{e}")) {
        rows.push(row.clone());
    }
    (rows, reader.read_as().description)
}

/// Rows equal in time (within `dt` seconds) and readings (exactly), line numbers shifted by
/// `lines`.
#[allow(clippy::float_cmp)] // the readings are the same decimal text, parsed the same way
fn assert_rows_equal(a: &[LoggerRow], b: &[LoggerRow], dt: f64, lines: u64) {
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(b) {
        assert!(
            (x.time_s - y.time_s).abs() <= dt,
            "{} vs {}",
            x.time_text,
            y.time_text
        );
        assert_eq!(x.values, y.values, "line {}", y.line);
        assert_eq!(x.line + lines, y.line);
    }
}

const UNITS: &str = "s,°C,°C,°C,°C,°C,°C,°C,°C";

#[test]
fn logger_dialects_read_as_their_comma_version() {
    let case = load_case(&CaseFiles::in_dir(sample("busbar-clamp"))).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let comma = short_log(30);
    let p0 = dir.path().join("comma.csv");
    std::fs::write(&p0, &comma).unwrap();
    let (reference, how) = read_log(&case, &p0, DialectOptions::default());
    assert_eq!(reference.len(), 30);
    assert_eq!(
        how,
        "comma-separated, decimal point, times ISO 8601 (YYYY-MM-DD hh:mm:ss)"
    );
    let styles: [(Style, u64, &str); 4] = [
        (
            Style {
                sep: ";",
                decimal_comma: true,
                ..PLAIN
            },
            0,
            "semicolon-separated, decimal comma, times ISO 8601 (YYYY-MM-DD hh:mm:ss)",
        ),
        (
            Style {
                sep: "\t",
                decimal_comma: true,
                ..PLAIN
            },
            0,
            "tab-separated, decimal comma",
        ),
        (
            Style { sep: "\t", ..PLAIN },
            0,
            "tab-separated, decimal point",
        ),
        (
            Style {
                sep: ";",
                decimal_comma: true,
                crlf: true,
                bom: true,
                metadata: &["Logger BX-7;serial 0042", "Exported 2026-03-01", ""],
                units: Some(UNITS),
                quote_first_column: true,
            },
            4,
            "semicolon-separated, decimal comma, times ISO 8601 (YYYY-MM-DD hh:mm:ss), units \
             row (s, °C, °C, °C, °C, °C, °C, °C, °C), 3 lines before the header skipped, \
             byte-order mark, CRLF line ends",
        ),
    ];
    for (i, (style, shift, want)) in styles.into_iter().enumerate() {
        let p = dir.path().join(format!("d{i}.csv"));
        std::fs::write(&p, rewrite(&comma, style, &same)).unwrap();
        let (rows, how) = read_log(&case, &p, DialectOptions::default());
        assert!(how.starts_with(want), "{how}");
        assert_rows_equal(&reference, &rows, 0.0, shift);
    }
}

/// A time rewrite, the file's style, the declared format, the time tolerance (s) and what the
/// echo must say.
type TimeCase<'a> = (
    &'a dyn Fn(&str) -> String,
    Style,
    Option<TimeFormat>,
    f64,
    &'static str,
);

#[test]
fn logger_time_formats_read_as_the_iso_times() {
    let case = load_case(&CaseFiles::in_dir(sample("busbar-clamp"))).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let comma = short_log(20);
    let p0 = dir.path().join("comma.csv");
    std::fs::write(&p0, &comma).unwrap();
    let (reference, _) = read_log(&case, &p0, DialectOptions::default());
    // `2026-03-01T07:00:10Z` → date part, time part
    let split = |t: &str| {
        let (d, rest) = t.split_once('T').unwrap();
        let (y, md) = d.split_once('-').unwrap();
        let (m, day) = md.split_once('-').unwrap();
        (
            y.to_string(),
            m.to_string(),
            day.to_string(),
            rest.trim_end_matches('Z').to_string(),
        )
    };
    let dot = |t: &str| {
        let (y, m, d, h) = split(t);
        format!("{d}.{m}.{y} {h}")
    };
    let mdy = |t: &str| {
        let (y, m, d, h) = split(t);
        format!("{m}/{d}/{y} {h}")
    };
    let space = |t: &str| t.replace('T', " ").trim_end_matches('Z').to_string();
    let seconds = |t: &str| {
        format!(
            "{}",
            edgetherm::io::logger::parse_time(t).unwrap().0 - 1_772_348_400.0
        )
    };
    // spreadsheet serial days: seconds since 1899-12-30 (`date -u -d 1899-12-30 +%s` prints
    // -2209161600) over 86400, written with 9 decimals (a 1e-9 day is 86 µs)
    let excel = |t: &str| {
        let s = edgetherm::io::logger::parse_time(t).unwrap().0;
        format!("{:.9}", (s + 2_209_161_600.0) / 86_400.0).replace('.', ",")
    };
    let semi = Style {
        sep: ";",
        decimal_comma: true,
        ..PLAIN
    };
    let cases: [TimeCase<'_>; 5] = [
        (&dot, semi, None, 0.0, "times DD.MM.YYYY hh:mm:ss"),
        (&space, PLAIN, None, 0.0, "times ISO 8601"),
        // every row is on 1 March (day 01, month 03): only a declaration settles it
        (
            &mdy,
            PLAIN,
            Some(TimeFormat::MonthDayYearSlash),
            0.0,
            "times MM/DD/YYYY",
        ),
        (
            &excel,
            semi,
            Some(TimeFormat::ExcelDays),
            1e-3,
            "spreadsheet serial days",
        ),
        (&seconds, PLAIN, None, 0.0, "times seconds"),
    ];
    for (i, (time, style, declared, dt, want)) in cases.into_iter().enumerate() {
        let p = dir.path().join(format!("t{i}.csv"));
        std::fs::write(&p, rewrite(&comma, style, time)).unwrap();
        let (rows, how) = read_log(
            &case,
            &p,
            DialectOptions {
                time_format: declared,
                ..DialectOptions::default()
            },
        );
        assert!(how.contains(want), "{how}");
        if i == 4 {
            // seconds since the first row: the same steps
            for (a, b) in reference.iter().zip(&rows) {
                assert!((a.time_s - 1_772_348_400.0 - b.time_s).abs() < 1e-9);
            }
        } else {
            assert_rows_equal(&reference, &rows, dt, 0);
        }
    }
}

#[test]
fn readings_and_sensors_in_other_dialects_read_the_same() {
    let dir = tempfile::tempdir().unwrap();
    let src = sample("cold-plate");
    let files = CaseFiles::in_dir(&src);
    let case = load_case(&files).unwrap();
    let (reference, how) =
        load_readings_as(&files.readings, &case, &DialectOptions::default()).unwrap();
    assert_eq!(how.description, "comma-separated, decimal point");
    let readings = std::fs::read_to_string(&files.readings).unwrap();
    let sensors = std::fs::read_to_string(&files.sensors).unwrap();
    let sensor_units = "-,mm,mm";
    for (i, style) in [
        Style {
            sep: ";",
            decimal_comma: true,
            ..PLAIN
        },
        Style {
            sep: "\t",
            decimal_comma: true,
            crlf: true,
            bom: true,
            ..PLAIN
        },
        Style {
            sep: ";",
            decimal_comma: true,
            metadata: &["Bench log 2026-03-01", "operator;A. N. Other"],
            units: Some("-,°C"),
            quote_first_column: true,
            ..PLAIN
        },
    ]
    .into_iter()
    .enumerate()
    {
        let r = dir.path().join(format!("readings{i}.csv"));
        std::fs::write(&r, rewrite(&readings, style, &same)).unwrap();
        let s = dir.path().join(format!("sensors{i}.csv"));
        let s_style = Style {
            units: style.units.map(|_| sensor_units),
            ..style
        };
        std::fs::write(&s, rewrite(&sensors, s_style, &same)).unwrap();
        let files_i = CaseFiles::in_dir(&src).with_overrides(None, Some(s), Some(r.clone()));
        let case_i = load_case(&files_i).unwrap_or_else(|e| panic!("{e}"));
        for (a, b) in case.sensors.iter().zip(&case_i.sensors) {
            assert_eq!(
                (&a.id, a.position, a.sigma_k),
                (&b.id, b.position, b.sigma_k)
            );
        }
        assert_eq!(
            case_i.read_as[0].separator,
            if i == 1 { "tab" } else { "semicolon" }
        );
        let (values, how) = load_readings_as(&r, &case_i, &DialectOptions::default())
            .unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(values, reference, "{}", how.description);
        assert_eq!(how.decimal_mark, "comma");
    }
}

fn track(case_dir: &Path, log: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    cargo_bin_cmd!("edgetherm")
        .arg("track")
        .arg(case_dir)
        .arg("--log")
        .arg(log)
        .arg("--out")
        .arg(out)
        .args(extra)
        .assert()
}

#[test]
fn track_on_a_semicolon_log_writes_the_same_rows_and_alarms() {
    let dir = tempfile::tempdir().unwrap();
    let comma = short_log(40);
    let p0 = dir.path().join("comma.csv");
    std::fs::write(&p0, &comma).unwrap();
    let style = Style {
        sep: ";",
        decimal_comma: true,
        metadata: &["Logger BX-7"],
        units: Some(UNITS),
        crlf: true,
        ..PLAIN
    };
    let p1 = dir.path().join("semicolon.csv");
    std::fs::write(&p1, rewrite(&comma, style, &same)).unwrap();
    // a limit the first rows cross, so that there are alarms to compare
    let args = ["--limit", "40", "--calibrate", "10"];
    let (o0, o1) = (dir.path().join("o0"), dir.path().join("o1"));
    track(&sample("busbar-clamp"), &p0, &o0, &args).code(3);
    track(&sample("busbar-clamp"), &p1, &o1, &args)
        .code(3)
        .stdout(
            predicate::str::contains(
                "Read semicolon.csv as: semicolon-separated, decimal comma, times ISO 8601",
            )
            .and(predicate::str::contains(
                "1 line before the header skipped, CRLF line ends",
            )),
        );
    for name in ["track.csv", "alarms.csv", "sensors-health.csv"] {
        let a = std::fs::read_to_string(o0.join(name)).unwrap();
        let b = std::fs::read_to_string(o1.join(name)).unwrap();
        assert_eq!(a, b, "{name}");
        if name == "alarms.csv" {
            assert!(a.lines().count() > 1, "no alarm to compare: {a}");
        }
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(o1.join("summary.json")).unwrap()).unwrap();
    let log = &json["inputs_read_as"][1];
    assert_eq!(log["file"], "semicolon.csv");
    assert_eq!(log["decimal_mark"], "comma");
    assert_eq!(log["lines_before_header"], 1);
    assert_eq!(log["units_row"][1], "°C");
}

/// Each refusal: the log text, extra flags, and what stderr must hold.
#[test]
fn unreadable_logs_are_refused_with_file_line_and_field() {
    let dir = tempfile::tempdir().unwrap();
    let case_dir = sample("busbar-clamp");
    let head = "time;TC01;TC02;TC03;TC04;TC05;TC06;TC07;TC08";
    let row = |t: &str, v: &str| format!("{t};{v};1;1;1;1;1;1;1\n");
    let cases: Vec<(String, Vec<&str>, Vec<&str>)> = vec![
        (
            format!(
                "{head}\n{}{}",
                row("03/04/2026 07:00:00", "21,5"),
                row("04/05/2026 07:00:00", "22")
            ),
            vec![],
            vec![
                "log.csv, line 2, field `time`",
                "could be DD/MM/YYYY or MM/DD/YYYY",
                "mm/dd/yyyy",
            ],
        ),
        (
            format!("Logger 7\nchannel;A\n{}", row("2026-03-01T07:00:00", "1")),
            vec![],
            vec![
                "log.csv, line 1",
                "no header found",
                "`Logger 7`",
                "skip lines",
            ],
        ),
        (
            format!(
                "{head}\ns;°F;°F;°F;°F;°F;°F;°F;°F\n{}",
                row("2026-03-01T07:00:00", "1")
            ),
            vec![],
            vec!["log.csv, line 2, field `TC01`", "°F", "temperature_unit"],
        ),
        (
            format!(
                "{head}\n{}{}",
                row("2026-03-01T07:00:00", "21,5"),
                row("2026-03-01T07:00:10", "21.5")
            ),
            vec![],
            vec![
                "log.csv, line 3, field `TC01`",
                "decimal point",
                "decimal comma",
            ],
        ),
        (
            format!(
                "{head}\n{}{}",
                row("2026-03-01T07:00:00", "1"),
                row("01.03.2026 07:00:10", "1")
            ),
            vec![],
            vec![
                "log.csv, line 3, field `time`",
                "not a time in the file's format, ISO 8601",
            ],
        ),
        (
            "time,TC01\n2026-03-01T07:00:00,1\n".to_string(),
            vec!["--decimal-mark", "comma"],
            vec!["field `--decimal-mark`", "comma-separated"],
        ),
        (
            format!("{head}\n{}", row("45000", "1")),
            vec!["--time-format", "excel-days", "--skip-lines", "1"],
            vec!["log.csv, line 2, field `time`", "no `time` column"],
        ),
    ];
    for (i, (text, flags, gists)) in cases.into_iter().enumerate() {
        let sub = dir.path().join(format!("c{i}"));
        std::fs::create_dir(&sub).unwrap();
        let log = sub.join("log.csv");
        std::fs::write(&log, &text).unwrap();
        let out = sub.join("out");
        let a = track(&case_dir, &log, &out, &flags).code(2);
        let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
        for g in gists {
            assert!(err.contains(g), "case {i}: `{g}` not in {err}");
        }
        // a refusal at open writes nothing; one in a row leaves no output file either
        // (track.csv is written to a temporary file renamed at the end)
        for name in edgetherm::io::TRACK_OUTPUT_FILE_NAMES {
            assert!(!out.join(name).exists(), "case {i}: {name} written");
        }
        assert_eq!(
            std::fs::read_to_string(&log).unwrap(),
            text,
            "the log is untouched"
        );
    }
}

/// A fixed edge's profile file in a semicolon / decimal-comma dialect reads as its comma
/// version (the same profile, so the same model), and `check` echoes how it was read.
#[test]
fn profile_files_read_in_any_dialect_and_are_echoed() {
    let comma = "position,temperature\n0,24.0\n90,26.5\n180,24.0\n";
    let semi = "position;temperature\r\n0;24,0\r\n90;26,5\r\n180;24,0\r\n";
    let mut profiles = Vec::new();
    for (name, text) in [("comma", comma), ("semi", semi)] {
        let dir = tempfile::tempdir().unwrap();
        for f in ["sensors.csv", "readings.csv"] {
            std::fs::copy(sample("cold-plate").join(f), dir.path().join(f)).unwrap();
        }
        let plate = std::fs::read_to_string(sample("cold-plate/plate.toml"))
            .unwrap()
            .replace(
                "temperature = 24.0       # coolant-held face",
                "profile = \"top.csv\"",
            );
        std::fs::write(dir.path().join("plate.toml"), plate).unwrap();
        std::fs::write(dir.path().join("top.csv"), text).unwrap();
        let case = load_case(&CaseFiles::in_dir(dir.path())).unwrap();
        profiles.push(format!("{:?}", case.plate));
        let out = cargo_bin_cmd!("edgetherm")
            .arg("check")
            .arg(dir.path())
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout).into_owned();
        let expected = if name == "semi" {
            "read as   top.csv: semicolon-separated, decimal comma"
        } else {
            "read as   top.csv: comma-separated, decimal point"
        };
        assert!(text.contains(expected), "{text}");
    }
    assert_eq!(profiles[0], profiles[1]);
}

//! `track --log` on a Parquet file gives the results of the CSV of the same data, byte for
//! byte: the bundled busbar-clamp log (and a voltage-free variant with gaps) is converted to
//! Parquet here with the `parquet` crate's Arrow writer (times as UTC timestamps, readings as
//! float64, missing readings as nulls), and every output of the two runs is compared. Bad
//! Parquet logs are refused with the CSV reader's messages, naming the file, line (the line of
//! the CSV export), table row and column, exit status 2.
//!
//! The reference here is the CSV reader of this crate (an internal-consistency check: the
//! same rows through the two readers); the Parquet encoding itself is the `parquet` crate's,
//! and `python/tests/test_parquet.py` checks files written by pyarrow.

use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray, TimestampSecondArray};
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use assert_cmd::cargo::cargo_bin_cmd;
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::properties::WriterProperties;
use std::path::{Path, PathBuf};
use std::sync::Arc;

fn sample() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp")
}

/// A logger CSV (`time` as ISO 8601 with `Z`, one column per sensor) as a Parquet file:
/// timestamps in seconds with the zone UTC, readings as float64, empty cells and fault
/// markers as nulls.
fn csv_to_parquet(csv: &str, out: &Path, compression: Compression) {
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let mut times = Vec::new();
    let mut columns: Vec<Vec<Option<f64>>> = vec![Vec::new(); header.len() - 1];
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        let t: jiff::Timestamp = cells[0].parse().unwrap();
        times.push(t.as_second());
        for (k, c) in cells[1..].iter().enumerate() {
            columns[k].push(c.parse::<f64>().ok());
        }
    }
    let mut fields = vec![Field::new(
        "time",
        DataType::Timestamp(TimeUnit::Second, Some("UTC".into())),
        false,
    )];
    let mut arrays: Vec<ArrayRef> = vec![Arc::new(
        TimestampSecondArray::from(times).with_timezone("UTC"),
    )];
    for (name, values) in header[1..].iter().zip(columns) {
        fields.push(Field::new(*name, DataType::Float64, true));
        arrays.push(Arc::new(Float64Array::from(values)));
    }
    write_parquet(out, fields, arrays, compression);
}

fn write_parquet(out: &Path, fields: Vec<Field>, arrays: Vec<ArrayRef>, compression: Compression) {
    let schema = Arc::new(Schema::new(fields));
    let batch = RecordBatch::try_new(schema.clone(), arrays).unwrap();
    let props = WriterProperties::builder()
        .set_compression(compression)
        // several row groups and pages, so batches straddle them
        .set_max_row_group_row_count(Some(1000))
        .build();
    let file = std::fs::File::create(out).unwrap();
    let mut w = ArrowWriter::try_new(file, schema, Some(props)).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
}

fn run(log: &Path, out: &Path, extra: &[&str]) -> std::process::Output {
    cargo_bin_cmd!("edgetherm")
        .arg("track")
        .arg(sample())
        .arg("--log")
        .arg(log)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap()
}

/// summary.json without `inputs_read_as`, the one entry that names the log's file and form
fn summary_without_read_as(dir: &Path) -> serde_json::Value {
    let mut v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("summary.json")).unwrap()).unwrap();
    let read_as = v
        .as_object_mut()
        .unwrap()
        .remove("inputs_read_as")
        .expect("summary.json says how the log was read");
    assert!(
        read_as.as_array().is_some_and(|a| a.len() == 2),
        "{read_as}"
    );
    v
}

fn assert_same_outputs(csv: &Path, parquet: &Path, extra: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("csv"), dir.path().join("parquet"));
    let ra = run(csv, &a, extra);
    let rb = run(parquet, &b, extra);
    assert_eq!(
        ra.status.code(),
        rb.status.code(),
        "{}",
        String::from_utf8_lossy(&rb.stderr)
    );
    assert!(
        matches!(ra.status.code(), Some(0 | 3)),
        "{}",
        String::from_utf8_lossy(&ra.stderr)
    );
    for f in ["track.csv", "alarms.csv", "sensors-health.csv", "track.svg"] {
        let (x, y) = (
            std::fs::read(a.join(f)).unwrap(),
            std::fs::read(b.join(f)).unwrap(),
        );
        assert!(f != "track.csv" || x.len() > 1000, "{f} is nearly empty");
        assert!(x == y, "{f} differs between the CSV and the Parquet log");
    }
    assert_eq!(summary_without_read_as(&a), summary_without_read_as(&b));
    let read_as = std::fs::read_to_string(b.join("summary.json")).unwrap();
    assert!(read_as.contains("Parquet"), "{read_as}");
}

#[test]
fn parquet_log_gives_the_csv_results_byte_for_byte() {
    let dir = tempfile::tempdir().unwrap();
    let csv_path = sample().join("log.csv");
    let csv = std::fs::read_to_string(&csv_path).unwrap();
    // the sample has an open-circuit stretch (`OPEN` cells): they become nulls
    assert!(csv.contains(",OPEN"));
    for (name, compression) in [
        ("snappy.parquet", Compression::SNAPPY),
        ("plain.parquet", Compression::UNCOMPRESSED),
    ] {
        let pq = dir.path().join(name);
        csv_to_parquet(&csv, &pq, compression);
        // per-row strength with an alarm limit, then calibrated with strict bounds
        assert_same_outputs(&csv_path, &pq, &["--limit", "100", "--quiet"]);
        if compression == Compression::SNAPPY {
            assert_same_outputs(
                &csv_path,
                &pq,
                &[
                    "--limit",
                    "90",
                    "--calibrate",
                    "60",
                    "--max-gradient",
                    "3",
                    "--quiet",
                ],
            );
        }
    }
}

#[test]
fn parquet_with_seconds_and_text_times_reads_as_csv() {
    // times as float seconds, and as text: the same rows as the CSV written the same way
    let dir = tempfile::tempdir().unwrap();
    let ids = [
        "TC01", "TC02", "TC03", "TC04", "TC05", "TC06", "TC07", "TC08",
    ];
    let n = 300;
    let secs: Vec<f64> = (0..n).map(|i| f64::from(i) * 2.5).collect();
    let value = |i: i32, k: usize| -> Option<f64> {
        if k == 4 && (100..140).contains(&i) {
            None
        } else {
            Some(((45.0 + 0.01 * f64::from(i) + k as f64 * 0.3) * 100.0).round() / 100.0)
        }
    };
    let mut csv = format!("time,{}\n", ids.join(","));
    for (i, s) in (0..n).zip(&secs) {
        csv.push_str(&format!("{s}"));
        for k in 0..ids.len() {
            csv.push(',');
            if let Some(v) = value(i, k) {
                csv.push_str(&format!("{v}"));
            }
        }
        csv.push('\n');
    }
    let csv_path = dir.path().join("log.csv");
    std::fs::write(&csv_path, &csv).unwrap();
    let readings = |fields: &mut Vec<Field>, arrays: &mut Vec<ArrayRef>| {
        for (k, id) in ids.iter().enumerate() {
            fields.push(Field::new(*id, DataType::Float64, true));
            arrays.push(Arc::new(Float64Array::from(
                (0..n).map(|i| value(i, k)).collect::<Vec<_>>(),
            )));
        }
    };
    let mut fields = vec![Field::new("time", DataType::Float64, false)];
    let mut arrays: Vec<ArrayRef> = vec![Arc::new(Float64Array::from(secs.clone()))];
    readings(&mut fields, &mut arrays);
    let seconds = dir.path().join("seconds.parquet");
    write_parquet(&seconds, fields, arrays, Compression::SNAPPY);
    assert_same_outputs(&csv_path, &seconds, &["--limit", "60", "--quiet"]);

    let mut fields = vec![Field::new("time", DataType::Utf8, false)];
    let texts: Vec<String> = secs.iter().map(|s| format!("{s}")).collect();
    let mut arrays: Vec<ArrayRef> = vec![Arc::new(StringArray::from(texts))];
    readings(&mut fields, &mut arrays);
    let text = dir.path().join("text.parquet");
    write_parquet(&text, fields, arrays, Compression::UNCOMPRESSED);
    assert_same_outputs(&csv_path, &text, &["--limit", "60", "--quiet"]);
}

/// The stderr of a run that must fail with status 2.
fn refused(log: &Path) -> String {
    let dir = tempfile::tempdir().unwrap();
    let r = run(log, &dir.path().join("out"), &["--quiet"]);
    assert_eq!(
        r.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    String::from_utf8(r.stderr).unwrap()
}

#[test]
fn bad_parquet_logs_are_refused_with_the_csv_messages() {
    let dir = tempfile::tempdir().unwrap();
    let times: Vec<i64> = (0..5).map(|i| 1_772_348_400 + 10 * i).collect();
    let ts = |t: Vec<i64>| -> ArrayRef { Arc::new(TimestampSecondArray::from(t)) };
    let f = |name: &str| Field::new(name, DataType::Float64, true);
    let tf = || Field::new("time", DataType::Timestamp(TimeUnit::Second, None), false);
    let good = |v: f64| -> ArrayRef { Arc::new(Float64Array::from(vec![v; 5])) };

    // an implausible reading on the third row: the same message as the CSV of that table
    let pq = dir.path().join("hot.parquet");
    let csv = dir.path().join("hot.csv");
    let mut hot = vec![Some(46.0); 5];
    hot[2] = Some(9.0e6);
    write_parquet(
        &pq,
        vec![tf(), f("TC01"), f("TC02")],
        vec![
            ts(times.clone()),
            Arc::new(Float64Array::from(hot)),
            good(46.0),
        ],
        Compression::SNAPPY,
    );
    let mut text = String::from("time,TC01,TC02\n");
    for (i, t) in times.iter().enumerate() {
        let iso = edgetherm::io::columnar::iso_text(t * 1_000_000_000, false).unwrap();
        let v = if i == 2 { "9000000" } else { "46" };
        text.push_str(&format!("{iso},{v},46\n"));
    }
    std::fs::write(&csv, text).unwrap();
    let (pm, cm) = (refused(&pq), refused(&csv));
    assert!(pm.contains("hot.parquet, line 4, field `TC01`"), "{pm}");
    assert!(pm.contains("not a plausible reading"), "{pm}");
    assert!(pm.contains("(table row 3)"), "{pm}");
    // the same body as the CSV reader's message
    let body = |m: &str| m.split(": ").skip(2).collect::<Vec<_>>().join(": ");
    assert_eq!(
        body(&pm).replace(" (table row 3)", ""),
        body(&cm),
        "{pm}\n{cm}"
    );

    // time going backwards
    let pq = dir.path().join("back.parquet");
    let mut back = times.clone();
    back.swap(3, 4);
    write_parquet(
        &pq,
        vec![tf(), f("TC01")],
        vec![ts(back), good(46.0)],
        Compression::SNAPPY,
    );
    let m = refused(&pq);
    assert!(
        m.contains("line 6, field `time`") && m.contains("earlier than the previous row's"),
        "{m}"
    );

    // a column that is not a sensor, and a column of text readings
    let pq = dir.path().join("extra.parquet");
    write_parquet(
        &pq,
        vec![tf(), f("TC99")],
        vec![ts(times.clone()), good(46.0)],
        Compression::SNAPPY,
    );
    let m = refused(&pq);
    assert!(
        m.contains("field `TC99`") && m.contains("is not a sensor"),
        "{m}"
    );
    let pq = dir.path().join("strings.parquet");
    write_parquet(
        &pq,
        vec![tf(), Field::new("TC01", DataType::Utf8, false)],
        vec![
            ts(times.clone()),
            Arc::new(StringArray::from(vec!["46"; 5])),
        ],
        Compression::SNAPPY,
    );
    let m = refused(&pq);
    assert!(
        m.contains("field `TC01`") && m.contains("must hold numbers"),
        "{m}"
    );

    // no time column
    let pq = dir.path().join("notime.parquet");
    write_parquet(&pq, vec![f("TC01")], vec![good(46.0)], Compression::SNAPPY);
    let m = refused(&pq);
    assert!(m.contains("no `time` column"), "{m}");

    // a damaged file: the magic bytes, then garbage
    let pq = dir.path().join("broken.parquet");
    std::fs::write(&pq, b"PAR1 this is not a parquet file at all PAR1").unwrap();
    let m = refused(&pq);
    assert!(m.contains("not a readable Parquet logger file"), "{m}");
}

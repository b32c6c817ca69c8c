//! `edgetherm track` as a user runs it: outputs and exit statuses on the bundled busbar-clamp
//! log, bad logger files (exit 2 with file, line and column), `--ignore-extra`, refusal to
//! overwrite the log, and `--follow` on a file that grows while it is read.

use assert_cmd::cargo::cargo_bin_cmd;
use predicates::prelude::*;
use std::io::Write;
use std::path::{Path, PathBuf};

fn sample() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp")
}

fn track(log: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    cargo_bin_cmd!("edgetherm")
        .arg("track")
        .arg(sample())
        .arg("--log")
        .arg(log)
        .arg("--out")
        .arg(out)
        .args(extra)
        .assert()
}

#[test]
fn sample_log_raises_the_alarm_and_names_the_open_sensor() {
    let out = tempfile::tempdir().unwrap();
    track(
        &sample().join("log.csv"),
        out.path(),
        &["--limit", "100", "--calibrate", "60"],
    )
    .code(3)
    .stdout(
        predicate::str::contains("ALARM")
            .and(predicate::str::contains(
                "TC03 dropout from 2026-03-01T11:00:00Z",
            ))
            .and(predicate::str::contains("licensed practice")),
    );
    for name in edgetherm::io::TRACK_OUTPUT_FILE_NAMES {
        assert!(
            out.path().join(name).metadata().unwrap().len() > 0,
            "{name}"
        );
    }
    let csv = std::fs::read_to_string(out.path().join("track.csv")).unwrap();
    assert_eq!(csv.lines().count(), 2881);
    assert!(
        csv.lines()
            .all(|l| l.split(',').count() == 16 || l.contains('"'))
    );
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(json["rows"], 2880);
    assert_eq!(json["alarm"]["episodes"].as_array().unwrap().len(), 1);
    assert!(
        json["cautions"][0]
            .as_str()
            .unwrap()
            .contains("not measurements")
    );
    let svg = std::fs::read_to_string(out.path().join("track.svg")).unwrap();
    roxmltree::Document::parse(&svg).expect("track.svg is well-formed XML");
    // without a limit there is no alarm and the status is 0
    let out2 = tempfile::tempdir().unwrap();
    track(
        &sample().join("log.csv"),
        out2.path(),
        &["--calibrate", "60", "--quiet"],
    )
    .success();
}

const HEADER: &str = "time,TC01,TC02,TC03,TC04,TC05,TC06,TC07,TC08\n";
const GOOD: &str = "2026-03-01T07:00:00Z,46.2,45.5,47.1,46.2,47.5,46.2,47.0,45.1\n";

fn bad(body: &str, expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    std::fs::write(&log, body).unwrap();
    let out = dir.path().join("out");
    let mut a = track(&log, &out, &["--quiet"]).code(2);
    for e in expect {
        a = a.stderr(predicate::str::contains(*e));
    }
    a.stderr(predicate::str::contains("panicked").not());
}

#[test]
fn bad_logger_files_are_refused_with_the_line_and_column() {
    bad(
        "time,TC01,TC99\n",
        &["log.csv, line 1, field `TC99`", "--ignore-extra"],
    );
    bad(
        "stamp,TC01,TC02\n",
        &["line 1, field `time`", "no `time` column"],
    );
    bad("time,TC01,TC01\n", &["appears twice"]);
    bad("", &["line 1", "empty"]);
    bad(
        &format!("{HEADER}{GOOD}2026-03-01T07:00:10Z,46.2,45.5\n"),
        &["line 3", "3 cells but the header has 9"],
    );
    bad(
        &format!("{HEADER}{GOOD}07:00:10 on Sunday,46.2,45.5,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &["line 3, field `time`", "not a time"],
    );
    bad(
        &format!("{HEADER}{GOOD}2026-03-01T06:59:59Z,46.2,45.5,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &[
            "line 3, field `time`",
            "earlier than the previous row's (line 2)",
        ],
    );
    bad(
        &format!("{HEADER}{GOOD}12.5,46.2,45.5,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &["line 3, field `time`", "one kind of time"],
    );
    bad(
        &format!("{HEADER}2026-03-01T07:00:10Z,46.2,1e308,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &["line 2, field `TC02`", "not a plausible reading"],
    );
    bad(
        &format!("{HEADER}2026-03-01T07:00:10Z,46.2,1e999,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &["line 2, field `TC02`", "not a finite number"],
    );
    bad(
        &format!("{HEADER}2026-03-01T07:00:10Z,46.2,warm,47.1,46.2,47.5,46.2,47.0,45.1\n"),
        &[
            "line 2, field `TC02`",
            "neither a temperature nor a known fault marker",
        ],
    );
    // binary garbage after a good row
    let mut body = format!("{HEADER}{GOOD}").into_bytes();
    body.extend((0u8..=255).cycle().take(3000).map(|b| b.wrapping_mul(37)));
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    std::fs::write(&log, body).unwrap();
    track(&log, &dir.path().join("out"), &["--quiet"])
        .code(2)
        .stderr(predicate::str::contains("log.csv, line 3"))
        .stderr(predicate::str::contains("panicked").not());
}

#[test]
fn markers_and_empty_cells_are_missing_readings_and_short_rows_are_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    let mut body = String::from(HEADER);
    body.push_str(GOOD);
    body.push_str("2026-03-01T07:00:10Z,46.2,,OPEN,9999,nan,-OL,47.0,45.1\n");
    body.push_str("2026-03-01T07:00:20Z,46.2,,OPEN,9999,nan,-OL,,\n");
    std::fs::write(&log, body).unwrap();
    let out = dir.path().join("out");
    track(&log, &out, &["--quiet"]).success();
    let csv = std::fs::read_to_string(out.join("track.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert!(lines[2].contains(",ok,"), "{}", lines[2]);
    assert!(lines[2].contains("TC02:missing;TC03:missing;TC04:missing;TC05:missing;TC06:missing"));
    // 1 reading left: skipped, and said so, not zeroed
    assert!(
        lines[3].contains("skipped: 1 usable readings"),
        "{}",
        lines[3]
    );
    assert_eq!(lines[3].split(',').nth(6), Some(""));
}

#[test]
fn extra_columns_need_ignore_extra_and_the_log_is_never_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    std::fs::write(
        &log,
        "time,TC01,TC02,TC03,TC04,TC05,TC06,TC07,TC08,ambient\n\
         0,46.2,45.5,47.1,46.2,47.5,46.2,47.0,45.1,21.0\n",
    )
    .unwrap();
    track(&log, &dir.path().join("a"), &["--quiet"]).code(2);
    track(&log, &dir.path().join("a"), &["--quiet", "--ignore-extra"]).success();
    // an output directory whose track.csv would be the log
    let renamed = dir.path().join("track.csv");
    std::fs::copy(&log, &renamed).unwrap();
    track(&renamed, dir.path(), &["--quiet", "--ignore-extra"])
        .code(2)
        .stderr(predicate::str::contains("inputs are never overwritten"));
    assert!(
        std::fs::read_to_string(&renamed)
            .unwrap()
            .contains("ambient")
    );
}

#[test]
fn follow_reads_rows_appended_while_running() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    let text = std::fs::read_to_string(sample().join("log.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let mut f = std::fs::File::create(&log).unwrap();
    for l in &lines[..101] {
        writeln!(f, "{l}").unwrap();
    }
    f.flush().unwrap();
    let out = dir.path().join("out");
    let bin = assert_cmd::cargo::cargo_bin!("edgetherm");
    let mut child = std::process::Command::new(bin)
        .arg("track")
        .arg(sample())
        .arg("--log")
        .arg(&log)
        .arg("--out")
        .arg(&out)
        .args([
            "--follow",
            "--idle-exit",
            "2",
            "--quiet",
            "--calibrate",
            "20",
        ])
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(800));
    // a row written in two pieces: nothing is read until its line is complete
    let (a, b) = lines[101].split_at(20);
    write!(f, "{a}").unwrap();
    f.flush().unwrap();
    std::thread::sleep(std::time::Duration::from_millis(400));
    writeln!(f, "{b}").unwrap();
    for l in &lines[102..301] {
        writeln!(f, "{l}").unwrap();
    }
    f.flush().unwrap();
    // while following, track.csv holds only complete rows
    std::thread::sleep(std::time::Duration::from_millis(900));
    let mid = std::fs::read_to_string(out.join("track.csv")).unwrap();
    assert!(mid.ends_with('\n'));
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(0));
    let csv = std::fs::read_to_string(out.join("track.csv")).unwrap();
    assert_eq!(csv.lines().count(), 301, "header and 300 rows");
    assert!(
        csv.lines()
            .nth(101)
            .unwrap()
            .starts_with(lines[101].split(',').next().unwrap())
    );
}

/// `track --follow` as a person runs it on a live logger: an alarm start is announced on
/// stderr as it happens, and SIGTERM (what a service manager sends; SIGINT takes the same
/// path) ends the run after the row in hand with every output written and the status the
/// run earned (3: an alarm was raised).
#[cfg(unix)]
#[test]
fn follow_announces_alarms_and_stops_cleanly_on_a_signal() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("log.csv");
    let text = std::fs::read_to_string(sample().join("log.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let mut f = std::fs::File::create(&log).unwrap();
    for l in &lines[..lines.len().min(400)] {
        writeln!(f, "{l}").unwrap();
    }
    f.flush().unwrap();
    let out = dir.path().join("out");
    let bin = assert_cmd::cargo::cargo_bin!("edgetherm");
    let child = std::process::Command::new(bin)
        .arg("track")
        .arg(sample())
        .arg("--log")
        .arg(&log)
        .arg("--out")
        .arg(&out)
        // a limit the busbar joint exceeds within the log
        .args(["--follow", "--limit", "40", "--calibrate", "20"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    // let it read what is there and wait for more: track.csv is written live, so wait
    // (up to a minute on a loaded machine) until it holds every row
    let want = lines.len().min(400);
    let start = std::time::Instant::now();
    while start.elapsed() < std::time::Duration::from_secs(60) {
        let n = std::fs::read_to_string(out.join("track.csv")).map_or(0, |t| t.lines().count());
        if n >= want {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
    let pid = i32::try_from(child.id()).unwrap();
    // SAFETY: kill(2) on the child we spawned; no memory is shared.
    let sent = unsafe { libc::kill(pid, libc::SIGTERM) };
    assert_eq!(sent, 0);
    let output = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr);
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert_eq!(output.status.code(), Some(3), "{stderr}\n{stdout}");
    assert!(stderr.contains("ALARM STARTED"), "{stderr}");
    assert!(stdout.contains("Tracked"), "{stdout}");
    for f in [
        "track.csv",
        "alarms.csv",
        "sensors-health.csv",
        "summary.json",
        "track.svg",
    ] {
        assert!(out.join(f).exists(), "{f} missing after the signal");
    }
    let csv = std::fs::read_to_string(out.join("track.csv")).unwrap();
    assert_eq!(
        csv.lines().count(),
        lines.len().min(400),
        "every row of the log so far"
    );
}

/// `track.svg` in the terms of the text: clock time on the time axis when the log gives
/// dates and times; skipped rows marked; alarm stretches carry a dark strip along the top
/// of the panel, so that in greyscale they read apart from the band.
#[test]
fn track_svg_uses_clock_time_and_marks_skipped_rows_and_alarms() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(sample().join("log.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // rows 301..=400: time only, every reading missing (a logger dropout)
    for l in &mut lines[301..=400] {
        let cells = l.split(',').count();
        let time = l.split(',').next().unwrap().to_string();
        *l = format!("{time}{}", ",".repeat(cells - 1));
    }
    let log = dir.path().join("log.csv");
    std::fs::write(&log, lines.join("\n") + "\n").unwrap();
    let out = dir.path().join("out");
    // exit status 3: the run ends in alarm
    track(&log, &out, &["--limit", "70"]).code(3);
    let svg = std::fs::read_to_string(out.join("track.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .map(str::trim)
        .collect();
    assert!(
        texts
            .iter()
            .any(|t| t.starts_with("clock time (UTC, HH:MM)")),
        "{texts:?}"
    );
    // the sample log runs 07:00 to 14:59:50 UTC: hourly ticks, twice (both panels)
    for hh in ["07:00", "10:00", "14:00"] {
        assert_eq!(
            texts.iter().filter(|t| **t == hh).count(),
            2,
            "{hh}: {texts:?}"
        );
    }
    assert!(
        !texts
            .iter()
            .any(|t| t.starts_with("time since the first row"))
    );
    assert!(
        texts.iter().any(|t| t.starts_with("rows skipped")),
        "{texts:?}"
    );
    let fills = |c: &str| {
        doc.descendants()
            .filter(|n| n.has_tag_name("rect") && n.attribute("fill") == Some(c))
            .count()
    };
    assert!(
        fills("#555555") >= 2,
        "skipped rows marked (and in the legend)"
    );
    assert!(fills("#9B111E") >= 1, "the alarm strip");
    // the sample's TC03 goes open circuit at 11:00: the rows without its reading carry the
    // dark strip along the foot of the panel, and the legend names it
    assert!(
        texts
            .iter()
            .any(|t| t.starts_with("sensor left out or silent")),
        "{texts:?}"
    );
    assert!(
        fills("#3A2A5C") >= 2,
        "the left-out strip and its legend swatch"
    );
}

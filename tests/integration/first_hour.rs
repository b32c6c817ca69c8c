//! What a new user stumbles on in the first hour (issue 13): negative values on the command
//! line, and messages that name the file, the field and the likely fix (exit status 2).

use crate::support::{run, s};
use std::fs;
use std::path::{Path, PathBuf};

fn sample() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate")
}

/// A limit below zero means something (a freezer plate): it is accepted, and the sample's
/// edge (about 40 °C) exceeds it, so the run ends with the alarm status 3. The same run's
/// fit leaves 0.2 degrees of freedom: the text says the readings cannot check the model.
#[test]
fn a_negative_limit_is_a_limit() {
    let out = tempfile::tempdir().unwrap();
    let (code, stdout, stderr) = run(&[
        "estimate",
        s(&sample()),
        "--limit",
        "-10",
        "--replicates",
        "50",
        "--out",
        s(out.path()),
    ]);
    assert_eq!(code, Some(3), "{stderr}");
    assert!(stdout.contains("-10"), "{stdout}");
    assert!(
        stdout.contains("Units            inputs read in mm and °C"),
        "{stdout}"
    );
    assert!(stdout.contains("cannot check the model"), "{stdout}");
    let summary = fs::read_to_string(out.path().join("summary.json")).unwrap();
    assert!(summary.contains("cannot check the model"), "{summary}");
    // the report states the safety caution once (the inlined pictures drop their short
    // note; the SVG files keep it)
    let html = fs::read_to_string(out.path().join("report.html")).unwrap();
    assert_eq!(html.matches("not measurements").count(), 1, "{html}");
    assert!(html.contains("<strong>The readings cannot check the model"));
    for svg in ["profile.svg", "field.svg"] {
        let text = fs::read_to_string(out.path().join(svg)).unwrap();
        assert_eq!(text.matches("not measurements").count(), 1, "{svg}");
    }
}

/// Where a negative value means nothing, the message says why (not clap's `-- -1` tip).
#[test]
fn a_meaningless_negative_gets_a_reason() {
    let dir = tempfile::tempdir().unwrap();
    let case = sample();
    let truth = case.join("truth-profile.csv");
    let cases: Vec<(Vec<&str>, &str, &str)> = vec![
        (
            vec!["simulate", s(&case), "--truth", s(&truth), "--noise", "-1"],
            "--noise",
            "means nothing",
        ),
        (
            vec!["estimate", s(&case), "--replicates", "-5"],
            "--replicates",
            "is negative",
        ),
        (
            vec!["estimate", s(&case), "--probability", "-0.1"],
            "--probability",
            "between 0 and 1",
        ),
        (
            vec!["design", s(&case), "--count", "-3"],
            "--count",
            "is negative",
        ),
        (
            vec!["design", s(&case), "--count", "3", "--variation", "-2"],
            "--variation",
            "positive",
        ),
    ];
    for (args, field, gist) in cases {
        let mut args = args.clone();
        let out = dir.path().join("out");
        args.extend(["--out", s(&out)]);
        let (code, _, stderr) = run(&args);
        assert_eq!(code, Some(2), "{args:?}: {stderr}");
        assert!(
            stderr.contains(field) && stderr.contains(gist),
            "{args:?}: {stderr}"
        );
        assert!(!stderr.contains("'-- "), "{args:?}: {stderr}");
    }
}

/// `--limit 400F`: the unit comes from the case; give the number alone.
#[test]
fn a_limit_with_a_unit_says_where_the_unit_comes_from() {
    let (code, _, stderr) = run(&["estimate", s(&sample()), "--limit", "400F"]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(stderr.contains("--limit"), "{stderr}");
    assert!(stderr.contains("give the number alone (`400`)"), "{stderr}");
    assert!(stderr.contains("temperature_unit"), "{stderr}");
}

/// Missing files and folders: the message names the path, what is missing and what to do.
#[test]
fn missing_inputs_say_what_is_missing_and_what_to_do() {
    let dir = tempfile::tempdir().unwrap();
    let case = dir.path().join("case");
    fs::create_dir(&case).unwrap();
    for f in ["plate.toml", "sensors.csv"] {
        fs::copy(sample().join(f), case.join(f)).unwrap();
    }
    let out = dir.path().join("out");
    // no readings.csv
    let (code, _, stderr) = run(&["estimate", s(&case), "--out", s(&out)]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(stderr.contains("readings.csv: not found"), "{stderr}");
    assert!(stderr.contains("--readings FILE"), "{stderr}");
    assert!(!stderr.contains("os error"), "{stderr}");
    // a case folder that does not exist: not reported as a missing plate.toml
    let nowhere = dir.path().join("nowhere");
    let (code, _, stderr) = run(&["estimate", s(&nowhere), "--out", s(&out)]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(
        stderr.contains("the case folder does not exist"),
        "{stderr}"
    );
    assert!(!stderr.contains("plate.toml:"), "{stderr}");
    // a file given as the case folder
    let (code, _, stderr) = run(&["check", s(&case.join("plate.toml"))]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(stderr.contains("this is a file"), "{stderr}");
    assert!(
        stderr.contains(&format!("perhaps `{}`", case.display())),
        "{stderr}"
    );
    assert!(!stderr.contains("Not a directory"), "{stderr}");
    // a typo in a sensor id of readings.csv: line, field and the nearest id
    fs::write(
        case.join("readings.csv"),
        fs::read_to_string(sample().join("readings.csv"))
            .unwrap()
            .replacen("TC03", "TC3", 1),
    )
    .unwrap();
    let (code, _, stderr) = run(&["check", s(&case)]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(stderr.contains("line 4"), "{stderr}");
    assert!(stderr.contains("field `sensor`"), "{stderr}");
    assert!(stderr.contains("did you mean `TC03`?"), "{stderr}");
}

/// Readings written in °F in a °C case (the cold-plate sample's readings converted, an
/// invented mix-up): every reading lies far above the coolant-held face, and read as °F they
/// would lie near it, so the outputs name the likely unit mix-up (the answer itself is not
/// changed: a very hot hidden edge can do the same). The sample as it is gets no such hint.
#[test]
fn readings_in_another_temperature_unit_are_called_a_possible_mix_up() {
    let dir = tempfile::tempdir().unwrap();
    let case = dir.path().join("case");
    fs::create_dir(&case).unwrap();
    for f in ["plate.toml", "sensors.csv"] {
        fs::copy(sample().join(f), case.join(f)).unwrap();
    }
    let text = fs::read_to_string(sample().join("readings.csv")).unwrap();
    let mut lines = text.lines();
    let mut out = format!("{}\n", lines.next().unwrap());
    for l in lines {
        let (id, t) = l.split_once(',').unwrap();
        let c: f64 = t.trim().parse().unwrap();
        out.push_str(&format!("{id},{:.4}\n", c * 1.8 + 32.0));
    }
    fs::write(case.join("readings.csv"), out).unwrap();
    let o = dir.path().join("o");
    let (code, stdout, stderr) = run(&["estimate", s(&case), "--out", s(&o), "--no-bounds"]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(stdout.contains("read as °F instead of °C"), "{stdout}");
    assert!(
        stdout.contains("temperature_unit in plate.toml"),
        "{stdout}"
    );
    let o2 = dir.path().join("o2");
    let (code, stdout, stderr) = run(&["estimate", s(&sample()), "--out", s(&o2), "--no-bounds"]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(!stdout.contains("unit mix-up"), "{stdout}");
}

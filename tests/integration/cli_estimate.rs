//! `edgetherm estimate` as a user runs it: outputs, exit statuses, refusal to overwrite.

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::{Path, PathBuf};

fn sample(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-measurements")
        .join(name)
}

fn estimate(case: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("estimate")
        .arg(case)
        .arg("--out")
        .arg(out)
        .args(["--replicates", "300"])
        .args(extra)
        .assert()
}

#[test]
fn writes_every_output_and_a_readable_summary() {
    let out = tempfile::tempdir().unwrap();
    estimate(&sample("cold-plate"), out.path(), &[])
        .success()
        .stdout(
            predicate::str::contains("Hottest point")
                .and(predicate::str::contains("not measurements"))
                .and(predicate::str::contains("licensed practice")),
        );
    for name in edgetherm::io::OUTPUT_FILE_NAMES {
        let p = out.path().join(name);
        assert!(p.metadata().unwrap().len() > 0, "{name} is empty");
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("summary.json")).unwrap())
            .unwrap();
    for key in [
        "hottest",
        "strength",
        "fit",
        "resolution_length",
        "units",
        "cautions",
        "seed",
    ] {
        assert!(json.get(key).is_some(), "summary.json lacks {key}");
    }
    assert_eq!(json["units"]["temperature"], "C");
    assert!(json.get("exceedance").is_none());
}

#[test]
fn limit_exceeded_gives_exit_status_3_and_json_on_stdout() {
    let out = tempfile::tempdir().unwrap();
    let assert = estimate(
        &sample("cold-plate"),
        out.path(),
        &["--limit", "35", "--json"],
    )
    .code(3);
    let json: serde_json::Value = serde_json::from_slice(&assert.get_output().stdout).unwrap();
    assert_eq!(json["exceedance"]["limit"], 35.0);
    assert!(json["exceedance"]["probability"].as_f64().unwrap() > 0.05);
    // a limit far above every plausible temperature raises no alarm
    estimate(
        &sample("cold-plate"),
        out.path(),
        &["--limit", "90", "--quiet"],
    )
    .success()
    .stdout(predicate::str::is_empty());
}

#[test]
fn refuses_to_write_over_the_case() {
    let case = tempfile::tempdir().unwrap();
    for f in ["plate.toml", "sensors.csv", "readings.csv"] {
        std::fs::copy(sample("cold-plate").join(f), case.path().join(f)).unwrap();
    }
    let before = std::fs::read(case.path().join("sensors.csv")).unwrap();
    estimate(case.path(), case.path(), &[])
        .code(2)
        .stderr(predicate::str::contains("--out").and(predicate::str::contains("sensors.csv")));
    assert_eq!(
        std::fs::read(case.path().join("sensors.csv")).unwrap(),
        before
    );
}

#[test]
fn bad_options_are_invalid_input() {
    let out = tempfile::tempdir().unwrap();
    for extra in [
        vec!["--probability", "1.5", "--limit", "40"],
        vec!["--strength", "sideways"],
        vec!["--grid", "1,1"],
        vec!["--replicates", "0"],
        vec!["--limit", "nan"],
    ] {
        estimate(&sample("cold-plate"), out.path(), &extra).code(2);
    }
}

#[test]
fn same_seed_gives_the_same_files() {
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    estimate(&sample("fin-root"), a.path(), &["--quiet", "--seed", "5"]).success();
    estimate(&sample("fin-root"), b.path(), &["--quiet", "--seed", "5"]).success();
    for name in ["profile.csv", "field.csv", "sensors.csv", "summary.json"] {
        assert_eq!(
            std::fs::read(a.path().join(name)).unwrap(),
            std::fs::read(b.path().join(name)).unwrap(),
            "{name} differs"
        );
    }
}

fn copy_case(name: &str) -> tempfile::TempDir {
    let case = tempfile::tempdir().unwrap();
    for f in ["plate.toml", "sensors.csv", "readings.csv"] {
        std::fs::copy(sample(name).join(f), case.path().join(f)).unwrap();
    }
    case
}

#[test]
fn discrepancy_without_a_stated_sigma_names_the_plate_file() {
    let case = copy_case("cold-plate");
    let plate = case.path().join("plate.toml");
    let text = std::fs::read_to_string(&plate).unwrap();
    let text: String = text
        .lines()
        .filter(|l| !l.starts_with("sigma ="))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(&plate, text).unwrap();
    let out = tempfile::tempdir().unwrap();
    estimate(case.path(), out.path(), &["--strength", "discrepancy"])
        .code(2)
        .stderr(
            predicate::str::contains("plate.toml")
                .and(predicate::str::contains("--strength"))
                .and(predicate::str::contains("discrepancy principle needs")),
        );
}

// IEC 60584-1 class 1 covers type T from −40 to 350 °C: a reading of 400 °C has
// no tolerance in that class, and the message names the readings file.
#[test]
fn a_reading_outside_the_tolerance_class_range_names_the_readings_file() {
    let case = copy_case("cold-plate");
    let plate = case.path().join("plate.toml");
    let text = std::fs::read_to_string(&plate)
        .unwrap()
        .replace("sigma = 0.15", "tolerance_class = \"iec-1\"\ntype = \"T\"");
    std::fs::write(&plate, text).unwrap();
    let readings = case.path().join("readings.csv");
    let text = std::fs::read_to_string(&readings).unwrap();
    let text = text.replacen("TC03,", "TC03,400.0\nTCXX,", 1);
    let text: String = text
        .lines()
        .filter(|l| !l.starts_with("TCXX"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(&readings, text).unwrap();
    let out = tempfile::tempdir().unwrap();
    estimate(case.path(), out.path(), &[])
        .code(2)
        .stderr(predicate::str::contains("readings.csv").and(predicate::str::contains("TC03")));
}

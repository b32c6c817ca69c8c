//! `edgetherm simulate` as a user runs it.

use assert_cmd::Command;
use predicates::prelude::*;
use std::fs;
use std::path::Path;

fn write(dir: &Path, name: &str, text: &str) {
    fs::write(dir.join(name), text).unwrap();
}

/// A long strip 0 < x < 30 mm, sides at 0 °C, base at 40 °C: the closed form
/// T = (2 T0/π) atan(sin(πx/W)/sinh(πy/W)) (Brown & Churchill, Complex Variables and
/// Applications, steady temperatures in a semi-infinite strip).
fn strip_case(dir: &Path) {
    write(
        dir,
        "plate.toml",
        r#"
[plate]
width = 30.0
height = "infinite"
length_unit = "mm"
temperature_unit = "C"

[edges.bottom]
condition = "unknown"

[edges.left]
condition = "fixed"
temperature = 0.0

[edges.right]
condition = "fixed"
temperature = 0.0
"#,
    );
    write(
        dir,
        "sensors.csv",
        "sensor,x,y\nA,15,15\nB,7.5,3\nC,15,30\nD,2,10\n",
    );
    write(dir, "truth.csv", "position,temperature\n0,40\n30,40\n");
}

fn exact(x: f64, y: f64) -> f64 {
    let (w, t0) = (30.0, 40.0);
    let pi = std::f64::consts::PI;
    2.0 * t0 / pi * ((pi * x / w).sin() / (pi * y / w).sinh()).atan()
}

#[test]
fn noise_free_readings_match_the_closed_form() {
    let dir = tempfile::tempdir().unwrap();
    strip_case(dir.path());
    let out = Command::cargo_bin("edgetherm")
        .unwrap()
        .args(["simulate"])
        .arg(dir.path())
        .arg("--truth")
        .arg(dir.path().join("truth.csv"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("sensor,temperature"));
    let expected = [
        ("A", exact(15.0, 15.0)),
        ("B", exact(7.5, 3.0)),
        ("C", exact(15.0, 30.0)),
        ("D", exact(2.0, 10.0)),
    ];
    for ((id, t), line) in expected.iter().zip(lines) {
        let (sid, val) = line.split_once(',').unwrap();
        assert_eq!(sid, *id);
        let v: f64 = val.parse().unwrap();
        // readings are printed with 4 decimals
        assert!((v - t).abs() < 6e-5, "{id}: {v} vs {t}");
    }
}

#[test]
fn same_seed_same_readings_and_noise_has_the_stated_size() {
    let dir = tempfile::tempdir().unwrap();
    strip_case(dir.path());
    let run = |seed: &str, out: &str| {
        Command::cargo_bin("edgetherm")
            .unwrap()
            .arg("simulate")
            .arg(dir.path())
            .arg("--truth")
            .arg(dir.path().join("truth.csv"))
            .args(["--noise", "0.5", "--seed", seed, "--out"])
            .arg(dir.path().join(out))
            .assert()
            .success()
            .stdout(predicate::str::contains("not measurements"));
        fs::read_to_string(dir.path().join(out)).unwrap()
    };
    let a = run("3", "a.csv");
    let b = run("3", "b.csv");
    let c = run("4", "c.csv");
    assert_eq!(a, b);
    assert_ne!(a, c);
}

#[test]
fn refuses_to_overwrite_an_input() {
    let dir = tempfile::tempdir().unwrap();
    strip_case(dir.path());
    let before = fs::read_to_string(dir.path().join("truth.csv")).unwrap();
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("simulate")
        .arg(dir.path())
        .arg("--truth")
        .arg(dir.path().join("truth.csv"))
        .arg("--out")
        .arg(dir.path().join("truth.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--out").and(predicate::str::contains("input")));
    assert_eq!(
        fs::read_to_string(dir.path().join("truth.csv")).unwrap(),
        before
    );
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("simulate")
        .arg(dir.path())
        .arg("--truth")
        .arg(dir.path().join("truth.csv"))
        .arg("--field")
        .arg(dir.path().join("sensors.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--field"));
}

#[test]
fn bad_noise_and_grid_are_invalid_input() {
    let dir = tempfile::tempdir().unwrap();
    strip_case(dir.path());
    for args in [
        vec!["--noise", "-1"],
        vec!["--noise", "nan"],
        vec!["--grid", "1,5", "--field", "f.csv"],
    ] {
        Command::cargo_bin("edgetherm")
            .unwrap()
            .arg("simulate")
            .arg(dir.path())
            .arg("--truth")
            .arg(dir.path().join("truth.csv"))
            .args(&args)
            .assert()
            .code(2);
    }
}

#[test]
fn field_file_has_the_grid_and_the_truth_on_the_edge() {
    let dir = tempfile::tempdir().unwrap();
    strip_case(dir.path());
    let field = dir.path().join("field.csv");
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("simulate")
        .arg(dir.path())
        .arg("--truth")
        .arg(dir.path().join("truth.csv"))
        .args(["--grid", "7,4", "--quiet", "--out"])
        .arg(dir.path().join("r.csv"))
        .arg("--field")
        .arg(&field)
        .assert()
        .success();
    let text = fs::read_to_string(field).unwrap();
    let rows: Vec<&str> = text.lines().collect();
    assert_eq!(rows[0], "x,y,temperature");
    assert_eq!(rows.len(), 1 + 7 * 4);
    // an interior point of the bottom row carries the base temperature
    let mid: Vec<f64> = rows[4].split(',').map(|v| v.parse().unwrap()).collect();
    assert_eq!((mid[0], mid[1]), (15.0, 0.0));
    assert!((mid[2] - 40.0).abs() < 1e-3);
    // a point inside, against the closed form
    let inner: Vec<f64> = rows[1 + 7 + 3]
        .split(',')
        .map(|v| v.parse().unwrap())
        .collect();
    assert!(
        (inner[2] - exact(inner[0], inner[1])).abs() < 1e-3,
        "{inner:?}"
    );
}

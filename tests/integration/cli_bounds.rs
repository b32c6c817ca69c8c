//! `edgetherm estimate` with strict bounds on the invented cold-plate sample: the bounds and
//! the gradient study reach `summary.json`, `profile.csv` and the text; a gradient limit the
//! readings rule out is reported (exit 0, no bounds, a caution), never a panic or a
//! non-finite number. Format and behaviour checks; the numbers are checked in
//! tests/integration/bounds_reference.rs and tests/integration/bounds_checks.rs.

use assert_cmd::cargo::cargo_bin_cmd;
use serde_json::Value;

fn run(extra: &[&str]) -> (i32, String, tempfile::TempDir) {
    let out_dir = tempfile::tempdir().unwrap();
    let out = cargo_bin_cmd!("edgetherm")
        .arg("estimate")
        .arg("sample-measurements/cold-plate")
        .arg("--out")
        .arg(out_dir.path())
        .args(["--replicates", "50"])
        .args(extra)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{err}");
    (out.status.code().unwrap_or(-1), stdout, out_dir)
}

fn summary(dir: &tempfile::TempDir) -> Value {
    let text = std::fs::read_to_string(dir.path().join("summary.json")).unwrap();
    assert!(!text.contains("NaN") && !text.contains("Infinity"));
    serde_json::from_str(&text).unwrap()
}

#[test]
fn stated_gradient_gives_bounds_in_every_output() {
    let (code, text, dir) = run(&["--max-gradient", "1.0", "--limit", "60"]);
    assert_eq!(code, 0, "{text}");
    let j = summary(&dir);
    let b = &j["bounds"];
    assert_eq!(b["admissible"], true);
    let lo = b["hottest_temperature_interval"][0].as_f64().unwrap();
    let hi = b["hottest_temperature_interval"][1].as_f64().unwrap();
    let est = j["hottest"]["temperature"].as_f64().unwrap();
    assert!(lo < est && est < hi, "[{lo}, {hi}] around {est}");
    // the limit is above the upper bound: ruled out
    assert_eq!(b["limit_ruled_out"], hi < 60.0);
    let study = &j["gradient_study"];
    let g_min = study["minimum_required_gradient"].as_f64().unwrap();
    assert!(
        g_min > 0.0 && g_min < 1.0,
        "1 °C/mm is admissible, so the minimum is below"
    );
    let rows = study["peak_upper_bound"].as_array().unwrap();
    assert!(rows.len() >= 3);
    // a looser limit never lowers the upper bound
    let uppers: Vec<f64> = rows
        .iter()
        .map(|r| r["hottest_temperature_upper_bound"].as_f64().unwrap())
        .collect();
    assert!(uppers.windows(2).all(|w| w[0] <= w[1] + 1e-6), "{uppers:?}");
    let csv = std::fs::read_to_string(dir.path().join("profile.csv")).unwrap();
    let mut lines = csv.lines();
    assert!(lines.next().unwrap().ends_with(",bound_lower,bound_upper"));
    for row in lines {
        let cells: Vec<f64> = row.split(',').skip(1).map(|c| c.parse().unwrap()).collect();
        let (b_lo, b_hi) = (cells[8], cells[9]);
        assert!(
            b_lo <= b_hi && b_lo.is_finite() && b_hi.is_finite(),
            "{row}"
        );
        // the bounds are simultaneous: every position's interval lies inside the peak's
        assert!(b_hi <= hi + 1e-3, "{row}");
    }
    assert!(text.contains("Strict bounds    hottest temperature in ["));
    assert!(text.contains("estimates, not measurements") || text.contains("These are estimates"));
}

#[test]
fn a_gradient_the_readings_rule_out_is_reported() {
    // the sample's readings need about 0.3 °C/mm; 0.05 °C/mm is ruled out
    let (code, text, dir) = run(&["--max-gradient", "0.05"]);
    assert_eq!(code, 0, "{text}");
    let j = summary(&dir);
    assert_eq!(j["bounds"]["admissible"], false);
    assert!(j["bounds"]["hottest_temperature_interval"].is_null());
    assert!(text.contains("none: the readings rule out a gradient limit of 0.05 °C/mm"));
    let csv = std::fs::read_to_string(dir.path().join("profile.csv")).unwrap();
    assert!(csv.lines().skip(1).all(|r| r.ends_with(",,")));
}

#[test]
fn bounds_on_an_estimated_sigma_are_marked_approximate() {
    let plate = std::fs::read_to_string("sample-measurements/cold-plate/plate.toml").unwrap();
    let without_noise = plate.replace("[noise]\nsigma = 0.15", "");
    assert_ne!(
        plate, without_noise,
        "test setup: the sample states its sigma"
    );
    let tmp = tempfile::tempdir().unwrap();
    let plate_path = tmp.path().join("plate.toml");
    std::fs::write(&plate_path, without_noise).unwrap();
    let plate_arg = plate_path.display().to_string();
    let (code, text, dir) = run(&["--plate", &plate_arg, "--max-gradient", "1.0"]);
    assert_eq!(code, 0, "{text}");
    let j = summary(&dir);
    assert_eq!(j["fit"]["sigma_source"], "estimated");
    assert_eq!(j["bounds"]["sigma_stated"], false);
    assert!(
        j["cautions"].as_array().unwrap().iter().any(|c| c
            .as_str()
            .unwrap()
            .contains("their confidence is approximate")),
        "{}",
        j["cautions"]
    );
}

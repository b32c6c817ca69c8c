//! Readings as they come off the bench (issue 14): thermocouple voltages converted with the
//! ITS-90 reference functions, and per-sensor calibration offsets.
//!
//! The voltages here are made from the cold-plate sample's temperatures with
//! `E = E_ref(t) − E_ref(t_cj)` (`edgetherm::its90`, itself checked against NIST Monograph 175
//! and an independent implementation in `its90_reference`), so the estimate on them must be
//! the estimate on the temperatures: the conversion is exact to the inverse's 1e-6 K, far
//! below anything the estimate reports.

use assert_cmd::cargo::cargo_bin_cmd;
use edgetherm::case::CaseFiles;
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::io::{load_case, load_readings};
use edgetherm::its90::Its90Type;
use std::path::Path;

const SAMPLE: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/sample-measurements/cold-plate"
);

/// The cold-plate sample with its readings (°C) as rows `(sensor, t)`.
fn sample_readings() -> Vec<(String, f64)> {
    let text = std::fs::read_to_string(Path::new(SAMPLE).join("readings.csv")).unwrap();
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            let (s, t) = l.split_once(',').unwrap();
            (s.to_string(), t.trim().parse().unwrap())
        })
        .collect()
}

/// A copy of the sample with `[thermocouple]` added and readings.csv replaced by `readings`.
fn case_with(thermocouple: &str, readings: &str) -> tempfile::TempDir {
    let d = tempfile::tempdir().unwrap();
    for f in ["plate.toml", "sensors.csv"] {
        std::fs::copy(Path::new(SAMPLE).join(f), d.path().join(f)).unwrap();
    }
    let plate = std::fs::read_to_string(d.path().join("plate.toml")).unwrap();
    // [thermocouple] before [design], so that its keys are not read as [design]'s
    let plate = plate.replacen("[design]", &format!("{thermocouple}\n[design]"), 1);
    std::fs::write(d.path().join("plate.toml"), plate).unwrap();
    std::fs::write(d.path().join("readings.csv"), readings).unwrap();
    d
}

fn quick() -> EstimateOptions {
    EstimateOptions {
        replicates: Some(200),
        ..EstimateOptions::default()
    }
}

#[test]
fn voltages_give_the_estimate_of_their_temperatures() {
    let rows = sample_readings();
    let files = CaseFiles::in_dir(SAMPLE);
    let case_t = load_case(&files).unwrap();
    let r_t = load_readings(&files.readings, &case_t).unwrap();
    // type K with a constant cold junction, type T with one per row
    let k = Its90Type::K;
    let mut fixed = String::from("sensor,emf_mv\n");
    for (s, t) in &rows {
        let e = k.emf_mv(*t).unwrap() - k.emf_mv(23.4).unwrap();
        fixed.push_str(&format!("{s},{e:e}\n"));
    }
    let ty = Its90Type::T;
    let mut per_row = String::from("sensor,cold_junction,emf_mv\n");
    for (i, (s, t)) in rows.iter().enumerate() {
        let cj = 21.0 + 0.37 * i as f64;
        let e = ty.emf_mv(*t).unwrap() - ty.emf_mv(cj).unwrap();
        per_row.push_str(&format!("{s},{cj},{e:e}\n"));
    }
    let base = estimate(&case_t, &r_t, &quick(), None).unwrap();
    for (tc, readings) in [
        (
            "[thermocouple]\ntype = \"K\"\nsignal = \"emf_mv\"\ncold_junction = 23.4\n",
            fixed,
        ),
        (
            "[thermocouple]\ntype = \"t\"\nsignal = \"emf_mv\"\ncold_junction = \"column\"\n",
            per_row,
        ),
    ] {
        let d = case_with(tc, &readings);
        let files = CaseFiles::in_dir(d.path());
        let case_v = load_case(&files).unwrap();
        let r_v = load_readings(&files.readings, &case_v).unwrap();
        for (a, b) in r_t.iter().zip(&r_v) {
            let (a, b) = (a.unwrap(), b.unwrap());
            assert!((a - b).abs() < 2e-6, "{tc}: {a} K vs {b} K");
        }
        let r = estimate(&case_v, &r_v, &quick(), None).unwrap();
        assert!((r.hottest.temperature - base.hottest.temperature).abs() < 1e-4);
        assert!((r.hottest.position - base.hottest.position).abs() < 1e-6);
        for (e, f) in r.edges[0].estimate.iter().zip(&base.edges[0].estimate) {
            assert!((e - f).abs() < 1e-4, "{e} vs {f}");
        }
        assert_eq!(
            r.sensors.iter().map(|s| s.flag.clone()).collect::<Vec<_>>(),
            base.sensors
                .iter()
                .map(|s| s.flag.clone())
                .collect::<Vec<_>>()
        );
        let c = r.conversion.expect("the conversion is stated");
        assert!(c.describe(&case_v.units).contains("type"), "{c:?}");
    }
}

#[test]
fn a_voltage_outside_the_type_exits_2_naming_file_line_field_and_range() {
    let d = case_with(
        "[thermocouple]\ntype = \"J\"\nsignal = \"emf_mv\"\ncold_junction = 20\n",
        "sensor,emf_mv\nTC01,0.4\nTC02,70.5\n",
    );
    let out = cargo_bin_cmd!("edgetherm")
        .args(["check"])
        .arg(d.path())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("readings.csv"), "{err}");
    assert!(err.contains("line 3"), "{err}");
    assert!(err.contains("`emf_mv`"), "{err}");
    // the range with the cold junction at 20 °C: E(-210) − E(20) to E(1200) − E(20)
    let j = Its90Type::J;
    let hi = j.emf_mv(1200.0).unwrap() - j.emf_mv(20.0).unwrap();
    assert!(err.contains(&format!("{hi:.3} mV")), "{err}");
    assert!(err.contains("type J"), "{err}");
}

#[test]
fn the_outputs_state_the_conversion_and_offsets() {
    let rows = sample_readings();
    let k = Its90Type::K;
    let mut text = String::from("sensor,emf_mv\n");
    for (s, t) in &rows {
        text.push_str(&format!(
            "{s},{:e}\n",
            k.emf_mv(*t).unwrap() - k.emf_mv(25.0).unwrap()
        ));
    }
    let d = case_with(
        "[thermocouple]\ntype = \"K\"\nsignal = \"emf_mv\"\ncold_junction = 25\n",
        &text,
    );
    // an offset for TC02: its reading is lowered by 0.25 °C
    let sensors = std::fs::read_to_string(d.path().join("sensors.csv")).unwrap();
    let mut lines: Vec<String> = sensors.lines().map(str::to_string).collect();
    lines[0].push_str(",offset");
    for (i, l) in lines.iter_mut().enumerate().skip(1) {
        l.push_str(if i == 2 { ",0.25" } else { "," });
    }
    std::fs::write(d.path().join("sensors.csv"), lines.join("\n") + "\n").unwrap();
    let out_dir = d.path().join("out");
    let out = cargo_bin_cmd!("edgetherm")
        .args(["estimate", "--no-bounds", "--replicates", "100", "--out"])
        .arg(&out_dir)
        .arg(d.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("converted from thermocouple voltages"),
        "{stdout}"
    );
    assert!(stdout.contains("type K"), "{stdout}");
    assert!(stdout.contains("cold junction 25 °C"), "{stdout}");
    assert!(stdout.contains("TC02 0.25"), "{stdout}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(json["readings_conversion"]["type"], "K");
    assert_eq!(json["readings_conversion"]["cold_junction"], 25.0);
    assert_eq!(json["sensor_offsets"]["TC02"], 0.25);
    let html = std::fs::read_to_string(out_dir.join("report.html")).unwrap();
    assert!(html.contains("converted from thermocouple voltages"));
    let csv = std::fs::read_to_string(out_dir.join("sensors.csv")).unwrap();
    assert!(csv.lines().next().unwrap().ends_with(",offset"), "{csv}");
    // TC02's reading in the output is the converted temperature less the offset
    let tc02 = csv.lines().find(|l| l.starts_with("TC02,")).unwrap();
    let reading: f64 = tc02.split(',').nth(3).unwrap().parse().unwrap();
    assert!((reading - (rows[1].1 - 0.25)).abs() < 1e-3, "{tc02}");
}

/// `track` on a logger in mV with a `cold_junction` column gives the rows of the same logger
/// in °C (numbers as written in track.csv, to their last decimal).
#[test]
fn track_on_a_voltage_logger_equals_track_on_temperatures() {
    let rows = sample_readings();
    let d = case_with(
        "[thermocouple]\ntype = \"N\"\nsignal = \"emf_mv\"\ncold_junction = \"column\"\n",
        "sensor,emf_mv\n",
    );
    let ty = Its90Type::N;
    let ids: Vec<&str> = rows.iter().map(|(s, _)| s.as_str()).collect();
    let mut log_t = format!("time,{}\n", ids.join(","));
    let mut log_v = format!("time,cold_junction,{}\n", ids.join(","));
    for r in 0..6 {
        let cj = 22.0 + 0.5 * r as f64;
        let ts: Vec<f64> = rows.iter().map(|(_, t)| t + 0.3 * r as f64).collect();
        let cells_t: Vec<String> = ts.iter().map(|t| format!("{t:.4}")).collect();
        let cells_v: Vec<String> = ts
            .iter()
            .map(|t| {
                let t: f64 = format!("{t:.4}").parse().unwrap();
                format!("{:e}", ty.emf_mv(t).unwrap() - ty.emf_mv(cj).unwrap())
            })
            .collect();
        log_t.push_str(&format!("{},{}\n", 10 * r, cells_t.join(",")));
        log_v.push_str(&format!("{},{cj},{}\n", 10 * r, cells_v.join(",")));
    }
    std::fs::write(d.path().join("log-t.csv"), log_t).unwrap();
    std::fs::write(d.path().join("log-v.csv"), log_v).unwrap();
    let run = |plate: &Path, log: &str, out: &str| {
        let o = cargo_bin_cmd!("edgetherm")
            .arg("--plate")
            .arg(plate)
            .args(["--quiet", "track", "--log"])
            .arg(d.path().join(log))
            .arg("--out")
            .arg(d.path().join(out))
            .arg(d.path())
            .output()
            .unwrap();
        assert_eq!(
            o.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        std::fs::read_to_string(d.path().join(out).join("track.csv")).unwrap()
    };
    let track_v = run(&d.path().join("plate.toml"), "log-v.csv", "out-v");
    let track_t = run(&Path::new(SAMPLE).join("plate.toml"), "log-t.csv", "out-t");
    assert_eq!(track_v.lines().count(), 7);
    for (a, b) in track_t.lines().zip(track_v.lines()) {
        for (x, y) in a.split(',').zip(b.split(',')) {
            match (x.parse::<f64>(), y.parse::<f64>()) {
                (Ok(x), Ok(y)) => assert!((x - y).abs() <= 2e-4, "{a}\n{b}"),
                _ => assert_eq!(x, y),
            }
        }
    }
    let summary = std::fs::read_to_string(d.path().join("out-v/summary.json")).unwrap();
    assert!(
        summary.contains("\"cold_junction\": \"column\""),
        "{summary}"
    );
    // the picture says so too, above the safety note; the temperature log's does not
    let svg = std::fs::read_to_string(d.path().join("out-v/track.svg")).unwrap();
    assert!(
        svg.contains("converted from thermocouple voltages"),
        "track.svg"
    );
    let svg_t = std::fs::read_to_string(d.path().join("out-t/track.svg")).unwrap();
    assert!(!svg_t.contains("converted from thermocouple voltages"));
}

//! `edgetherm check` on invalid inputs: every case exits with status 2 and a message on
//! stderr naming the file, the line (where there is one) and the field, and never panics.
//! Valid cases pass. Each test writes a small case into a fresh temporary directory.

use assert_cmd::cargo::cargo_bin_cmd;
use std::path::Path;
use tempfile::TempDir;

/// A valid case: the bottom edge is unknown. Line numbers below refer to this text.
const PLATE: &str = "\
[plate]
width = 150.0
height = 60.0
length_unit = \"mm\"
temperature_unit = \"C\"
conductivity = 205.0

[edges.bottom]
condition = \"unknown\"

[edges.top]
condition = \"fixed\"
temperature = 25.0

[edges.left]
condition = \"insulated\"

[edges.right]
condition = \"insulated\"

[fit]
terms = 32

[noise]
sigma = 0.5

[uncertainty]
replicates = 500
";

const SENSORS: &str = "sensor,x,y\nTC01,20,8\nTC02,75,10\nTC03,130,30\n";
const READINGS: &str = "sensor,temperature\nTC01,61.3\nTC02,70.2\nTC03,41.0\n";

/// A case directory holding the base files with some replaced (`Some`) or left out (`None`).
fn case(changes: &[(&str, Option<&str>)]) -> TempDir {
    let dir = tempfile::tempdir().unwrap();
    let mut files: Vec<(&str, Option<&str>)> = vec![
        ("plate.toml", Some(PLATE)),
        ("sensors.csv", Some(SENSORS)),
        ("readings.csv", Some(READINGS)),
    ];
    for &(name, text) in changes {
        match files.iter_mut().find(|(n, _)| *n == name) {
            Some(f) => f.1 = text,
            None => files.push((name, text)),
        }
    }
    for (name, text) in files {
        if let Some(t) = text {
            std::fs::write(dir.path().join(name), t).unwrap();
        }
    }
    dir
}

/// The base plate file with `from` replaced by `to` (which must occur).
fn plate_with(from: &str, to: &str) -> String {
    assert!(
        PLATE.contains(from),
        "test setup: `{from}` not in the plate file"
    );
    PLATE.replacen(from, to, 1)
}

/// Run `edgetherm check DIR` with extra arguments; returns (status, stdout, stderr).
fn check(dir: &Path, extra: &[&str]) -> (i32, String, String) {
    let out = cargo_bin_cmd!("edgetherm")
        .arg("check")
        .arg(dir)
        .args(extra)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Assert status 2 and a message naming `file` (in `dir`), `line`, `field` and the gist.
fn assert_invalid(dir: &TempDir, file: &str, line: Option<usize>, field: Option<&str>, gist: &str) {
    let (code, _, err) = check(dir.path(), &[]);
    assert_invalid_output(dir, code, &err, file, line, field, gist);
}

fn assert_invalid_output(
    dir: &TempDir,
    code: i32,
    err: &str,
    file: &str,
    line: Option<usize>,
    field: Option<&str>,
    gist: &str,
) {
    assert_eq!(code, 2, "exit status; stderr: {err}");
    assert!(!err.contains("panicked"), "panic: {err}");
    assert!(err.starts_with("edgetherm: "), "prefix: {err}");
    let path = dir.path().join(file);
    assert!(
        err.contains(&path.display().to_string()),
        "file {file}: {err}"
    );
    if let Some(l) = line {
        assert!(
            err.contains(&format!("line {l},")) || err.contains(&format!("line {l}:")),
            "line {l}: {err}"
        );
    }
    if let Some(f) = field {
        assert!(err.contains(&format!("field `{f}`")), "field {f}: {err}");
    }
    assert!(err.contains(gist), "gist `{gist}`: {err}");
}

// ---- valid cases ----------------------------------------------------------------------------

#[test]
fn valid_case_passes_and_describes_the_sensors() {
    let dir = case(&[]);
    let (code, out, err) = check(dir.path(), &[]);
    assert_eq!(code, 0, "{err}");
    assert!(err.is_empty(), "{err}");
    assert!(out.contains("The case is valid."), "{out}");
    assert!(
        out.contains("rectangle 150 mm wide (x) by 60 mm high (y)"),
        "{out}"
    );
    assert!(out.contains("Unknown edges: bottom"), "{out}");
    assert!(out.contains("fixed at 25 C"), "{out}");
    // TC01 at y = 8 mm sits 8 mm below the bottom edge: 8/150 = 0.053 of its length
    let tc01 = out
        .lines()
        .find(|l| l.trim_start().starts_with("TC01"))
        .unwrap();
    let cells: Vec<&str> = tc01.split_whitespace().collect();
    assert_eq!(cells, ["TC01", "20", "8", "8", "0.053"], "{out}");
    assert!(out.contains("Readings: 3 of 3 sensors"), "{out}");
    assert!(out.contains("32 terms per unknown edge"), "{out}");
}

#[test]
fn valid_case_as_json() {
    let dir = case(&[("readings.csv", Some("sensor,temperature\nTC02,70\n"))]);
    let (code, out, err) = check(dir.path(), &["--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["valid"], true);
    assert_eq!(v["units"]["length"], "mm");
    assert_eq!(v["unknown_edges"][0], "bottom");
    assert_eq!(v["sensors"][2]["sensor"], "TC03");
    assert_eq!(v["sensors"][2]["depths"][0]["depth"], 30.0);
    assert!(
        (v["sensors"][2]["depths"][0]["fraction_of_edge"]
            .as_f64()
            .unwrap()
            - 0.2)
            .abs()
            < 1e-12
    );
    assert_eq!(v["readings"]["count"], 1);
    assert_eq!(v["readings"]["sensors_without_reading"][0], "TC01");
    assert_eq!(v["fit"]["strength"], "default");
    assert_eq!(v["noise"]["sigma"], 0.5);
    assert_eq!(v["uncertainty"]["replicates"], 500);
}

#[test]
fn quiet_prints_nothing() {
    let dir = case(&[]);
    let (code, out, err) = check(dir.path(), &["--quiet"]);
    assert_eq!((code, out.as_str(), err.as_str()), (0, "", ""));
}

#[test]
fn valid_strip_with_profile_and_without_readings() {
    let plate = PLATE
        .replace("height = 60.0", "height = \"infinite\"")
        .replace(
            "[edges.top]\ncondition = \"fixed\"\ntemperature = 25.0\n",
            "",
        )
        .replace(
            "[edges.left]\ncondition = \"insulated\"",
            "[edges.left]\ncondition = \"fixed\"\ntemperature = 20",
        );
    let dir = case(&[("plate.toml", Some(&plate)), ("readings.csv", None)]);
    let (code, out, err) = check(dir.path(), &[]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("long strip 150 mm wide"), "{out}");
    assert!(out.contains("Readings: none"), "{out}");

    let plate = plate_with("temperature = 25.0", "profile = \"top.csv\"");
    let dir = case(&[
        ("plate.toml", Some(&plate)),
        (
            "top.csv",
            Some("position,temperature\n0,20\n75,30\n150,20\n"),
        ),
    ]);
    let (code, out, err) = check(dir.path(), &[]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("3 points, 20 to 30 C"), "{out}");
}

#[test]
fn two_unknown_edges_are_described() {
    let plate = plate_with(
        "[edges.left]\ncondition = \"insulated\"",
        "[edges.left]\ncondition = \"unknown\"",
    );
    let dir = case(&[("plate.toml", Some(&plate))]);
    let (code, out, err) = check(dir.path(), &[]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("Unknown edges: bottom, left"), "{out}");
    assert!(out.contains("depth below left [mm]"), "{out}");
}

#[test]
fn overrides_replace_the_case_files() {
    let dir = case(&[
        ("other-sensors.csv", Some("sensor,x,y\nA,10,10\n")),
        ("other-readings.csv", Some("sensor,temperature\nA,30\n")),
    ]);
    let s = dir.path().join("other-sensors.csv");
    let r = dir.path().join("other-readings.csv");
    let (code, out, err) = check(
        dir.path(),
        &[
            "--sensors",
            s.to_str().unwrap(),
            "--readings",
            r.to_str().unwrap(),
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("Sensors (1)"), "{out}");
    // a --readings override that does not exist is an error, unlike a missing readings.csv
    let missing = dir.path().join("nope.csv");
    let (code, _, err) = check(dir.path(), &["--readings", missing.to_str().unwrap()]);
    assert_invalid_output(&dir, code, &err, "nope.csv", None, None, "No such file");
}

// ---- sensors ----------------------------------------------------------------------------------

#[test]
fn sensor_outside_the_plate() {
    let dir = case(&[(
        "sensors.csv",
        Some("sensor,x,y\nTC01,20,8\nTC02,75,70\nTC03,130,30\n"),
    )]);
    assert_invalid(&dir, "sensors.csv", Some(3), Some("y"), "outside the plate");
}

#[test]
fn sensor_exactly_on_an_edge() {
    let dir = case(&[(
        "sensors.csv",
        Some("sensor,x,y\nTC01,20,8\nTC02,75,10\nTC03,150,30\n"),
    )]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(4),
        Some("x"),
        "exactly on an edge",
    );
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,20,0\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(2),
        Some("y"),
        "exactly on an edge",
    );
}

#[test]
fn duplicate_sensor_ids() {
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,20,8\nTC01,75,10\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(3),
        Some("sensor"),
        "used twice (lines 2 and 3)",
    );
}

#[test]
fn non_finite_sensor_position() {
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,NaN,8\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(2),
        Some("x"),
        "not a finite number",
    );
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,20,inf\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(2),
        Some("y"),
        "not a finite number",
    );
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,,8\n"))]);
    assert_invalid(&dir, "sensors.csv", Some(2), Some("x"), "empty cell");
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,2O,8\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(2),
        Some("x"),
        "`2O` is not a number",
    );
}

#[test]
fn bad_sensor_headers_and_rows() {
    let dir = case(&[("sensors.csv", Some("sensor,y\nTC01,8\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(1),
        Some("x"),
        "missing column `x`",
    );
    let dir = case(&[("sensors.csv", Some("sensor,x,y,sigam\nTC01,1,8,0.2\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(1),
        Some("sigam"),
        "unknown column `sigam`",
    );
    let dir = case(&[("sensors.csv", Some("TC01,20,8\nTC02,75,10\n"))]);
    assert_invalid(&dir, "sensors.csv", Some(1), None, "no header found");
    // (a file written with semicolons is read since issue 14: tests/integration/dialects.rs)
    let dir = case(&[("sensors.csv", Some("sensor,x,y\nTC01,20,8\nTC02,75\n"))]);
    assert_invalid(
        &dir,
        "sensors.csv",
        Some(3),
        None,
        "2 cells but the header names 3",
    );
}

#[test]
fn empty_sensors_file() {
    let dir = case(&[("sensors.csv", Some(""))]);
    assert_invalid(&dir, "sensors.csv", None, None, "the file is empty");
    let dir = case(&[("sensors.csv", Some("sensor,x,y\n"))]);
    assert_invalid(&dir, "sensors.csv", None, None, "lists no sensors");
}

// ---- readings ---------------------------------------------------------------------------------

#[test]
fn reading_for_an_unknown_sensor() {
    let dir = case(&[(
        "readings.csv",
        Some("sensor,temperature\nTC01,61.3\nTC09,70\n"),
    )]);
    assert_invalid(
        &dir,
        "readings.csv",
        Some(3),
        Some("sensor"),
        "`TC09`, which is not in",
    );
}

#[test]
fn two_readings_for_one_sensor() {
    let dir = case(&[(
        "readings.csv",
        Some("sensor,temperature\nTC01,61.3\nTC02,70\nTC01,62\n"),
    )]);
    assert_invalid(
        &dir,
        "readings.csv",
        Some(4),
        Some("sensor"),
        "first is on line 2",
    );
}

#[test]
fn non_finite_or_empty_reading() {
    for bad in ["NaN", "inf", "-inf", "", "1e999"] {
        let text = format!("sensor,temperature\nTC01,61.3\nTC02,{bad}\n");
        let dir = case(&[("readings.csv", Some(&text))]);
        let gist = if bad.is_empty() {
            "empty cell"
        } else {
            "not a finite number"
        };
        assert_invalid(&dir, "readings.csv", Some(3), Some("temperature"), gist);
    }
}

#[test]
fn reading_below_absolute_zero_in_every_unit() {
    for (unit, t) in [("C", "-273.2"), ("K", "-0.5"), ("F", "-460")] {
        let plate = plate_with(
            "temperature_unit = \"C\"",
            &format!("temperature_unit = \"{unit}\""),
        )
        .replace("temperature = 25.0", "temperature = 300");
        let text = format!("sensor,temperature\nTC01,{t}\n");
        let dir = case(&[("plate.toml", Some(&plate)), ("readings.csv", Some(&text))]);
        assert_invalid(
            &dir,
            "readings.csv",
            Some(2),
            Some("temperature"),
            "below absolute zero",
        );
    }
}

#[test]
fn bad_readings_header() {
    let dir = case(&[("readings.csv", Some("sensor,temp\nTC01,61.3\n"))]);
    assert_invalid(
        &dir,
        "readings.csv",
        Some(1),
        Some("temp"),
        "unknown column `temp`",
    );
}

// ---- plate.toml -------------------------------------------------------------------------------

#[test]
fn unknown_keys_in_plate_toml() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("width = 150.0", "widht = 150.0")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(2),
        Some("plate.widht"),
        "unknown key `widht`",
    );
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("[edges.bottom]", "[edges.botom]")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(8),
        Some("edges.botom"),
        "unknown key `botom`",
    );
    let dir = case(&[("plate.toml", Some(&plate_with("[noise]", "[noize]")))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(24),
        Some("noize"),
        "unknown key `noize`",
    );
    let dir = case(&[("plate.toml", Some(&plate_with("terms = 32", "term = 32")))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(22),
        Some("fit.term"),
        "unknown key `term`",
    );
}

#[test]
fn non_finite_numbers_in_plate_toml() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("sigma = 0.5", "sigma = nan")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(25),
        Some("noise.sigma"),
        "positive number",
    );
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("width = 150.0", "width = inf")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(2),
        Some("plate.width"),
        "finite number",
    );
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("temperature = 25.0", "temperature = -inf")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(13),
        Some("edges.top.temperature"),
        "finite number",
    );
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("height = 60.0", "height = \"\"")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(3),
        Some("plate.height"),
        "not a height",
    );
}

#[test]
fn temperature_below_absolute_zero_in_plate_toml() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("temperature = 25.0", "temperature = -300")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(13),
        Some("edges.top.temperature"),
        "below absolute zero",
    );
}

#[test]
fn edge_missing() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("[edges.left]\ncondition = \"insulated\"\n", "")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        None,
        Some("edges.left"),
        "the left edge has no condition",
    );
}

#[test]
fn edge_given_twice() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("[edges.right]", "[edges.top]")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(18),
        Some("edges.top"),
        "the top edge is given twice (first on line 11)",
    );
}

#[test]
fn no_edge_fixes_the_temperature_level() {
    let plate = plate_with("condition = \"unknown\"", "condition = \"insulated\"").replace(
        "condition = \"fixed\"\ntemperature = 25.0",
        "condition = \"insulated\"",
    );
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(8),
        Some("edges"),
        "nothing fixes the temperature level",
    );
}

#[test]
fn long_strip_with_unknown_sides() {
    let plate = plate_with("height = 60.0", "height = \"infinite\"")
        .replace(
            "[edges.top]\ncondition = \"fixed\"\ntemperature = 25.0\n",
            "",
        )
        .replace(
            "[edges.right]\ncondition = \"insulated\"",
            "[edges.right]\ncondition = \"unknown\"",
        );
    let dir = case(&[("plate.toml", Some(&plate))]);
    // the three lines of [edges.top] are gone, so right's condition moves from line 19 to 16
    assert_invalid(
        &dir,
        "plate.toml",
        Some(16),
        Some("edges.right.condition"),
        "long strip",
    );
    // a strip has no top edge
    let plate = plate_with("height = 60.0", "height = \"infinite\"");
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(11),
        Some("edges.top"),
        "has no top edge",
    );
}

/// Convective edges: each missing or absurd key is refused naming its line and field.
#[test]
fn bad_convective_edges() {
    let conv = |keys: &str| {
        plate_with(
            "[edges.right]\ncondition = \"insulated\"",
            &format!("[edges.right]\ncondition = \"convective\"\n{keys}"),
        )
    };
    let cases: [(String, usize, &str, &str); 7] = [
        (
            conv("h = 10"),
            19,
            "edges.right.condition",
            "needs `ambient",
        ),
        (
            conv("ambient = 20"),
            19,
            "edges.right.condition",
            "needs `h",
        ),
        (
            conv("h = -5\nambient = 20"),
            20,
            "edges.right.h",
            "plausible range",
        ),
        (
            conv("h = 1e9\nambient = 20"),
            20,
            "edges.right.h",
            "plausible range",
        ),
        (
            conv("h = \"high\"\nambient = 20"),
            20,
            "edges.right.h",
            "not a heat transfer",
        ),
        (
            conv("h = \"unknown\"\nh_range = [50.0, 5.0]\nambient = 20"),
            21,
            "edges.right.h_range",
            "larger value",
        ),
        (
            conv("h = 10\nambient = -400"),
            21,
            "edges.right.ambient",
            "absolute zero",
        ),
    ];
    for (plate, line, field, gist) in cases {
        let dir = case(&[("plate.toml", Some(&plate))]);
        assert_invalid(&dir, "plate.toml", Some(line), Some(field), gist);
    }
    // no conductivity: h/κ is undefined
    let plate = conv("h = 10\nambient = 20").replace("conductivity = 205.0\n", "");
    let dir = case(&[("plate.toml", Some(&plate))]);
    let (code, _, err) = check(dir.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("plate.conductivity") && err.contains("convective"),
        "{err}"
    );
    // a key of the convective condition on another kind of edge
    let plate = plate_with(
        "[edges.right]\ncondition = \"insulated\"",
        "[edges.right]\ncondition = \"insulated\"\nh = 10",
    );
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(20),
        Some("edges.right.h"),
        "convective edge only",
    );
}

#[test]
fn bad_values_in_plate_toml() {
    let cases: [(&str, &str, usize, &str, &str); 9] = [
        (
            "length_unit = \"mm\"",
            "length_unit = \"cm\"",
            4,
            "plate.length_unit",
            "unknown value `cm`",
        ),
        (
            "condition = \"unknown\"",
            "condition = \"unkown\"",
            9,
            "edges.bottom.condition",
            "unknown condition",
        ),
        ("terms = 32", "terms = -3", 22, "fit.terms", "whole number"),
        (
            "terms = 32",
            "terms = 32\nstrength = \"best\"",
            23,
            "fit.strength",
            "unknown strength rule",
        ),
        (
            "terms = 32",
            "terms = 32\nsmoothing = \"wiggle\"",
            23,
            "fit.smoothing",
            "unknown value `wiggle`",
        ),
        (
            "sigma = 0.5",
            "sigma = 0.5\ntolerance_class = \"iec-1\"\ntype = \"K\"",
            25,
            "noise.sigma",
            "not both",
        ),
        (
            "replicates = 500",
            "replicates = 0",
            28,
            "uncertainty.replicates",
            "whole number",
        ),
        (
            "replicates = 500",
            "confidence = 95",
            28,
            "uncertainty.confidence",
            "between 0 and 1",
        ),
        (
            "width = 150.0",
            "width = \"wide\"",
            2,
            "plate.width",
            "invalid type",
        ),
    ];
    for (from, to, line, field, gist) in cases {
        let dir = case(&[("plate.toml", Some(&plate_with(from, to)))]);
        assert_invalid(&dir, "plate.toml", Some(line), Some(field), gist);
    }
}

#[test]
fn missing_required_key() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("length_unit = \"mm\"\n", "")),
    )]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(1),
        Some("plate.length_unit"),
        "needs the key `length_unit`",
    );
}

#[test]
fn toml_syntax_error() {
    let dir = case(&[(
        "plate.toml",
        Some(&plate_with("width = 150.0", "width = = 150.0")),
    )]);
    assert_invalid(&dir, "plate.toml", Some(2), Some("plate.width"), "");
}

#[test]
fn garbage_binary_plate_toml() {
    let dir = case(&[]);
    let garbage: Vec<u8> = (0..4096u32)
        .map(|i| (i.wrapping_mul(2654435761) >> 13) as u8)
        .collect();
    std::fs::write(dir.path().join("plate.toml"), garbage).unwrap();
    assert_invalid(&dir, "plate.toml", None, None, "");
    // valid UTF-8 that is not TOML
    std::fs::write(dir.path().join("plate.toml"), "\u{0}\u{7}ÿ[[[]]]=\n").unwrap();
    assert_invalid(&dir, "plate.toml", Some(1), None, "");
    std::fs::write(dir.path().join("plate.toml"), "").unwrap();
    assert_invalid(
        &dir,
        "plate.toml",
        None,
        Some("plate"),
        "the [plate] section is missing",
    );
}

// ---- profiles ---------------------------------------------------------------------------------

#[test]
fn profile_that_does_not_span_its_edge() {
    let plate = plate_with("temperature = 25.0", "profile = \"top.csv\"");
    let dir = case(&[
        ("plate.toml", Some(&plate)),
        ("top.csv", Some("position,temperature\n0,20\n100,30\n")),
    ]);
    assert_invalid(
        &dir,
        "top.csv",
        Some(3),
        Some("position"),
        "does not span the edge",
    );
    let dir = case(&[
        ("plate.toml", Some(&plate)),
        ("top.csv", Some("position,temperature\n0,20\n150,-280\n")),
    ]);
    assert_invalid(
        &dir,
        "top.csv",
        Some(3),
        Some("temperature"),
        "below absolute zero",
    );
    let dir = case(&[
        ("plate.toml", Some(&plate)),
        ("top.csv", Some("pos,temperature\n0,20\n150,30\n")),
    ]);
    assert_invalid(&dir, "top.csv", Some(1), None, "header");
}

#[test]
fn profile_file_missing() {
    let plate = plate_with("temperature = 25.0", "profile = \"top.csv\"");
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(13),
        Some("edges.top.profile"),
        "cannot read the profile file",
    );
}

// ---- files ------------------------------------------------------------------------------------

#[test]
fn missing_files() {
    // the message says what is missing and how to supply it, not a bare "No such file"
    for (name, fix) in [
        ("plate.toml", "--plate FILE"),
        ("sensors.csv", "--sensors FILE"),
    ] {
        let dir = case(&[(name, None)]);
        assert_invalid(&dir, name, None, None, "not found");
        assert_invalid(&dir, name, None, None, fix);
    }
    let (code, _, err) = check(Path::new("/nonexistent/edgetherm-case"), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("the case folder does not exist"), "{err}");
}

#[test]
fn usage_errors_exit_2() {
    let out = cargo_bin_cmd!("edgetherm").arg("check").output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let out = cargo_bin_cmd!("edgetherm").arg("--help").output().unwrap();
    assert_eq!(out.status.code(), Some(0));
}

#[test]
fn output_dir_may_not_be_the_case_dir() {
    use edgetherm::case::CaseFiles;
    use edgetherm::io::{check_output_dir, load_case};
    let dir = case(&[]);
    let case = load_case(&CaseFiles::in_dir(dir.path())).unwrap();
    let inputs = case.files.inputs();
    // an input is refused even with overwrite on
    let e = check_output_dir(dir.path(), &inputs, true).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let msg = e.to_string();
    assert!(
        msg.contains("sensors.csv") && msg.contains("never overwritten"),
        "{msg}"
    );
    assert!(check_output_dir(&dir.path().join("edgetherm-out"), &inputs, false).is_ok());
}

// ---- [bounds] -------------------------------------------------------------------------------

/// The base plate file with a `[bounds]` section appended; returns it and the line of the
/// section's first key.
fn plate_with_bounds(keys: &str) -> (String, usize) {
    let text = format!("{PLATE}\n[bounds]\n{keys}\n");
    (text, PLATE.lines().count() + 3)
}

#[test]
fn bounds_gradient_must_be_positive_and_finite() {
    for value in ["-1.0", "0.0", "nan", "inf"] {
        let (plate, line) = plate_with_bounds(&format!("max_gradient = {value}"));
        let dir = case(&[("plate.toml", Some(&plate))]);
        assert_invalid(
            &dir,
            "plate.toml",
            Some(line),
            Some("bounds.max_gradient"),
            "must be a positive number",
        );
    }
}

#[test]
fn bounds_unknown_key_and_temperature_limits() {
    let (plate, line) = plate_with_bounds("max_gradiant = 2.0");
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(line),
        Some("bounds.max_gradiant"),
        "unknown",
    );
    let (plate, line) =
        plate_with_bounds("max_gradient = 2.0\nmin_temperature = 80.0\nmax_temperature = 70.0");
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(line + 2),
        Some("bounds.max_temperature"),
        "above min_temperature",
    );
    let (plate, line) = plate_with_bounds("min_temperature = -300.0");
    let dir = case(&[("plate.toml", Some(&plate))]);
    assert_invalid(
        &dir,
        "plate.toml",
        Some(line),
        Some("bounds.min_temperature"),
        "below absolute zero",
    );
}

#[test]
fn max_gradient_option_must_be_positive() {
    let dir = case(&[]);
    let out_dir = tempfile::tempdir().unwrap();
    for value in ["0", "-2", "NaN"] {
        let out = cargo_bin_cmd!("edgetherm")
            .arg("estimate")
            .arg(dir.path())
            .arg("--out")
            .arg(out_dir.path().join("out"))
            .arg(format!("--max-gradient={value}"))
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "--max-gradient {value}: {err}");
        assert!(err.contains("--max-gradient"), "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }
}

//! `edgetherm design` as a user runs it: the outputs honour every constraint, `--add`,
//! `--evaluate` and `--against` work, runs are reproducible, and impossible constraints are
//! clear input errors (exit status 2).

use assert_cmd::Command;
use predicates::prelude::*;
use std::fs;
use std::path::{Path, PathBuf};

fn sample() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate")
}

fn design(case: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("design")
        .arg(case)
        .arg("--out")
        .arg(out)
        .args(extra)
        .assert()
}

/// A copy of the sample case with its `[design]` section replaced.
fn case_with_design(dir: &Path, design_section: &str) {
    let plate = fs::read_to_string(sample().join("plate.toml")).unwrap();
    let head = &plate[..plate.find("[design]").unwrap()];
    fs::write(dir.join("plate.toml"), format!("{head}{design_section}")).unwrap();
    fs::copy(sample().join("sensors.csv"), dir.join("sensors.csv")).unwrap();
}

/// (id, x, y) rows of a layout file, in mm.
fn rows(path: &Path) -> Vec<(String, f64, f64)> {
    let text = fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("sensor,x,y"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].to_string(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
            )
        })
        .collect()
}

/// The sample's constraints (mm): allowed y ≤ 16, keep-outs at x ∈ [53, 61] and
/// [107, 115], 4 mm from every face, 10 mm apart.
fn assert_sample_constraints(layout: &[(String, f64, f64)]) {
    for (id, x, y) in layout {
        assert!(*y <= 16.0 + 1e-9, "{id} above the allowed region");
        assert!(
            *x >= 4.0 - 1e-9 && *x <= 176.0 + 1e-9,
            "{id} too near an end"
        );
        assert!(
            *y >= 4.0 - 1e-9 && *y <= 24.0 + 1e-9,
            "{id} too near a face"
        );
        for (a, b) in [(53.0, 61.0), (107.0, 115.0)] {
            assert!(!(*x >= a && *x <= b), "{id} at x = {x} in a keep-out");
        }
    }
    for (i, a) in layout.iter().enumerate() {
        for b in &layout[i + 1..] {
            let d = (a.1 - b.1).hypot(a.2 - b.2);
            assert!(d >= 10.0 - 1e-9, "{} and {} only {d} mm apart", a.0, b.0);
        }
    }
}

#[test]
fn designs_a_layout_that_honours_every_constraint() {
    let out = tempfile::tempdir().unwrap();
    design(&sample(), out.path(), &["--count", "8"])
        .success()
        .stdout(predicate::str::contains("8 new sensors chosen"))
        .stdout(predicate::str::contains("resolution length"))
        .stdout(predicate::str::contains("estimates, not measurements"));
    let layout = rows(&out.path().join("layout.csv"));
    assert_eq!(layout.len(), 8);
    assert_sample_constraints(&layout);
    // design.json carries the same layout and the criteria
    let json: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.path().join("design.json")).unwrap()).unwrap();
    assert_eq!(json["criterion"], "edge");
    let jl = json["layout"].as_array().unwrap();
    assert_eq!(jl.len(), 8);
    for (j, r) in jl.iter().zip(&layout) {
        assert_eq!(j["sensor"], r.0.as_str());
        assert!((j["x"].as_f64().unwrap() - r.1).abs() < 1e-9);
        assert!((j["y"].as_f64().unwrap() - r.2).abs() < 1e-9);
    }
    for key in ["information", "edge_rms_sd", "worst_sd", "condition_number"] {
        assert!(json["score"][key].as_f64().unwrap() > 0.0, "{key}");
    }
    assert!(
        json["score"]["resolution_length"]["bottom"]
            .as_f64()
            .unwrap()
            > 0.0
    );
    // design.svg is well-formed and shows every sensor number
    let svg = fs::read_to_string(out.path().join("design.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(str::trim))
        .collect();
    for k in 1..=8 {
        assert!(
            texts.contains(&k.to_string().as_str()),
            "sensor {k} not numbered"
        );
    }
    // layout.csv is ready to use as sensors.csv: check accepts it in a case of its own
    let case = tempfile::tempdir().unwrap();
    fs::copy(sample().join("plate.toml"), case.path().join("plate.toml")).unwrap();
    fs::copy(
        out.path().join("layout.csv"),
        case.path().join("sensors.csv"),
    )
    .unwrap();
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("check")
        .arg(case.path())
        .assert()
        .success();
}

#[test]
fn same_inputs_give_the_same_files() {
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    for d in [&a, &b] {
        design(
            &sample(),
            d.path(),
            &["--count", "6", "--criterion", "worst", "--quiet"],
        )
        .success();
    }
    for name in ["layout.csv", "design.json", "design.svg"] {
        assert_eq!(
            fs::read(a.path().join(name)).unwrap(),
            fs::read(b.path().join(name)).unwrap(),
            "{name}"
        );
    }
}

#[test]
fn adds_to_the_existing_sensors_and_keeps_them() {
    let out = tempfile::tempdir().unwrap();
    let dir = tempfile::tempdir().unwrap();
    case_with_design(
        dir.path(),
        "[design]\nedge_distance = 3.0\nsensor_spacing = 8.0\ncandidate_spacing = 1.0\n\
         variation = 4.0\n",
    );
    design(dir.path(), out.path(), &["--add", "3", "--json"])
        .success()
        .stdout(predicate::str::contains("\"fixed\": true"));
    let layout = rows(&out.path().join("layout.csv"));
    assert_eq!(layout.len(), 13);
    let existing = rows(&sample().join("sensors.csv"));
    assert_eq!(&layout[..10], &existing[..]);
    for new in &layout[10..] {
        assert!(new.0.starts_with('D'));
        for old in &existing {
            assert!((new.1 - old.1).hypot(new.2 - old.2) >= 8.0 - 1e-9);
        }
        assert!(new.2 >= 3.0 - 1e-9);
    }
}

#[test]
fn evaluates_and_compares_layouts() {
    let out = tempfile::tempdir().unwrap();
    let designed = tempfile::tempdir().unwrap();
    design(&sample(), designed.path(), &["--count", "8", "--quiet"]).success();
    let a = designed.path().join("layout.csv");
    let output = Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("design")
        .arg(sample())
        .arg("--evaluate")
        .arg(&a)
        .arg("--against")
        .arg(sample().join("sensors.csv"))
        .arg("--out")
        .arg(out.path())
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert!(json["search"].is_null());
    assert_eq!(json["against"]["name"], "sensors.csv");
    let ours = json["score"]["edge_rms_sd"].as_f64().unwrap();
    let theirs = json["against"]["score"]["edge_rms_sd"].as_f64().unwrap();
    assert!(ours > 0.0 && theirs > 0.0);
    // the designed layout is optimal for its own criterion among these two
    assert!(ours <= theirs, "{ours} vs {theirs}");
    // the sample's drilled layout sits deeper than the design allows, so it is worse here;
    // it honours the keep-outs and spacing, so no constraint caution is raised for it
    let cautions = json["cautions"].to_string();
    assert!(!cautions.contains("breaks a constraint"), "{cautions}");
    // the scored layout is written back unchanged
    assert_eq!(
        fs::read_to_string(&a).unwrap(),
        fs::read_to_string(out.path().join("layout.csv")).unwrap()
    );
}

#[test]
fn impossible_constraints_are_input_errors() {
    let cases: Vec<(&str, Vec<&str>, &str)> = vec![
        (
            "[design]\nallowed = [{ x = [50, 60], y = [0, 10] }]\nkeep_out = [{ x = [40, 70], y = [0, 28] }]\nvariation = 4\n",
            vec!["--count", "2"],
            "no candidate position",
        ),
        (
            "[design]\nallowed = [{ x = [50, 60], y = [0, 10] }]\ncandidate_spacing = 2\nvariation = 4\nedge_distance = 4\n",
            vec!["--count", "40"],
            "only 24 candidate",
        ),
        (
            "[design]\nsensor_spacing = 100\ncandidate_spacing = 2\nvariation = 4\n",
            vec!["--count", "3"],
            "could place only 2 new sensors",
        ),
        (
            "[design]\nvariation = 4\nedge_distance = 14\n",
            vec!["--count", "3"],
            "no room",
        ),
        (
            "[design]\nvariation = 4\nallowed = [{ x = [0, 200], y = [0, 10] }]\n",
            vec!["--count", "3"],
            "outside the plate",
        ),
        (
            "[design]\nvariation = 4\nsmoothing = \"auto\"\n",
            vec!["--count", "3"],
            "one smoothing order",
        ),
        (
            "[design]\nvariation = 4\nspacing = 3\n",
            vec!["--count", "3"],
            "unknown key",
        ),
        (
            "[design]\nvariation = 4\n",
            vec!["--count", "0"],
            "at least one sensor",
        ),
    ];
    for (section, args, gist) in cases {
        let dir = tempfile::tempdir().unwrap();
        let out = tempfile::tempdir().unwrap();
        case_with_design(dir.path(), section);
        let output = Command::cargo_bin("edgetherm")
            .unwrap()
            .arg("design")
            .arg(dir.path())
            .arg("--out")
            .arg(out.path())
            .args(&args)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(2), "{section}: {err}");
        assert!(err.contains(gist), "{section}: {err}");
        assert!(!err.contains("panicked"), "{err}");
        assert!(!out.path().join("layout.csv").exists());
    }
}

#[test]
fn errors_name_the_file_line_and_key() {
    let dir = tempfile::tempdir().unwrap();
    let out = tempfile::tempdir().unwrap();
    case_with_design(
        dir.path(),
        "[design]\nvariation = 4\ncriterion = \"best\"\n",
    );
    let plate = fs::read_to_string(dir.path().join("plate.toml")).unwrap();
    let line = plate
        .lines()
        .position(|l| l.starts_with("criterion"))
        .unwrap()
        + 1;
    design(dir.path(), out.path(), &["--count", "3"])
        .code(2)
        .stderr(predicate::str::contains("plate.toml"))
        .stderr(predicate::str::contains(format!("line {line}")))
        .stderr(predicate::str::contains("design.criterion"));
}

#[test]
fn refuses_to_overwrite_an_input_and_needs_a_count() {
    let dir = tempfile::tempdir().unwrap();
    let out = tempfile::tempdir().unwrap();
    design(&sample(), out.path(), &["--count", "4", "--quiet"]).success();
    let layout = out.path().join("layout.csv");
    let before = fs::read_to_string(&layout).unwrap();
    // scoring a layout.csv into its own directory would replace it
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("design")
        .arg(sample())
        .arg("--evaluate")
        .arg(&layout)
        .arg("--out")
        .arg(out.path())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("inputs are never overwritten"));
    assert_eq!(fs::read_to_string(&layout).unwrap(), before);
    design(&sample(), dir.path(), &[])
        .code(2)
        .stderr(predicate::str::contains("--count"));
}

/// No `[design]` section: the design runs with its documented defaults and says which were
/// used, in the text, in `design.json` and on stdout's JSON.
#[test]
fn no_design_section_runs_on_defaults_and_says_which() {
    let dir = tempfile::tempdir().unwrap();
    let out = tempfile::tempdir().unwrap();
    case_with_design(dir.path(), "");
    let output = design(dir.path(), out.path(), &["--count", "4"])
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8_lossy(&output);
    assert!(text.contains("Defaults used"), "{text}");
    assert!(text.contains("no [design] section"), "{text}");
    assert!(text.contains("edges 1.4 mm"), "{text}");
    assert!(text.contains("10 times the reading noise"), "{text}");
    let json: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.path().join("design.json")).unwrap()).unwrap();
    assert_eq!(json["defaults_used"].as_array().unwrap().len(), 4, "{json}");
    assert_eq!(rows(&out.path().join("layout.csv")).len(), 4);
    // a stated variation replaces the default, and is not listed as one
    let out2 = tempfile::tempdir().unwrap();
    let output = design(
        dir.path(),
        out2.path(),
        &["--count", "4", "--variation", "4"],
    )
    .success()
    .get_output()
    .stdout
    .clone();
    let text = String::from_utf8_lossy(&output);
    assert!(!text.contains("times the reading noise"), "{text}");
    assert!(text.contains("by about 4.000 °C"), "{text}");
}

/// Without a reading noise (no `[noise]`, no `[design]`): an assumed noise of 0.5 K, said to
/// be assumed, and a variation of ten times it; `--variation` replaces the latter.
#[test]
fn no_noise_stated_runs_on_an_assumed_noise_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let out = tempfile::tempdir().unwrap();
    case_with_design(dir.path(), "");
    let plate = fs::read_to_string(dir.path().join("plate.toml")).unwrap();
    let plate = plate.replace("[noise]\nsigma = 0.15", "");
    assert!(!plate.contains("[noise]"), "{plate}");
    fs::write(dir.path().join("plate.toml"), plate).unwrap();
    design(dir.path(), out.path(), &["--count", "3"])
        .success()
        .stdout(predicate::str::contains(
            "reading noise 0.5 °C (nothing states it",
        ))
        .stdout(predicate::str::contains("hidden profile 5 °C (10 times"));
}

/// `--against` a file that is also called `layout.csv`: it is named by its path, so the two
/// layouts of the comparison do not carry the same label.
#[test]
fn against_a_file_of_the_same_name_is_named_by_its_path() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    for d in [&a, &b] {
        fs::create_dir(d).unwrap();
    }
    fs::copy(sample().join("sensors.csv"), a.join("layout.csv")).unwrap();
    fs::copy(sample().join("sensors.csv"), b.join("layout.csv")).unwrap();
    let out = dir.path().join("out");
    design(
        &sample(),
        &out,
        &[
            "--evaluate",
            a.join("layout.csv").to_str().unwrap(),
            "--against",
            b.join("layout.csv").to_str().unwrap(),
        ],
    )
    .success();
    let json: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("design.json")).unwrap()).unwrap();
    let name = json["against"]["name"].as_str().unwrap();
    assert_eq!(name, b.join("layout.csv").display().to_string());
}

/// The design states what `estimate` will give on its layout (issue 13: the promise and the
/// result must agree, or the difference be stated): on the cold-plate sample's own layout the
/// simulated `estimate` band for prior-like edges is within 30 % of the prediction, a rougher
/// edge gives a wider band, and `estimate` on the sample's readings (a rougher edge than the
/// prior) falls between the prediction and twice the rough-edge figure.
#[test]
fn design_states_what_estimate_will_give() {
    let out = tempfile::tempdir().unwrap();
    let layout = sample().join("sensors.csv");
    design(
        &sample(),
        out.path(),
        &["--evaluate", layout.to_str().unwrap()],
    )
    .success()
    .stdout(predicates::str::contains(
        "what `estimate` gives on readings from this layout",
    ));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("design.json")).unwrap())
            .unwrap();
    let check = &json["estimate_check"];
    let smooth = check["band_half_width"]["bottom"].as_f64().unwrap();
    let rough = check["band_half_width_rough"]["bottom"].as_f64().unwrap();
    let edges = json["score"]["edges"].as_array().unwrap();
    // the 95 % half-width: z = 1.959964 (the standard normal's 97.5 % point) times the sd
    let predicted = 1.959_964 * edges[0]["rms_sd"].as_f64().unwrap();
    eprintln!("predicted {predicted}, estimate smooth {smooth}, rough {rough}");
    assert!(
        (smooth / predicted - 1.0).abs() < 0.3,
        "{predicted} vs {smooth}"
    );
    assert!(rough > 2.0 * smooth, "{smooth} vs {rough}");
    // estimate on the sample's readings
    let est = tempfile::tempdir().unwrap();
    assert_cmd::cargo::cargo_bin_cmd!("edgetherm")
        .args([
            "estimate",
            sample().to_str().unwrap(),
            "--no-bounds",
            "--replicates",
            "50",
        ])
        .arg("--out")
        .arg(est.path())
        .assert()
        .success();
    let text = std::fs::read_to_string(est.path().join("profile.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (lo, hi) = (col("linear_lower"), col("linear_upper"));
    let w: Vec<f64> = lines
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            0.5 * (c[hi].parse::<f64>().unwrap() - c[lo].parse::<f64>().unwrap())
        })
        .collect();
    let rms = (w.iter().map(|v| v * v).sum::<f64>() / w.len() as f64).sqrt();
    eprintln!("estimate on the sample's readings: {rms}");
    assert!(
        rms > predicted && rms < 2.0 * rough,
        "{predicted} {rough} {rms}"
    );
}

/// Bounding boxes `(x0, y0, x1, y1)` of the polylines of `design.svg` stroked in `colour`.
fn polyline_boxes(doc: &roxmltree::Document<'_>, colour: &str) -> Vec<[f64; 4]> {
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline") && n.attribute("stroke") == Some(colour))
        .map(|n| {
            let mut b = [
                f64::INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NEG_INFINITY,
            ];
            for p in n.attribute("points").unwrap().split_whitespace() {
                let (x, y) = p.split_once(',').unwrap();
                let (x, y): (f64, f64) = (x.parse().unwrap(), y.parse().unwrap());
                b = [b[0].min(x), b[1].min(y), b[2].max(x), b[3].max(y)];
            }
            b
        })
        .collect()
}

/// The sensor numbers on the plate keep off the dashed minimum-distance line and the
/// hatching of the keep-outs (on the sample the chosen sensors sit on that line, so a
/// number to their right or left would lie on it); with `--against`, the legend tells the
/// two layouts apart.
#[test]
fn design_svg_numbers_keep_off_the_margin_line_and_the_hatching() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let other = dir.path().join("other");
    fs::create_dir(&other).unwrap();
    fs::copy(sample().join("sensors.csv"), other.join("layout.csv")).unwrap();
    design(
        &sample(),
        &out,
        &[
            "--count",
            "6",
            "--against",
            other.join("layout.csv").to_str().unwrap(),
        ],
    )
    .success();
    let svg = fs::read_to_string(out.join("design.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    // dashes of the margin line and hatching strokes: grey, one pixel
    let grey: Vec<[f64; 4]> = polyline_boxes(&doc, "#555555");
    assert!(
        grey.len() > 20,
        "margin dashes and hatching drawn: {}",
        grey.len()
    );
    let mut numbers = 0;
    for k in 1..=6 {
        let t = doc
            .descendants()
            .find(|n| n.has_tag_name("text") && n.text().unwrap_or("").trim() == k.to_string())
            .unwrap_or_else(|| panic!("sensor {k} numbered"));
        let r = t.prev_sibling_element().unwrap();
        assert!(r.has_tag_name("rect"), "number {k} sits on a box");
        let a = |s: &str| r.attribute(s).unwrap().parse::<f64>().unwrap();
        let b = [a("x"), a("y"), a("x") + a("width"), a("y") + a("height")];
        for g in &grey {
            let overlap = b[0] < g[2] && g[0] < b[2] && b[1] < g[3] && g[1] < b[3];
            assert!(!overlap, "number {k} at {b:?} over a grey line at {g:?}");
        }
        numbers += 1;
    }
    assert_eq!(numbers, 6);
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .map(str::trim)
        .collect();
    let path = other.join("layout.csv").display().to_string();
    assert!(texts.iter().any(|t| t.contains(&path)), "{texts:?}");
    assert!(texts.iter().any(|t| t.contains("this layout")), "{texts:?}");
}

//! Snapshots of what people and programs read (insta): the text summary of an estimate of
//! the cold-plate sample, and the shape of its `summary.json` (every key with the kind of its
//! value). A change to either shows up as a diff to review with `cargo insta review`; the
//! snapshots live in `tests/integration/snapshots/`. The numbers are the library's own on the
//! invented sample (not an external check); what the snapshot guards is that nothing a reader
//! relies on changes unnoticed.

use edgetherm::case::CaseFiles;
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::io::{load_case, load_readings};
use edgetherm::report::estimate::{summary_json, text_summary};
use serde_json::Value;

fn cold_plate_result() -> edgetherm::estimate::EstimateResult {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    let case = load_case(&CaseFiles::in_dir(dir)).unwrap();
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let options = EstimateOptions {
        replicates: Some(400),
        limit: Some(273.15 + 45.0),
        ..EstimateOptions::default()
    };
    estimate(&case, &readings, &options, None).unwrap()
}

/// The JSON with every value replaced by its kind, arrays by their first element's shape.
fn shape(v: &Value) -> Value {
    match v {
        Value::Null => Value::String("null".into()),
        Value::Bool(_) => Value::String("bool".into()),
        Value::Number(_) => Value::String("number".into()),
        Value::String(_) => Value::String("string".into()),
        Value::Array(a) => Value::Array(a.first().map(shape).into_iter().collect()),
        Value::Object(o) => Value::Object(o.iter().map(|(k, v)| (k.clone(), shape(v))).collect()),
    }
}

#[test]
fn text_summary_of_the_cold_plate() {
    let text = text_summary(&cold_plate_result());
    // the version line changes with every release: keep it out of the snapshot
    let body: String = text.lines().skip(1).map(|l| format!("{l}\n")).collect();
    insta::assert_snapshot!(body);
}

#[test]
fn summary_json_shape_of_the_cold_plate() {
    let json = summary_json(&cold_plate_result());
    insta::assert_snapshot!(serde_json::to_string_pretty(&shape(&json)).unwrap());
}

//! `edgetherm check` describes the forward model a case will use.

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::Path;

fn sample(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-measurements")
        .join(name)
}

#[test]
fn describes_the_basis_of_each_edge_and_the_sensor_depths() {
    // cold plate: insulated ends, so the hidden bottom uses cosines with the constant mode,
    // decaying as a sinh ratio toward the held top (the separation-of-variables table in
    // docs/method.md)
    Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("check")
        .arg(sample("cold-plate"))
        .assert()
        .success()
        .stdout(
            predicate::str::contains("Forward model")
                .and(predicate::str::contains(
                    "64 terms of cosines with the constant mode",
                ))
                .and(predicate::str::contains("sinh ratio"))
                .and(predicate::str::contains("depth below bottom"))
                .and(predicate::str::contains(
                    "the shallowest sensor is 7 mm deep",
                )),
        );
    // fin root: a strip held at both sides: sines, exponential decay
    let out = Command::cargo_bin("edgetherm")
        .unwrap()
        .arg("check")
        .arg(sample("fin-root"))
        .arg("--json")
        .output()
        .unwrap();
    assert!(out.status.success());
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let bottom = &json["model"]["edges"][0];
    assert_eq!(bottom["edge"], "bottom");
    assert_eq!(bottom["unknowns"], 48);
    assert!(bottom["basis"].as_str().unwrap().starts_with("sines"));
    assert!(bottom["decay"].as_str().unwrap().starts_with("exponential"));
    assert_eq!(json["model"]["unknowns"], 48);
}

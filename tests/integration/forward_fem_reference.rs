//! The series model against an independent finite-element solution.
//!
//! Reference: `scripts/fem_fixtures.py` solves Laplace's equation with scikit-fem (P4
//! triangles on a mesh graded toward corners and profile knots; P3 on the same mesh bounds
//! its error below 1e-6 of the boundary temperature range) and writes
//! `tests/fixtures/fem/<case>/expected.csv`. The cases cover insulated sides, a non-constant
//! fixed profile, two unknown edges given truth profiles, a plate in metres and kelvin, and
//! one in inches and degrees Fahrenheit. Every point lies at least 2 % of the width from
//! every edge; there the series must agree with the reference to 1e-4 of the range of the
//! boundary temperatures (issue bar).

use edgetherm::case::CaseFiles;
use edgetherm::geometry::{Edge, EdgeCondition};
use edgetherm::io::{load_case, read_truth_profiles};
use edgetherm::simulate::{exact_readings, truth_model};
use std::path::Path;

fn check_case(name: &str) -> f64 {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/fem")
        .join(name);
    let case = load_case(&CaseFiles::in_dir(&dir)).unwrap();
    let truths = if dir.join("truth.csv").exists() {
        read_truth_profiles(&dir.join("truth.csv"), &case).unwrap()
    } else {
        Vec::new()
    };
    let model = truth_model(&case.plate, &truths).unwrap();
    let points: Vec<_> = case.sensors.iter().map(|s| s.position).collect();
    let series = exact_readings(&model, &points).unwrap();

    // the range of the boundary data, kelvin
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for edge in Edge::ALL {
        if let Some(EdgeCondition::Fixed(p)) = model.plate().condition(edge) {
            for &t in p.temperatures() {
                lo = lo.min(t);
                hi = hi.max(t);
            }
        }
    }
    let range = hi - lo;
    assert!(range > 0.0);

    let text = std::fs::read_to_string(dir.join("expected.csv")).unwrap();
    let u = case.units;
    let mut worst: f64 = 0.0;
    for (line, (sensor, t_series)) in text.lines().skip(1).zip(case.sensors.iter().zip(&series)) {
        let (id, value) = line.split_once(',').unwrap();
        assert_eq!(id, sensor.id);
        let t_fem = u.temp_to_k(value.trim().parse::<f64>().unwrap());
        let rel = (t_series - t_fem).abs() / range;
        worst = worst.max(rel);
        assert!(
            rel < 1e-4,
            "{name} {id}: series {} vs FEM {} (relative {rel:.2e})",
            u.temp_from_k(*t_series),
            value
        );
    }
    eprintln!("{name}: worst difference {worst:.2e} of the boundary range");
    worst
}

#[test]
fn insulated_sides() {
    check_case("insulated-sides");
}

#[test]
fn fixed_profile() {
    check_case("fixed-profile");
}

#[test]
fn two_unknown_edges() {
    check_case("two-unknown");
}

#[test]
fn metres_and_kelvin() {
    check_case("si-units");
}

#[test]
fn inches_and_fahrenheit() {
    check_case("inch-fahrenheit");
}

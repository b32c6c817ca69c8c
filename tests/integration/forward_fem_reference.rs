//! The series model against an independent finite-element solution.
//!
//! Reference: `scripts/fem_fixtures.py` solves Laplace's equation with scikit-fem (P4
//! triangles on a mesh graded toward corners and profile knots; P3 on the same mesh bounds
//! its error below 1e-6 of the boundary temperature range) and writes
//! `tests/fixtures/fem/<case>/expected.csv`. The cases cover insulated sides, a non-constant
//! fixed profile, two unknown edges given truth profiles, a plate in metres and kelvin, and
//! one in inches and degrees Fahrenheit, and three plates with convective (Robin) edges: a
//! convective top over a hidden bottom, two convective edges meeting at a corner, and a
//! convective side next to the hidden edge (the script adds the Robin boundary form
//! `∫ (h/κ) T v ds`; its Robin machinery is verified against a slab and two separable closed
//! forms). Every point lies at least 2 % of the width from every edge; there the series must
//! agree with the reference to 1e-4 of the range of the boundary temperatures, fluid
//! temperatures included (issue bar). The heat flows through the convective edges
//! (`heat-flow.csv`, `h ∫ (T∞ − T) ds` from the finite-element solution) must agree to 1e-4.

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
    for edge in Edge::STRAIGHT {
        match model.plate().condition(edge) {
            Some(EdgeCondition::Fixed(p)) => {
                for &t in p.temperatures() {
                    lo = lo.min(t);
                    hi = hi.max(t);
                }
            }
            Some(EdgeCondition::Convective(c)) => {
                lo = lo.min(c.ambient_k);
                hi = hi.max(c.ambient_k);
            }
            _ => {}
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

    let flows = dir.join("heat-flow.csv");
    if flows.exists() {
        let text = std::fs::read_to_string(flows).unwrap();
        let mut checked = 0;
        for line in text.lines().skip(1) {
            let cells: Vec<&str> = line.split(',').collect();
            let edge = Edge::parse(cells[0]).unwrap();
            let fem: f64 = cells[1].trim().parse().unwrap();
            let series = model.heat_flow(edge, &[]).unwrap().unwrap();
            let rel = (series - fem).abs() / fem.abs();
            eprintln!("{name} {edge}: heat flow {series:.6} vs FEM {fem:.6} W/m ({rel:.1e})");
            assert!(rel < 1e-4, "{name} {edge}: {series} vs {fem} W/m");
            checked += 1;
        }
        assert!(checked > 0);
    }
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

#[test]
fn convective_top() {
    assert!(check_case("convective-top") < 1e-4);
}

#[test]
fn convective_corner() {
    assert!(check_case("convective-corner") < 1e-4);
}

#[test]
fn convective_side() {
    assert!(check_case("convective-side") < 1e-4);
}

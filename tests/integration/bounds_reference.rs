//! The strict-bound programs against an independent solver.
//!
//! Source: `tests/fixtures/bounds/reference.json`, written by `scripts/bounds_reference.py`
//! (the same programs stated with cvxpy and solved by ECOS, Domahidi, Chu & Boyd 2013; the
//! chi-square quantile from `scipy.stats.chi2.ppf`) on an invented small problem.
//!
//! Tolerance: both solvers stop at relative duality gaps of 1e-8 (Clarabel's default) and
//! 1e-10 (ECOS as called by the script) on objectives of about 300 K, so each optimum is
//! known to about 3e-6 K; 2e-5 K leaves a margin of about six over that. The gradient is
//! compared to 2e-5 relative for the same reason. The quantile: statrs against scipy, 1e-9
//! relative (both invert the regularised incomplete gamma function to machine accuracy).

use edgetherm::bounds::AdmissibleSet;
use edgetherm::bounds::dual::DualData;
use edgetherm::bounds::program::{Limits, Objective, Outcome, solve};
use edgetherm::geometry::Edge;
use serde_json::Value;
use statrs::distribution::{ChiSquared, ContinuousCDF};

fn fixture() -> Value {
    let text = std::fs::read_to_string("tests/fixtures/bounds/reference.json")
        .expect("fixture present (scripts/bounds_reference.py)");
    serde_json::from_str(&text).expect("valid JSON")
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

/// The fixture's set: one hidden edge given by its matrices.
fn fixture_set(f: &Value) -> AdmissibleSet {
    AdmissibleSet::from_matrix(
        Edge::Bottom,
        f["length_m"].as_f64().expect("length"),
        f["nodes"].as_u64().expect("nodes") as usize,
        floats(&f["h"]),
        floats(&f["offset"]),
        floats(&f["readings"]),
        floats(&f["sigma"]),
        floats(&f["rho_m"]),
    )
    .expect("a consistent set")
}

#[test]
fn programs_match_an_independent_solver() {
    let f = fixture();
    let set = fixture_set(&f);
    let m = set.sensor_count();
    let confidence = f["confidence"].as_f64().expect("confidence");
    let q = ChiSquared::new(m as f64)
        .expect("chi-square")
        .inverse_cdf(confidence);
    let q_ref = f["chi2_quantile"].as_f64().expect("quantile");
    assert!(
        ((q - q_ref) / q_ref).abs() < 1e-9,
        "chi-square quantile {q} vs scipy {q_ref}"
    );
    let mut checked = 0;
    for p in f["programs"].as_array().expect("programs") {
        let name = p["name"].as_str().expect("name");
        let node = p["node"].as_u64().expect("node") as usize;
        let objective = match p["objective"].as_str().expect("objective") {
            "max_node" => Objective::MaxNode(node),
            "min_node" => Objective::MinNode(node),
            "min_peak" => Objective::MinPeak,
            "min_gradient" => Objective::MinGradient,
            other => panic!("unknown objective {other}"),
        };
        let limits = Limits {
            gradient: p["gradient"].as_f64().unwrap_or(0.0),
            radius: q.sqrt(),
            t_min: p["t_min"].as_f64(),
            t_max: p["t_max"].as_f64(),
        };
        let got = solve(&set, limits, objective);
        match (p["value"].as_f64(), got) {
            (None, Outcome::Infeasible) => {}
            (Some(want), Outcome::Value(v)) => {
                let tol = if objective == Objective::MinGradient {
                    2e-5 * want.abs()
                } else {
                    2e-5
                };
                assert!(
                    (v - want).abs() <= tol,
                    "{name}: Clarabel {v} vs ECOS {want} (tolerance {tol})"
                );
            }
            (want, got) => panic!("{name}: expected {want:?}, got {got:?}"),
        }
        checked += 1;
    }
    assert_eq!(checked, 15, "every reference program was compared");
}

/// The fixture's node programs without temperature limits (those the dual solves):
/// `(name, node, gradient, maximise, ECOS optimum)`.
fn unlimited_node_programs(f: &Value) -> Vec<(String, usize, f64, bool, f64)> {
    let mut programs = Vec::new();
    for p in f["programs"].as_array().expect("programs") {
        let limited = p["t_min"].as_f64().is_some() || p["t_max"].as_f64().is_some();
        let (Some(want), false) = (p["value"].as_f64(), limited) else {
            continue;
        };
        let maximise = match p["objective"].as_str().expect("objective") {
            "max_node" => true,
            "min_node" => false,
            _ => continue,
        };
        programs.push((
            p["name"].as_str().expect("name").to_string(),
            p["node"].as_u64().expect("node") as usize,
            p["gradient"].as_f64().unwrap_or(0.0),
            maximise,
            want,
        ));
    }
    assert_eq!(programs.len(), 10, "the fixture's unlimited node programs");
    programs
}

/// The node bounds from the dual (`edgetherm::bounds::dual`) against the same ECOS optima.
/// Any dual point gives a valid bound, so the dual may only be above the optimum: by at
/// most its smoothing tolerance (1e-5 K per smoothed group, two groups) plus the optimum's
/// own uncertainty (3e-6 K, above); 5e-5 K covers both. Below the optimum by more than the
/// reference's uncertainty would be a false bound.
#[test]
fn dual_node_bounds_match_the_independent_solver() {
    let f = fixture();
    let set = fixture_set(&f);
    let radius = f["chi2_quantile"].as_f64().expect("quantile").sqrt();
    let dual = DualData::new(&set);
    for (name, node, gradient, maximise, want) in unlimited_node_programs(&f) {
        let sign = if maximise { 1.0 } else { -1.0 };
        let got = sign
            * dual
                .node_bound(node, maximise, gradient, radius)
                .unwrap_or_else(|| panic!("{name}: the dual search did not settle"));
        // an upper bound for max, a lower bound for min: how much looser than the optimum
        let looser = sign * (got - want);
        assert!(
            (-3e-6..=5e-5).contains(&looser),
            "{name}: dual {got} vs ECOS {want} (looser by {looser:e} K)"
        );
    }
}

/// The same ECOS optima against the dual followed only down to a coarse tolerance, as the
/// gradient study asks (`DualData::node_solution_within`): still never below the optimum
/// (a strict bound whatever the tolerance), and above it by at most the tolerance per
/// smoothed group (two groups) plus the optimum's own uncertainty.
#[test]
fn coarse_dual_node_bounds_stay_strict_and_within_their_tolerance() {
    let f = fixture();
    let set = fixture_set(&f);
    let radius = f["chi2_quantile"].as_f64().expect("quantile").sqrt();
    let dual = DualData::new(&set);
    for tolerance in [1e-3, 1e-2, 0.1] {
        for (name, node, gradient, maximise, want) in unlimited_node_programs(&f) {
            let sign = if maximise { 1.0 } else { -1.0 };
            let got = sign
                * dual
                    .node_solution_within(node, maximise, gradient, radius, tolerance)
                    .unwrap_or_else(|| panic!("{name}: the dual search did not settle"))
                    .bound;
            let looser = sign * (got - want);
            assert!(
                (-3e-6..=2.0 * tolerance + 5e-6).contains(&looser),
                "{name} at {tolerance} K: dual {got} vs ECOS {want} (looser by {looser:e} K)"
            );
        }
    }
}

/// The dual against the conic programs on a set with two hidden edges meeting at a corner
/// and a series tail (the conic solver is the independent method here: an interior-point
/// method on the node values, against a Newton search over the sensors' multipliers).
#[test]
fn dual_node_bounds_match_the_conic_programs_on_two_edges() {
    use edgetherm::geometry::{EdgeCondition, EdgeProfile, Plate, Point, Shape};
    let mut conditions: [Option<EdgeCondition>; 4] = [None, None, None, None];
    conditions[Edge::Bottom.index()] = Some(EdgeCondition::Unknown);
    conditions[Edge::Left.index()] = Some(EdgeCondition::Unknown);
    conditions[Edge::Top.index()] = Some(EdgeCondition::Fixed(EdgeProfile::constant(300.0)));
    conditions[Edge::Right.index()] = Some(EdgeCondition::Insulated);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.06,
            height_m: 0.04,
        },
        conditions,
        None,
    )
    .expect("plate");
    // invented layout and readings
    let sensors: Vec<Point> = [
        (0.01, 0.01),
        (0.03, 0.008),
        (0.05, 0.012),
        (0.008, 0.03),
        (0.035, 0.025),
        (0.02, 0.018),
    ]
    .iter()
    .map(|&(x, y)| Point::new(x, y))
    .collect();
    let readings = [312.0, 309.5, 306.0, 307.5, 304.0, 309.0];
    let sigmas = [0.3; 6];
    let set = AdmissibleSet::new(
        &plate,
        &sensors,
        &readings,
        &sigmas,
        edgetherm::bounds::Discretisation {
            nodes_per_edge: 31,
            terms: 256,
        },
    )
    .expect("set");
    let m = sensors.len() as f64;
    let radius = ChiSquared::new(m)
        .expect("chi-square")
        .inverse_cdf(0.95)
        .sqrt();
    let dual = DualData::new(&set);
    let limits = Limits {
        gradient: 600.0,
        radius,
        t_min: None,
        t_max: None,
    };
    for node in [0, 7, 15, 30, 31, 45, 61] {
        for (maximise, sign) in [(true, 1.0), (false, -1.0)] {
            let objective = if maximise {
                Objective::MaxNode(node)
            } else {
                Objective::MinNode(node)
            };
            let Outcome::Value(want) = solve(&set, limits, objective) else {
                panic!("node {node}: the conic program has no value");
            };
            let got = sign
                * dual
                    .node_bound(node, maximise, limits.gradient, radius)
                    .expect("the dual search settles");
            let looser = sign * (got - want);
            // Clarabel stops at a 1e-8 relative gap (3e-6 K here); see above for the dual
            assert!(
                (-3e-6..=5e-5).contains(&looser),
                "node {node} max {maximise}: dual {got} vs conic {want} ({looser:e} K)"
            );
        }
    }
}

/// One dual point bounds every node of its edge (`DualData::node_solution`): each of those
/// bounds must hold against the node's own optimum (the conic program), equal the node's
/// bound at the node itself, and be no looser than the Lipschitz tent `U_j + G |s − s_j|`
/// (triangle inequality on the partial sums; docs/method.md §4).
#[test]
fn one_dual_point_bounds_its_whole_edge() {
    let f = fixture();
    let nodes = f["nodes"].as_u64().expect("nodes") as usize;
    let length = f["length_m"].as_f64().expect("length");
    let set = fixture_set(&f);
    let radius = f["chi2_quantile"].as_f64().expect("quantile").sqrt();
    let dual = DualData::new(&set);
    let gradient = 800.0;
    let h = length / (nodes - 1) as f64;
    let limits = Limits {
        gradient,
        radius,
        t_min: None,
        t_max: None,
    };
    let mut tighter_than_tent = 0;
    for (j, maximise) in [(6, true), (12, false), (20, true)] {
        let sign = if maximise { 1.0 } else { -1.0 };
        let sol = dual
            .node_solution(j, maximise, gradient, radius)
            .expect("the dual search settles");
        assert_eq!(sol.first, 0);
        assert_eq!(sol.edge_bounds.len(), nodes);
        assert!((sol.edge_bounds[j] - sol.bound).abs() < 1e-9);
        for k in 0..nodes {
            let objective = if maximise {
                Objective::MaxNode(k)
            } else {
                Objective::MinNode(k)
            };
            let Outcome::Value(want) = solve(&set, limits, objective) else {
                panic!("node {k}: no value");
            };
            let got = sign * sol.edge_bounds[k];
            let looser = sign * (got - want);
            assert!(
                looser >= -3e-6,
                "node {k} from node {j}: {got} is not a bound of the optimum {want}"
            );
            let tent = sol.bound + gradient * h * k.abs_diff(j) as f64;
            assert!(
                sol.edge_bounds[k] <= tent + 1e-9,
                "node {k}: looser than the tent"
            );
            if sol.edge_bounds[k] < tent - 1e-3 {
                tighter_than_tent += 1;
            }
        }
    }
    // the point of the construction: it beats the tent somewhere
    assert!(tighter_than_tent > 0);
}

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

#[test]
fn programs_match_an_independent_solver() {
    let f = fixture();
    let nodes = f["nodes"].as_u64().expect("nodes") as usize;
    let set = AdmissibleSet::from_matrix(
        Edge::Bottom,
        f["length_m"].as_f64().expect("length"),
        nodes,
        floats(&f["h"]),
        floats(&f["offset"]),
        floats(&f["readings"]),
        floats(&f["sigma"]),
        floats(&f["rho_m"]),
    )
    .expect("a consistent set");
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

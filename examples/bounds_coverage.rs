//! Coverage of the strict peak interval on the cold-plate layout for three invented truths
//! (development aid; the CI version with the narrow spot is `tests/integration/bounds_checks.rs`).
//!
//! `cargo run --release --example bounds_coverage -- [DRAWS]` (default 100)
//!
//! Each truth obeys the stated gradient limit; each draw adds seeded Gaussian noise
//! (σ = 0.15 K) to the exact readings, and the strict interval of the hottest temperature
//! (95 %, 121 nodes per edge) is checked against the true peak. Prints one line per truth.

use edgetherm::bounds::Discretisation;
use edgetherm::bounds::{AdmissibleSet, BoundSpec, BoundsOptions, BoundsOutcome, bounds_under};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use edgetherm::simulate::{add_noise, exact_readings, truth_model};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let draws: usize = std::env::args().nth(1).map_or(Ok(100), |s| s.parse())?;
    let mut conditions: [Option<EdgeCondition>; 4] = [None, None, None, None];
    conditions[Edge::Bottom.index()] = Some(EdgeCondition::Unknown);
    conditions[Edge::Top.index()] = Some(EdgeCondition::Fixed(EdgeProfile::constant(297.15)));
    conditions[Edge::Left.index()] = Some(EdgeCondition::Insulated);
    conditions[Edge::Right.index()] = Some(EdgeCondition::Insulated);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.18,
            height_m: 0.028,
        },
        conditions,
        None,
    )?;
    let xs = [
        12.0, 30.0, 48.0, 66.0, 84.0, 102.0, 120.0, 138.0, 156.0, 172.0,
    ];
    let sensors: Vec<Point> = xs
        .iter()
        .enumerate()
        .map(|(k, &x)| Point::new(x * 1e-3, if k % 2 == 0 { 0.007 } else { 0.009 }))
        .collect();
    let positions: Vec<f64> = (0..=720).map(|k| k as f64 * 0.18 / 720.0).collect();
    type Truth = (&'static str, f64, Box<dyn Fn(f64) -> f64>);
    let truths: Vec<Truth> = vec![
        (
            "smooth edge",
            200.0,
            Box::new(|s: f64| 307.0 + 2.0 * (2.0 * std::f64::consts::PI * s / 0.18).sin()),
        ),
        (
            "broad spot (FWHM 33 mm)",
            500.0,
            Box::new(|s: f64| 307.0 + 8.0 * (-((s - 0.09) / 0.02).powi(2)).exp()),
        ),
        (
            "narrow spot (10 mm base)",
            1500.0,
            Box::new(|s: f64| {
                307.0
                    + 3.0 * (-((s - 0.06) / 0.02).powi(2)).exp()
                    + (6.0 * (1.0 - (s - 0.093).abs() / 0.005)).max(0.0)
            }),
        ),
    ];
    let sigma = 0.15;
    for (name, g, f) in &truths {
        let temps: Vec<f64> = positions.iter().map(|&s| f(s)).collect();
        let steepest = positions
            .windows(2)
            .zip(temps.windows(2))
            .map(|(s, t)| ((t[1] - t[0]) / (s[1] - s[0])).abs())
            .fold(0.0, f64::max);
        assert!(
            steepest <= *g,
            "{name}: truth steeper than the stated limit"
        );
        let peak = temps.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let profile = EdgeProfile::piecewise_linear(positions.clone(), temps)?;
        let truth = truth_model(&plate, &[(Edge::Bottom, profile)])?;
        let exact = exact_readings(&truth, &sensors)?;
        let base = AdmissibleSet::new(
            &plate,
            &sensors,
            &exact,
            &[sigma; 10],
            Discretisation {
                nodes_per_edge: 121,
                terms: 512,
            },
        )?;
        let spec = BoundSpec {
            gradient_k_per_m: *g,
            confidence: 0.95,
            min_temperature_k: None,
            max_temperature_k: None,
        };
        let options = BoundsOptions {
            envelope_points: 25,
            peak_tolerance_k: 0.1,
            max_rounds: 10,
            ..BoundsOptions::default()
        };
        let (mut covered, mut width, mut upper_excess) = (0, 0.0, 0.0);
        for k in 0..draws {
            let d = add_noise(&exact, sigma, 1000 + k as u64)?;
            let set = base.with_readings(&d)?;
            if let BoundsOutcome::Bounded { hottest_k, .. } =
                bounds_under(&set, &spec, &[], &options)?
            {
                if hottest_k[0] <= peak && peak <= hottest_k[1] {
                    covered += 1;
                }
                width += hottest_k[1] - hottest_k[0];
                upper_excess += hottest_k[1] - peak;
            }
        }
        println!(
            "{name}: G = {g} K/m (truth's steepest {steepest:.0}), true peak {peak:.2} K: held in \
             {covered}/{draws}, mean width {:.2} K, upper bound {:.2} K above the peak on average",
            width / draws as f64,
            upper_excess / draws as f64
        );
    }
    Ok(())
}

//! The design's predictions against measurement by simulation, on the sample cold plate.
//!
//! 1. The predicted posterior standard deviation along the edge matches the spread of the
//!    error of `simulate` + `estimate` with the strength fixed at the prior's equivalent
//!    (λ = 1/τ², see `src/design/prior.rs`), over seeded draws of profiles from the prior and
//!    of the noise. For a linear-Gaussian model the error of the posterior mean has exactly
//!    the posterior covariance (Wahba 1983, J. R. Statist. Soc. B 45:133–150; for a fixed
//!    strength the estimate is that posterior mean, with a flat prior on the level where the
//!    design's is broad but proper, a difference far below the sampling error here).
//! 2. The designed 8-sensor layout gives a smaller mean reconstruction error than a uniform
//!    grid of 8 and than the median of 50 random feasible layouts, measured by Monte Carlo
//!    over profiles drawn from the prior (common random numbers: the same truths and noise
//!    for every layout).
//!
//! Run with `cargo test --test integration design_checks:: -- --nocapture` to see the figures.

use edgetherm::case::{Case, CaseFiles, Sensor, Smoothing, StrengthRule};
use edgetherm::design::{DesignSpace, LayoutSensor, prior_draw, random_layout, uniform_layout};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeProfile, Point};
use edgetherm::io::case::load_design_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

fn sample() -> Case {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    load_design_case(&CaseFiles::in_dir(dir)).unwrap()
}

fn designed(space: &DesignSpace, k: usize) -> Vec<LayoutSensor> {
    space.design(&[], k, "--count", &|_, _| {}).unwrap().0
}

fn as_sensors(layout: &[LayoutSensor]) -> Vec<Sensor> {
    layout
        .iter()
        .enumerate()
        .map(|(i, s)| Sensor {
            id: s.id.clone(),
            position: s.position,
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect()
}

/// A level near room temperature, so that drawn profiles are valid absolute temperatures.
const LEVEL_K: f64 = 300.0;

#[test]
fn predicted_spread_matches_simulate_and_estimate_with_fixed_strength() {
    let mut case = sample();
    let space = DesignSpace::new(&case, None, None).unwrap();
    let layout = designed(&space, 8);
    let score = space.evaluate(&layout).unwrap();
    case.sensors = as_sensors(&layout);
    case.fit.smoothing = Smoothing::Curvature;
    let lambda = space.prior().equivalent_strength;
    let options = EstimateOptions {
        replicates: Some(1),
        keep_all: true,
        grid: (3, 3),
        strength: Some(StrengthRule::Fixed(lambda)),
        ..EstimateOptions::default()
    };
    let sigma = space.noise_k();
    let model = space.model();
    let len = 0.18;
    // truth profiles sampled every 0.25 mm: the prior's modes (up to 64) are smooth on that
    // scale, so the piecewise-linear truth is the drawn profile to well below the noise
    let fine: Vec<f64> = (0..=720).map(|i| len * i as f64 / 720.0).collect();
    let fine_map = model.edge_profile_map(Edge::Bottom, &fine);
    let draws = 400;
    let mut rng = ChaCha8Rng::seed_from_u64(2026);
    let mut per_draw = Vec::with_capacity(draws);
    let mut positions = Vec::new();
    let mut sq_at = Vec::new();
    for b in 0..draws {
        let c = prior_draw(&space, LEVEL_K, || StandardNormal.sample(&mut rng));
        let truth: Vec<f64> = (&fine_map.matrix * &c + &fine_map.offset)
            .iter()
            .copied()
            .collect();
        let profile = EdgeProfile::piecewise_linear(fine.clone(), truth).unwrap();
        let tm = truth_model(&case.plate, &[(Edge::Bottom, profile.clone())]).unwrap();
        let pts: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
        let readings: Vec<Option<f64>> = add_noise(
            &exact_readings(&tm, &pts).unwrap(),
            sigma,
            10_000 + b as u64,
        )
        .unwrap()
        .into_iter()
        .map(Some)
        .collect();
        let r = estimate(&case, &readings, &options, None).unwrap();
        let e = &r.edges[0];
        if positions.is_empty() {
            positions = e.positions.clone();
            sq_at = vec![0.0; positions.len()];
        }
        let mut mse = 0.0;
        for (k, (&s, &est)) in e.positions.iter().zip(&e.estimate).enumerate() {
            let err = est - profile.value(s);
            mse += err * err;
            sq_at[k] += err * err;
        }
        per_draw.push(mse / e.positions.len() as f64);
    }
    let n = draws as f64;
    let mean = per_draw.iter().sum::<f64>() / n;
    let sd = (per_draw.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let se = sd / n.sqrt();
    let predicted = score.edge_mean_variance;
    println!(
        "predicted RMS posterior sd along the edge {:.4} K; measured RMS error of simulate + \
         estimate (fixed strength {lambda:.4e}) over {draws} draws {:.4} K; mean squared \
         error {mean:.5} ± {se:.5} (1 s.e.) against {predicted:.5} K²",
        predicted.sqrt(),
        mean.sqrt()
    );
    assert!(
        (mean - predicted).abs() < 3.0 * se,
        "mean squared error {mean} vs predicted {predicted} (s.e. {se})"
    );
    // pointwise: at the worst point and at mid-edge the measured spread agrees too (each a
    // chi-square with `draws` degrees of freedom: relative s.e. of a variance sqrt(2/n))
    let edge = &score.edges[0];
    for target in [score.worst_at.1, 0.09] {
        let k = (0..positions.len())
            .min_by(|&a, &b| {
                (positions[a] - target)
                    .abs()
                    .total_cmp(&(positions[b] - target).abs())
            })
            .unwrap();
        let j = (0..edge.positions.len())
            .min_by(|&a, &b| {
                (edge.positions[a] - target)
                    .abs()
                    .total_cmp(&(edge.positions[b] - target).abs())
            })
            .unwrap();
        let measured = sq_at[k] / n;
        let predicted = edge.sd[j].powi(2);
        let rel = (measured / predicted - 1.0).abs();
        println!(
            "at x = {:.1} mm: predicted sd {:.4} K, measured {:.4} K",
            1e3 * positions[k],
            predicted.sqrt(),
            measured.sqrt()
        );
        assert!(
            rel < 4.0 * (2.0 / n).sqrt(),
            "at {}: {measured} vs {predicted}",
            positions[k]
        );
    }
}

/// Mean squared reconstruction error along the edge of the posterior-mean estimate with the
/// design prior, for each truth and noise draw, averaged: Monte Carlo, not the formula.
fn monte_carlo_error(
    space: &DesignSpace,
    layout: &[LayoutSensor],
    truths: &[DVector<f64>],
    noise: &[Vec<f64>],
) -> f64 {
    let model = space.model();
    let pts: Vec<Point> = layout.iter().map(|s| s.position).collect();
    let map = model.sensor_map(&pts);
    let sigma = space.noise_k();
    let prior = space.prior();
    let h = &map.matrix / sigma;
    let mut precision = DMatrix::from_diagonal(&prior.variances.map(|v| 1.0 / v));
    precision += h.transpose() * &h;
    let chol = precision.cholesky().unwrap();
    let mean0 = prior_draw(space, LEVEL_K, || 0.0);
    let prior_term = mean0.component_div(&prior.variances);
    let prof = &space.edge_maps()[0].matrix;
    let mut total = 0.0;
    for (c, e) in truths.iter().zip(noise) {
        let d = &map.matrix * c
            + DVector::from_iterator(pts.len(), e.iter().take(pts.len()).map(|v| v * sigma));
        let rhs = &prior_term + h.transpose() * (d / sigma);
        let c_hat = chol.solve(&rhs);
        let err = prof * (c_hat - c);
        total += err.norm_squared() / err.len() as f64;
    }
    total / truths.len() as f64
}

#[test]
fn designed_layout_beats_a_uniform_grid_and_random_layouts() {
    let case = sample();
    let space = DesignSpace::new(&case, None, None).unwrap();
    let k = 8;
    let ours = designed(&space, k);
    let cands = space.candidates();
    let c = space.constraints();
    let to_layout = |idx: Vec<usize>| -> Vec<LayoutSensor> {
        idx.iter()
            .map(|&i| LayoutSensor {
                id: format!("C{i}"),
                position: cands[i],
                sigma_k: None,
                fixed: false,
            })
            .collect()
    };
    let grid = to_layout(uniform_layout(c, cands, k).unwrap());
    let randoms: Vec<Vec<LayoutSensor>> = (0..50)
        .map(|s| to_layout(random_layout(c, cands, k, 100 + s).unwrap()))
        .collect();
    for l in std::iter::once(&ours)
        .chain(std::iter::once(&grid))
        .chain(&randoms)
    {
        assert!(space.violations(l).is_empty(), "{:?}", space.violations(l));
    }
    let draws = 400;
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let truths: Vec<DVector<f64>> = (0..draws)
        .map(|_| prior_draw(&space, LEVEL_K, || StandardNormal.sample(&mut rng)))
        .collect();
    let noise: Vec<Vec<f64>> = (0..draws)
        .map(|_| (0..k).map(|_| StandardNormal.sample(&mut rng)).collect())
        .collect();
    let e_ours = monte_carlo_error(&space, &ours, &truths, &noise);
    let e_grid = monte_carlo_error(&space, &grid, &truths, &noise);
    let mut e_rand: Vec<f64> = randoms
        .iter()
        .map(|l| monte_carlo_error(&space, l, &truths, &noise))
        .collect();
    e_rand.sort_by(f64::total_cmp);
    let median = 0.5 * (e_rand[24] + e_rand[25]);
    let rms = |v: f64| v.sqrt();
    println!(
        "RMS reconstruction error along the bottom edge over {draws} prior draws: designed \
         {:.4} K, uniform grid {:.4} K, random layouts median {:.4} K (best {:.4}, worst {:.4})",
        rms(e_ours),
        rms(e_grid),
        rms(median),
        rms(e_rand[0]),
        rms(e_rand[49])
    );
    println!(
        "uniform grid: {:?}",
        grid.iter()
            .map(|s| (1e3 * s.position.x, 1e3 * s.position.y))
            .collect::<Vec<_>>()
    );
    // the Monte Carlo agrees with the formula for the designed layout (s.e. about 5 %)
    let predicted = space.evaluate(&ours).unwrap().edge_mean_variance;
    println!("designed: predicted {:.4} K", predicted.sqrt());
    assert!(
        (e_ours / predicted - 1.0).abs() < 0.15,
        "{e_ours} vs {predicted}"
    );
    assert!(e_ours < e_grid, "designed {e_ours} vs grid {e_grid}");
    assert!(
        e_ours < median,
        "designed {e_ours} vs random median {median}"
    );
}

/// The same comparison through the whole tool: `simulate` + `estimate` with its default
/// strength rule (evidence) and smoothing (auto), not the design's fixed prior. Fewer draws
/// (each is a full estimate); the same truths and noise seeds for both layouts.
#[test]
fn designed_layout_beats_the_uniform_grid_through_estimate_with_its_default_rule() {
    let case = sample();
    let space = DesignSpace::new(&case, None, None).unwrap();
    let k = 8;
    let ours = designed(&space, k);
    let cands = space.candidates();
    let grid: Vec<LayoutSensor> = uniform_layout(space.constraints(), cands, k)
        .unwrap()
        .iter()
        .map(|&i| LayoutSensor {
            id: format!("C{i}"),
            position: cands[i],
            sigma_k: None,
            fixed: false,
        })
        .collect();
    let options = EstimateOptions {
        replicates: Some(1),
        keep_all: true,
        grid: (3, 3),
        ..EstimateOptions::default()
    };
    let len = 0.18;
    let fine: Vec<f64> = (0..=720).map(|i| len * i as f64 / 720.0).collect();
    let fine_map = space.model().edge_profile_map(Edge::Bottom, &fine);
    let draws = 60;
    let mut rng = ChaCha8Rng::seed_from_u64(99);
    let truths: Vec<EdgeProfile> = (0..draws)
        .map(|_| {
            let c = prior_draw(&space, LEVEL_K, || StandardNormal.sample(&mut rng));
            let t: Vec<f64> = (&fine_map.matrix * &c + &fine_map.offset)
                .iter()
                .copied()
                .collect();
            EdgeProfile::piecewise_linear(fine.clone(), t).unwrap()
        })
        .collect();
    let mse = |layout: &[LayoutSensor]| -> f64 {
        let mut c = case.clone();
        c.sensors = as_sensors(layout);
        let pts: Vec<Point> = c.sensors.iter().map(|s| s.position).collect();
        let mut total = 0.0;
        for (b, truth) in truths.iter().enumerate() {
            let tm = truth_model(&c.plate, &[(Edge::Bottom, truth.clone())]).unwrap();
            let readings: Vec<Option<f64>> = add_noise(
                &exact_readings(&tm, &pts).unwrap(),
                space.noise_k(),
                500 + b as u64,
            )
            .unwrap()
            .into_iter()
            .map(Some)
            .collect();
            let r = estimate(&c, &readings, &options, None).unwrap();
            let e = &r.edges[0];
            total += e
                .positions
                .iter()
                .zip(&e.estimate)
                .map(|(&s, &v)| (v - truth.value(s)).powi(2))
                .sum::<f64>()
                / e.positions.len() as f64;
        }
        total / truths.len() as f64
    };
    let (e_ours, e_grid) = (mse(&ours), mse(&grid));
    println!(
        "through estimate (evidence, auto smoothing), {draws} prior draws: RMS error designed \
         {:.4} K, uniform grid {:.4} K",
        e_ours.sqrt(),
        e_grid.sqrt()
    );
    assert!(e_ours < e_grid, "designed {e_ours} vs grid {e_grid}");
}

/// A plate file with no `[design]` section: every setting takes its default
/// (`edgetherm::design::apply_defaults`), the defaults are reported, and the designed layout
/// still beats a uniform grid of the same size, both by the predicted criterion and by the
/// Monte Carlo error over prior draws (common random numbers, as above). The candidate grid
/// is coarsened to 2 mm to keep the test short; the CLI uses the default grid.
#[test]
fn without_a_design_section_the_defaults_still_beat_a_uniform_grid() {
    let mut case = sample();
    case.design = edgetherm::case::DesignSettings::default();
    let used = edgetherm::design::apply_defaults(&mut case, None).unwrap();
    let text = used.join("\n");
    for what in [
        "no [design] section",
        "edges 1.4 mm",
        "sensors 2.8 mm",
        "1.5 °C",
    ] {
        assert!(
            text.contains(what),
            "{what} missing from the defaults: {text}"
        );
    }
    assert!((case.design.edge_distance_m - 0.0014).abs() < 1e-12);
    assert!((case.design.sensor_spacing_m - 0.0028).abs() < 1e-12);
    assert_eq!(case.design.variation_k, Some(1.5));
    case.design.candidates = edgetherm::case::CandidateSource::Grid(Some(0.002));
    let space = DesignSpace::new(&case, None, None).unwrap();
    let k = 8;
    let ours = designed(&space, k);
    let cands = space.candidates();
    let grid: Vec<LayoutSensor> = uniform_layout(space.constraints(), cands, k)
        .unwrap()
        .iter()
        .map(|&i| LayoutSensor {
            id: format!("C{i}"),
            position: cands[i],
            sigma_k: None,
            fixed: false,
        })
        .collect();
    assert!(space.violations(&ours).is_empty());
    assert!(space.violations(&grid).is_empty());
    let (p_ours, p_grid) = (
        space.evaluate(&ours).unwrap().edge_mean_variance,
        space.evaluate(&grid).unwrap().edge_mean_variance,
    );
    let draws = 200;
    let mut rng = ChaCha8Rng::seed_from_u64(13);
    let truths: Vec<DVector<f64>> = (0..draws)
        .map(|_| prior_draw(&space, LEVEL_K, || StandardNormal.sample(&mut rng)))
        .collect();
    let noise: Vec<Vec<f64>> = (0..draws)
        .map(|_| (0..k).map(|_| StandardNormal.sample(&mut rng)).collect())
        .collect();
    let e_ours = monte_carlo_error(&space, &ours, &truths, &noise);
    let e_grid = monte_carlo_error(&space, &grid, &truths, &noise);
    println!(
        "no [design] section: predicted RMS sd designed {:.4} K, grid {:.4} K; Monte Carlo \
         RMS error designed {:.4} K, grid {:.4} K",
        p_ours.sqrt(),
        p_grid.sqrt(),
        e_ours.sqrt(),
        e_grid.sqrt()
    );
    assert!(
        p_ours < p_grid,
        "predicted: designed {p_ours} vs grid {p_grid}"
    );
    assert!(
        e_ours < e_grid,
        "Monte Carlo: designed {e_ours} vs grid {e_grid}"
    );
}

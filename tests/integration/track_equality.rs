//! A row of `track` equals `estimate` on that row with the same options: the point estimate's
//! hottest point, the linear (Gaussian posterior) band along the edge and the hottest
//! interval built from it. `estimate` runs with `keep_all` (no fault search): in `track` the
//! leave-outs come from the sensor-health checks over time instead (docs/track.md).
//! These are internal-consistency checks (two code paths, one model); the model itself is
//! checked against external references in `forward_*` and `tikhonov_reference`.

use edgetherm::case::{Case, CaseFiles, Smoothing, StrengthRule};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::EdgeProfile;
use edgetherm::inverse::{Strength, StrengthMethod};
use edgetherm::io::load_case;
use edgetherm::noise::NoiseSpec;
use edgetherm::track::engine::{RowEstimator, RowFit, RowStrength};
use edgetherm::track::synthetic::{Spec, write_log};

fn busbar() -> Case {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp");
    load_case(&CaseFiles::in_dir(dir)).unwrap()
}

/// Rows of an invented log (kelvin readings per sensor).
fn rows(case: &Case, n: usize, seed: u64) -> Vec<Vec<Option<f64>>> {
    let s: Vec<f64> = (0..=120).map(|i| f64::from(i) * 0.001).collect();
    let base = EdgeProfile::piecewise_linear(s.clone(), vec![273.15 + 50.0; s.len()]).unwrap();
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - 0.07) / 0.015f64).powi(2)).exp())
        .collect();
    let amp = |r: usize| 5.0 * r as f64;
    let spec = Spec {
        rows: n,
        step_s: 1.0,
        start: None,
        sigma: 0.2,
        seed,
        base,
        bump: EdgeProfile::piecewise_linear(s, bump).unwrap(),
        amplitude: &amp,
        faults: vec![],
        decimals: 3,
    };
    let mut out = Vec::new();
    write_log(case, &spec, &mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            l.split(',')
                .skip(1)
                .map(|v| Some(case.units.temp_to_k(v.parse::<f64>().unwrap())))
                .collect()
        })
        .collect()
}

fn compare(case: &Case, strength_rule: Option<StrengthRule>, row_strength: RowStrength) {
    let mut est = RowEstimator::new(case, 200, 1, 1).unwrap();
    for (k, readings) in rows(case, 6, 5).iter().enumerate() {
        let used: Vec<usize> = (0..readings.len()).collect();
        let opts = EstimateOptions {
            keep_all: true,
            replicates: Some(20),
            strength: strength_rule,
            grid: (3, 3),
            ..EstimateOptions::default()
        };
        let r = estimate(case, readings, &opts, None).unwrap();
        let mut fit = RowFit::default();
        est.fit_row(readings, &used, row_strength, None, &mut fit)
            .unwrap();
        let e = &r.edges[0];
        // same smoothing order and strength
        assert_eq!(
            Smoothing::of_order(fit.order).unwrap(),
            r.strength.smoothing,
            "row {k}"
        );
        // track states λ against unit weights when σ is estimated; estimate against σ̂
        let lambda = fit.lambda / fit.sigma_scale.map_or(1.0, |s| s * s);
        let rel = (lambda - r.strength.value).abs() / r.strength.value;
        assert!(rel < 1e-6, "row {k}: λ {lambda} vs {}", r.strength.value);
        // hottest point
        assert!(
            (fit.temperature - r.hottest.temperature).abs() < 1e-6,
            "row {k}: {} vs {}",
            fit.temperature,
            r.hottest.temperature
        );
        assert!((fit.position - r.hottest.position).abs() < 1e-6, "row {k}");
        // linear band along the edge
        let band = est.profile_band(readings, &used, row_strength).unwrap();
        for (j, (m, lo, hi)) in band.iter().enumerate() {
            assert!((m - e.estimate[j]).abs() < 1e-6, "row {k} point {j}");
            assert!((lo - e.linear_lower[j]).abs() < 1e-6, "row {k} point {j}");
            assert!((hi - e.linear_upper[j]).abs() < 1e-6, "row {k} point {j}");
        }
        // hottest interval from the linear band: [max L, max U] (stride 1 scans every point)
        let max_l = e.linear_lower.iter().copied().fold(f64::MIN, f64::max);
        let max_u = e.linear_upper.iter().copied().fold(f64::MIN, f64::max);
        assert!((fit.temperature_interval[0] - max_l.min(fit.temperature)).abs() < 1e-6);
        assert!((fit.temperature_interval[1] - max_u.max(fit.temperature)).abs() < 1e-6);
    }
}

#[test]
fn per_row_rule_and_auto_smoothing_match_estimate() {
    let case = busbar();
    assert_eq!(case.fit.smoothing, Smoothing::Auto);
    compare(
        &case,
        None,
        RowStrength::PerRow(Strength::Rule(StrengthMethod::Evidence)),
    );
}

#[test]
fn fixed_strength_matches_estimate() {
    let mut case = busbar();
    case.fit.smoothing = Smoothing::Curvature;
    compare(
        &case,
        Some(StrengthRule::Fixed(0.05)),
        RowStrength::Fixed {
            order: 2,
            lambda: 0.05,
            refit: None,
        },
    );
}

#[test]
fn estimated_sigma_matches_estimate() {
    let mut case = busbar();
    case.noise = NoiseSpec::Unstated;
    case.fit.smoothing = Smoothing::Curvature;
    compare(
        &case,
        Some(StrengthRule::Gcv),
        RowStrength::PerRow(Strength::Rule(StrengthMethod::Gcv)),
    );
}

#[test]
fn the_default_scan_stride_finds_the_same_hottest_point() {
    let case = busbar();
    let mut fine = RowEstimator::new(&case, 200, 1, 1).unwrap();
    let mut coarse =
        RowEstimator::new(&case, 200, 1, edgetherm::track::engine::SCAN_STRIDE).unwrap();
    let s = RowStrength::PerRow(Strength::Rule(StrengthMethod::Evidence));
    for readings in rows(&case, 8, 9) {
        let used: Vec<usize> = (0..readings.len()).collect();
        let (mut a, mut b) = (RowFit::default(), RowFit::default());
        fine.fit_row(&readings, &used, s, Some(330.0), &mut a)
            .unwrap();
        coarse
            .fit_row(&readings, &used, s, Some(330.0), &mut b)
            .unwrap();
        assert!((a.temperature - b.temperature).abs() < 1e-9);
        assert!((a.position - b.position).abs() < 1e-9);
        // the interval's ends are refined on the fine grid around the scan's maxima
        for e in 0..2 {
            let gap = (a.temperature_interval[e] - b.temperature_interval[e]).abs();
            assert!(gap < 1e-9, "end {e}: the scan loses {gap} K");
        }
    }
}

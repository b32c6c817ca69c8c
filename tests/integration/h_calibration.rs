//! Calibration with a convective edge and an unknown heat transfer coefficient (issue 10).
//!
//! The invented scenario of `tests/fixtures/convective-calibration`: an air-jet cooled steel
//! insert, 160 × 30 mm, k = 45 W/(m K), the bottom edge hidden (an invented smooth truth about
//! 180 °C), the top convective toward 25 °C air with a true h = 400 W/(m² K), the ends
//! insulated, σ = 0.15 K stated. Sixteen sensors in two rows, 8 mm and 24 mm above the hidden
//! edge (the upper row in the outer third, 6 mm under the convective edge); a second layout
//! with all sixteen in one row 6 mm above the hidden edge, which cannot tell h.
//!
//! This is a cheaper repeat (40 draws, 200 replicates; the deep layout 10 draws) of the
//! release study in docs/calibration.md, "Convective edge and an unknown h"
//! (`cargo run --release --example h_calibration -- 100 400`: 100 draws, 400 replicates, the
//! same seeds, so these draws are the first 40 of those). The figures are printed; run with
//! `cargo test --test integration h_calibration:: -- --nocapture`.

use edgetherm::case::{Case, CaseFiles};
use edgetherm::estimate::calibration::{coverage_study, coverage_study_unknown_h};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeProfile, Point};
use edgetherm::io::load_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};

/// The true heat transfer coefficient of the scenario, W/(m² K).
const TRUE_H: f64 = 400.0;
/// Noise of the simulated readings, kelvin (the case states the same σ).
const SIGMA: f64 = 0.15;
/// First noise seed (the release study's).
const SEED: u64 = 2026_1202;

fn fixture(sensors: &str) -> Case {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/convective-calibration");
    let mut files = CaseFiles::in_dir(&dir);
    files.sensors = dir.join(sensors);
    load_case(&files).unwrap()
}

/// The invented smooth truth on the hidden bottom edge (`truth.csv` beside the case): 180 °C,
/// a 6 K rise toward mid-plate and a 3 K tilt, 241 points.
fn smooth_truth(case: &Case) -> Vec<(Edge, EdgeProfile)> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/convective-calibration");
    edgetherm::io::read_truth_profiles(&dir.join("truth.csv"), case).unwrap()
}

fn options() -> EstimateOptions {
    EstimateOptions {
        replicates: Some(200),
        ..EstimateOptions::default()
    }
}

/// Count of draws with a property, from a share over `n` draws.
fn count(share: f64, n: usize) -> usize {
    (share * n as f64).round() as usize
}

#[test]
fn unknown_h_interval_and_bands_are_calibrated_on_a_smooth_truth() {
    const DRAWS: usize = 40;
    let opts = options();

    // h known: the bands alone
    let mut known = fixture("sensors.csv");
    let truths = smooth_truth(&known);
    known.plate = known.plate.with_heat_transfer(Edge::Top, TRUE_H).unwrap();
    let k = coverage_study(&known, &truths, SIGMA, DRAWS, SEED, &opts).unwrap();
    eprintln!(
        "h known, {DRAWS} draws: pointwise {:.3} (worst draw {:.3}), hottest temperature {:.3}, \
         RMSE {:.3} K, band width {:.3} K",
        k.pointwise,
        k.pointwise_worst(),
        k.hottest_temperature,
        k.rmse,
        k.band_width
    );

    // h unknown: profiled in every draw
    let case = fixture("sensors.csv");
    let u = coverage_study_unknown_h(&case, TRUE_H, &truths, SIGMA, DRAWS, SEED, &opts).unwrap();
    let c = &u.coverage;
    eprintln!(
        "h unknown, {DRAWS} draws: pointwise {:.3} (worst draw {:.3}), hottest temperature \
         {:.3}, RMSE {:.3} K, band width {:.3} K; h interval holds the true h in {:.3}, median \
         h/h_true {:.4}, median interval hi/lo {:.4}, open {:.3}",
        c.pointwise,
        c.pointwise_worst(),
        c.hottest_temperature,
        c.rmse,
        c.band_width,
        u.interval_coverage(),
        u.median_ratio(),
        u.median_width_ratio(),
        u.open()
    );
    assert_eq!(u.estimates.len(), DRAWS, "one h estimate per draw");

    for (label, cov) in [("h known", &k), ("h unknown", c)] {
        // Bar: 90–99 % pointwise, averaged over draws. Asserted as stated, not widened: the
        // per-draw coverage has a standard deviation of 0.044 (h known) and 0.023 (h
        // unknown) in the 100-draw release study, so a 40-draw mean has a standard error of
        // 0.007 and 0.004; the release figures (0.959 and 0.982) sit 2 standard errors or
        // more inside the bars.
        assert!(
            (0.90..=0.99).contains(&cov.pointwise),
            "{label}: pointwise coverage {} outside 0.90–0.99",
            cov.pointwise
        );
        // Bar: at least 80 % on single cases, every draw (worst of 100 release draws: 0.809
        // with h known, 0.858 with h unknown).
        assert!(
            cov.pointwise_worst() >= 0.80,
            "{label}: a draw's pointwise coverage fell to {}",
            cov.pointwise_worst()
        );
        // Bar (docs/calibration.md, the cold plate): the hottest-temperature interval holds
        // the true hottest temperature in at least 90 % of draws: 36 of 40. A 95 % interval
        // fails that in 4.8 % of sets of 40 draws (binomial tail P(X ≤ 35 | 40, 0.95)); the
        // release study held it in 99 and 100 of 100.
        assert!(
            count(cov.hottest_temperature, DRAWS) >= 36,
            "{label}: hottest-temperature interval held the truth in {} of {DRAWS} draws",
            count(cov.hottest_temperature, DRAWS)
        );
    }

    // The h interval at the case's 95 %: "the true h inside the reported h interval" in about
    // the stated share. The count of draws that hold it is binomial(40, p); 35 of 40 or more
    // is asserted. A calibrated interval (p = 0.95, expected 38) fails that with probability
    // 0.014 (P(X ≤ 34 | 40, 0.95)); an interval at p = 0.80 passes it with probability 0.16,
    // and the grid-limited interval this study found (0 of 100, d09c852) cannot. An upper
    // limit on the count cannot be asserted with 40 draws (40 of 40 has probability 0.13 at
    // p = 0.95), so the width is held instead: an interval made wide enough to always cover
    // would fail the width check below.
    let held = count(u.interval_coverage(), DRAWS);
    assert!(
        held >= 35,
        "the h interval held the true h in only {held} of {DRAWS} draws"
    );
    // The h estimate is unbiased to within 1 %: the release study's 95 % intervals are
    // ±0.9 % wide (hi/lo 1.019), i.e. a standard deviation of log ĥ of about 0.005, and the
    // median of 40 draws scatters by about 1.25 · 0.005 / √40 ≈ 0.001; the −3 % bias of the
    // grid-limited version fails it.
    assert!(
        (u.median_ratio() - 1.0).abs() <= 0.01,
        "median h/h_true {}",
        u.median_ratio()
    );
    // The interval is informative: median hi/lo 1.019 in the release study; 1.10 would mean
    // an interval five times wider than the noise warrants.
    assert!(
        u.median_width_ratio() <= 1.10,
        "median h interval hi/lo {}",
        u.median_width_ratio()
    );
    assert!(
        u.open() == 0.0,
        "a layout with sensors under the convective edge bounds h on both sides"
    );
}

#[test]
fn unknown_h_is_reported_open_when_no_sensor_sees_the_convective_edge() {
    const DRAWS: usize = 10;
    let case = fixture("sensors-deep.csv");
    let truths = smooth_truth(&case);
    let opts = options();
    let u = coverage_study_unknown_h(&case, TRUE_H, &truths, SIGMA, DRAWS, SEED, &opts).unwrap();
    let c = &u.coverage;
    eprintln!(
        "deep layout, {DRAWS} draws: h not identified in {:.2}, pointwise {:.3} (worst draw \
         {:.3}), hottest temperature {:.3}, RMSE {:.3} K, band width {:.3} K",
        u.not_identified(),
        c.pointwise,
        c.pointwise_worst(),
        c.hottest_temperature,
        c.rmse,
        c.band_width
    );
    // One row at one depth cannot separate h from the hidden profile: every draw must say so
    // (the interval is the whole search range).
    assert!(
        u.estimates.iter().all(|e| !e.identified()),
        "h reported as identified from one deep row: {:?}",
        u.estimates.iter().map(|e| e.h_interval).collect::<Vec<_>>()
    );
    // The bands must still cover: they hold the estimates at both ends of the range. The
    // bars as above (the release study: 1.000 pointwise and hottest temperature, 100 draws).
    assert!(c.pointwise >= 0.90, "pointwise {}", c.pointwise);
    assert!(c.pointwise_worst() >= 0.80, "worst {}", c.pointwise_worst());
    assert!(
        count(c.hottest_temperature, DRAWS) >= 9,
        "hottest temperature held in {} of {DRAWS}",
        count(c.hottest_temperature, DRAWS)
    );
    // and the estimate says so in words
    let model = truth_model(
        &case.plate.with_heat_transfer(Edge::Top, TRUE_H).unwrap(),
        &truths,
    )
    .unwrap();
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let readings: Vec<Option<f64>> =
        add_noise(&exact_readings(&model, &points).unwrap(), SIGMA, SEED)
            .unwrap()
            .into_iter()
            .map(Some)
            .collect();
    let r = estimate(&case, &readings, &opts, None).unwrap();
    assert!(
        r.cautions.iter().any(|s| s.contains("do not pin h down")),
        "no caution that h is not identified: {:?}",
        r.cautions
    );
}

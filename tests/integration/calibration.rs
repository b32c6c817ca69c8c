//! Calibration of the bands (issue bar): over 100 seeded noise draws of a smooth truth on the
//! sample cold plate's layout, the 95 % pointwise bands must cover the truth at 90–99 % of
//! the profile points on average, and the interval for the hottest temperature must contain
//! the true hottest temperature in at least 90 % of the draws. The figures are printed; the
//! wider study behind the defaults is in docs/calibration.md.

use edgetherm::case::CaseFiles;
use edgetherm::estimate::EstimateOptions;
use edgetherm::estimate::calibration::coverage_study;
use edgetherm::geometry::{Edge, EdgeProfile};
use edgetherm::io::load_case;

#[test]
fn bands_cover_a_smooth_truth_at_their_stated_confidence() {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    let case = load_case(&CaseFiles::in_dir(dir)).unwrap();
    let w = 0.18;
    let n = 181;
    let s: Vec<f64> = (0..n).map(|i| w * i as f64 / (n - 1) as f64).collect();
    // an invented smooth profile: a broad rise toward mid-plate and a gentle tilt
    let t = s
        .iter()
        .map(|&x| 273.15 + 34.0 + 3.0 * (std::f64::consts::PI * x / w).sin() + 1.5 * x / w)
        .collect();
    let truth = EdgeProfile::piecewise_linear(s, t).unwrap();
    let opts = EstimateOptions {
        replicates: Some(400),
        ..EstimateOptions::default()
    };
    let c = coverage_study(
        &case,
        &[(Edge::Bottom, truth)],
        0.15,
        100,
        20_261_202,
        &opts,
    )
    .unwrap();
    eprintln!(
        "smooth truth, 100 draws: pointwise {:.3}, linear {:.3}, simultaneous {:.3}, hottest \
         temperature {:.3}, hottest position {:.3}, RMSE {:.3} K, band width {:.3} K, flagged {:.2}",
        c.pointwise,
        c.linear,
        c.simultaneous,
        c.hottest_temperature,
        c.hottest_position,
        c.rmse,
        c.band_width,
        c.flagged
    );
    assert!(
        (0.90..=0.99).contains(&c.pointwise),
        "pointwise coverage {}",
        c.pointwise
    );
    assert!(
        c.hottest_temperature >= 0.90,
        "hottest-temperature coverage {}",
        c.hottest_temperature
    );
    assert!(
        c.flagged < 0.05,
        "good sensors flagged in {} of draws",
        c.flagged
    );
}

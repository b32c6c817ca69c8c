//! Calibration study: coverage of the bands over seeded noise draws on known truths.
//!
//! `cargo run --release --example calibrate -- [DRAWS] [REPLICATES]`
//! Prints one line per (truth, layout, strength rule): the figures in docs/calibration.md.

use edgetherm::case::{CaseFiles, Smoothing, StrengthRule};
use edgetherm::estimate::EstimateOptions;
use edgetherm::estimate::calibration::coverage_study;
use edgetherm::geometry::{Edge, EdgeProfile};
use edgetherm::io::load_case;

fn profile(len: f64, f: impl Fn(f64) -> f64) -> EdgeProfile {
    let n = 241;
    let s: Vec<f64> = (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
    let t = s.iter().map(|&x| f(x)).collect();
    EdgeProfile::piecewise_linear(s, t).unwrap()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let draws: usize = std::env::args().nth(1).map_or(100, |s| s.parse().unwrap());
    let reps: usize = std::env::args().nth(2).map_or(400, |s| s.parse().unwrap());
    let which = std::env::var("CAL_CASE").unwrap_or("cold-plate".into());
    let mut case = load_case(&CaseFiles::in_dir(format!("sample-measurements/{which}")))?;
    let k0 = 273.15;
    let pi = std::f64::consts::PI;
    let truths: Vec<(&str, EdgeProfile)> = if which == "fin-root" {
        // the sides are held at 30 °C: every truth meets them at the corners
        let w = 0.04;
        let s = move |x: f64| (pi * x / w).sin();
        vec![
            ("smooth", profile(w, move |x| k0 + 30.0 + 50.0 * s(x))),
            (
                "broad-hot-spot",
                profile(w, move |x| {
                    k0 + 30.0
                        + 35.0 * s(x)
                        + 12.0 * s(x) * (-((x - 0.026) / 0.006f64).powi(2)).exp()
                }),
            ),
            (
                "narrow-hot-spot",
                profile(w, move |x| {
                    k0 + 30.0
                        + 35.0 * s(x)
                        + 12.0 * s(x) * (-((x - 0.026) / 0.0025f64).powi(2)).exp()
                }),
            ),
        ]
    } else {
        let w = 0.18;
        vec![
            (
                "smooth",
                profile(w, |x| {
                    k0 + 34.0 + 3.0 * (std::f64::consts::PI * x / w).sin() + 1.5 * (x / w)
                }),
            ),
            (
                "broad-hot-spot",
                profile(w, |x| {
                    k0 + 33.5 + 8.0 * (-((x - 0.097) / 0.025f64).powi(2)).exp()
                }),
            ),
            (
                "narrow-hot-spot",
                profile(w, |x| {
                    k0 + 33.5 + 11.0 * (-((x - 0.097) / 0.011f64).powi(2)).exp()
                }),
            ),
        ]
    };
    let sigma = if which == "fin-root" { 0.2 } else { 0.15 };
    for (name, truth) in &truths {
        let only: Option<String> = std::env::var("CAL_RULES").ok();
        for (rule, smoothing) in [
            (StrengthRule::Evidence, Smoothing::Auto),
            (StrengthRule::Evidence, Smoothing::Curvature),
            (StrengthRule::Evidence, Smoothing::Slope),
            (StrengthRule::Evidence, Smoothing::Size),
            (StrengthRule::Gcv, Smoothing::Curvature),
            (StrengthRule::Discrepancy, Smoothing::Curvature),
        ] {
            let label = format!("{}/{}", rule.name(), smoothing.name());
            if only
                .as_ref()
                .is_some_and(|o| !o.split(',').any(|x| x == label))
            {
                continue;
            }
            case.fit.strength = rule;
            case.fit.smoothing = smoothing;
            let opts = EstimateOptions {
                replicates: Some(reps),
                ..EstimateOptions::default()
            };
            let t = std::time::Instant::now();
            let c = coverage_study(
                &case,
                &[(Edge::Bottom, truth.clone())],
                sigma,
                draws,
                1000,
                &opts,
            )?;
            println!(
                "{name:16} {:20} pointwise {:.3} linear {:.3} simult {:.3} hotT {:.3} hotX {:.3} rmse {:.3} peakbias {:+.3} width {:.3} flagged {:.2} ({:.1}s)",
                label,
                c.pointwise,
                c.linear,
                c.simultaneous,
                c.hottest_temperature,
                c.hottest_position,
                c.rmse,
                c.peak_bias,
                c.band_width,
                c.flagged,
                t.elapsed().as_secs_f64()
            );
        }
    }
    Ok(())
}

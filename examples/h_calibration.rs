//! Calibration of a convective edge and an unknown heat transfer coefficient (issue 10).
//!
//! `cargo run --release --example h_calibration -- [DRAWS] [REPLICATES] [STUDIES]`
//!
//! The invented scenario of `tests/fixtures/convective-calibration` (an air-jet cooled steel
//! insert, 160 × 30 mm, bottom hidden, top convective toward 25 °C air, true h = 400 W/(m² K),
//! σ = 0.15 K): seeded noise draws of a smooth truth on the bottom edge, estimated with h known,
//! with h unknown (two rows of sensors, 8 and 24 mm above the hidden edge), and with h unknown
//! on a layout that cannot identify it (one row 6 mm above the hidden edge). STUDIES is a
//! comma-separated subset of `known,unknown,deep` (default: all); `H_TRUE=<W/(m² K)>` sets
//! another true h; `H_CAL_VERBOSE=1` also prints every draw's h and interval and the first
//! draw's criterion curve `E(h) − E(ĥ)`. Prints the figures of docs/calibration.md,
//! "Convective edge and an unknown h".

use edgetherm::case::{Case, CaseFiles};
use edgetherm::estimate::EstimateOptions;
use edgetherm::estimate::calibration::{Coverage, coverage_study, coverage_study_unknown_h};
use edgetherm::geometry::{Edge, EdgeProfile};
use edgetherm::io::load_case;

/// The true heat transfer coefficient of the scenario, W/(m² K) (`H_TRUE` overrides it).
const TRUE_H: f64 = 400.0;

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

fn line(label: &str, c: &Coverage, secs: f64) {
    println!(
        "{label:8} pointwise {:.3} linear {:.3} simult {:.3} hotT {:.3} hotX {:.3} rmse {:.3} \
         peakbias {:+.3} width {:.3} flagged {:.2} ({secs:.0} s)",
        c.pointwise,
        c.linear,
        c.simultaneous,
        c.hottest_temperature,
        c.hottest_position,
        c.rmse,
        c.peak_bias,
        c.band_width,
        c.flagged,
    );
    let n = c.pointwise_draws.len() as f64;
    let sd = (c
        .pointwise_draws
        .iter()
        .map(|v| (v - c.pointwise).powi(2))
        .sum::<f64>()
        / (n - 1.0).max(1.0))
    .sqrt();
    println!(
        "{label:8} single draws: worst pointwise {:.3}, share >= 0.80 {:.3}, sd {:.4}",
        c.pointwise_worst(),
        c.pointwise_share_at_least(0.80),
        sd
    );
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let draws: usize = std::env::args().nth(1).map_or(100, |s| s.parse().unwrap());
    let reps: usize = std::env::args().nth(2).map_or(400, |s| s.parse().unwrap());
    let studies = std::env::args()
        .nth(3)
        .unwrap_or_else(|| "known,unknown,deep".into());
    let opts = EstimateOptions {
        replicates: Some(reps),
        ..EstimateOptions::default()
    };
    let truths = smooth_truth(&fixture("sensors.csv"));
    let seed = 2026_1202;
    let true_h: f64 = std::env::var("H_TRUE").map_or(TRUE_H, |s| s.parse().unwrap());
    for study in studies.split(',') {
        let t = std::time::Instant::now();
        match study {
            "known" => {
                let mut case = fixture("sensors.csv");
                case.plate = case.plate.with_heat_transfer(Edge::Top, true_h)?;
                let c = coverage_study(&case, &truths, 0.15, draws, seed, &opts)?;
                line("known", &c, t.elapsed().as_secs_f64());
            }
            "unknown" | "deep" => {
                let sensors = if study == "deep" {
                    "sensors-deep.csv"
                } else {
                    "sensors.csv"
                };
                let case = fixture(sensors);
                let c = coverage_study_unknown_h(&case, true_h, &truths, 0.15, draws, seed, &opts)?;
                line(study, &c.coverage, t.elapsed().as_secs_f64());
                println!(
                    "{study:8} h interval holds true h {:.3}  median h/h_true {:.3}  median \
                     hi/lo {:.3}  open on a side {:.3}  whole range {:.3}",
                    c.interval_coverage(),
                    c.median_ratio(),
                    c.median_width_ratio(),
                    c.open(),
                    c.not_identified(),
                );
                if std::env::var_os("H_CAL_VERBOSE").is_some() {
                    for (k, e) in c.estimates.iter().enumerate() {
                        println!(
                            "  draw {k:3}: h {:8.2} [{:8.2}, {:8.2}] open {}/{}",
                            e.h, e.h_interval[0], e.h_interval[1], e.open_below, e.open_above
                        );
                        if k == 0 {
                            for (h, de) in &e.curve {
                                println!("    h {h:9.2}  E - E_min {de:12.3}");
                            }
                        }
                    }
                }
            }
            other => return Err(format!("unknown study {other}").into()),
        }
    }
    Ok(())
}

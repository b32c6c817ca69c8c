//! Estimate benchmark (issue bar): 32 sensors, 64 terms, 2000 bootstrap replicates with the
//! strength re-chosen in each, 41 × 41 field bands — target under 0.25 s wall on the 2-core
//! CI machine — and the peak memory of the process.
//!
//! `cargo bench --bench estimate` prints the median and the spread of 15 runs of the whole
//! estimate (fault search, order choice, bootstrap, bands), and the same with the fault
//! search turned off (`--keep-all`), plus the peak resident memory (VmHWM).

use edgetherm::case::{CaseFiles, Sensor};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeProfile, Point};
use edgetherm::io::load_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};
use std::time::Instant;

fn main() {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    let mut case = load_case(&CaseFiles::in_dir(dir)).expect("sample case");
    case.fit.terms = 64;
    // 32 sensors in two staggered rows, 6 and 10 mm above the hidden edge
    case.sensors = (0..32)
        .map(|i| Sensor {
            id: format!("S{i:02}"),
            position: Point::new(
                0.18 * (i as f64 + 0.5) / 32.0,
                if i % 2 == 0 { 0.006 } else { 0.010 },
            ),
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect();
    let w = 0.18;
    let s: Vec<f64> = (0..181).map(|i| w * i as f64 / 180.0).collect();
    let t = s
        .iter()
        .map(|&x| 273.15 + 34.0 + 9.0 * (-((x - 0.097) / 0.015f64).powi(2)).exp())
        .collect();
    let truth = EdgeProfile::piecewise_linear(s, t).expect("truth");
    let model = truth_model(&case.plate, &[(Edge::Bottom, truth)]).expect("model");
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let readings: Vec<Option<f64>> =
        add_noise(&exact_readings(&model, &points).expect("exact"), 0.15, 3)
            .expect("noise")
            .into_iter()
            .map(Some)
            .collect();
    for (label, keep_all) in [("full estimate", false), ("without the fault search", true)] {
        let opts = EstimateOptions {
            replicates: Some(2000),
            grid: (41, 41),
            keep_all,
            ..EstimateOptions::default()
        };
        let _ = estimate(&case, &readings, &opts, None).expect("warm-up");
        let mut times: Vec<f64> = (0..15)
            .map(|_| {
                let t0 = Instant::now();
                let r = estimate(&case, &readings, &opts, None).expect("estimate");
                std::hint::black_box(r);
                t0.elapsed().as_secs_f64()
            })
            .collect();
        times.sort_by(f64::total_cmp);
        println!(
            "estimate, 32 sensors x 64 terms, 2000 replicates, 41x41 field bands ({label}): \
             median {:.3} s, min {:.3} s, max {:.3} s over {} runs, {} threads",
            times[times.len() / 2],
            times[0],
            times[times.len() - 1],
            times.len(),
            rayon::current_num_threads()
        );
    }
    if let Ok(status) = std::fs::read_to_string("/proc/self/status") {
        if let Some(line) = status.lines().find(|l| l.starts_with("VmHWM")) {
            println!(
                "peak resident memory: {}",
                line.trim_start_matches("VmHWM:").trim()
            );
        }
    }
}

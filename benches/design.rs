//! Design benchmark (issue 4 bar): choose K = 16 sensors among 10,000 candidates with 64
//! series terms, greedy selection plus exchange passes, in under 2 s wall on the 2-core CI
//! machine; `worst` in under 0.5 s (issue 9).
//!
//! `cargo bench --bench design` prints, for each criterion, the median and the range of 5
//! runs of the whole design (sensor map of every candidate, search, scoring of the result),
//! the passes and swaps the exchange made, the ratio of the median to its bar, and at the end
//! the peak resident memory of the benchmark process. `DESIGN_BENCH_ONLY=worst` (or
//! `information`, `edge`) runs one criterion, for a profile.

use edgetherm::case::CandidateSource;
use edgetherm::case::{CaseFiles, Smoothing};
use edgetherm::design::{Criterion, DesignSpace};
use edgetherm::geometry::Point;
use edgetherm::io::case::load_design_case;
use std::time::Instant;

mod common;

fn main() {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    let mut case = load_design_case(&CaseFiles::in_dir(dir)).expect("sample case");
    case.fit.terms = 64;
    case.fit.smoothing = Smoothing::Curvature;
    case.design.allowed.clear();
    case.design.keep_out.clear();
    case.design.edge_distance_m = 0.001;
    case.design.sensor_spacing_m = 0.008;
    case.design.candidates = CandidateSource::File("bench-candidates.csv".into());
    // 125 × 80 = 10,000 candidates over the 180 × 28 mm plate
    let candidates: Vec<(Point, usize)> = (0..80)
        .flat_map(|j| {
            (0..125).map(move |i| {
                (
                    Point::new(
                        0.002 + 0.176 * i as f64 / 124.0,
                        0.0015 + 0.025 * j as f64 / 79.0,
                    ),
                    2 + j * 125 + i,
                )
            })
        })
        .collect();
    // DESIGN_BENCH_ONLY=worst (or information, edge) runs one criterion, for profiling
    let only = std::env::var("DESIGN_BENCH_ONLY").ok();
    for criterion in [Criterion::Information, Criterion::Edge, Criterion::Worst] {
        if only.as_deref().is_some_and(|o| o != criterion.name()) {
            continue;
        }
        let mut times = Vec::new();
        let mut last = None;
        for _ in 0..5 {
            let t0 = Instant::now();
            let space = DesignSpace::new(&case, Some(&candidates), Some(criterion)).expect("space");
            assert_eq!(space.candidates().len(), 10_000);
            let (layout, summary) = space
                .design(&[], 16, "--count", &|_, _| {})
                .expect("design");
            let score = space.evaluate(&layout).expect("score");
            std::hint::black_box(&score);
            times.push(t0.elapsed().as_secs_f64());
            last = Some(summary);
        }
        times.sort_by(f64::total_cmp);
        let s = last.expect("ran");
        let bar = if criterion == Criterion::Worst {
            0.5
        } else {
            2.0
        };
        println!(
            "design {:<11} 10,000 candidates, K = 16, 64 terms: median {:.3} s (range {:.3}-{:.3} s \
             over 5 runs; {} exchange passes, {} swaps) — bar {bar} s: median/bar = {:.2}",
            criterion.name(),
            times[2],
            times[0],
            times[4],
            s.passes,
            s.swaps,
            times[2] / bar
        );
    }
    common::print_own_peak_memory();
}

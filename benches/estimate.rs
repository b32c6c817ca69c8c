//! Estimate benchmark (issue bar): 32 sensors, 64 terms, 2000 bootstrap replicates with the
//! strength re-chosen in each, 41 × 41 field bands — target under 0.25 s wall on the 2-core
//! CI machine — and the peak memory of the process.
//!
//! `cargo bench --bench estimate` prints the median and the spread of 15 runs of the whole
//! estimate (fault search, order choice, bootstrap, bands), and the same with the fault
//! search turned off (`--keep-all`), plus the peak resident memory (VmHWM).
//!
//! Then the row of issue 9's table, whole process: `edgetherm estimate` (the release binary,
//! `cargo build --release` first) on an invented case of 14 sensors × 64 terms (cold-plate
//! geometry, readings of an invented hot spot with noise), 2000 replicates with the strength
//! re-chosen in each, 41 × 41 field bands, strict bounds' gradient study on, every output
//! written: the median wall time of 15 runs, their spread, the largest peak resident memory
//! (`wait4`), and the ratios to the targets (60 ms, 40 MB). Skipped without the binary.
//! With `ESTIMATE_BENCH_PYTHON=PYTHON` (a Python with numpy), the same case is then run 15
//! times in alternation with `benches/estimate_reference.py`, a straightforward numpy
//! implementation of the estimate, and the ratio of the medians printed (issue 9's bar: the
//! binary at least 10 times faster, whole process). `ESTIMATE_BENCH_KEEP=1` keeps the
//! 14-sensor case and prints where.

use edgetherm::case::{CaseFiles, Sensor};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeProfile, Point};
use edgetherm::io::load_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};
use std::time::Instant;

mod common;

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
    let readings: Vec<Option<f64>> = hot_spot_readings(&case, (34.0, 9.0, 0.097, 0.015), 3)
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
    common::print_own_peak_memory();
    whole_process();
}

/// Noisy readings (kelvin, σ 0.15 K, `seed`) of `case`'s sensors under an invented hidden
/// bottom edge of the 180 mm cold-plate geometry: `base` °C plus a Gaussian hot spot of
/// `rise` K at `centre` metres, `width` metres wide.
fn hot_spot_readings(
    case: &edgetherm::case::Case,
    (base, rise, centre, width): (f64, f64, f64, f64),
    seed: u64,
) -> Vec<f64> {
    let w = 0.18;
    let s: Vec<f64> = (0..181).map(|i| w * i as f64 / 180.0).collect();
    let t = s
        .iter()
        .map(|&x| 273.15 + base + rise * (-((x - centre) / width).powi(2)).exp())
        .collect();
    let truth = EdgeProfile::piecewise_linear(s, t).expect("truth");
    let model = truth_model(&case.plate, &[(Edge::Bottom, truth)]).expect("model");
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    add_noise(&exact_readings(&model, &points).expect("exact"), 0.15, seed).expect("noise")
}

/// Issue 9's row: the release binary on an invented 14-sensor case, end to end.
fn whole_process() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let bin = root.join("target/release/edgetherm");
    if !bin.exists() {
        println!("whole process: skipped (build the binary first: cargo build --release)");
        return;
    }
    let tmp = tempfile::tempdir().expect("temp dir");
    // ESTIMATE_BENCH_KEEP=1 keeps the 14-sensor case (for profiling) and prints where
    if std::env::var_os("ESTIMATE_BENCH_KEEP").is_some() {
        println!("files kept in {}", tmp.path().display());
    }
    // 14 sensors in two staggered rows, 5 and 9 mm above the hidden edge (invented)
    let case_dir = common::staggered_case(root, tmp.path(), 14, (5.0, 9.0));
    let case = load_case(&CaseFiles::in_dir(&case_dir)).expect("case");
    assert_eq!(case.fit.terms, 64, "the sample plate's terms");
    let noisy = hot_spot_readings(&case, (33.0, 7.0, 0.121, 0.018), 5);
    let mut readings = String::from("sensor,temperature\n");
    for (i, v) in noisy.iter().enumerate() {
        readings.push_str(&format!("S{i:02},{:.4}\n", v - 273.15));
    }
    std::fs::write(case_dir.join("readings.csv"), readings).expect("readings.csv");
    let out = tmp.path().join("out");
    let mut runs: Vec<(f64, f64)> = (0..16)
        .map(|_| run_estimate(&bin, &case_dir, &out))
        .collect();
    runs.remove(0); // the first run warms the file cache
    let mut secs: Vec<f64> = runs.iter().map(|r| r.0).collect();
    secs.sort_by(f64::total_cmp);
    let peak = runs.iter().map(|r| r.1).fold(0.0, f64::max);
    let median = secs[secs.len() / 2];
    println!(
        "estimate whole process, 14 sensors x 64 terms, 2000 replicates, 41x41 field bands, \
         gradient study on: median {:.1} ms (spread {:.1} to {:.1} ms over {} runs), peak \
         memory {peak:.1} MB; target 60 ms, 40 MB: median/target = {:.2}, peak/target = {:.2}",
        1e3 * median,
        1e3 * secs[0],
        1e3 * secs[secs.len() - 1],
        secs.len(),
        median / 0.060,
        peak / 40.0
    );
    // ESTIMATE_BENCH_PYTHON=PYTHON (a Python with numpy): the same case in alternation with
    // the straightforward numpy implementation, issue 9's "at least 10x faster"
    if let Some(python) = std::env::var_os("ESTIMATE_BENCH_PYTHON") {
        let status = std::process::Command::new(python)
            .arg(root.join("benches/estimate_reference.py"))
            .arg("--compare")
            .arg(&bin)
            .arg(&case_dir)
            .arg("15")
            .status();
        if !status.as_ref().is_ok_and(|s| s.success()) {
            println!("the numpy reference did not run: {status:?}");
        }
    }
    if std::env::var_os("ESTIMATE_BENCH_KEEP").is_some() {
        let _ = tmp.keep();
    }
}

/// One run of `edgetherm estimate`: wall seconds and the peak resident memory in MB (from
/// `wait4`, which reports the child's own maximum even for a run of a few milliseconds).
#[allow(clippy::zombie_processes)] // reaped by `wait4`, which std does not know of
fn run_estimate(
    bin: &std::path::Path,
    case: &std::path::Path,
    out: &std::path::Path,
) -> (f64, f64) {
    let t0 = Instant::now();
    let child = std::process::Command::new(bin)
        .arg("estimate")
        .arg(case)
        .arg("--out")
        .arg(out)
        .args(["--overwrite", "--quiet"])
        .spawn()
        .expect("run edgetherm");
    let mut status = 0;
    // SAFETY: `rusage` is plain data, zero is a valid value; wait4 writes it for the child
    // just spawned, which nothing else waits for.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let pid = libc::pid_t::try_from(child.id()).expect("pid");
    // SAFETY: a valid pid of our own child and valid pointers to the two outputs.
    let reaped = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    let secs = t0.elapsed().as_secs_f64();
    assert_eq!(reaped, pid, "wait4");
    assert!(
        libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0,
        "edgetherm estimate failed: status {status}"
    );
    // ru_maxrss is in kilobytes on Linux
    (secs, usage.ru_maxrss as f64 / 1024.0)
}

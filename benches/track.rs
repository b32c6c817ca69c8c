//! Track benchmark (issue bars): 1,000,000 rows × 32 sensors end to end (`edgetherm track`
//! reading the CSV log and writing every output), in constant memory — with the strength
//! chosen on every row (the default) at least 200,000 rows per second, and with
//! `--calibrate 200` at least 500,000 rows per second, on the 2-core machine.
//!
//! `cargo build --release && cargo bench --bench track` writes an invented log (cold-plate
//! geometry, 64 terms, 32 sensors in two staggered rows, a hot spot that grows and fades, one
//! sensor open circuit for a stretch) to a temporary directory and runs the release binary on
//! it. For each targeted setting (the per-row strength with σ stated and, on the same log,
//! with σ estimated on every row; `--calibrate 200`) it prints the median rows/s of
//! `TRACK_BENCH_REPEATS` runs (default 3), their spread (slowest to fastest), the binary's
//! peak resident memory (VmHWM, polled from /proc while it runs) and the ratio of the median
//! to the target. It also runs once with the limit inside the band (every row needs the
//! exceedance draws), and both settings on a log a tenth as long (the peak memory does not
//! grow with the log). `TRACK_BENCH_ROWS` overrides the row count; `TRACK_BENCH_KEEP=1` keeps
//! the files.

use edgetherm::case::{CaseFiles, Sensor};
use edgetherm::geometry::{EdgeProfile, Point};
use edgetherm::io::load_case;
use edgetherm::track::synthetic::{Fault, FaultKind, Spec, write_log};
use std::io::Write;
use std::path::Path;
use std::time::{Duration, Instant};

mod common;

fn main() {
    let rows: usize = std::env::var("TRACK_BENCH_ROWS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let bin = root.join("target/release/edgetherm");
    assert!(
        bin.exists(),
        "build the binary first: cargo build --release (the benchmark runs it end to end)"
    );
    let tmp = tempfile::tempdir().expect("temp dir");
    // TRACK_BENCH_KEEP=1 keeps the case and logs (for profiling) and prints where
    let keep = std::env::var_os("TRACK_BENCH_KEEP").is_some();
    let dir_path = tmp.path().to_path_buf();
    if keep {
        println!("files kept in {}", dir_path.display());
        std::mem::forget(tmp);
    }
    let dir = DirRef(&dir_path);
    let case_dir = common::staggered_case(root, dir.path(), 32, (6.0, 10.0));
    let mut case = load_case(&CaseFiles::in_dir(&case_dir)).expect("case");
    case.sensors = case
        .sensors
        .iter()
        .map(|s| Sensor {
            position: Point::new(s.position.x, s.position.y),
            ..s.clone()
        })
        .collect();

    // TRACK_BENCH_REPEATS runs of each measured setting (default 3); the median is reported
    let repeats: usize = std::env::var("TRACK_BENCH_REPEATS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3)
        .max(1);
    // the same case without a stated σ: every row's fit estimates its own noise scale
    let unstated_dir = dir.path().join("case-sigma-estimated");
    std::fs::create_dir_all(&unstated_dir).expect("case dir");
    for entry in std::fs::read_dir(&case_dir).expect("case dir") {
        let path = entry.expect("case file").path();
        let text = std::fs::read_to_string(&path).expect("case file");
        let text = if path.file_name().is_some_and(|n| n == "plate.toml") {
            text.lines()
                .filter(|l| !l.trim_start().starts_with("sigma"))
                .collect::<Vec<_>>()
                .join("\n")
        } else {
            text
        };
        std::fs::write(unstated_dir.join(path.file_name().expect("name")), text)
            .expect("case file");
    }
    let runs: [RunSpec<'_>; 6] = [
        (
            rows,
            &["--limit", "70"],
            "strength chosen on every row (the default)",
            Some(200_000.0),
            true,
        ),
        (
            rows,
            &["--limit", "70"],
            "strength chosen on every row, sigma estimated on every row",
            Some(200_000.0),
            false,
        ),
        (
            rows,
            &["--calibrate", "200", "--limit", "70"],
            "calibrated, limit far above",
            Some(500_000.0),
            true,
        ),
        (
            rows,
            &["--calibrate", "200", "--limit", "56"],
            "calibrated, limit within the band",
            None,
            true,
        ),
        (
            rows / 10,
            &["--limit", "70"],
            "strength chosen on every row, a tenth of the rows",
            None,
            true,
        ),
        (
            rows / 10,
            &["--calibrate", "200", "--limit", "70"],
            "calibrated, a tenth of the rows",
            None,
            true,
        ),
    ];
    println!(
        "{} core(s) seen; the machine may be shared: figures are medians of {repeats} runs \
         (single runs for the rows without a target)",
        std::thread::available_parallelism().map_or(1, |n| n.get())
    );
    for (n, flags, what, target, stated) in runs {
        let case_used = if stated { &case_dir } else { &unstated_dir };
        let log = dir.path().join(format!("log-{n}.csv"));
        if !log.exists() {
            let t0 = Instant::now();
            write_bench_log(&case, n, &log);
            let size = std::fs::metadata(&log).map(|m| m.len()).unwrap_or(0);
            println!(
                "log: {n} rows × 32 sensors, {:.0} MB, written in {:.1} s",
                size as f64 / 1e6,
                t0.elapsed().as_secs_f64()
            );
        }
        let out = dir.path().join(format!("out-{n}"));
        let times = if target.is_some() { repeats } else { 1 };
        let mut rates = Vec::with_capacity(times);
        let mut peak_mb: f64 = 0.0;
        let mut last = None;
        for _ in 0..times {
            let run = run_track(&bin, case_used, &log, &out, flags);
            rates.push(n as f64 / run.secs);
            peak_mb = peak_mb.max(run.peak_mb);
            last = Some(run);
        }
        let run = last.expect("at least one run");
        rates.sort_by(f64::total_cmp);
        let median = if rates.len() % 2 == 1 {
            rates[rates.len() / 2]
        } else {
            0.5 * (rates[rates.len() / 2 - 1] + rates[rates.len() / 2])
        };
        let summary = std::fs::read_to_string(out.join("summary.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            .unwrap_or(serde_json::Value::Null);
        let versus = match target {
            Some(t) => format!(
                "; target {t:.0} rows/s: median/target = {:.2}{}",
                median / t,
                if median >= t { " (met)" } else { " (NOT met)" }
            ),
            None => String::new(),
        };
        println!(
            "track ({what}; {}): {n} rows, median {median:.0} rows/s end to end over {} run(s) \
             (spread {:.0} to {:.0}); peak memory {peak_mb:.1} MB; exit {:?}; {} fitted, {} \
             refitted, {} alarm episodes{versus}",
            flags.join(" "),
            rates.len(),
            rates[0],
            rates[rates.len() - 1],
            run.code,
            summary["rows_fitted"],
            summary["rows_refitted"],
            summary["alarm"]["episode_count"],
        );
    }
}

/// A measured setting: rows, extra flags, what it shows, target rows/s, whether the case
/// states σ.
type RunSpec<'a> = (usize, &'a [&'a str], &'a str, Option<f64>, bool);

/// One run of the binary: wall seconds, peak resident memory, exit code.
struct Run {
    secs: f64,
    peak_mb: f64,
    code: Option<i32>,
}

fn run_track(bin: &Path, case_dir: &Path, log: &Path, out: &Path, flags: &[&str]) -> Run {
    let t0 = Instant::now();
    let mut child = std::process::Command::new(bin)
        .arg("track")
        .arg(case_dir)
        .arg("--log")
        .arg(log)
        .arg("--out")
        .arg(out)
        .args(flags)
        .arg("--quiet")
        .spawn()
        .expect("run edgetherm");
    let status_path = format!("/proc/{}/status", child.id());
    let mut peak_kb = 0u64;
    let status = loop {
        if let Ok(text) = std::fs::read_to_string(&status_path) {
            if let Some(v) = text
                .lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|v| v.parse::<u64>().ok())
            {
                peak_kb = peak_kb.max(v);
            }
        }
        if let Some(s) = child.try_wait().expect("wait") {
            break s;
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    Run {
        secs: t0.elapsed().as_secs_f64(),
        peak_mb: peak_kb as f64 / 1024.0,
        code: status.code(),
    }
}

struct DirRef<'a>(&'a Path);

impl DirRef<'_> {
    fn path(&self) -> &Path {
        self.0
    }
}

fn write_bench_log(case: &edgetherm::case::Case, rows: usize, path: &Path) {
    let s: Vec<f64> = (0..=180).map(|i| f64::from(i) * 0.001).collect();
    let base =
        EdgeProfile::piecewise_linear(s.clone(), vec![273.15 + 34.0; s.len()]).expect("base");
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - 0.097) / 0.015f64).powi(2)).exp())
        .collect();
    // a hot spot of 20 K that wanders by ±1.5 K over the log: the strength calibrated on the
    // first rows fits every row (the per-row rule path is measured separately, see
    // docs/track.md)
    let period = (rows / 3).max(1) as f64;
    let amp = move |r: usize| 20.0 + 1.5 * (2.0 * std::f64::consts::PI * r as f64 / period).sin();
    let spec = Spec {
        rows,
        step_s: 5.0,
        start: Some(1_772_348_400),
        sigma: 0.15,
        seed: 99,
        base,
        bump: EdgeProfile::piecewise_linear(s, bump).expect("bump"),
        amplitude: &amp,
        faults: vec![Fault {
            sensor: 7,
            from: rows / 3,
            to: Some(rows / 3 + rows / 20),
            kind: FaultKind::Marker("OPEN".into()),
        }],
        decimals: 2,
    };
    let file = std::fs::File::create(path).expect("log file");
    let mut w = std::io::BufWriter::new(file);
    write_log(case, &spec, &mut w).expect("write log");
    w.flush().expect("flush");
}

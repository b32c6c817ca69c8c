//! Shared by the benchmarks: an invented case for those that run the release binary, and
//! the benchmark process's own peak memory. Each benchmark uses some of these.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// Write an invented case into `dir/case` and return that folder: the cold-plate sample's
/// plate (64 terms, its noise and uncertainty settings) with `count` sensors `S00`, `S01`, …
/// spread evenly along the 180 mm plate in two staggered rows, `depths_mm.0` and
/// `depths_mm.1` above the hidden bottom edge.
pub fn staggered_case(root: &Path, dir: &Path, count: usize, depths_mm: (f64, f64)) -> PathBuf {
    let case_dir = dir.join("case");
    std::fs::create_dir(&case_dir).expect("case dir");
    std::fs::copy(
        root.join("sample-measurements/cold-plate/plate.toml"),
        case_dir.join("plate.toml"),
    )
    .expect("plate.toml");
    let mut sensors = String::from("sensor,x,y\n");
    for i in 0..count {
        let x = 180.0 * (i as f64 + 0.5) / count as f64;
        let y = if i % 2 == 0 { depths_mm.0 } else { depths_mm.1 };
        sensors.push_str(&format!("S{i:02},{x},{y}\n"));
    }
    std::fs::write(case_dir.join("sensors.csv"), sensors).expect("sensors.csv");
    case_dir
}

/// Print the peak resident memory of this process so far (`VmHWM` of `/proc/self/status`;
/// nothing where there is no such file).
pub fn print_own_peak_memory() {
    if let Ok(status) = std::fs::read_to_string("/proc/self/status") {
        if let Some(line) = status.lines().find(|l| l.starts_with("VmHWM")) {
            println!(
                "peak resident memory: {}",
                line.trim_start_matches("VmHWM:").trim()
            );
        }
    }
}

//! Regenerates `sample-measurements/busbar-clamp/log.csv`, the invented logger file of the
//! `track` demo: a shift of 8 hours logged every 10 s (2880 rows) on a copper busbar clamp
//! plate whose hidden joint edge warms as a bolted joint loosens, with one thermocouple (TC03)
//! going open circuit part way. Deterministic (seeded); every number is made up.
//!
//! ```sh
//! cargo run --release --example busbar_clamp_log
//! ```

use edgetherm::case::CaseFiles;
use edgetherm::geometry::EdgeProfile;
use edgetherm::io::load_case;
use edgetherm::track::synthetic::{Fault, FaultKind, Spec, write_log};

fn main() {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp");
    let case = load_case(&CaseFiles::in_dir(&dir)).expect("busbar-clamp case");
    let k = |c: f64| c + 273.15;
    // The joint edge: 48 °C along the clamp, a little warmer toward the middle ...
    let s: Vec<f64> = (0..=120).map(|i| f64::from(i) * 0.001).collect();
    let base: Vec<f64> = s
        .iter()
        .map(|&x| k(48.0 + 3.0 * (std::f64::consts::PI * x / 0.12).sin()))
        .collect();
    // ... and a hot spot 22 mm wide (half width at half height ~11 mm) at x = 78 mm, the
    // loosening bolt, whose amplitude grows from 0 at 02:00 into the shift to 70 K at 06:00.
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - 0.078) / 0.013).powi(2)).exp())
        .collect();
    let amplitude = |row: usize| {
        let h = row as f64 * 10.0 / 3600.0;
        70.0 * ((h - 2.0) / 4.0).clamp(0.0, 1.0)
    };
    let spec = Spec {
        rows: 2880,
        step_s: 10.0,
        start: Some(1_772_348_400), // 2026-03-01T07:00:00Z, the start of the shift
        sigma: 0.2,
        seed: 2026,
        base: EdgeProfile::piecewise_linear(s.clone(), base).expect("base"),
        bump: EdgeProfile::piecewise_linear(s, bump).expect("bump"),
        amplitude: &amplitude,
        faults: vec![Fault {
            sensor: 2, // TC03 goes open circuit at 04:00 into the shift
            from: 1440,
            to: None,
            kind: FaultKind::Marker("OPEN".into()),
        }],
        decimals: 2,
    };
    let mut out = Vec::new();
    let truths = write_log(&case, &spec, &mut out).expect("log");
    edgetherm::io::write_atomic(&dir.join("log.csv"), &out).expect("write log.csv");
    let hottest = truths.iter().copied().fold(f64::NEG_INFINITY, f64::max) - 273.15;
    println!(
        "wrote {} rows; true hottest edge temperature {hottest:.1} C",
        truths.len()
    );
}

//! Print the key numbers of an estimate on a case directory (development aid).
//!
//! `cargo run --release --example quick_estimate -- sample-measurements/cold-plate`

use edgetherm::case::CaseFiles;
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::io::{load_case, load_readings};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args()
        .nth(1)
        .unwrap_or("sample-measurements/cold-plate".into());
    let case = load_case(&CaseFiles::in_dir(&dir))?;
    let readings = load_readings(&case.files.readings, &case)?;
    let t = std::time::Instant::now();
    let r = estimate(&case, &readings, &EstimateOptions::default(), None)?;
    let u = case.units;
    println!("elapsed {:.3} s", t.elapsed().as_secs_f64());
    let h = &r.hottest;
    println!(
        "hottest {} at {:.2} [{:.2}, {:.2}] {}: {:.2} [{:.2}, {:.2}] {}",
        h.edge,
        u.length_from_m(h.position),
        u.length_from_m(h.position_interval[0]),
        u.length_from_m(h.position_interval[1]),
        u.length.symbol(),
        u.temp_from_k(h.temperature),
        u.temp_from_k(h.temperature_interval[0]),
        u.temp_from_k(h.temperature_interval[1]),
        u.temperature.symbol()
    );
    println!("strength {:?}", r.strength);
    println!("fit {:?}", r.fit);
    for e in &r.edges {
        println!(
            "edge {} resolution {:.2} {} heat flow {:?}",
            e.edge,
            u.length_from_m(e.resolution_length),
            u.length.symbol(),
            e.heat_flow
        );
        let n = e.positions.len();
        for i in (0..n).step_by(n / 12) {
            println!(
                "  {:8.2}  {:8.3}  [{:8.3}, {:8.3}]  sim [{:8.3}, {:8.3}]  lin [{:8.3}, {:8.3}]",
                u.length_from_m(e.positions[i]),
                u.temp_from_k(e.estimate[i]),
                u.temp_from_k(e.lower[i]),
                u.temp_from_k(e.upper[i]),
                u.temp_from_k(e.simultaneous_lower[i]),
                u.temp_from_k(e.simultaneous_upper[i]),
                u.temp_from_k(e.linear_lower[i]),
                u.temp_from_k(e.linear_upper[i]),
            );
        }
    }
    for s in &r.sensors {
        println!(
            "  {} resid {:?} loo {:?} lev {:?} flag {:?}",
            s.sensor, s.residual, s.loo_residual, s.leverage, s.flag
        );
    }
    for c in &r.cautions {
        println!("! {c}");
    }
    Ok(())
}

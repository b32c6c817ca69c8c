//! Strict bounds on a case directory, printed with their cost (development aid).
//!
//! `cargo run --release --example bounds_probe -- sample-measurements/cold-plate 1.0`
//! (the gradient in the case's temperature unit per length unit).

use edgetherm::bounds::{BoundsInput, BoundsOptions, BoundsOutcome, strict_bounds};
use edgetherm::io::{CaseFiles, load_case, load_readings};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let dir = args.next().unwrap_or("sample-measurements/cold-plate".into());
    let g_case: f64 = args.next().map_or(Ok(1.0), |s| s.parse())?;
    let case = load_case(&CaseFiles::in_dir(&dir))?;
    let readings = load_readings(&case.files.readings, &case)?;
    let u = case.units;
    let g = u.dtemp_to_k(g_case) / u.length_to_m(1.0);
    let used: Vec<usize> = (0..case.sensors.len()).filter(|&i| readings[i].is_some()).collect();
    let points: Vec<_> = used.iter().map(|&i| case.sensors[i].position).collect();
    let d: Vec<f64> = used.iter().map(|&i| readings[i].unwrap_or(0.0)).collect();
    let sigma = vec![0.15; used.len()];
    let input = BoundsInput {
        plate: &case.plate,
        sensors: &points,
        readings_k: &d,
        sigmas_k: &sigma,
        sigma_stated: true,
        confidence: 0.95,
        min_temperature_k: None,
        max_temperature_k: None,
    };
    let edges = case.plate.unknown_edges();
    let len = case.plate.shape().edge_length(edges[0]).unwrap_or(1.0);
    let pos: Vec<f64> = (0..=60).map(|k| k as f64 * len / 60.0).collect();
    let t = std::time::Instant::now();
    let set = edgetherm::bounds::AdmissibleSet::new(&case.plate, &points, &d, &sigma, Default::default())?;
    println!("set {:.3} s, rho {:?} m, tail {:.1e}", t.elapsed().as_secs_f64(), set.rho_m(), set.max_tail_factor);
    let t = std::time::Instant::now();
    let r = strict_bounds(&input, Some(g), &[(edges[0], pos)], &BoundsOptions::default())?;
    println!("elapsed {:.3} s", t.elapsed().as_secs_f64());
    if let Some((_, BoundsOutcome::Bounded { hottest_k, edges, programs })) = &r.stated {
        println!(
            "hottest in [{:.2}, {:.2}] {} ({programs} programs)",
            u.temp_from_k(hottest_k[0]),
            u.temp_from_k(hottest_k[1]),
            u.temperature.symbol()
        );
        for e in edges {
            for k in (0..e.positions_m.len()).step_by(5) {
                println!(
                    "  {:7.2} {:8.2} {:8.2}",
                    u.length_from_m(e.positions_m[k]),
                    u.temp_from_k(e.lower_k[k]),
                    u.temp_from_k(e.upper_k[k])
                );
            }
        }
    } else {
        println!("stated: {:?}", r.stated);
    }
    println!("study: min {:?}", r.study.min_gradient_k_per_m);
    for row in &r.study.rows {
        println!("  G {:.4} K/m -> {:?}", row.gradient_k_per_m, row.hottest_upper_k.map(|t| u.temp_from_k(t)));
    }
    Ok(())
}

//! The whole case pipeline: the input split into plate, sensors and readings at two `\0`
//! bytes (a missing part takes the base file), loaded, described by `check`, and estimated
//! with a few replicates on a small grid. Every answer is finite or an error; an error from
//! the estimate is an input error, or a numerical failure that says so (exit status 1), never
//! a panic.
#![no_main]
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let mut parts = data.splitn(3, |&b| b == 0);
    let plate = parts
        .next()
        .filter(|p| !p.is_empty())
        .unwrap_or(PLATE.as_bytes());
    let sensors = parts
        .next()
        .filter(|p| !p.is_empty())
        .unwrap_or(SENSORS.as_bytes());
    let readings = parts
        .next()
        .filter(|p| !p.is_empty())
        .unwrap_or(READINGS.as_bytes());
    let dir = scratch();
    write_case(&dir, plate, sensors, readings);
    let Some((case, readings)) = load_and_check(&dir) else {
        return;
    };
    // keep each run short: a small model, few replicates, a coarse grid
    if case.fit.terms > 32 || case.sensors.len() > 64 {
        return;
    }
    let options = EstimateOptions {
        replicates: Some(8),
        grid: (5, 5),
        ..EstimateOptions::default()
    };
    match estimate(&case, &readings, &options, None) {
        Ok(r) => {
            assert!(r.check_finite().is_ok());
            assert!(r.hottest.temperature.is_finite());
        }
        Err(e) => {
            let msg = e.to_string();
            assert!(!msg.is_empty() && !msg.contains("NaN"), "{msg}");
        }
    }
});

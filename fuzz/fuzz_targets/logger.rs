//! Any bytes as a logger file for `track` (with the valid base case): rows or an input error,
//! never a panic; every reading read is finite and plausible.
#![no_main]
use edgetherm::io::{LoggerOptions, LoggerReader, LoggerRow};
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    // the base case is the same for every input: load it once per process
    static CASE: std::sync::OnceLock<edgetherm::case::Case> = std::sync::OnceLock::new();
    let dir = scratch();
    let case = CASE.get_or_init(|| {
        write_case(
            &dir,
            PLATE.as_bytes(),
            SENSORS.as_bytes(),
            READINGS.as_bytes(),
        );
        edgetherm::io::load_case(&edgetherm::case::CaseFiles::in_dir(&dir)).unwrap()
    });
    let log = dir.join("log.csv");
    std::fs::write(&log, data).unwrap();
    let options = LoggerOptions {
        ignore_extra: data.first().is_some_and(|b| b & 1 == 1),
        follow: None,
        ..LoggerOptions::default()
    };
    let mut reader = match LoggerReader::open(&log, case, &options) {
        Ok(r) => r,
        Err(e) => return input_error(&e),
    };
    let mut row = LoggerRow::default();
    for _ in 0..10_000 {
        match reader.next_row(&mut row) {
            Ok(true) => {
                assert!(row.time_s.is_finite());
                for v in row.values.iter().flatten() {
                    assert!(v.is_finite() && (0.0..=5000.0).contains(v), "reading {v}");
                }
            }
            Ok(false) => break,
            Err(e) => return input_error(&e),
        }
    }
});

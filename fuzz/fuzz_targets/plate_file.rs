//! Any bytes as `plate.toml` (with valid sensors and readings): an input error or a case.
#![no_main]
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = scratch();
    write_case(&dir, data, SENSORS.as_bytes(), READINGS.as_bytes());
    let _ = load_and_check(&dir);
});

//! Any bytes as `readings.csv` (with a valid plate and sensors): an input error or readings
//! within the plausible range.
#![no_main]
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = scratch();
    write_case(&dir, PLATE.as_bytes(), SENSORS.as_bytes(), data);
    let _ = load_and_check(&dir);
});

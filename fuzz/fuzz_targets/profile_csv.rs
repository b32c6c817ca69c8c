//! Any bytes as a fixed-edge profile file named by the plate: an input error or a case.
#![no_main]
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = scratch();
    let plate = PLATE.replace(TOP_LINE, "profile = \"top.csv\"");
    write_case(
        &dir,
        plate.as_bytes(),
        SENSORS.as_bytes(),
        READINGS.as_bytes(),
    );
    std::fs::write(dir.join("top.csv"), data).unwrap();
    let _ = load_and_check(&dir);
});

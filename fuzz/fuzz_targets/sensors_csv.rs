//! Any bytes as `sensors.csv` (with a valid plate; readings left out): an input error or a
//! case.
#![no_main]
use edgetherm_fuzz::*;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = scratch();
    write_case(&dir, PLATE.as_bytes(), data, b"sensor,temperature\n");
    let _ = std::fs::remove_file(dir.join("readings.csv"));
    if let Err(e) = edgetherm::io::load_case(&edgetherm::case::CaseFiles::in_dir(&dir)) {
        input_error(&e);
    }
});

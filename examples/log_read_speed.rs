//! How fast a logger file is read and checked, with no fitting: every row of each LOG through
//! `LoggerReader` (CSV or Parquet), timed (development aid for the columnar-log figures in
//! docs/track.md, Scale).
//!
//! `cargo run --release --example log_read_speed -- CASE_DIR LOG [LOG ...]`
//! (`REPEATS=N` runs each file N times, default 3; the median is printed).

use edgetherm::case::CaseFiles;
use edgetherm::io::{LoggerOptions, LoggerReader, LoggerRow, load_case};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let dir = args
        .next()
        .ok_or("usage: log_read_speed CASE_DIR LOG [LOG ...]")?;
    let case = load_case(&CaseFiles::in_dir(&dir))?;
    let repeats: usize = std::env::var("REPEATS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3)
        .max(1);
    for log in args {
        let mut times = Vec::new();
        let mut rows = 0u64;
        let mut checksum = 0.0;
        for _ in 0..repeats {
            let t = std::time::Instant::now();
            let mut reader = LoggerReader::open(log.as_ref(), &case, &LoggerOptions::default())?;
            let mut row = LoggerRow::default();
            rows = 0;
            checksum = 0.0;
            while reader.next_row(&mut row)? {
                rows += 1;
                checksum += row.values.iter().flatten().sum::<f64>();
            }
            times.push(t.elapsed().as_secs_f64());
        }
        times.sort_by(f64::total_cmp);
        let median = times[times.len() / 2];
        let bytes = std::fs::metadata(&log)?.len();
        println!(
            "{log}: {rows} rows, {:.1} MB, read in {median:.3} s median of {repeats} \
             ({:.3}–{:.3} s): {:.0} rows/s (checksum {checksum:.6e})",
            bytes as f64 / 1e6,
            times[0],
            times[times.len() - 1],
            rows as f64 / median
        );
    }
    Ok(())
}

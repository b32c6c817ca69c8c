//! Case input and result output: the only part of the library that touches files.
//!
//! Inputs are read in two stages (raw, then validated): each file is
//! parsed as written, then checked once and converted to metres and kelvin into a typed
//! [`crate::case::Case`]. Every problem is an [`crate::Error::Invalid`] naming the file, the 1-based line
//! and the field (a dotted TOML key or a CSV column), which the binary maps to exit status 2.
//!
//! | file | module |
//! |---|---|
//! | `plate.toml` | `plate_file` (raw serde structs, then validation) |
//! | `sensors.csv`, `readings.csv`, profile files | `csv_files` |
//! | the assembled case (its types live in `crate::case`) | [`case`] |
//! | results, written atomically, never over an input | [`output`] |
//! | logger files for `track`, and `track.csv` written row by row | [`logger`] |
//! | columnar logger files (Parquet) and in-memory tables, checked by the logger's rules | [`columnar`] |
//! | CSV dialects (separator, decimal mark, metadata lines, units row) of every table | [`dialect`] |
//! | the time column of a logger file | [`times`] |

pub mod case;
pub mod columnar;
mod convert;
mod csv_files;
pub mod dialect;
pub mod logger;
pub mod output;
mod plate_file;
mod spans;
pub mod suggest;
pub mod times;

pub use case::{
    load_case, load_readings, load_readings_as, read_truth_profiles, readings_from_values,
};
pub use dialect::{DecimalMark, DialectOptions, Separator};
pub use logger::{
    LoggerOptions, LoggerReader, LoggerRow, StreamWriter, TRACK_OUTPUT_FILE_NAMES,
    check_track_outputs,
};
pub use output::{
    MANIFEST_NAME, OUTPUT_FILE_NAMES, OutputSet, check_output_dir, check_output_file,
    clean_stale_temporaries, create_output_dir, verify_manifest, write_atomic,
};
pub use plate_file::{
    DEFAULT_CONFIDENCE, DEFAULT_REPLICATES, DEFAULT_SEED, DEFAULT_TERMS, MAX_REPLICATES, MAX_TERMS,
    plate_line_of,
};
pub use times::TimeFormat;

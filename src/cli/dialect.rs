//! The flags that declare how a data file is written (`--separator`, `--decimal-mark`,
//! `--skip-lines`, and for `track` `--time-format`); what is not declared is detected
//! (`docs/case-files.md`, CSV dialects).

use edgetherm::Result;
use edgetherm::io::{DecimalMark, DialectOptions, Separator, TimeFormat};

/// Dialect flags shared by `estimate` (for readings.csv) and `track` (for the log).
#[derive(Debug, clap::Args)]
pub struct DialectArgs {
    /// Column separator of the data file [default: detected from its header].
    #[arg(long, value_name = "SEP", value_parser = ["comma", "semicolon", "tab"])]
    pub separator: Option<String>,
    /// Decimal mark of the data file's numbers; a comma needs a semicolon or tab separator
    /// [default: detected from its first rows].
    #[arg(long, value_name = "MARK", value_parser = ["point", "comma"])]
    pub decimal_mark: Option<String>,
    /// Lines before the header of the data file (a logger's metadata) [default: every line
    /// before the first one with the header's key word].
    #[arg(long, value_name = "N")]
    pub skip_lines: Option<usize>,
}

impl DialectArgs {
    /// The declared dialect, with a time format for a logger file.
    pub fn options(&self, time_format: Option<&str>) -> Result<DialectOptions> {
        Ok(DialectOptions {
            // clap has checked the names against the same lists
            separator: self.separator.as_deref().and_then(Separator::from_name),
            decimal_mark: self
                .decimal_mark
                .as_deref()
                .and_then(DecimalMark::from_name),
            skip_lines: self.skip_lines,
            time_format: time_format.and_then(TimeFormat::from_name),
        })
    }
}

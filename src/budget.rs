//! Pre-flight cost: the memory and the time a run will need, estimated from its settings
//! before anything large is allocated, and checked against a budget.
//!
//! Every setting a user can raise to its documented maximum (`replicates`, `--grid`,
//! `terms`, `track --draws`, `candidate_spacing`) multiplies the size of some array or the
//! number of some products; a few of them together can ask for hundreds of gigabytes or
//! hours. Each job adds up its few dominant terms ([`estimate_cost`], [`track_cost`],
//! [`design_cost`]); [`Budget::check`] refuses (an [`Error::Invalid`], exit status 2) a run
//! whose total is above the budget, naming the setting that costs most, what the run would
//! cost and what to change. The budget defaults to [`DEFAULT_MEMORY_BYTES`] and
//! [`DEFAULT_SECONDS`] and is raised with `--memory-budget` and `--time-budget`
//! (`docs/case-files.md`, "Budgets").
//!
//! The estimates are deliberately simple (array sizes in bytes; operation counts divided by
//! a throughput measured on the 2-core CI machine, [`FLOPS_PER_SECOND`]) and meant to be right
//! within a factor of a few: they separate a run of seconds from one of hours, and megabytes
//! from tens of gigabytes; DEVELOPERS.md records the measurements they were checked against.

use crate::case::Case;
use crate::error::{Error, Result};

/// Default memory budget: 2 GiB.
pub const DEFAULT_MEMORY_BYTES: f64 = 2.0 * 1024.0 * 1024.0 * 1024.0;
/// Default time budget: 10 minutes of computation.
pub const DEFAULT_SECONDS: f64 = 600.0;
/// Floating-point operations per second assumed for the time estimate: one core of the CI
/// machine on the matrix products and the series evaluations of this program (measured;
/// DEVELOPERS.md, "Budgets").
pub const FLOPS_PER_SECOND: f64 = 1.0e9;
/// Above this estimated time a run says on stderr how long it will take before it starts
/// (a progress message for runs without a progress bar).
pub const ANNOUNCE_SECONDS: f64 = 10.0;
/// Largest input file read whole (plate file, sensors, readings, profiles, layouts):
/// 64 MiB. A case file is a few kilobytes; this keeps a device or a wrong path (a fixed-edge
/// profile naming `/dev/zero`) from being read without limit. Logger files are streamed and
/// have no size limit, but each of their lines has [`MAX_LINE_BYTES`].
pub const MAX_INPUT_BYTES: u64 = 64 * 1024 * 1024;
/// Longest line of a logger file: 1 MiB (a row of ten thousand sensors is about 100 kB).
pub const MAX_LINE_BYTES: usize = 1024 * 1024;

/// The memory and time a run may use.
#[derive(Debug, Clone, Copy)]
pub struct Budget {
    /// Bytes of memory.
    pub memory_bytes: f64,
    /// Seconds of computation.
    pub seconds: f64,
}

impl Default for Budget {
    fn default() -> Self {
        Budget {
            memory_bytes: DEFAULT_MEMORY_BYTES,
            seconds: DEFAULT_SECONDS,
        }
    }
}

/// One term of a run's cost: what drives it and how to make it smaller.
#[derive(Debug, Clone)]
pub struct CostItem {
    /// The setting that drives it, as a field (`uncertainty.replicates`, `option.grid`).
    pub field: String,
    /// The line of the setting in the plate file, when it came from there.
    pub line: Option<usize>,
    /// What it is, in words ("2000 bootstrap replicates × 4 004 001 field points").
    pub what: String,
    /// What to change.
    pub advice: String,
    /// Bytes it needs at once.
    pub bytes: f64,
    /// Floating-point operations (or their equivalent) it needs.
    pub flops: f64,
}

/// A run's estimated cost: the sum of its items.
#[derive(Debug, Clone, Default)]
pub struct Cost {
    /// The terms.
    pub items: Vec<CostItem>,
}

impl Cost {
    /// Total bytes.
    pub fn bytes(&self) -> f64 {
        self.items.iter().map(|i| i.bytes).sum()
    }

    /// Total seconds at [`FLOPS_PER_SECOND`].
    pub fn seconds(&self) -> f64 {
        self.items.iter().map(|i| i.flops).sum::<f64>() / FLOPS_PER_SECOND
    }
}

/// `bytes` for a reader: `7.7 GB`, `120 MB`.
pub fn human_bytes(bytes: f64) -> String {
    let (v, u) = if bytes >= 1e12 {
        (bytes / 1e12, "TB")
    } else if bytes >= 1e9 {
        (bytes / 1e9, "GB")
    } else {
        (bytes / 1e6, "MB")
    };
    format!("{v:.1} {u}")
}

/// `seconds` for a reader: `45 s`, `12 min`, `3.5 h`.
pub fn human_seconds(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7200.0 {
        format!("{:.0} min", s / 60.0)
    } else {
        format!("{:.1} h", s / 3600.0)
    }
}

impl Budget {
    /// Refuse a run whose cost is above the budget.
    ///
    /// # Errors
    /// [`Error::Invalid`] (exit status 2) naming the setting of the largest term of the
    /// exceeded resource (with the plate file and line when it came from there), the run's
    /// estimated memory and time, and what to change.
    pub fn check(&self, cost: &Cost, case: &Case) -> Result<()> {
        let (bytes, seconds) = (cost.bytes(), cost.seconds());
        let over_memory = bytes > self.memory_bytes;
        let over_time = seconds > self.seconds;
        if !(over_memory || over_time) {
            return Ok(());
        }
        let key = |i: &&CostItem| if over_memory { i.bytes } else { i.flops };
        let Some(worst) = cost.items.iter().max_by(|a, b| key(a).total_cmp(&key(b))) else {
            return Ok(());
        };
        let message = format!(
            "this run would need about {} of memory and {} of computation, above the budget \
             of {} and {} ({}); {}; or raise the budget with --memory-budget MB / \
             --time-budget S if the machine has it",
            human_bytes(bytes),
            human_seconds(seconds),
            human_bytes(self.memory_bytes),
            human_seconds(self.seconds),
            worst.what,
            worst.advice,
        );
        Err(if worst.field.starts_with("option.") {
            Error::invalid_field(&worst.field, message)
        } else {
            Error::invalid_at(&case.files.plate, worst.line, Some(&worst.field), message)
        })
    }
}

/// Where a setting came from: a flag (`option.NAME`) or the plate file (`section.key`; the
/// caller adds its line with [`crate::io::plate_line_of`]).
fn origin(from_flag: bool, flag: &str, key: &str) -> (String, Option<usize>) {
    if from_flag {
        (format!("option.{flag}"), None)
    } else {
        (key.to_string(), None)
    }
}

/// The cost of `estimate` on `case`: `replicates` bootstrap replicates (`replicates_flag`:
/// given with `--replicates`), an `nx × ny` field grid, the case's terms, `sensors` readings.
pub fn estimate_cost(
    case: &Case,
    replicates: usize,
    replicates_flag: bool,
    (nx, ny): (usize, usize),
    sensors: usize,
) -> Cost {
    let edges = case.plate.unknown_edges().len().max(1) as f64;
    let terms = case.fit.terms as f64;
    let p = edges * terms + 4.0;
    let n_prof = edges * crate::estimate::profile_points(case.fit.terms) as f64;
    let b = replicates as f64;
    let m = sensors as f64;
    let grid = (nx * ny) as f64;
    let (rep_field, rep_line) = origin(replicates_flag, "replicates", "uncertainty.replicates");
    let (terms_field, terms_line) = (String::from("fit.terms"), None);
    Cost {
        items: vec![
            CostItem {
                field: rep_field,
                line: rep_line,
                what: format!(
                    "{replicates} bootstrap replicates × {} profile points and {} coefficients",
                    n_prof as usize, p as usize
                ),
                advice: "use fewer replicates (2000 give percentiles to about ±0.5 % coverage)"
                    .into(),
                // each replicate's coefficient errors (twice, while collected) and its
                // errors along the profiles (twice: the errors and their transpose)
                bytes: b * (3.0 * p + 2.0 * n_prof) * 8.0,
                // the strength search (200 grid points × the spectrum) and the products
                flops: b * (200.0 * 12.0 * m + 2.0 * p * (m + n_prof)),
            },
            CostItem {
                field: "option.grid".into(),
                line: None,
                what: format!("a {nx} × {ny} field grid with {replicates} replicates"),
                advice: "use a coarser --grid".into(),
                // the field map (points × coefficients), the band blocks, and the text of
                // field.csv, field.svg and report.html (about 300 bytes per point)
                bytes: grid * (p * 8.0 + 300.0) + 2.0 * b * 64.0 * 8.0,
                // evaluating the series at every point, and the band's products
                flops: grid * p * (40.0 + 2.0 * b),
            },
            CostItem {
                field: terms_field,
                line: terms_line,
                what: format!(
                    "{} series terms per unknown edge ({} profile points)",
                    case.fit.terms, n_prof as usize
                ),
                advice: "use fewer terms (64 resolve any feature the sensors can see at usual \
                         depths)"
                    .into(),
                // the resolution kernels of every profile point, the profile map
                // (checked: 461 MB measured against 400 MB estimated at 1024 terms)
                bytes: n_prof * p * 8.0 * 5.0 + p * p * 8.0 * 4.0,
                flops: 2.0 * n_prof * p * p + 10.0 * p * p * p,
            },
        ],
    }
}

/// The cost of a whole `track` run with `options`: the per-pattern tables
/// ([`track_cost`]) and, with the per-row bootstrap, its replicates (as [`estimate_cost`]
/// prices them on a 2 × 2 grid). `replicates_stated`: the replicates came from the run's
/// options rather than the case file (the message names the setting accordingly).
pub fn track_run_cost(
    case: &Case,
    options: &crate::track::TrackOptions,
    replicates_stated: bool,
) -> Cost {
    let mut cost = track_cost(
        case,
        options.draws,
        options.stride,
        crate::track::engine::PATTERN_CACHE,
    );
    if options.bootstrap {
        let replicates = options.replicates.unwrap_or(case.uncertainty.replicates);
        let per_row = estimate_cost(
            case,
            replicates,
            replicates_stated,
            (2, 2),
            case.sensors.len(),
        );
        cost.items.extend(
            per_row
                .items
                .into_iter()
                .filter(|i| i.field.ends_with("replicates")),
        );
    }
    cost
}

/// The cost of `track`'s per-pattern tables: `draws` posterior draws at every scan point
/// (`n_scan`, the profile points over the stride) for each of up to `patterns` cached sensor
/// patterns.
pub fn track_cost(case: &Case, draws: usize, stride: usize, patterns: usize) -> Cost {
    let edges = case.plate.unknown_edges().len().max(1) as f64;
    let n_fine = edges * crate::estimate::profile_points(case.fit.terms) as f64;
    let n_scan = (n_fine / stride.max(1) as f64).ceil();
    let d = draws as f64;
    let p = edges * case.fit.terms as f64 + 4.0;
    let mut cost = estimate_cost(case, 0, false, (2, 2), case.sensors.len());
    cost.items.retain(|i| i.field == "fit.terms");
    cost.items.push(CostItem {
        field: "option.draws".into(),
        line: None,
        what: format!(
            "{draws} posterior draws × {} scan points × up to {patterns} sensor patterns",
            n_scan as usize
        ),
        advice: "use fewer --draws (the default gives the exceedance probability to about \
                 ±0.01)"
            .into(),
        // kept: a value (8 bytes) and its draw's index (4) per draw and point; while one
        // pattern's draws are made, the draws matrix (8) and the (value, index) pairs (16)
        bytes: d * n_scan * (12.0 * patterns as f64 + 24.0),
        flops: d * (n_scan * p + n_scan * 20.0) * patterns as f64,
    });
    cost
}

/// The cost of `design` with about `candidates` candidate positions (before the feasibility
/// checks) and a layout of `count` sensors.
pub fn design_cost(case: &Case, candidates: f64, count: usize, spacing_stated: bool) -> Cost {
    let edges = case.plate.unknown_edges().len().max(1) as f64;
    let p = edges * case.fit.terms as f64 + 4.0;
    let (field, line) = if spacing_stated {
        (
            "design.candidate_spacing".to_string(),
            case.design.line_of("design.candidate_spacing"),
        )
    } else {
        ("design.candidates".to_string(), None)
    };
    let k = count.max(1) as f64;
    Cost {
        items: vec![CostItem {
            field,
            line,
            what: format!("about {candidates:.0} candidate positions"),
            advice: "use a larger candidate_spacing (the default gives about 10 000 \
                     candidates)"
                .into(),
            // each candidate's position and its row of the sensor map, with the search's
            // per-candidate scores
            bytes: candidates * (16.0 + 8.0 * p + 64.0),
            // a row of the sensor map per candidate, and each greedy and exchange step
            // scores every candidate
            flops: candidates * (40.0 * p + 4.0 * k * k * p),
        }],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn readable_sizes() {
        assert_eq!(human_bytes(7.7e9), "7.7 GB");
        assert_eq!(human_bytes(2.5e7), "25.0 MB");
        assert_eq!(human_seconds(45.0), "45 s");
        assert_eq!(human_seconds(720.0), "12 min");
        assert_eq!(human_seconds(12600.0), "3.5 h");
    }
}

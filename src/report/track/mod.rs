//! The outputs of `edgetherm track`, in the case's units: the `track.csv` header and rows,
//! `alarms.csv`, `sensors-health.csv`, `summary.json` and the text summary (here), and
//! `track.svg` ([`plot`]). Pure functions: the binary writes them (rows through
//! [`crate::io::StreamWriter`], the rest atomically).

pub mod plot;

use crate::case::Case;
use crate::report::format::CaseUnits;
use crate::report::format::{fixed, fixed_units, push_units, significant};
use crate::track::{RowRecord, RowStatus, TrackSummary};
use serde_json::{Value, json};
use std::fmt::Write as _;

/// The header of `track.csv`.
pub const TRACK_CSV_HEADER: &str = "time,status,edge,position,position_lower,position_upper,\
temperature,lower,upper,exceedance_probability,readings_used,smoothing,strength,bound_lower,\
bound_upper,left_out";

/// Append one `track.csv` line (with its line end) for a row to `out`.
pub fn track_csv_row(case: &Case, rec: &RowRecord<'_>, out: &mut Vec<u8>) {
    use std::io::Write as _;
    let u = CaseUnits::new(case.units);
    push_csv_cell(out, &rec.row.time_text);
    match &rec.status {
        RowStatus::Fitted => {
            let f = rec.fit;
            let ld = u.len_file_decimals();
            out.extend_from_slice(b",ok,");
            out.extend_from_slice(f.edge.map_or("", |e| e.name()).as_bytes());
            // along a circle the position is the angle in degrees
            let shape = case.plate.shape();
            for v in [f.position, f.position_interval[0], f.position_interval[1]] {
                out.push(b',');
                match f.edge {
                    Some(e) if e.is_circular() => push_fixed(out, u.pos(shape, e, v), 3),
                    _ => push_fixed(out, u.len(v), ld),
                }
            }
            for v in [
                f.temperature,
                f.temperature_interval[0],
                f.temperature_interval[1],
            ] {
                out.push(b',');
                push_fixed(out, u.temp(v), TEMP_DECIMALS);
            }
            out.push(b',');
            if let Some(p) = f.exceedance {
                push_fixed(out, p, 4);
            }
            out.push(b',');
            // a count: a whole number of units with no decimals
            push_units(out, (false, f.used.len() as u64), 0);
            out.push(b',');
            out.extend_from_slice(
                crate::case::Smoothing::of_penalty_order(f.order)
                    .name()
                    .as_bytes(),
            );
            out.push(b',');
            push_lambda(out, f.lambda);
            out.push(b',');
            if let Some(crate::track::bounds::RowBound::Interval([lo, hi])) = rec.bound {
                push_fixed(out, u.temp(lo), TEMP_DECIMALS);
                out.push(b',');
                push_fixed(out, u.temp(hi), TEMP_DECIMALS);
            } else {
                out.push(b',');
            }
            out.push(b',');
        }
        RowStatus::Skipped(why) => {
            let _ = write!(
                out,
                ",{},,,,,,,,,{},,,,,",
                csv_cell(&format!("skipped: {why}")),
                rec.usable,
            );
        }
    }
    let mut first = true;
    let mut sep = |out: &mut Vec<u8>| {
        if !first {
            out.push(b';');
        }
        first = false;
    };
    for (i, p) in rec.left_out {
        sep(out);
        out.extend_from_slice(case.sensors[*i].id.as_bytes());
        out.push(b':');
        out.extend_from_slice(p.name().as_bytes());
    }
    for &i in rec.missing {
        sep(out);
        out.extend_from_slice(case.sensors[i].id.as_bytes());
        out.extend_from_slice(b":missing");
    }
    out.push(b'\n');
}

/// Decimals of temperatures in `track.csv` (as in `estimate`'s tables).
const TEMP_DECIMALS: usize = 4;

/// `v` with `decimals` decimals, appended: the text of [`fixed`] (a value half-way between
/// two texts rounds to even, as in every other output), without a string per number (this
/// runs for the millions of numbers in `track.csv`).
fn push_fixed(out: &mut Vec<u8>, v: f64, decimals: usize) {
    match fixed_units(v, decimals) {
        Some(units) if v.abs() < 1e15 => push_units(out, units, decimals),
        _ => out.extend_from_slice(fixed(v, decimals).as_bytes()),
    }
}

thread_local! {
    /// The last strength written and its text: a calibrated run writes the same λ on
    /// nearly every row.
    static LAST_LAMBDA: std::cell::RefCell<(Option<u64>, Vec<u8>)> =
        const { std::cell::RefCell::new((None, Vec::new())) };
}

/// `λ` as `{}` writes it (the shortest text that reads back to the same number), formatted
/// once per distinct value in a row.
fn push_lambda(out: &mut Vec<u8>, lambda: f64) {
    use std::io::Write as _;
    LAST_LAMBDA.with_borrow_mut(|(bits, text)| {
        if *bits != Some(lambda.to_bits()) {
            text.clear();
            let _ = write!(text, "{lambda}");
            *bits = Some(lambda.to_bits());
        }
        out.extend_from_slice(text);
    });
}

/// [`csv_cell`] appended to `out` without an intermediate string.
fn push_csv_cell(out: &mut Vec<u8>, s: &str) {
    if s.contains([',', '"', '\n', '\r']) {
        out.extend_from_slice(csv_cell(s).as_bytes());
    } else {
        out.extend_from_slice(s.as_bytes());
    }
}

fn csv_cell(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// `alarms.csv`: one row per episode.
pub fn alarms_csv(case: &Case, s: &TrackSummary) -> Vec<u8> {
    let u = CaseUnits::new(case.units);
    let mut out = String::from(
        "episode,start,end,rows,peak_time,peak_temperature,peak_lower,peak_upper,edge,\
         position,max_probability,limit,held_rows\n",
    );
    for (k, e) in s.episodes.iter().enumerate() {
        let _ = writeln!(
            out,
            "{},{},{},{},{},{},{},{},{},{},{},{},{}",
            k + 1,
            csv_cell(&e.start),
            csv_cell(e.end.as_deref().unwrap_or("ongoing")),
            e.rows,
            csv_cell(&e.peak_time),
            u.temp_file(e.peak_temperature),
            u.temp_file(e.peak_interval[0]),
            u.temp_file(e.peak_interval[1]),
            e.peak_edge.map_or("", |x| x.name()),
            match e.peak_edge {
                Some(x) => u.pos_file(case.plate.shape(), x, e.peak_position),
                None => u.len_file(e.peak_position),
            },
            fixed(e.max_probability, 4),
            s.limit.map_or(String::new(), |l| u.temp_file(l)),
            e.held_rows,
        );
    }
    out.into_bytes()
}

/// `sensors-health.csv`: one row per problem stretch.
pub fn health_csv(case: &Case, s: &TrackSummary) -> Vec<u8> {
    let mut out = String::from("sensor,problem,start,end,start_line,rows,rows_left_out\n");
    for e in &s.events {
        let _ = writeln!(
            out,
            "{},{},{},{},{},{},{}",
            csv_cell(&case.sensors[e.sensor].id),
            e.problem.name(),
            csv_cell(&e.start),
            csv_cell(e.end.as_deref().unwrap_or("ongoing")),
            e.start_line,
            e.rows,
            e.rows_left_out
        );
    }
    out.into_bytes()
}

/// At most this many alarm episodes and sensor problems are listed in `summary.json` (all
/// are in `alarms.csv` and `sensors-health.csv`; the counts are always given).
pub const MAX_LISTED: usize = 100;

/// At most this many are listed in the text summary.
pub const MAX_TEXT_LISTED: usize = 20;

/// `summary.json`.
pub fn summary_json(case: &Case, s: &TrackSummary) -> Value {
    let u = CaseUnits::of_plate(case.units, &case.plate);
    let hottest = s.hottest.as_ref().map(|(t, f)| {
        json!({
            "time": t,
            "edge": f.edge.map(|e| e.name()),
            "position": match f.edge {
                Some(e) => u.pos_json(case.plate.shape(), e, f.position),
                None => u.len_json(f.position),
            },
            "temperature": u.temp_json(f.temperature),
            "temperature_interval": [u.temp_json(f.temperature_interval[0]),
                                     u.temp_json(f.temperature_interval[1])],
        })
    });
    let episodes: Vec<Value> = s
        .episodes
        .iter()
        .take(MAX_LISTED)
        .map(|e| {
            json!({
                "start": e.start, "end": e.end, "rows": e.rows,
                "peak": {
                    "time": e.peak_time,
                    "temperature": u.temp_json(e.peak_temperature),
                    "temperature_interval": [u.temp_json(e.peak_interval[0]),
                                             u.temp_json(e.peak_interval[1])],
                    "edge": e.peak_edge.map(|x| x.name()),
                    "position": match e.peak_edge {
                        Some(x) => u.pos_json(case.plate.shape(), x, e.peak_position),
                        None => u.len_json(e.peak_position),
                    },
                },
                "max_probability": e.max_probability,
            })
        })
        .collect();
    let sensors: Vec<Value> = s
        .events
        .iter()
        .take(MAX_LISTED)
        .map(|e| {
            json!({
                "sensor": case.sensors[e.sensor].id, "problem": e.problem.name(),
                "start": e.start, "end": e.end, "rows": e.rows,
                "rows_left_out": e.rows_left_out,
            })
        })
        .collect();
    let mut v = json!({
        "rows": s.counts.rows,
        "rows_fitted": s.counts.fitted,
        "rows_skipped": s.counts.skipped,
        "rows_with_sensors_left_out": s.counts.with_left_out,
        "rows_refitted": s.counts.refitted,
        "first_time": s.first_time,
        "last_time": s.last_time,
        "hottest": hottest,
        "strength": {
            "mode": s.strength_mode.name(),
            "smoothing": s.smoothing.map(|x| x.name()),
            "value": s.lambda,
        },
        "alarm": s.limit.map(|l| json!({
            "limit": u.temp_json(l),
            "probability": s.probability,
            "clear_rows": s.clear_rows,
            "episode_count": s.episodes.len(),
            "episodes": episodes,
        })),
        "bounds": s.bounds.map(|b| json!({
            "max_gradient": significant(
                u.gradient(b.max_gradient_k_per_m),
                4
            ),
            "max_gradient_unit": format!(
                "{}/{}",
                u.temp_code(),
                u.gradient_per()
            ),
            "every": b.every,
            "rows_bounded": b.rows,
            "rows_limit_certain": b.limit_certain,
            "rows_limit_ruled_out": b.limit_ruled_out,
            "rows_empty": b.empty,
        })),
        "sensor_problem_count": s.events.len(),
        "sensor_problems": sensors,
        "unlisted_sensor_problems": s.unlisted_events,
        "band": if s.bootstrap { "bootstrap" } else { "linear" },
        "exceedance_draws": s.draws,
        "units": {"length": u.len_symbol(), "temperature": u.temp_code()},
        "confidence": s.confidence,
        "seed": s.seed,
        "version": env!("CARGO_PKG_VERSION"),
        "cautions": s.cautions,
    });
    if let Some(c) = &s.convection {
        let sig = |x: f64| significant(x, 4);
        v["convection"] = json!({
            c.edge.name(): {
                "h": sig(c.h),
                "h_interval": [sig(c.h_interval[0]), sig(c.h_interval[1])],
                "h_range": [sig(c.h_range[0]), sig(c.h_range[1])],
                "bounded_below": !c.open_below,
                "bounded_above": !c.open_above,
                "unit": "W/(m^2 K)",
                "estimated_from": "the first rows of the log, once",
            }
        });
    }
    if !case.read_as.is_empty() {
        v["inputs_read_as"] = json!(case.read_as);
    }
    if let Some(c) = case.conversion() {
        v["readings_conversion"] = json!({
            "signal": "emf_mv",
            "type": c.tc_type.name(),
            "reference_function": "NIST ITS-90 (NIST Monograph 175)",
            "cold_junction": match c.cold_junction {
                crate::case::ColdJunction::Fixed(k) => u.temp_json(k),
                crate::case::ColdJunction::Column => json!("column"),
            },
            "description": c.describe(&case.units),
        });
    }
    v
}

/// The text summary printed at the end of a run.
pub fn text_summary(case: &Case, s: &TrackSummary) -> String {
    let u = CaseUnits::of_plate(case.units, &case.plate);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Units: inputs read in {} and {} (plate.toml: length_unit, temperature_unit).",
        u.len_symbol(),
        u.temp_symbol()
    );
    let _ = writeln!(
        out,
        "Tracked {} rows ({} fitted, {} skipped) from {} to {}.",
        s.counts.rows,
        s.counts.fitted,
        s.counts.skipped,
        s.first_time.as_deref().unwrap_or("-"),
        s.last_time.as_deref().unwrap_or("-")
    );
    for how in &case.read_as {
        let _ = writeln!(out, "Read {} as: {}.", how.file, how.description);
    }
    if let Some(c) = case.conversion() {
        let _ = writeln!(out, "{}", c.describe(&case.units));
    }
    match (s.strength_mode, s.lambda) {
        (m, Some(l)) => {
            let _ = writeln!(
                out,
                "Smoothing {} with strength {l:.3e} ({m}); {} rows that it did not fit were \
                 refitted with the case's rule.",
                s.smoothing.map_or("?", |x| x.name()),
                s.counts.refitted
            );
        }
        (m, None) => {
            let _ = writeln!(out, "Smoothing strength chosen {m}.");
        }
    }
    if let Some((t, f)) = &s.hottest {
        let _ = writeln!(
            out,
            "Hottest row: {t}, {} edge at {}: {} ({} to {}).",
            f.edge.map_or("?", |e| e.name()),
            match f.edge {
                Some(e) => u.pos_show(case.plate.shape(), e, f.position),
                None => u.len_show(f.position),
            },
            u.temp_show(f.temperature),
            u.temp_show(f.temperature_interval[0]),
            u.temp_show(f.temperature_interval[1]),
        );
    }
    if let Some(b) = s.bounds {
        let _ = writeln!(
            out,
            "Strict bounds (every hidden edge changing by at most {} {}/{}, {} %): {} rows \
             bounded (every {} fitted rows and each row opening an episode){}.",
            crate::report::format::significant_text(u.gradient(b.max_gradient_k_per_m), 3),
            u.temp_symbol(),
            u.gradient_per_show(),
            fixed(100.0 * s.confidence, 0),
            b.rows,
            b.every,
            match s.limit {
                Some(_) => format!(
                    "; on {} the limit is exceeded for every admissible edge, on {} it is ruled \
                     out; {} contradict the gradient limit",
                    b.limit_certain, b.limit_ruled_out, b.empty
                ),
                None => format!("; {} contradict the gradient limit", b.empty),
            }
        );
    }
    if let Some(l) = s.limit {
        if s.episodes.is_empty() {
            let _ = writeln!(
                out,
                "No alarm: the probability of exceeding {} stayed at or below {}.",
                u.temp_show(l),
                s.probability
            );
        } else {
            let _ = writeln!(
                out,
                "ALARM: {} episode(s) with probability above {} that a hidden edge exceeds {}:",
                s.episodes.len(),
                s.probability,
                u.temp_show(l)
            );
            for e in s.episodes.iter().take(MAX_TEXT_LISTED) {
                let _ = writeln!(
                    out,
                    "  {} to {} ({} rows): peak {} ({} to {}) at {} on the {} edge, at {}; \
                     probability up to {:.3}",
                    e.start,
                    e.end.as_deref().unwrap_or("ongoing"),
                    e.rows,
                    u.temp_show(e.peak_temperature),
                    u.temp_show(e.peak_interval[0]),
                    u.temp_show(e.peak_interval[1]),
                    match e.peak_edge {
                        Some(x) => u.pos_show(case.plate.shape(), x, e.peak_position),
                        None => u.len_show(e.peak_position),
                    },
                    e.peak_edge.map_or("?", |x| x.name()),
                    e.peak_time,
                    e.max_probability
                );
            }
        }
    }
    if s.episodes.len() > MAX_TEXT_LISTED {
        let _ = writeln!(
            out,
            "  ... and {} more in alarms.csv",
            s.episodes.len() - MAX_TEXT_LISTED
        );
    }
    let problems: Vec<_> = s.events.iter().collect();
    if problems.is_empty() {
        let _ = writeln!(out, "No sensor problems found.");
    } else {
        let _ = writeln!(out, "Sensor problems:");
        for e in problems.iter().take(MAX_TEXT_LISTED) {
            let kept = if e.problem == crate::track::health::Problem::Doubtful {
                ": reads high, kept because a hot spot under it would explain it as well as a \
                 fault; check the sensor"
                    .to_string()
            } else {
                String::new()
            };
            let _ = writeln!(
                out,
                "  {} {} from {} to {} ({} rows; left out of the fit in {} of them){kept}",
                case.sensors[e.sensor].id,
                e.problem.name(),
                e.start,
                e.end.as_deref().unwrap_or("the end"),
                e.rows,
                e.rows_left_out
            );
        }
        if problems.len() > MAX_TEXT_LISTED {
            let _ = writeln!(
                out,
                "  ... and {} more in sensors-health.csv",
                problems.len() - MAX_TEXT_LISTED
            );
        }
    }
    for c in &s.cautions {
        let _ = writeln!(out, "Caution: {c}");
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn track_csv_numbers_are_the_other_outputs_text() {
        // `track.csv` writes its numbers without a string each; the text must be [`fixed`]'s
        // (the float formatter's), ties to even included: a hull end at 104.0625 mm is
        // 104.062 here as in alarms.csv (it was 104.063 when ties went away from zero)
        let mut out = Vec::new();
        for (v, d) in [
            (104.0625, 3),
            (-104.0625, 3),
            (2.5, 0),
            (0.00005, 4),
            (-0.00004, 4),
            (53.63055, 4),
            (1e20, 2),
            (f64::NAN, 4),
            (12.0, 0),
        ] {
            out.clear();
            push_fixed(&mut out, v, d);
            assert_eq!(
                String::from_utf8_lossy(&out),
                fixed(v, d),
                "{v} with {d} decimals"
            );
        }
        out.clear();
        push_fixed(&mut out, 104.0625, 3);
        assert_eq!(out, b"104.062");
    }
}

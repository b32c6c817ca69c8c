//! The outputs of `edgetherm design`, made from a [`DesignResult`] in the case's units:
//! `layout.csv` (ready to use as `sensors.csv`), `design.json`, the text summary, and
//! `design.svg` (drawn by `svg`). Rendering happens in memory; [`write_design_outputs`]
//! writes each file atomically through [`crate::io::write_atomic`]. Nothing here prints.

mod svg;

use crate::design::{Comparison, Criterion, DesignResult, LayoutScore, LayoutSensor, z_of};
use crate::error::{Error, Result};
use crate::report::format::{CaseUnits, edge_coordinate, rounded, significant};
use serde_json::{Value, json};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The files `edgetherm design` writes into its output directory.
pub const DESIGN_OUTPUT_FILE_NAMES: [&str; 3] = ["layout.csv", "design.json", "design.svg"];

/// `layout.csv`: `sensor,x,y` in the case's length unit, every sensor of the layout (those
/// kept fixed first), ready to use as `sensors.csv`.
pub fn layout_csv(r: &DesignResult) -> String {
    let u = CaseUnits::new(r.units);
    let mut out = String::from("sensor,x,y\n");
    for s in &r.layout {
        let _ = writeln!(
            out,
            "{},{},{}",
            s.id,
            u.len_file(s.position.x),
            u.len_file(s.position.y)
        );
    }
    out
}

fn percent(c: f64) -> String {
    let p = 100.0 * c;
    if (p - p.round()).abs() < 1e-9 {
        format!("{} %", p.round())
    } else {
        format!("{p:.1} %")
    }
}

fn score_json(r: &DesignResult, s: &LayoutScore) -> Value {
    let u = CaseUnits::new(r.units);
    let z = z_of(r.confidence);
    json!({
        "information": rounded(s.information, 4),
        "edge_rms_sd": u.dtemp_json(s.edge_mean_variance.sqrt()),
        "edge_mean_variance": significant(u.dtemp(1.0).powi(2) * s.edge_mean_variance, 6),
        "worst_sd": u.dtemp_json(s.worst_sd),
        "worst_at": {"edge": s.worst_at.0, "position": u.pos_json(r.plate.shape(), s.worst_at.0, s.worst_at.1)},
        "condition_number": s.condition_number.map_or(Value::Null, |c| significant(c, 4)),
        "resolution_length": s.edges.iter().map(|e| (e.edge.name().to_string(), u.len_json(e.resolution_worst.1))).collect::<serde_json::Map<_, _>>(),
        "edges": s.edges.iter().map(|e| json!({
            "edge": e.edge,
            "rms_sd": u.dtemp_json(e.rms_sd),
            "max_sd": u.dtemp_json(e.max_sd),
            "resolution_length_median": u.len_json(e.resolution_median),
            "resolution_length_worst": u.len_json(e.resolution_worst.1),
            "resolution_worst_position": u.pos_json(r.plate.shape(), e.edge, e.resolution_worst.0),
            "resolution_length": e.resolution.iter().map(|(p, l)| json!({"position": u.pos_json(r.plate.shape(), e.edge, *p), "length": u.len_json(*l)})).collect::<Vec<_>>(),
            "profile": e.positions.iter().enumerate().step_by(4).map(|(k, p)| json!({
                "position": u.pos_json(r.plate.shape(), e.edge, *p),
                "sd": u.dtemp_json(e.sd[k]),
                "half_width": u.dtemp_json(z * e.sd[k]),
                "prior_sd": u.dtemp_json(e.prior_sd[k]),
            })).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
    })
}

fn layout_json(r: &DesignResult, layout: &[LayoutSensor]) -> Value {
    let u = CaseUnits::new(r.units);
    Value::Array(
        layout
            .iter()
            .map(|s| {
                json!({
                    "sensor": s.id,
                    "x": u.len_json(s.position.x),
                    "y": u.len_json(s.position.y),
                    "fixed": s.fixed,
                })
            })
            .collect(),
    )
}

/// `design.json` and the `--json` output.
pub fn design_json(r: &DesignResult) -> Value {
    let u = CaseUnits::new(r.units);
    let c = &r.constraints;
    let region = |g: &crate::case::Region| json!({"x": [u.len_json(g.x_min), u.len_json(g.x_max)], "y": [u.len_json(g.y_min), u.len_json(g.y_max)]});
    json!({
        "criterion": r.criterion.name(),
        "criterion_value": criterion_json(r, &r.score),
        "layout": layout_json(r, &r.layout),
        "score": score_json(r, &r.score),
        "against": r.against.as_ref().map(|a: &Comparison| json!({
            "name": a.name,
            "layout": layout_json(r, &a.layout),
            "criterion_value": criterion_json(r, &a.score),
            "score": score_json(r, &a.score),
        })),
        "search": r.search.as_ref().map(|s| json!({
            "new_sensors": s.count,
            "greedy_value": criterion_value_json(r, s.greedy_value),
            "value": criterion_value_json(r, s.value),
            "exchange_passes": s.passes,
            "swaps": s.swaps,
        })),
        "prior": {
            "variation": u.dtemp_json(r.prior.variation_k),
            "smoothing": crate::case::Smoothing::of_penalty_order(r.prior.order).name(),
            "tau": significant(u.dtemp(r.prior.tau_k), 6),
            "unpenalised_sd": u.dtemp_json(r.prior.unpenalised_sd_k),
            "equivalent_strength": significant(r.prior.equivalent_strength, 6),
        },
        "noise": u.dtemp_json(r.noise_k),
        "confidence": r.confidence,
        "constraints": {
            "allowed": c.allowed.iter().map(region).collect::<Vec<_>>(),
            "keep_out": c.keep_out.iter().map(region).collect::<Vec<_>>(),
            "edge_distance": u.len_json(c.edge_distance_m),
            "sensor_spacing": u.len_json(c.sensor_spacing_m),
        },
        "candidates": {
            "count": r.candidate_count,
            "spacing": r.candidate_spacing_m.map(|h| u.len_json(h)),
        },
        "units": {"length": r.units.length.symbol(), "temperature": r.units.temperature.symbol()},
        "version": env!("CARGO_PKG_VERSION"),
        "cautions": r.cautions,
        "defaults_used": r.defaults,
        "estimate_check": r.estimate_check.as_ref().map(|c| json!({
            "draws": c.draws,
            "strength_rule": c.rule,
            "band_half_width": c.edges.iter().map(|(e, w)| (e.name().to_string(), u.dtemp_json(*w))).collect::<serde_json::Map<String, Value>>(),
            "band_half_width_rough": c.rough_edges.as_ref().map(|v| v.iter().map(|(e, w)| (e.name().to_string(), u.dtemp_json(*w))).collect::<serde_json::Map<String, Value>>()),
        })),
    })
}

/// A criterion value in case units (information is dimensionless; edge is a mean variance,
/// written as its root, a standard deviation; worst a standard deviation).
fn criterion_value_json(r: &DesignResult, v: f64) -> Value {
    let u = CaseUnits::new(r.units);
    match r.criterion {
        Criterion::Information => rounded(v, 4),
        Criterion::Edge => u.dtemp_json(v.max(0.0).sqrt()),
        Criterion::Worst => u.dtemp_json(v),
    }
}

fn criterion_json(r: &DesignResult, s: &LayoutScore) -> Value {
    criterion_value_json(r, s.value(r.criterion))
}

/// The text summary for stdout.
pub fn design_text(r: &DesignResult) -> String {
    let u = CaseUnits::new(r.units);
    let z = z_of(r.confidence);
    let conf = percent(r.confidence);
    let lu = u.len_symbol();
    let mut out = String::new();
    let new = r.layout.iter().filter(|s| !s.fixed).count();
    let fixed = r.layout.len() - new;
    let _ = writeln!(
        out,
        "edgetherm {} - sensor layout {} (criterion `{}`: {})",
        env!("CARGO_PKG_VERSION"),
        if r.search.is_some() {
            "design"
        } else {
            "score"
        },
        r.criterion.name(),
        r.criterion.describe()
    );
    out.push('\n');
    let _ = writeln!(
        out,
        "Units: inputs read in {} and {} (plate.toml: length_unit, temperature_unit).",
        lu,
        u.temp_symbol()
    );
    out.push('\n');
    if !r.defaults.is_empty() {
        let _ = writeln!(out, "Defaults used (not stated in the case):");
        for d in &r.defaults {
            let _ = writeln!(out, "  - {d}");
        }
        out.push('\n');
    }
    if let Some(s) = &r.search {
        let _ = writeln!(
            out,
            "{new} new sensors chosen from {} feasible candidates{}{}; greedy, then {} \
             exchange pass{} ({} swap{}).",
            r.candidate_count,
            r.candidate_spacing_m
                .map_or(String::new(), |h| format!(" (grid {})", u.len_show(h))),
            if fixed > 0 {
                format!(", beside {fixed} existing sensors kept fixed")
            } else {
                String::new()
            },
            s.passes,
            if s.passes == 1 { "" } else { "es" },
            s.swaps,
            if s.swaps == 1 { "" } else { "s" },
        );
    } else {
        let _ = writeln!(out, "Scored layout: {} sensors.", r.layout.len());
    }
    out.push('\n');
    let _ = writeln!(
        out,
        "  sensor  {:>9}  {:>9}",
        format!("x [{lu}]"),
        format!("y [{lu}]")
    );
    for s in &r.layout {
        let _ = writeln!(
            out,
            "  {:<6}  {:>9}  {:>9}{}",
            s.id,
            u.len_num(s.position.x),
            u.len_num(s.position.y),
            if s.fixed && r.search.is_some() {
                "  (kept)"
            } else {
                ""
            }
        );
    }
    out.push('\n');
    let score_lines = |out: &mut String, name: &str, s: &LayoutScore| {
        let _ = writeln!(out, "{name}");
        for e in &s.edges {
            let prior_rms = (e.prior_sd.iter().map(|v| v * v).sum::<f64>()
                / e.prior_sd.len().max(1) as f64)
                .sqrt();
            let _ = writeln!(
                out,
                "  {} edge: predicted {conf} band half-width {} on average (root mean square), \
                 {} at most (expected variation before any reading ±{})",
                e.edge,
                u.dtemp_show(z * e.rms_sd),
                u.dtemp_show(z * e.max_sd),
                u.dtemp_show(z * prior_rms),
            );
            let _ = writeln!(
                out,
                "  {} edge: resolution length {} (the worst along the edge, at {} = {}; \
                 median {})",
                e.edge,
                u.len_show(e.resolution_worst.1),
                edge_coordinate(e.edge),
                u.pos_show(r.plate.shape(), e.edge, e.resolution_worst.0),
                u.len_show(e.resolution_median),
            );
        }
        let _ = writeln!(
            out,
            "  information (log det gain) {:.2}; worst standard deviation {} at {} = {} on \
             the {} edge; condition number of the weighted sensor map {}",
            s.information,
            u.dtemp_show(s.worst_sd),
            edge_coordinate(s.worst_at.0),
            u.pos_show(r.plate.shape(), s.worst_at.0, s.worst_at.1),
            s.worst_at.0,
            s.condition_number
                .map_or("infinite".to_string(), |c| format!("{c:.3e}")),
        );
    };
    let name = if r.search.is_some() {
        "This layout".to_string()
    } else {
        "The scored layout".to_string()
    };
    score_lines(&mut out, &name, &r.score);
    if let Some(check) = &r.estimate_check {
        let rough_name = match r.prior.order {
            2 => "slope",
            _ => "size",
        };
        for (k, (edge, w)) in check.edges.iter().enumerate() {
            let rough = check.rough_edges.as_ref().and_then(|v| v.get(k)).map_or(
                String::new(),
                |(_, x)| {
                    format!(
                        "; about {} for a rougher edge (profiles drawn from the {rough_name} prior \
                         with the same variation)",
                        u.dtemp_show(*x)
                    )
                },
            );
            let _ = writeln!(
                out,
                "  {edge} edge: what `estimate` gives on readings from this layout: {conf} band \
                 half-width about {} on average for an edge like the prior{rough} (medians of {} \
                 simulated readings each, smoothing chosen by the {} rule from the readings, as \
                 `estimate` does; the prediction above fixes it at the prior's)",
                u.dtemp_show(*w),
                check.draws,
                check.rule
            );
        }
    }
    if let Some(a) = &r.against {
        out.push('\n');
        score_lines(
            &mut out,
            &format!("Compared with {} ({} sensors)", a.name, a.layout.len()),
            &a.score,
        );
        out.push('\n');
        let (ours, theirs) = (r.score.value(r.criterion), a.score.value(r.criterion));
        let verdict = match r.criterion {
            Criterion::Information => {
                format!(
                    "information {:.2} against {:.2} (higher is better)",
                    ours, theirs
                )
            }
            Criterion::Edge => format!(
                "root-mean-square standard deviation along the edges {} against {} (lower is better)",
                u.dtemp_show(ours.sqrt()),
                u.dtemp_show(theirs.sqrt())
            ),
            Criterion::Worst => format!(
                "worst standard deviation {} against {} (lower is better)",
                u.dtemp_show(ours),
                u.dtemp_show(theirs)
            ),
        };
        let _ = writeln!(out, "Criterion `{}`: {verdict}.", r.criterion.name());
    }
    out.push('\n');
    let _ = writeln!(out, "Cautions");
    for c in &r.cautions {
        let _ = writeln!(out, "  - {c}");
    }
    out
}

/// Render `layout.csv`, `design.json` and `design.svg`, in the order of
/// [`DESIGN_OUTPUT_FILE_NAMES`].
pub fn render_design_outputs(r: &DesignResult) -> Result<Vec<(&'static str, Vec<u8>)>> {
    let json = serde_json::to_string_pretty(&design_json(r))
        .map_err(|e| Error::Internal(format!("cannot format design.json: {e}")))?;
    let svg = svg::design_svg(r)?;
    Ok(vec![
        ("layout.csv", layout_csv(r).into_bytes()),
        ("design.json", format!("{json}\n").into_bytes()),
        ("design.svg", svg.into_bytes()),
    ])
}

/// Render every output and write it into `out_dir` (created if needed) as one set
/// ([`crate::io::OutputSet`]); nothing is written unless every output rendered. The caller must first check
/// with [`crate::io::output::check_output_names`] that no output would replace an input.
pub fn write_design_outputs(r: &DesignResult, out_dir: &Path) -> Result<Vec<PathBuf>> {
    let outputs = render_design_outputs(r)?;
    let mut set = crate::io::OutputSet::begin(out_dir, "design")?;
    for (name, bytes) in outputs {
        set.write(name, &bytes)?;
    }
    set.commit()
}

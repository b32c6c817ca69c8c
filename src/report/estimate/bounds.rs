//! The strict bounds of an estimate in the outputs: the `bounds` and `gradient_study` keys of
//! `summary.json`, the text lines, the cautions, and the lookups the tables and plots use.
//! Everything in the case's units; a gradient is in the case's temperature unit per length
//! unit.

use crate::bounds::{BoundsOutcome, BoundsResult};
use crate::estimate::EstimateResult;
use crate::geometry::Edge;
use crate::report::format::{CaseUnits, RATIO_FILE_DECIMALS, fixed, rounded, significant};
use serde_json::{Value, json};

/// Significant digits of a gradient in the outputs.
const GRADIENT_DIGITS: i32 = 3;

/// A gradient, K/m, in case units (temperature unit per length unit).
pub(crate) fn gradient_case(u: &CaseUnits, g_k_per_m: f64) -> f64 {
    u.gradient(g_k_per_m)
}

/// The gradient unit in files, e.g. `C/mm` (`C/deg` on a round part).
pub(crate) fn gradient_unit(u: &CaseUnits) -> String {
    format!("{}/{}", u.temp_code(), u.gradient_per())
}

/// The gradient unit for a reader, e.g. `°C/mm` (`°C/°` on a round part).
pub(crate) fn gradient_unit_show(u: &CaseUnits) -> String {
    format!("{}/{}", u.temp_symbol(), u.gradient_per_show())
}

/// A gradient (K/m) for a reader in case units, three significant digits.
pub(crate) fn gradient_text(u: &CaseUnits, g_k_per_m: f64) -> String {
    let g = gradient_case(u, g_k_per_m);
    match significant(g, GRADIENT_DIGITS) {
        Value::Number(n) => n.to_string(),
        _ => "–".to_string(),
    }
}

/// The strict-bound interval of the hottest temperature under the stated gradient limit,
/// kelvin, when it was computed.
pub fn bounds_hottest_interval(r: &EstimateResult) -> Option<[f64; 2]> {
    match r.bounds.as_ref()?.stated.as_ref()? {
        (_, BoundsOutcome::Bounded { hottest_k, .. }) => Some(*hottest_k),
        _ => None,
    }
}

/// The bound envelopes along `edge` (lower, upper; kelvin), aligned with the edge's
/// positions in the result.
pub(crate) fn edge_envelope(r: &EstimateResult, edge: Edge) -> Option<(&[f64], &[f64])> {
    match r.bounds.as_ref()?.stated.as_ref()? {
        (_, BoundsOutcome::Bounded { edges, .. }) => edges
            .iter()
            .find(|e| e.edge == edge)
            .map(|e| (e.lower_k.as_slice(), e.upper_k.as_slice())),
        _ => None,
    }
}

/// The stated gradient limit, K/m.
pub(crate) fn stated_gradient(r: &EstimateResult) -> Option<f64> {
    r.bounds.as_ref()?.stated.as_ref().map(|(g, _)| *g)
}

/// What the bounds say about the `--limit` (kelvin): `Some(true)` when the upper bound of
/// the hottest temperature is below it (ruled out), `Some(false)` when it is not.
pub(crate) fn limit_ruled_out(r: &EstimateResult) -> Option<bool> {
    let limit = r.exceedance.as_ref()?.limit;
    bounds_hottest_interval(r).map(|[_, hi]| hi < limit)
}

/// The verdict on the limit in words.
pub(crate) fn limit_verdict(r: &EstimateResult) -> Option<String> {
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let limit = r.exceedance.as_ref()?.limit;
    let [lo, hi] = bounds_hottest_interval(r)?;
    Some(if hi < limit {
        format!(
            "ruled out under the strict bounds: the hottest temperature is at most {}",
            u.temp_show(hi)
        )
    } else if lo > limit {
        format!(
            "exceeded under the strict bounds: the hottest temperature is at least {}",
            u.temp_show(lo)
        )
    } else {
        "not ruled out under the strict bounds".to_string()
    })
}

/// The `bounds` key of `summary.json` (only with a stated gradient limit).
pub(crate) fn bounds_json(r: &EstimateResult) -> Option<Value> {
    let b = r.bounds.as_ref()?;
    let (g, outcome) = b.stated.as_ref()?;
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let ratio = |v: f64| rounded(v, RATIO_FILE_DECIMALS);
    let mut v = json!({
        "max_gradient": significant(gradient_case(&u, *g), GRADIENT_DIGITS),
        "max_gradient_unit": gradient_unit(&u),
        "confidence": ratio(b.confidence),
        "sigma_stated": !b.approximate,
        "min_temperature": b.temperature_limits_k.0.map_or(Value::Null, |t| u.temp_json(t)),
        "max_temperature": b.temperature_limits_k.1.map_or(Value::Null, |t| u.temp_json(t)),
    });
    let obj = v.as_object_mut()?;
    match outcome {
        BoundsOutcome::Bounded {
            hottest_k,
            programs,
            ..
        } => {
            obj.insert("admissible".into(), json!(true));
            obj.insert(
                "hottest_temperature_interval".into(),
                json!([u.temp_json(hottest_k[0]), u.temp_json(hottest_k[1])]),
            );
            obj.insert("programs".into(), json!(programs));
        }
        BoundsOutcome::Empty => {
            obj.insert("admissible".into(), json!(false));
            obj.insert("hottest_temperature_interval".into(), Value::Null);
            obj.insert("message".into(), json!(empty_message(&u, *g, b)));
        }
        BoundsOutcome::Failed { reason } => {
            obj.insert("admissible".into(), Value::Null);
            obj.insert("hottest_temperature_interval".into(), Value::Null);
            obj.insert(
                "message".into(),
                json!(format!("strict bounds not computed: {reason}")),
            );
        }
    }
    if let Some(x) = limit_ruled_out(r) {
        obj.insert("limit_ruled_out".into(), json!(x));
    }
    Some(v)
}

/// The `gradient_study` key of `summary.json` (whenever the bounds were asked for).
pub(crate) fn gradient_study_json(r: &EstimateResult) -> Option<Value> {
    let b = r.bounds.as_ref()?;
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let rows: Vec<Value> = b
        .study
        .rows
        .iter()
        .map(|row| {
            json!({
                "max_gradient": significant(gradient_case(&u, row.gradient_k_per_m), GRADIENT_DIGITS),
                "hottest_temperature_upper_bound":
                    row.hottest_upper_k.map_or(Value::Null, |t| u.temp_json(t)),
            })
        })
        .collect();
    Some(json!({
        "minimum_required_gradient": b
            .study
            .min_gradient_k_per_m
            .map_or(Value::Null, |g| significant(gradient_case(&u, g), GRADIENT_DIGITS)),
        "gradient_unit": gradient_unit(&u),
        "confidence": rounded(b.confidence, RATIO_FILE_DECIMALS),
        "sigma_stated": !b.approximate,
        "peak_upper_bound": rows,
    }))
}

fn empty_message(u: &CaseUnits, g: f64, b: &BoundsResult) -> String {
    let need = b
        .study
        .min_gradient_k_per_m
        .map(|m| {
            format!(
                " (they need at least {} {})",
                gradient_text(u, m),
                gradient_unit_show(u)
            )
        })
        .unwrap_or_default();
    format!(
        "no hidden-edge profile changing by at most {} {} along the edge reproduces the \
         readings at the stated confidence{need}: the stated gradient limit is ruled out by the \
         readings, or a sensor is faulty",
        gradient_text(u, g),
        gradient_unit_show(u)
    )
}

/// The cautions the bounds add.
pub(crate) fn bounds_cautions(r: &EstimateResult) -> Vec<String> {
    let Some(b) = r.bounds.as_ref() else {
        return Vec::new();
    };
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let mut out = Vec::new();
    if b.approximate && (b.stated.is_some() || b.study.min_gradient_k_per_m.is_some()) {
        out.push(
            "The strict bounds use a reading uncertainty estimated from the residuals, not a \
             stated one: their confidence is approximate. State [noise] sigma or a tolerance \
             class for bounds that hold as stated."
                .to_string(),
        );
    }
    match &b.stated {
        Some((g, BoundsOutcome::Empty)) => {
            out.push(format!("No strict bounds: {}.", empty_message(&u, *g, b)));
        }
        Some((_, BoundsOutcome::Failed { reason })) => {
            out.push(format!("The strict bounds could not be computed: {reason}"));
        }
        _ => {}
    }
    if let Some((g, BoundsOutcome::Bounded { .. })) = &b.stated {
        out.push(format!(
            "The strict bounds hold only if no hidden edge changes faster than {} {} along \
             itself; a steeper hot spot can be hotter than their upper bound.",
            gradient_text(&u, *g),
            gradient_unit_show(&u)
        ));
    }
    out
}

/// The text-summary lines of the bounds: `(label, text)`.
pub(crate) fn bounds_text(r: &EstimateResult) -> Vec<(String, String)> {
    let Some(b) = r.bounds.as_ref() else {
        return Vec::new();
    };
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let conf = super::summary::percent(b.confidence);
    let unit = gradient_unit_show(&u);
    let mut out = Vec::new();
    let label = "Strict bounds".to_string();
    match &b.stated {
        Some((g, BoundsOutcome::Bounded { hottest_k, .. })) => {
            out.push((
                label.clone(),
                format!(
                    "hottest temperature in [{}, {}] {} if no hidden edge changes by more than \
                     {} {unit} ({conf}, simultaneous{})",
                    u.temp_num(hottest_k[0]),
                    u.temp_num(hottest_k[1]),
                    u.temp_symbol(),
                    gradient_text(&u, *g),
                    if b.approximate { ", approximate" } else { "" }
                ),
            ));
            if let Some(v) = limit_verdict(r) {
                out.push((String::new(), format!("limit {v}")));
            }
        }
        Some((g, BoundsOutcome::Empty)) => out.push((
            label.clone(),
            format!(
                "none: the readings rule out a gradient limit of {} {unit}",
                gradient_text(&u, *g)
            ),
        )),
        Some((_, BoundsOutcome::Failed { reason })) => {
            out.push((label.clone(), format!("not computed: {reason}")));
        }
        None => out.push((
            label.clone(),
            "none without a gradient limit ([bounds] max_gradient in plate.toml)".to_string(),
        )),
    }
    let study = &b.study;
    if let Some(m) = study.min_gradient_k_per_m {
        out.push((
            "Gradient".to_string(),
            format!(
                "the readings need a hidden edge changing by at least {} {unit} ({conf})",
                gradient_text(&u, m)
            ),
        ));
        if !study.rows.is_empty() {
            let cells: Vec<String> = study
                .rows
                .iter()
                .map(|row| {
                    format!(
                        "{} -> {}",
                        gradient_text(&u, row.gradient_k_per_m),
                        row.hottest_upper_k
                            .map_or("–".to_string(), |t| u.temp_num(t))
                    )
                })
                .collect();
            out.push((
                String::new(),
                format!(
                    "hottest possible ({}) if it changes by at most G {unit}:",
                    u.temp_symbol()
                ),
            ));
            for chunk in cells.chunks(3) {
                out.push((String::new(), format!("  {}", chunk.join("   "))));
            }
        }
    } else if b.failure.is_none() {
        out.push((
            "Gradient".to_string(),
            "no gradient limit reproduces the readings at the stated confidence".to_string(),
        ));
    }
    out
}

/// A peak-upper-bound table row for the HTML page: `(gradient text, upper text)`.
pub(crate) fn study_rows(r: &EstimateResult) -> Vec<(String, String)> {
    let Some(b) = r.bounds.as_ref() else {
        return Vec::new();
    };
    let u = CaseUnits::of_plate(r.units, &r.plate);
    b.study
        .rows
        .iter()
        .map(|row| {
            (
                gradient_text(&u, row.gradient_k_per_m),
                row.hottest_upper_k
                    .map_or("–".to_string(), |t| fixed(u.temp(t), 2)),
            )
        })
        .collect()
}

/// The page section "How hot could it be?": the stated bounds, the limit verdict, the
/// smallest gradient the readings need and the table of the peak's upper bound against the
/// assumed gradient limit. Empty when the bounds were not asked for.
pub(crate) fn bounds_html(r: &EstimateResult) -> String {
    use crate::report::format::escape_html as esc;
    use std::fmt::Write as _;
    let Some(b) = r.bounds.as_ref() else {
        return String::new();
    };
    let u = CaseUnits::of_plate(r.units, &r.plate);
    let conf = super::summary::percent(b.confidence);
    let unit = gradient_unit_show(&u);
    // per length unit, or per degree along a circle
    let len = if r.plate.shape().is_round() {
        "degree"
    } else {
        u.len_symbol()
    };
    let mut o = String::new();
    o.push_str("<h2>How hot could it be? Strict bounds</h2>\n");
    let _ = writeln!(
        o,
        "<p>Strict bounds hold for <em>every</em> hidden-edge profile that reproduces the \
         readings within their {conf} chi-square region and changes by at most G {} per {len} \
         along the edge, whatever its shape, a hot spot narrower than the sensors resolve \
         included. They rest on that statement about G, not on the smoothing prior of the \
         estimate{}.</p>",
        esc(u.temp_symbol()),
        if b.approximate {
            "; with the reading uncertainty estimated from the residuals their confidence is \
             approximate"
        } else {
            ""
        }
    );
    match &b.stated {
        Some((g, BoundsOutcome::Bounded { hottest_k, .. })) => {
            let _ = writeln!(
                o,
                "<div class=\"card\"><h3>Hottest temperature if the edge changes by at most {} \
                 {}</h3><p class=\"big\">{} to {}</p><p>{conf} strict bounds (simultaneous \
                 over the whole edge){}</p></div>",
                esc(&gradient_text(&u, *g)),
                esc(&unit),
                esc(&u.temp_num(hottest_k[0])),
                esc(&u.temp_show(hottest_k[1])),
                limit_verdict(r)
                    .map(|v| format!(
                        "<br/>Limit {}: {}",
                        esc(&u.temp_show(r.exceedance.as_ref().map_or(f64::NAN, |x| x.limit))),
                        esc(&v)
                    ))
                    .unwrap_or_default()
            );
        }
        Some((g, BoundsOutcome::Empty)) => {
            let _ = writeln!(
                o,
                "<div class=\"card alarm\"><h3>Gradient limit {} {} ruled out</h3><p>{}</p></div>",
                esc(&gradient_text(&u, *g)),
                esc(&unit),
                esc(&empty_message(&u, *g, b))
            );
        }
        Some((_, BoundsOutcome::Failed { reason })) => {
            let _ = writeln!(o, "<p>Strict bounds not computed: {}</p>", esc(reason));
        }
        None => {
            let _ = writeln!(
                o,
                "<p>No gradient limit was stated (<code>[bounds] max_gradient</code> in \
                 plate.toml), so no strict interval is given; the table shows what each \
                 assumption would allow.</p>"
            );
        }
    }
    if let Some(m) = b.study.min_gradient_k_per_m {
        let _ = writeln!(
            o,
            "<p>The readings need a hidden edge that changes by at least <strong>{} {}</strong> \
             somewhere ({conf}).</p>",
            esc(&gradient_text(&u, m)),
            esc(&unit)
        );
    }
    let rows = study_rows(r);
    if !rows.is_empty() {
        let _ = writeln!(
            o,
            "<table class=\"kv\"><tr><th>if the edge changes by at most G [{}]</th><th>the \
             hottest temperature is at most [{}]</th></tr>",
            esc(&unit),
            esc(u.temp_symbol())
        );
        for (g, t) in rows {
            let _ = writeln!(o, "<tr><td>{}</td><td>{}</td></tr>", esc(&g), esc(&t));
        }
        o.push_str("</table>\n");
    }
    o
}

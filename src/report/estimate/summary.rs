//! `summary.json` (`docs/case-files.md`, summary.json, the part other programs rely on) and the text summary a person
//! reads on stdout, both in the case's units.

use super::tables::mean_half_width;
use crate::estimate::{DoubtfulSensor, EdgeResult, EstimateResult};
use crate::report::format::{
    CaseUnits, RATIO_FILE_DECIMALS, SIGNIFICANT_DIGITS, edge_coordinate, fixed, rounded,
    significant, significant_text,
};
use serde_json::{Map, Value, json};
use std::fmt::Write as _;

pub use crate::estimate::SAFETY_CAUTION;

/// The unit of the heat flows: per unit depth of the plate, into the plate.
pub(crate) const HEAT_FLOW_UNIT: &str = "W/m";

/// Whether a caution already says what [`SAFETY_CAUTION`] says (estimates, not
/// measurements; decisions follow licensed practice), in whatever words.
fn is_safety_caution(c: &str) -> bool {
    let c = c.to_lowercase();
    c == SAFETY_CAUTION.to_lowercase()
        || (c.contains("not measurements") && c.contains("licensed practice"))
}

/// The cautions of a result, then the safety caution (always, exactly once: a result's own
/// wording of it is replaced by [`SAFETY_CAUTION`]).
pub fn cautions(r: &EstimateResult) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    let untested = untestable_fit(r);
    for c in r
        .cautions
        .iter()
        .chain(&super::bounds::bounds_cautions(r))
        .chain(&untested)
    {
        if !is_safety_caution(c) && !out.contains(c) {
            out.push(c.clone());
        }
    }
    out.push(SAFETY_CAUTION.to_string());
    out
}

/// Below this many degrees of freedom of the residuals (readings less effective parameters)
/// the chi-square of the fit has nearly nothing to test: the readings cannot check the model.
pub const MIN_CHECKING_DOF: f64 = 1.0;

/// The caution for a fit that leaves under [`MIN_CHECKING_DOF`] degrees of freedom: the
/// smoothness chosen lets the model follow every reading, so the readings cannot check it.
pub(crate) fn untestable_fit(r: &EstimateResult) -> Option<String> {
    (r.fit.dof < MIN_CHECKING_DOF).then(|| {
        format!(
            "The readings cannot check the model: {} readings against {} effective parameters \
             leave {} degrees of freedom, so the fitted profile passes through almost every \
             reading and the chi-square and p-value say next to nothing (too few sensors for \
             the smoothness the data chose). More sensors, a repeat set of readings, or a \
             stated stiffer smoothing ([fit] smoothing = \"curvature\" with a fixed \
             strength) would leave room for a check; until then the bands rest on the model and \
             the stated sigma, which these readings cannot confirm.",
            r.fit.readings_used,
            fixed(r.strength.effective_parameters, 2),
            fixed(r.fit.dof, 2)
        )
    })
}

/// The sensors left out of the fit or marked as suspect: `(index, reason)`.
pub(crate) fn flagged(r: &EstimateResult) -> Vec<(usize, &str)> {
    r.sensors
        .iter()
        .enumerate()
        .filter_map(|(k, s)| s.flag.as_deref().map(|f| (k, f)))
        .collect()
}

/// What a person reads about a sensor kept under two explanations (a hot spot under it, or
/// a fault).
pub(crate) fn doubt_message(r: &EstimateResult, d: &DoubtfulSensor) -> String {
    let u = CaseUnits::new(r.units);
    let ls = u.len_symbol();
    let ts = u.temp_symbol();
    let mut m = format!(
        "{} reads {} standard deviations above what the other sensors predict, which alone \
         would call it faulty (probability {}). A hot spot on the {} edge near {} = {}, about \
         {} wide and reaching about {}, explains it as well: it is kept, so the hotter \
         explanation drives the hottest point and the verdict. Check the sensor.",
        d.sensor,
        fixed(d.loo_residual, 1),
        fixed(d.fault_probability, 4),
        d.edge,
        edge_coordinate(d.edge),
        u.pos_show(r.plate.shape(), d.edge, d.position),
        u.len_show(d.width),
        u.temp_show(d.peak_temperature),
    );
    if let Some(g) = d.min_gradient {
        let _ = write!(
            m,
            " The hot spot is ruled out only if the edge cannot change by more than {} {ts}/{ls} \
             along it (a stated gradient limit), or if the sensor is known to be faulty.",
            significant_text(u.dtemp(g) / u.len(1.0), 3),
        );
    }
    m
}

/// The confidence as a percentage for a reader (`95 %`, `99.5 %`).
pub(crate) fn percent(p: f64) -> String {
    let v = 100.0 * p;
    let s = fixed(v, 1);
    let s = s.strip_suffix(".0").unwrap_or(&s);
    format!("{s} %")
}

/// Where the estimate of an edge is highest: `(position, temperature)`, SI.
pub(crate) fn edge_maximum(e: &EdgeResult) -> Option<(f64, f64)> {
    e.positions
        .iter()
        .zip(&e.estimate)
        .filter(|(s, t)| s.is_finite() && t.is_finite())
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(&s, &t)| (s, t))
}

/// `summary.json` as a JSON value: the keys of `docs/case-files.md`, summary.json with their meaning, plus heat
/// flows, per-edge band widths, the bootstrap mode and the readings used. Each group of keys
/// is made by the step named after it.
pub fn summary_json(r: &EstimateResult) -> Value {
    let mut out = Map::new();
    out.insert("hottest".into(), hottest_json(r));
    if let Some(x) = exceedance_json(r) {
        out.insert("exceedance".into(), x);
    }
    out.insert("strength".into(), strength_json(r));
    out.insert("fit".into(), fit_json(r));
    insert_edges_json(r, &mut out);
    insert_sensors_json(r, &mut out);
    if let Some(b) = super::bounds::bounds_json(r) {
        out.insert("bounds".into(), b);
    }
    if let Some(g) = super::bounds::gradient_study_json(r) {
        out.insert("gradient_study".into(), g);
    }
    if !r.convection.is_empty() {
        out.insert("convection".into(), convection_json(r));
    }
    insert_run_json(r, &mut out);
    Value::Object(out)
}

/// `convection`: per convective edge whose `h` was estimated, `h` and its interval in
/// W/(m² K) (four significant digits), the search range, and whether the readings bound `h`
/// on each side.
fn convection_json(r: &EstimateResult) -> Value {
    let mut out = Map::new();
    for c in &r.convection {
        out.insert(
            c.edge.name().into(),
            json!({
                "h": significant(c.h, 4),
                "h_interval": [significant(c.h_interval[0], 4), significant(c.h_interval[1], 4)],
                "h_range": [significant(c.h_range[0], 4), significant(c.h_range[1], 4)],
                "bounded_below": !c.open_below,
                "bounded_above": !c.open_above,
                "unit": "W/(m^2 K)",
            }),
        );
    }
    Value::Object(out)
}

/// A dimensionless value in `summary.json`, at the precision of the data files.
fn ratio(v: f64) -> Value {
    rounded(v, RATIO_FILE_DECIMALS)
}

/// `hottest`: the hottest point, its intervals, and how the replicates' hottest points
/// spread over the edges and around the main peak.
fn hottest_json(r: &EstimateResult) -> Value {
    let u = CaseUnits::new(r.units);
    let h = &r.hottest;
    let mut shares = Map::new();
    for (edge, share) in &h.edge_shares {
        shares.insert(edge.name().to_string(), ratio(*share));
    }
    json!({
        "edge": h.edge.name(),
        "position": u.pos_json(r.plate.shape(), h.edge, h.position),
        "position_interval": [
            u.pos_json(r.plate.shape(), h.edge, h.position_interval[0]),
            u.pos_json(r.plate.shape(), h.edge, h.position_interval[1]),
        ],
        "temperature": u.temp_json(h.temperature),
        "temperature_interval": [
            u.temp_json(h.temperature_interval[0]),
            u.temp_json(h.temperature_interval[1]),
        ],
        "edge_shares": shares,
        "main_peak_share": ratio(h.main_peak_share),
    })
}

/// `exceedance`: the limit verdict, only when a limit was given.
fn exceedance_json(r: &EstimateResult) -> Option<Value> {
    let u = CaseUnits::new(r.units);
    r.exceedance.as_ref().map(|x| {
        json!({
            "limit": u.temp_json(x.limit),
            "probability": ratio(x.probability),
            "alarm_probability": ratio(x.alarm_probability),
            "alarm": x.alarm,
        })
    })
}

/// `strength`: the regularisation strength, its rule and the smoothing.
fn strength_json(r: &EstimateResult) -> Value {
    json!({
        "method": r.strength.method,
        "value": significant(r.strength.value, SIGNIFICANT_DIGITS),
        "effective_parameters": ratio(r.strength.effective_parameters),
        "at_range_end": r.strength.at_range_end,
        "smoothing": r.strength.smoothing,
        "smoothing_chosen_by_evidence": r.strength.smoothing_auto,
    })
}

/// `fit`: the reading uncertainty and the fit quality.
fn fit_json(r: &EstimateResult) -> Value {
    let u = CaseUnits::new(r.units);
    json!({
        "sigma": u.dtemp_json(r.fit.sigma),
        "sigma_source": r.fit.sigma_source,
        "chi_square": ratio(r.fit.chi_square),
        "dof": ratio(r.fit.dof),
        "p_value": r.fit.p_value.map_or(Value::Null, |p| significant(p, SIGNIFICANT_DIGITS)),
        "readings_used": r.fit.readings_used,
    })
}

/// The per-edge keys: `resolution_length`, `resolution`, `heat_flow` with its unit, and
/// `edges` (maximum and mean band half-widths of each unknown edge).
fn insert_edges_json(r: &EstimateResult, out: &mut Map<String, Value>) {
    let u = CaseUnits::new(r.units);
    let edge_map = |f: &dyn Fn(&EdgeResult) -> Option<Value>| -> Value {
        let mut m = Map::new();
        for e in &r.edges {
            if let Some(v) = f(e) {
                m.insert(e.edge.name().to_string(), v);
            }
        }
        Value::Object(m)
    };
    out.insert(
        "resolution_length".into(),
        edge_map(&|e| Some(u.len_json(e.resolution_length))),
    );
    out.insert(
        "resolution".into(),
        edge_map(&|e| {
            Some(json!({
                "worst": u.len_json(e.resolution_length),
                "worst_position": u.pos_json(r.plate.shape(), e.edge, e.resolution_worst_position),
                "at_hottest": u.len_json(e.resolution_at_hottest),
            }))
        }),
    );
    let mut flows = edge_map(&|e| {
        e.heat_flow.map(|q| {
            json!({
                "value": rounded(q.value, 3),
                "interval": [rounded(q.lower, 3), rounded(q.upper, 3)],
            })
        })
    });
    // convective edges too: −h ∫ (T − T∞) along each, negative when heat leaves
    for (edge, q) in &r.convective_heat_flows {
        flows[edge.name()] = json!({
            "value": rounded(q.value, 3),
            "interval": [rounded(q.lower, 3), rounded(q.upper, 3)],
        });
    }
    out.insert("heat_flow".into(), flows);
    out.insert(
        "heat_flow_unit".into(),
        json!(format!(
            "{HEAT_FLOW_UNIT}, {}, into the plate",
            if r.plate.shape().is_round() {
                "per unit length of the pipe (or per unit thickness of a disk)"
            } else {
                "per unit depth of the plate"
            }
        )),
    );
    let edges: Vec<Value> = r
        .edges
        .iter()
        .map(|e| {
            let (pos, temp) = edge_maximum(e).unwrap_or((f64::NAN, f64::NAN));
            json!({
                "edge": e.edge.name(),
                "samples": e.positions.len(),
                "maximum": {"position": u.pos_json(r.plate.shape(), e.edge, pos), "temperature": u.temp_json(temp)},
                "mean_half_width": {
                    "pointwise": u.dtemp_json(mean_half_width(&e.lower, &e.upper)),
                    "simultaneous": u.dtemp_json(
                        mean_half_width(&e.simultaneous_lower, &e.simultaneous_upper)),
                    "linear": u.dtemp_json(mean_half_width(&e.linear_lower, &e.linear_upper)),
                },
            })
        })
        .collect();
    out.insert("edges".into(), Value::Array(edges));
}

/// The sensor keys: `flagged_sensors` (left out or suspect, with the reason) and
/// `doubtful_sensors` (kept under two explanations, with the hot-spot explanation).
fn insert_sensors_json(r: &EstimateResult, out: &mut Map<String, Value>) {
    let u = CaseUnits::new(r.units);
    let flagged_sensors: Vec<Value> = flagged(r)
        .into_iter()
        .map(|(k, reason)| {
            let s = &r.sensors[k];
            json!({
                "sensor": s.sensor,
                "loo_residual": s.loo_residual.map_or(Value::Null, ratio),
                "reason": reason,
            })
        })
        .collect();
    out.insert("flagged_sensors".into(), Value::Array(flagged_sensors));
    let doubtful: Vec<Value> = r
        .doubtful_sensors
        .iter()
        .map(|d| {
            json!({
                "sensor": d.sensor,
                "loo_residual": ratio(d.loo_residual),
                "fault_probability": ratio(d.fault_probability),
                "hot_explanation": {
                    "edge": d.edge.name(),
                    "position": u.pos_json(r.plate.shape(), d.edge, d.position),
                    "width": u.len_json(d.width),
                    "peak_temperature": u.temp_json(d.peak_temperature),
                    "min_gradient": d.min_gradient.map_or(Value::Null, |g| {
                        significant(u.dtemp(g) / u.len(1.0), 3)
                    }),
                },
                "message": doubt_message(r, d),
            })
        })
        .collect();
    out.insert("doubtful_sensors".into(), Value::Array(doubtful));
}

/// The keys that describe the run: sensor count, units, confidence, bootstrap, seed,
/// version, and the cautions (the safety caution always).
fn insert_run_json(r: &EstimateResult, out: &mut Map<String, Value>) {
    let u = CaseUnits::new(r.units);
    out.insert("sensor_count".into(), json!(r.sensors.len()));
    out.insert(
        "units".into(),
        json!({"length": u.len_symbol(), "temperature": u.temp_code()}),
    );
    out.insert("confidence".into(), ratio(r.confidence));
    out.insert("replicates".into(), json!(r.replicates));
    out.insert("bootstrap_mode".into(), json!(r.bootstrap_mode));
    out.insert("seed".into(), json!(r.seed));
    out.insert("version".into(), json!(env!("CARGO_PKG_VERSION")));
    out.insert("cautions".into(), json!(cautions(r)));
    if let Some(c) = &r.conversion {
        let cold_junction = match c.cold_junction {
            crate::case::ColdJunction::Fixed(k) => u.temp_json(k),
            crate::case::ColdJunction::Column => json!("column"),
        };
        out.insert(
            "readings_conversion".into(),
            json!({
                "signal": "emf_mv",
                "type": c.tc_type.name(),
                "reference_function": "NIST ITS-90 (NIST Monograph 175)",
                "cold_junction": cold_junction,
                "description": c.describe(&r.units),
            }),
        );
    }
    if !r.read_as.is_empty() {
        out.insert("inputs_read_as".into(), json!(r.read_as));
    }
    if r.sensors.iter().any(|s| s.offset.is_some()) {
        let offsets: Map<String, Value> = r
            .sensors
            .iter()
            .filter_map(|s| s.offset.map(|o| (s.sensor.clone(), u.dtemp_json(o))))
            .collect();
        out.insert("sensor_offsets".into(), Value::Object(offsets));
    }
}

/// The calibration offsets of the sensors that have one ("TC01 0.3 °C, TC04 -0.2 °C"), empty
/// when none has.
pub(crate) fn offsets_text(r: &EstimateResult) -> String {
    let u = CaseUnits::new(r.units);
    r.sensors
        .iter()
        .filter_map(|s| {
            s.offset
                .map(|o| format!("{} {}", s.sensor, u.dtemp_show(o)))
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// Width of the label column of the text summary.
const LABEL: usize = 17;

fn line(out: &mut String, label: &str, text: &str) {
    let _ = writeln!(out, "{label:<LABEL$}{text}");
}

/// The text summary for stdout: what a person needs in ten seconds — the hottest point with
/// its intervals, the limit verdict, flagged sensors, resolution, fit quality, heat flows and
/// the cautions (the safety caution always). Each block is written by the step named after
/// it.
pub fn text_summary(r: &EstimateResult) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "edgetherm {} - hidden edge estimate ({} intervals, {} {} bootstrap replicates, \
         seed {})",
        env!("CARGO_PKG_VERSION"),
        percent(r.confidence),
        r.replicates,
        r.bootstrap_mode,
        r.seed
    );
    out.push('\n');
    let u = CaseUnits::new(r.units);
    line(
        &mut out,
        "Units",
        &format!(
            "inputs read in {} and {} (plate.toml: length_unit, temperature_unit)",
            u.len_symbol(),
            u.temp_symbol()
        ),
    );
    for how in &r.read_as {
        line(
            &mut out,
            "Read as",
            &format!("{}: {}", how.file, how.description),
        );
    }
    if let Some(c) = &r.conversion {
        line(&mut out, "Readings", &c.describe(&r.units));
    }
    let offsets = offsets_text(r);
    if !offsets.is_empty() {
        line(
            &mut out,
            "Offsets",
            &format!("subtracted from the readings (sensors.csv): {offsets}"),
        );
    }
    hottest_text(r, &mut out);
    limit_text(r, &mut out);
    for (label, text) in super::bounds::bounds_text(r) {
        line(&mut out, &label, &text);
    }
    sensors_text(r, &mut out);
    resolution_text(r, &mut out);
    fit_text(r, &mut out);
    convection_text(r, &mut out);
    heat_flow_text(r, &mut out);
    out.push('\n');
    out.push_str("Cautions\n");
    for c in cautions(r) {
        let _ = writeln!(out, "  ! {c}");
    }
    out
}

/// The hottest point and its intervals, with a note when replicates put it on another edge
/// or away from the main peak.
fn hottest_text(r: &EstimateResult, out: &mut String) {
    let u = CaseUnits::new(r.units);
    let h = &r.hottest;
    let conf = percent(r.confidence);
    line(
        out,
        "Hottest point",
        &format!(
            "{}   {conf} interval [{}, {}] {}",
            u.temp_show(h.temperature),
            u.temp_num(h.temperature_interval[0]),
            u.temp_num(h.temperature_interval[1]),
            u.temp_symbol()
        ),
    );
    line(
        out,
        "",
        &format!(
            "{} edge, {} = {}   {conf} interval [{}, {}] {}",
            h.edge,
            edge_coordinate(h.edge),
            u.pos_show(r.plate.shape(), h.edge, h.position),
            u.pos_num(r.plate.shape(), h.edge, h.position_interval[0]),
            u.pos_num(r.plate.shape(), h.edge, h.position_interval[1]),
            u.pos_symbol(r.plate.shape(), h.edge)
        ),
    );
    let other_edges: Vec<String> = h
        .edge_shares
        .iter()
        .filter(|(e, share)| *e != h.edge && *share > 0.0)
        .map(|(e, share)| format!("{e} {}", percent(*share)))
        .collect();
    if !other_edges.is_empty() {
        line(
            out,
            "",
            &format!(
                "replicates whose hottest point is on another edge: {}",
                other_edges.join(", ")
            ),
        );
    }
    if h.main_peak_share.is_finite() && h.main_peak_share < 0.9 {
        line(
            out,
            "",
            &format!(
                "only {} of the replicates put the peak near this position: another peak is \
                 possible",
                percent(h.main_peak_share)
            ),
        );
    }
}

/// The limit verdict, when a limit was given.
fn limit_text(r: &EstimateResult, out: &mut String) {
    let u = CaseUnits::new(r.units);
    if let Some(x) = &r.exceedance {
        let verdict = if x.alarm { "ALARM" } else { "no alarm" };
        line(
            out,
            "Limit",
            &format!(
                "{}: {verdict} - exceeded with probability {} (alarm when above {})",
                u.temp_show(x.limit),
                fixed(x.probability, 3),
                fixed(x.alarm_probability, 3)
            ),
        );
    }
}

/// The flagged sensors (or `none`), then the sensors kept although doubtful.
fn sensors_text(r: &EstimateResult, out: &mut String) {
    let flags = flagged(r);
    if flags.is_empty() {
        line(out, "Flagged sensors", "none");
    } else {
        for (n, (k, reason)) in flags.iter().enumerate() {
            let s = &r.sensors[*k];
            let loo = s
                .loo_residual
                .filter(|v| v.is_finite())
                .map(|v| format!(" (standardised LOO residual {})", fixed(v, 2)))
                .unwrap_or_default();
            let label = if n == 0 { "Flagged sensors" } else { "" };
            line(out, label, &format!("{}{loo}: {reason}", s.sensor));
        }
    }
    for (n, d) in r.doubtful_sensors.iter().enumerate() {
        let label = if n == 0 { "Kept, doubtful" } else { "" };
        line(out, label, &doubt_message(r, d));
    }
}

/// The resolution length of each unknown edge.
fn resolution_text(r: &EstimateResult, out: &mut String) {
    let u = CaseUnits::new(r.units);
    for (n, e) in r.edges.iter().enumerate() {
        let label = if n == 0 { "Resolution" } else { "" };
        line(
            out,
            label,
            &format!(
                "{} edge {}{}, the worst along it (at {} = {}); {} at the hottest point; \
                 narrower features are smoothed away",
                e.edge,
                u.len_show(e.resolution_length),
                if e.edge.is_circular() { " of arc" } else { "" },
                edge_coordinate(e.edge),
                u.pos_show(r.plate.shape(), e.edge, e.resolution_worst_position),
                u.len_show(e.resolution_at_hottest),
            ),
        );
    }
}

/// The fit quality, the readings used with their sigma, and the strength.
fn fit_text(r: &EstimateResult, out: &mut String) {
    let u = CaseUnits::new(r.units);
    let p = r.fit.p_value.map_or_else(
        || "p not available".to_string(),
        |p| format!("p = {}", significant_text(p, 2)),
    );
    let quality = match r.fit.p_value {
        _ if r.fit.dof < MIN_CHECKING_DOF => {
            " - under one degree of freedom: the readings cannot check the model (see Cautions)"
        }
        Some(p) if p < 0.01 => " - the readings scatter more than sigma explains",
        Some(p) if p > 0.99 => " - the readings scatter less than sigma suggests",
        _ => "",
    };
    line(
        out,
        "Fit",
        &format!(
            "chi-square {} on {} dof, {p}{quality}",
            fixed(r.fit.chi_square, 2),
            fixed(r.fit.dof, 1)
        ),
    );
    line(
        out,
        "",
        &format!(
            "{} readings of {} sensors, sigma {} ({})",
            r.fit.readings_used,
            r.sensors.len(),
            u.dtemp_show(r.fit.sigma),
            r.fit.sigma_source
        ),
    );
    line(
        out,
        "Strength",
        &format!(
            "{} by {}, {} smoothing{}, {} effective parameters{}",
            significant_text(r.strength.value, 3),
            r.strength.method,
            r.strength.smoothing,
            if r.strength.smoothing_auto {
                " (chosen by evidence)"
            } else {
                ""
            },
            fixed(r.strength.effective_parameters, 1),
            if r.strength.at_range_end {
                " (at the end of the search range)"
            } else {
                ""
            }
        ),
    );
}

/// The heat flow into the plate through each edge that has one, with its interval.
/// `Convection`: each estimated heat transfer coefficient with its interval.
fn convection_text(r: &EstimateResult, out: &mut String) {
    let conf = percent(r.confidence);
    for (n, c) in r.convection.iter().enumerate() {
        let label = if n == 0 { "Convection" } else { "" };
        let open = match (c.open_below, c.open_above) {
            (true, true) => " - not identified by these readings (the whole search range)",
            (true, false) => " - unbounded below within the search range",
            (false, true) => " - unbounded above within the search range",
            (false, false) => "",
        };
        line(
            out,
            label,
            &format!(
                "{} edge h = {} W/(m² K)   {conf} interval [{}, {}] (estimated from the readings){open}",
                c.edge,
                significant_text(c.h, 3),
                significant_text(c.h_interval[0], 3),
                significant_text(c.h_interval[1], 3),
            ),
        );
    }
}

fn heat_flow_text(r: &EstimateResult, out: &mut String) {
    let conf = percent(r.confidence);
    let mut flows: Vec<(crate::geometry::Edge, crate::estimate::Interval)> = r
        .edges
        .iter()
        .filter_map(|e| e.heat_flow.map(|q| (e.edge, q)))
        .collect();
    flows.extend(r.convective_heat_flows.iter().copied());
    for (n, (edge, q)) in flows.iter().enumerate() {
        let label = if n == 0 { "Heat flow in" } else { "" };
        line(
            out,
            label,
            &format!(
                "{} edge {} {HEAT_FLOW_UNIT}   {conf} interval [{}, {}] ({}){}",
                edge,
                fixed(q.value, 1),
                fixed(q.lower, 1),
                fixed(q.upper, 1),
                if r.plate.shape().is_round() {
                    "per unit length of pipe, or per unit thickness of a disk"
                } else {
                    "per unit depth"
                },
                if r.plate.convection(*edge).is_some() {
                    ", convective: -h (T - T∞) along it"
                } else {
                    ""
                }
            ),
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percentages() {
        assert_eq!(percent(0.95), "95 %");
        assert_eq!(percent(0.995), "99.5 %");
    }
}

//! `report.html`: one self-contained page (inline CSS, both plots inlined as SVG, no
//! external resources, no scripts) to attach to a test record: the case, the hottest point,
//! the limit verdict, the fit, resolution and heat flow per edge, the sensor table with
//! flagged rows highlighted, and the cautions. Every piece of text from the inputs is
//! escaped.

use super::summary::{SAFETY_CAUTION, cautions, doubt_message, edge_maximum, flagged, percent};
use super::tables::mean_half_width;
use crate::estimate::EstimateResult;
use crate::geometry::{Edge, EdgeCondition, Shape};
use crate::report::format::{
    CaseUnits, edge_coordinate, escape_html as esc, fixed, significant_text,
};
use std::fmt::Write as _;

const CSS: &str = "
:root { color-scheme: light; }
body { font-family: system-ui, -apple-system, 'Segoe UI', Roboto, 'Helvetica Neue', Arial,
  sans-serif; color: #1a1a1a; background: #fff; margin: 0 auto; max-width: 1000px;
  padding: 24px 28px 48px; line-height: 1.45; }
h1 { font-size: 1.7rem; margin: 0 0 4px; }
h2 { font-size: 1.2rem; margin: 28px 0 8px; border-bottom: 1px solid #ccc; padding-bottom: 3px; }
.meta { color: #555; margin: 0 0 16px; }
.safety { border: 3px solid #1a1a1a; background: #fff6d6; padding: 12px 16px; margin: 16px 0;
  font-size: 1.05rem; }
.cautions { border-left: 6px solid #9b111e; background: #fbeeee; padding: 8px 16px; margin: 12px 0; }
.cautions ul { margin: 4px 0; padding-left: 20px; }
.cards { display: flex; flex-wrap: wrap; gap: 14px; margin: 12px 0; }
.card { flex: 1 1 280px; border: 1px solid #bbb; border-radius: 6px; padding: 10px 14px; }
.card h3 { margin: 0 0 6px; font-size: 1rem; color: #444; }
.big { font-size: 1.6rem; font-weight: 700; margin: 0; }
.alarm { border: 3px solid #9b111e; background: #fbeeee; }
.alarm .big { color: #9b111e; }
figure { margin: 12px 0; }
figure svg { max-width: 100%; height: auto; display: block; border: 1px solid #ddd; }
figcaption { color: #555; font-size: 0.9rem; }
table { border-collapse: collapse; width: 100%; font-size: 0.92rem; margin: 6px 0; }
th, td { border: 1px solid #ccc; padding: 3px 7px; text-align: right; }
td { white-space: nowrap; }
th { background: #eee; }
td.text, th.text { text-align: left; white-space: normal; }
table.kv { width: auto; min-width: 50%; }
tr.flagged td { background: #fde3dc; font-weight: 700; }
tr.flagged td:first-child { border-left: 5px solid #1a1a1a; }
tr.doubtful td { background: #fff4d6; }
tr.doubtful td:first-child { border-left: 5px dashed #1a1a1a; }
dl.case { display: grid; grid-template-columns: max-content 1fr; gap: 3px 16px; }
dl.case dt { font-weight: 600; }
dl.case dd { margin: 0; }
footer { margin-top: 32px; color: #555; font-size: 0.88rem; }
@media print {
  body { padding: 0; max-width: none; }
  figure, table, .card, .safety { break-inside: avoid; }
}
";

/// Write a table row of cells; the cells whose index is in `text_cols` are left-aligned
/// text, the others numbers.
fn row(out: &mut String, cells: &[String], text_cols: &[usize], header: bool, class: Option<&str>) {
    let tag = if header { "th" } else { "td" };
    match class {
        Some(c) => {
            let _ = write!(out, "<tr class=\"{c}\">");
        }
        None => out.push_str("<tr>"),
    }
    for (k, c) in cells.iter().enumerate() {
        let cls = if text_cols.contains(&k) {
            " class=\"text\""
        } else {
            ""
        };
        let _ = write!(out, "<{tag}{cls}>{c}</{tag}>");
    }
    out.push_str("</tr>\n");
}

/// The page, with the two SVG pictures inlined: one section after another, each written by
/// the step named after it.
pub(crate) fn report_html(r: &EstimateResult, profile_svg: &str, field_svg: &str) -> String {
    let mut o = String::new();
    head_html(&mut o, r);
    cautions_html(&mut o, r);
    cards_html(&mut o, r);
    figures_html(&mut o, r, profile_svg, field_svg);
    fit_table_html(&mut o, r);
    edges_table_html(&mut o, r);
    sensors_table_html(&mut o, r);
    case_html(&mut o, r);
    o.push_str(
        "<footer>Files beside this page: <code>profile.csv</code>, <code>field.csv</code>, \
         <code>sensors.csv</code>, <code>summary.json</code>, <code>profile.svg</code>, \
         <code>field.svg</code>. Temperatures are in the case's units; positions along an edge \
         are measured from its lower coordinate.</footer>\n</body>\n</html>\n",
    );
    o
}

/// The fit's p-value for a reader.
fn p_value_text(r: &EstimateResult) -> String {
    r.fit
        .p_value
        .map_or_else(|| "not available".to_string(), |p| significant_text(p, 2))
}

/// The document head (title, inline style) and the page heading with the run's settings.
fn head_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let h = &r.hottest;
    let conf = percent(r.confidence);
    let _ = write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
         <title>edgetherm estimate: hottest {} on the {} edge</title>\n<style>{CSS}</style>\n\
         </head>\n<body>\n",
        esc(&u.temp_show(h.temperature)),
        h.edge
    );
    let _ = writeln!(o, "<h1>Hidden edge temperature: estimate</h1>");
    let _ = writeln!(
        o,
        "<p class=\"meta\">edgetherm {} &middot; {conf} intervals &middot; {} {} bootstrap \
         replicates &middot; seed {}</p>",
        esc(env!("CARGO_PKG_VERSION")),
        r.replicates,
        esc(r.bootstrap_mode.name()),
        r.seed
    );
}

/// The cautions, first: the safety caution always, then the result's own.
fn cautions_html(o: &mut String, r: &EstimateResult) {
    let _ = writeln!(
        o,
        "<div class=\"safety\" role=\"note\"><strong>Caution.</strong> {}</div>",
        esc(SAFETY_CAUTION)
    );
    let others: Vec<String> = cautions(r)
        .into_iter()
        .filter(|c| c != SAFETY_CAUTION)
        .collect();
    if !others.is_empty() {
        o.push_str("<div class=\"cautions\"><strong>Cautions for this result</strong>\n<ul>\n");
        for c in &others {
            let _ = writeln!(o, "<li>{}</li>", esc(c));
        }
        o.push_str("</ul></div>\n");
    }
}

/// The key results as cards: the hottest point, the limit verdict, the fit.
fn cards_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let h = &r.hottest;
    let conf = percent(r.confidence);
    o.push_str("<div class=\"cards\">\n");
    let _ = writeln!(
        o,
        "<div class=\"card\"><h3>Hottest point</h3><p class=\"big\">{}</p>\
         <p>{conf} interval {} to {}</p><p>on the {} edge at {} = {}<br/>{conf} interval {} to \
         {}</p></div>",
        esc(&u.temp_show(h.temperature)),
        esc(&u.temp_num(h.temperature_interval[0])),
        esc(&u.temp_show(h.temperature_interval[1])),
        h.edge,
        edge_coordinate(h.edge),
        esc(&u.pos_show(r.plate.shape(), h.edge, h.position)),
        esc(&u.pos_num(r.plate.shape(), h.edge, h.position_interval[0])),
        esc(&u.pos_show(r.plate.shape(), h.edge, h.position_interval[1])),
    );
    match &r.exceedance {
        Some(x) => {
            let (class, verdict) = if x.alarm {
                (" alarm", "ALARM")
            } else {
                ("", "No alarm")
            };
            let _ = writeln!(
                o,
                "<div class=\"card{class}\"><h3>Limit {}</h3><p class=\"big\">{verdict}</p>\
                 <p>Probability that the edge exceeds the limit somewhere: {}<br/>alarm when \
                 above {}</p></div>",
                esc(&u.temp_show(x.limit)),
                fixed(x.probability, 3),
                fixed(x.alarm_probability, 3)
            );
        }
        None => {
            o.push_str(
                "<div class=\"card\"><h3>Limit</h3><p>No limit was given (use \
                 <code>--limit</code> for an exceedance probability).</p></div>\n",
            );
        }
    }
    let p = p_value_text(r);
    let _ = writeln!(
        o,
        "<div class=\"card\"><h3>Fit</h3><p><strong>{}</strong></p><p>chi-square {} on {} \
         degrees of freedom, p = {}</p><p>strength {} by {}, {} effective parameters</p></div>",
        esc(fit_verdict(r)),
        fixed(r.fit.chi_square, 2),
        fixed(r.fit.dof, 1),
        esc(&p),
        esc(&significant_text(r.strength.value, 3)),
        esc(r.strength.method.name()),
        fixed(r.strength.effective_parameters, 1)
    );
    o.push_str("</div>\n");
}

/// The fit in plain words, for the fit card.
fn fit_verdict(r: &EstimateResult) -> &'static str {
    match r.fit.p_value {
        _ if r.fit.dof < super::summary::MIN_CHECKING_DOF => {
            "The readings cannot check the model: too few readings for the smoothness chosen \
             (see the cautions)."
        }
        Some(p) if p < 0.01 => {
            "The readings scatter more than their stated uncertainty explains: the model, an \
             edge condition or sigma is doubtful."
        }
        Some(p) if p > 0.99 => {
            "The readings scatter less than their stated uncertainty suggests: sigma may be \
             stated too large."
        }
        Some(_) => "The readings agree with the model within their uncertainty.",
        None => "No check of the fit is available.",
    }
}

/// The two pictures, inlined, with their captions (and the strict bounds' block between them).
fn figures_html(o: &mut String, r: &EstimateResult, profile_svg: &str, field_svg: &str) {
    let conf = percent(r.confidence);
    o.push_str("<h2>Edge profile</h2>\n<figure>\n");
    o.push_str(&inline_svg(profile_svg));
    let _ = writeln!(
        o,
        "<figcaption>Reconstructed temperature along each unknown edge: shaded, the {conf} \
         pointwise band; dashed, the {conf} simultaneous band (covers the whole edge at once); \
         below, each sensor's depth under the edge{}.</figcaption>\n</figure>",
        if super::bounds::bounds_hottest_interval(r).is_some() {
            "; solid teal, the strict bounds under the stated gradient limit"
        } else {
            ""
        }
    );
    o.push_str(&super::bounds::bounds_html(r));
    o.push_str("<h2>Temperature field</h2>\n<figure>\n");
    o.push_str(&inline_svg(field_svg));
    o.push_str(
        "<figcaption>Estimated steady temperature over the plate with isotherms; the \
         pointwise bands of every grid point are in <code>field.csv</code>.</figcaption>\n\
         </figure>\n",
    );
}

/// The fit details as a key-value table.
fn fit_table_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let p = p_value_text(r);
    o.push_str("<h2>Fit</h2>\n<table class=\"kv\">\n");
    let fit_rows = [
        ("strength rule".to_string(), esc(r.strength.method.name())),
        (
            "smoothing".to_string(),
            format!(
                "{}{}",
                esc(r.strength.smoothing.name()),
                if r.strength.smoothing_auto {
                    " (chosen by evidence)"
                } else {
                    ""
                }
            ),
        ),
        (
            "strength".to_string(),
            format!(
                "{}{}",
                esc(&significant_text(r.strength.value, 4)),
                if r.strength.at_range_end {
                    " (at the end of the search range)"
                } else {
                    ""
                }
            ),
        ),
        (
            "effective parameters".to_string(),
            fixed(r.strength.effective_parameters, 2),
        ),
        ("chi-square".to_string(), fixed(r.fit.chi_square, 3)),
        ("degrees of freedom".to_string(), fixed(r.fit.dof, 2)),
        ("p-value".to_string(), esc(&p)),
        (
            "reading uncertainty sigma".to_string(),
            format!(
                "{} ({})",
                esc(&u.dtemp_show(r.fit.sigma)),
                esc(r.fit.sigma_source.name())
            ),
        ),
        (
            "readings used".to_string(),
            format!("{} of {} sensors", r.fit.readings_used, r.sensors.len()),
        ),
    ];
    for (k, v) in fit_rows {
        let _ = writeln!(
            o,
            "<tr><th class=\"text\">{k}</th><td class=\"text\">{v}</td></tr>"
        );
    }
    o.push_str("</table>\n");
}

/// Per unknown edge: resolution length, highest estimate, mean band half-widths and heat
/// flow.
fn edges_table_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let conf = percent(r.confidence);
    o.push_str("<h2>Edges: resolution and heat flow</h2>\n<table>\n");
    row(
        o,
        &[
            "edge".into(),
            format!("resolution length [{}]", u.len_symbol()),
            format!("highest estimate [{}]", esc(u.temp_symbol())),
            format!("at [{}]", u.len_symbol()),
            format!(
                "mean half-width: pointwise / simultaneous / linear [{}]",
                esc(u.temp_symbol())
            ),
            "heat flow into the plate [W/m]".into(),
            format!("{conf} interval [W/m]"),
        ],
        &[0],
        true,
        None,
    );
    for e in &r.edges {
        let (pos, t) = edge_maximum(e).unwrap_or((f64::NAN, f64::NAN));
        let hw = |l: &[f64], h: &[f64]| u.dtemp_num(mean_half_width(l, h));
        row(
            o,
            &[
                e.edge.name().to_string(),
                u.len_num(e.resolution_length),
                u.temp_num(t),
                format!(
                    "{} = {}",
                    edge_coordinate(e.edge),
                    u.pos_num(r.plate.shape(), e.edge, pos)
                ),
                format!(
                    "{} / {} / {}",
                    hw(&e.lower, &e.upper),
                    hw(&e.simultaneous_lower, &e.simultaneous_upper),
                    hw(&e.linear_lower, &e.linear_upper)
                ),
                e.heat_flow.map_or("–".into(), |q| fixed(q.value, 1)),
                e.heat_flow.map_or("–".into(), |q| {
                    format!("{} to {}", fixed(q.lower, 1), fixed(q.upper, 1))
                }),
            ],
            &[0],
            false,
            None,
        );
    }
    o.push_str(if r.plate.shape().is_round() {
        "</table>\n<p class=\"meta\">The resolution length is the finest feature the \
                sensors can resolve along the edge, as an arc length; narrower features are \
                smoothed away. Heat flows are per unit length of the pipe (per unit thickness \
                of a disk).</p>\n"
    } else {
        "</table>\n<p class=\"meta\">The resolution length is the finest feature the \
                sensors can resolve along the edge; narrower features are smoothed away. Heat \
                flows are per unit depth of the plate.</p>\n"
    });
}

/// The sensor table, flagged rows highlighted and doubtful rows dashed.
fn sensors_table_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let n_flagged = flagged(r).len();
    let _ = writeln!(
        o,
        "<h2>Sensors</h2>\n<p>{} sensors; {} flagged{}{}.</p>",
        r.sensors.len(),
        n_flagged,
        if n_flagged > 0 {
            " (highlighted rows)"
        } else {
            ""
        },
        match r.doubtful_sensors.len() {
            0 => String::new(),
            n => format!(
                "; {n} kept although {} out (dashed rows): a hot spot under {} \
                 explains its reading as well as a fault does",
                if n == 1 { "it stands" } else { "they stand" },
                if n == 1 { "it" } else { "each" },
            ),
        }
    );
    o.push_str("<table>\n");
    let ts = esc(u.temp_symbol());
    let ls = u.len_symbol();
    row(
        o,
        &[
            "sensor".into(),
            format!("x [{ls}]"),
            format!("y [{ls}]"),
            format!("reading [{ts}]"),
            format!("fitted [{ts}]"),
            format!("residual [{ts}]"),
            "standardised LOO residual".into(),
            "leverage".into(),
            format!("sigma [{ts}]"),
            "flag".into(),
        ],
        &[0, 9],
        true,
        None,
    );
    for s in &r.sensors {
        let dash = || "–".to_string();
        row(
            o,
            &[
                esc(&s.sensor),
                u.len_num(s.position.x),
                u.len_num(s.position.y),
                s.reading.map_or_else(dash, |v| u.temp_num(v)),
                u.temp_num(s.fitted),
                s.residual.map_or_else(dash, |v| u.dtemp_num(v)),
                s.loo_residual.map_or_else(dash, |v| fixed(v, 2)),
                s.leverage.map_or_else(dash, |v| fixed(v, 3)),
                s.sigma.map_or_else(dash, |v| u.dtemp_num(v)),
                match (
                    &s.flag,
                    r.doubtful_sensors.iter().find(|d| d.sensor == s.sensor),
                ) {
                    (Some(f), _) => format!("flagged: {}", esc(f)),
                    (None, Some(d)) if s.doubtful => {
                        format!("kept, doubtful: {}", esc(&doubt_message(r, d)))
                    }
                    _ => String::new(),
                },
            ],
            &[0, 9],
            false,
            if s.flag.is_some() {
                Some("flagged")
            } else if s.doubtful {
                Some("doubtful")
            } else {
                None
            },
        );
    }
    o.push_str("</table>\n");
}

/// The case: outline, edge conditions, conductivity, units, grid and uncertainty settings.
fn case_html(o: &mut String, r: &EstimateResult) {
    let u = CaseUnits::new(r.units);
    let conf = percent(r.confidence);
    o.push_str("<h2>The case</h2>\n<dl class=\"case\">\n");
    let shape = r.plate.shape();
    let outline = match shape {
        Shape::Rectangle { width_m, height_m } => format!(
            "rectangle {} wide (x) by {} high (y)",
            u.len_show(*width_m),
            u.len_show(*height_m)
        ),
        Shape::Strip { width_m } => {
            format!("long strip {} wide (x), no top edge", u.len_show(*width_m))
        }
        Shape::Disk { radius_m } => format!(
            "disk of radius {}, origin at the centre, angles counter-clockwise from +x",
            u.len_show(*radius_m)
        ),
        Shape::Annulus { inner_m, outer_m } => format!(
            "annulus (pipe wall) from radius {} to {}, origin at the centre, angles \
             counter-clockwise from +x",
            u.len_show(*inner_m),
            u.len_show(*outer_m)
        ),
    };
    let mut dl = vec![("plate", esc(&outline))];
    for e in Edge::ALL {
        if let Some(c) = r.plate.condition(e) {
            let d = match c {
                EdgeCondition::Unknown => "unknown (reconstructed)".to_string(),
                EdgeCondition::Insulated => "insulated".to_string(),
                EdgeCondition::Convective(cv) => match cv.known_h() {
                    Some(h) => format!(
                        "convective, h = {} W/(m² K), fluid at {}",
                        significant_text(h, 3),
                        u.temp_show(cv.ambient_k)
                    ),
                    None => match r.convection.iter().find(|c| c.edge == e) {
                        Some(c) => format!(
                            "convective, fluid at {}; h estimated from the readings: {} W/(m² K), \
                             {} interval [{}, {}] W/(m² K){}",
                            u.temp_show(cv.ambient_k),
                            significant_text(c.h, 3),
                            super::summary::percent(r.confidence),
                            significant_text(c.h_interval[0], 3),
                            significant_text(c.h_interval[1], 3),
                            if c.identified() {
                                ""
                            } else {
                                " (not identified by these readings: the whole search range)"
                            }
                        ),
                        None => format!(
                            "convective, h estimated from the readings, fluid at {}",
                            u.temp_show(cv.ambient_k)
                        ),
                    },
                },
                EdgeCondition::Fixed(p) if p.is_constant() => {
                    format!("fixed at {}", u.temp_show(p.temperatures()[0]))
                }
                EdgeCondition::Fixed(p) => {
                    format!("fixed profile ({} points)", p.positions().len())
                }
            };
            dl.push((e.name(), esc(&d)));
        }
    }
    dl.push((
        "conductivity",
        r.plate
            .conductivity()
            .map_or("not given (no heat flows)".to_string(), |k| {
                format!("{} W/(m K)", significant_text(k, 4))
            }),
    ));
    dl.push((
        "units",
        format!("{}, {}", u.len_symbol(), esc(u.temp_symbol())),
    ));
    if let Some(c) = &r.conversion {
        dl.push(("readings", esc(&c.describe(&r.units))));
    }
    let offsets = super::summary::offsets_text(r);
    if !offsets.is_empty() {
        dl.push(("calibration offsets", esc(&offsets)));
    }
    dl.push((
        "field grid",
        format!("{} × {}", r.field.xs.len(), r.field.ys.len()),
    ));
    dl.push((
        "uncertainty",
        format!(
            "{conf} confidence, {} bootstrap replicates ({}), seed {}",
            r.replicates,
            esc(r.bootstrap_mode.name()),
            r.seed
        ),
    ));
    for (k, v) in dl {
        let _ = writeln!(o, "<dt>{k}</dt><dd>{v}</dd>");
    }
    o.push_str("</dl>\n");
}

/// An SVG to inline in the report: without its XML declaration and without the short safety
/// note under the plot (the page states the caution once, in full, at the top; the SVG files
/// keep their note, since an image can travel without its report).
fn inline_svg(svg: &str) -> String {
    let s = strip_xml_declaration(svg);
    let note = crate::report::draw::PLOT_SAFETY_NOTE;
    match s.find(note) {
        Some(k) => {
            let start = s[..k].rfind("<text").unwrap_or(k);
            let end = s[k..]
                .find("</text>")
                .map_or(k + note.len(), |e| k + e + "</text>".len());
            format!("{}{}", &s[..start], &s[end..])
        }
        None => s.to_string(),
    }
}

/// An SVG document without its XML declaration, ready to inline in HTML.
fn strip_xml_declaration(svg: &str) -> &str {
    let s = svg.trim_start();
    if s.starts_with("<?xml") {
        s.find("?>").map_or(s, |k| s[k + 2..].trim_start())
    } else {
        s
    }
}

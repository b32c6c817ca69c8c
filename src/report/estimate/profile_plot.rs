//! `profile.svg`: the reconstructed temperature along each unknown edge, with its bands, the
//! hottest point and its intervals, an alarm limit when one was given, and beneath each
//! profile a small panel of the sensors' depth below that edge against their position
//! along it (what the reconstruction could see, and from how deep).

use super::summary::percent;
use crate::error::{Error, Result};
use crate::estimate::{EdgeResult, EstimateResult};
use crate::geometry::Edge;
use crate::report::draw::{
    AXIS_PX, Anchor, Area, BAND, BOUNDS, DrawResult, ESTIMATE, FAMILY, FOOTER_H, GREY, GRID, Glyph,
    HOTTEST, INK, LEGEND_ROW_H, LIMIT, Marker, PLOT_SAFETY_NOTE, SIMULTANEOUS, TEXT_PX, TITLE_PX,
    TextOpts, font, label_box, legend, legend_rows, line, marker, sensor_label_width,
    sensor_marker, text,
};
use crate::report::format::{CaseUnits, edge_coordinate, fixed, tick};
use crate::report::labels::{Placer, Rect, around_marker, text_width};
use plotters::element::DashedPathElement;
use plotters::prelude::*;

/// Picture width, px.
const WIDTH: u32 = 960;
/// Left and right margins of the picture, px.
const MARGIN: f64 = 16.0;
/// Height of an edge's caption line, px.
const CAPTION_H: f64 = 30.0;
/// Height of an edge's temperature chart (with its tick labels), px.
const TEMP_H: f64 = 330.0;
/// Height of an edge's depth panel (with its tick labels and axis title), px.
const DEPTH_H: f64 = 190.0;
/// Space after an edge's block, px.
const BLOCK_GAP: f64 = 18.0;
/// Width of the y tick-label and title area, px.
const Y_LABEL_W: u32 = 82;
/// Right margin of the charts, px.
const CHART_RIGHT: u32 = 28;

/// The header: title, subtitle and legend.
struct Header {
    legend: Vec<(Glyph, String)>,
    height: f64,
}

fn header(r: &EstimateResult) -> Header {
    let conf = percent(r.confidence);
    let mut legend: Vec<(Glyph, String)> = vec![
        (Glyph::Swatch(BAND), format!("{conf} pointwise band")),
        (
            Glyph::Dashed(SIMULTANEOUS, 1),
            format!("{conf} simultaneous band (whole edge)"),
        ),
        (Glyph::Line(ESTIMATE, 2), "estimate".to_string()),
        (
            Glyph::HottestBars,
            format!("hottest point, {conf} intervals"),
        ),
    ];
    if let Some(g) = super::bounds::stated_gradient(r) {
        if r.edges
            .iter()
            .any(|e| super::bounds::edge_envelope(r, e.edge).is_some())
        {
            let u = CaseUnits::of_plate(r.units, &r.plate);
            legend.push((
                Glyph::Line(BOUNDS, 2),
                format!(
                    "strict bounds (|slope| ≤ G = {} {}, {conf})",
                    super::bounds::gradient_text(&u, g),
                    super::bounds::gradient_unit_show(&u)
                ),
            ));
        }
    }
    if let Some(x) = &r.exceedance {
        let u = CaseUnits::new(r.units);
        legend.push((
            Glyph::Dashed(LIMIT, 2),
            format!("limit {}", u.temp_show(x.limit)),
        ));
    }
    legend.push((Glyph::Marker(Marker::Rug), "sensor position".to_string()));
    legend.push((
        Glyph::Marker(Marker::Sensor),
        "sensor (depth below)".to_string(),
    ));
    if r.sensors.iter().any(|s| s.flag.is_some()) {
        legend.push((Glyph::Marker(Marker::Flagged), "flagged sensor".to_string()));
    }
    if r.sensors.iter().any(|s| s.doubtful) {
        legend.push((
            Glyph::Marker(Marker::Doubtful),
            "doubtful sensor (kept: a hot spot or a fault)".to_string(),
        ));
    }
    if r.sensors
        .iter()
        .any(|s| s.reading.is_none() && s.flag.is_none())
    {
        legend.push((
            Glyph::Marker(Marker::SensorNoReading),
            "no reading".to_string(),
        ));
    }
    let rows = legend_rows(&legend, f64::from(WIDTH) - 2.0 * MARGIN);
    Header {
        legend,
        height: 78.0 + rows as f64 * LEGEND_ROW_H + 10.0,
    }
}

/// Draw `profile.svg`.
pub(crate) fn profile_svg(r: &EstimateResult) -> Result<String> {
    let head = header(r);
    let blocks = r.edges.len().max(1) as f64;
    let footers = if r.conversion.is_some() { 2.0 } else { 1.0 };
    let height =
        head.height + blocks * (CAPTION_H + TEMP_H + DEPTH_H + BLOCK_GAP) + footers * FOOTER_H;
    let mut buf = String::new();
    {
        let root =
            SVGBackend::with_string(&mut buf, (WIDTH, height.ceil() as u32)).into_drawing_area();
        draw(&root, r, &head)
            .and_then(|()| root.present().map_err(Into::into))
            .map_err(|e| Error::Internal(format!("cannot draw profile.svg: {e}")))?;
    }
    Ok(buf)
}

fn draw(root: &Area<'_>, r: &EstimateResult, head: &Header) -> DrawResult {
    root.fill(&WHITE)?;
    let u = CaseUnits::new(r.units);
    let conf = percent(r.confidence);
    let h = &r.hottest;
    text(
        root,
        &format!("Hidden edge temperature: estimate with {conf} bands"),
        MARGIN,
        14.0,
        TextOpts::new(TITLE_PX, Anchor::TopLeft).bold(),
    )?;
    text(
        root,
        &format!(
            "Hottest point {} [{}, {}] at {} = {} [{}, {}] on the {} edge  ·  {} bootstrap \
             replicates ({})",
            u.temp_show(h.temperature),
            u.temp_num(h.temperature_interval[0]),
            u.temp_num(h.temperature_interval[1]),
            edge_coordinate(h.edge),
            u.pos_show(r.plate.shape(), h.edge, h.position),
            u.pos_num(r.plate.shape(), h.edge, h.position_interval[0]),
            u.pos_num(r.plate.shape(), h.edge, h.position_interval[1]),
            h.edge,
            r.replicates,
            r.bootstrap_mode,
        ),
        MARGIN,
        46.0,
        TextOpts::new(TEXT_PX + 1.0, Anchor::TopLeft),
    )?;
    legend(
        root,
        &head.legend,
        MARGIN,
        74.0,
        f64::from(WIDTH) - 2.0 * MARGIN,
    )?;
    if r.edges.is_empty() {
        text(
            root,
            "No unknown edge in this result.",
            MARGIN,
            head.height + 20.0,
            TextOpts::new(AXIS_PX, Anchor::TopLeft),
        )?;
        return Ok(());
    }
    let mut top = head.height;
    for e in &r.edges {
        draw_edge(root, r, e, top)?;
        top += CAPTION_H + TEMP_H + DEPTH_H + BLOCK_GAP;
    }
    // readings converted from voltages say so on the picture too
    if let Some(c) = &r.conversion {
        text(
            root,
            &c.describe(&r.units),
            MARGIN,
            top + 4.0,
            TextOpts::new(TEXT_PX, Anchor::TopLeft),
        )?;
        top += FOOTER_H;
    }
    text(
        root,
        PLOT_SAFETY_NOTE,
        MARGIN,
        top + 4.0,
        TextOpts::new(TEXT_PX, Anchor::TopLeft),
    )?;
    Ok(())
}

/// Runs of consecutive indices where `ok(k)` holds.
fn runs(n: usize, ok: impl Fn(usize) -> bool) -> Vec<std::ops::Range<usize>> {
    let mut out = Vec::new();
    let mut start = None;
    for k in 0..=n {
        match (k < n && ok(k), start) {
            (true, None) => start = Some(k),
            (false, Some(s)) => {
                out.push(s..k);
                start = None;
            }
            _ => {}
        }
    }
    out
}

/// The temperature range a panel shows: every band, the hottest interval and the limit,
/// padded.
fn temperature_range(r: &EstimateResult, e: &EdgeResult, u: &CaseUnits) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    let series = [
        &e.estimate,
        &e.lower,
        &e.upper,
        &e.simultaneous_lower,
        &e.simultaneous_upper,
    ];
    let mut extra = vec![];
    if let Some((lo, hi)) = super::bounds::edge_envelope(r, e.edge) {
        extra.extend(lo.iter().chain(hi).copied());
    }
    if r.hottest.edge == e.edge {
        extra.extend(r.hottest.temperature_interval);
    }
    if let Some(x) = &r.exceedance {
        extra.push(x.limit);
    }
    for v in series.iter().flat_map(|s| s.iter()).chain(&extra) {
        let t = u.temp(*v);
        if t.is_finite() {
            lo = lo.min(t);
            hi = hi.max(t);
        }
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    let span = (hi - lo).max(1e-6 * hi.abs().max(1.0)).max(0.5);
    (lo - 0.06 * span, hi + 0.08 * span)
}

fn edge_title(e: Edge) -> String {
    let (name, at) = match e {
        Edge::Bottom => ("Bottom", "y = 0"),
        Edge::Top => ("Top", "y = height"),
        Edge::Left => ("Left", "x = 0"),
        Edge::Right => ("Right", "x = width"),
        Edge::Inner => ("Inner", "inner circle"),
        Edge::Outer => ("Outer", "outer circle"),
        Edge::Rim => ("Rim", "the disk's circle"),
    };
    format!("{name} edge ({at})")
}

fn draw_edge(root: &Area<'_>, r: &EstimateResult, e: &EdgeResult, top: f64) -> DrawResult {
    let u = CaseUnits::new(r.units);
    let shape = r.plate.shape();
    let last_position = e
        .positions
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    let len_m = shape.edge_length(e.edge).unwrap_or(last_position);
    let x_max = u.pos(shape, e.edge, len_m).max(f64::MIN_POSITIVE);
    let coord = edge_coordinate(e.edge);

    // Caption: the edge in bold, then what the reader needs about it.
    let title = format!("{}, reconstructed", edge_title(e.edge));
    let mut details = format!("resolution length {}", u.len_show(e.resolution_length));
    if e.edge.is_circular() {
        details.push_str(" of arc");
    }
    if let Some(q) = e.heat_flow {
        details.push_str(&format!(
            "  ·  heat flow in {} W/m [{}, {}]",
            fixed(q.value, 1),
            fixed(q.lower, 1),
            fixed(q.upper, 1)
        ));
    }
    let cy = top + CAPTION_H / 2.0;
    text(
        root,
        &title,
        MARGIN,
        cy,
        TextOpts::new(AXIS_PX, Anchor::Left).bold(),
    )?;
    // Flush right with the charts, so that its start does not hang on an estimate of the
    // title's width in the reader's font.
    text(
        root,
        &details,
        f64::from(WIDTH) - f64::from(CHART_RIGHT),
        cy,
        TextOpts::new(TEXT_PX + 1.0, Anchor::Right).colour(GREY),
    )?;

    // Temperature chart.
    let (y_lo, y_hi) = temperature_range(r, e, &u);
    let temp_area = root
        .clone()
        .shrink((0, (top + CAPTION_H) as i32), (WIDTH, TEMP_H as u32));
    let mut chart = ChartBuilder::on(&temp_area)
        .margin_left(MARGIN as u32)
        .margin_right(CHART_RIGHT)
        .margin_top(6)
        .y_label_area_size(Y_LABEL_W)
        .x_label_area_size(34)
        .build_cartesian_2d(0.0..x_max, y_lo..y_hi)?;
    let fmt = |v: &f64| tick(*v);
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID.stroke_width(1))
        .axis_style(INK.stroke_width(1))
        .label_style((FAMILY, font(TEXT_PX)).into_font().color(&INK))
        .axis_desc_style((FAMILY, font(AXIS_PX)).into_font().color(&INK))
        .y_desc(format!("temperature [{}]", u.temp_symbol()))
        .x_labels(12)
        .y_labels(8)
        .x_label_formatter(&fmt)
        .y_label_formatter(&fmt)
        .draw()?;

    let n = e.positions.len();
    let at = |v: &[f64], k: usize| v.get(k).map_or(f64::NAN, |&t| u.temp(t));
    let s = |k: usize| u.pos(shape, e.edge, e.positions[k]);

    // Pointwise band, shaded.
    for run in runs(n, |k| {
        s(k).is_finite() && at(&e.lower, k).is_finite() && at(&e.upper, k).is_finite()
    }) {
        let mut pts: Vec<(f64, f64)> = run.clone().map(|k| (s(k), at(&e.lower, k))).collect();
        pts.extend(run.rev().map(|k| (s(k), at(&e.upper, k))));
        chart.draw_series(std::iter::once(Polygon::new(pts, BAND.filled())))?;
    }
    // Simultaneous band, thin dashed.
    for band in [&e.simultaneous_lower, &e.simultaneous_upper] {
        for run in runs(n, |k| s(k).is_finite() && at(band, k).is_finite()) {
            let pts: Vec<(f64, f64)> = run.map(|k| (s(k), at(band, k))).collect();
            chart.draw_series(std::iter::once(DashedPathElement::new(
                pts,
                6,
                4,
                SIMULTANEOUS.stroke_width(1),
            )))?;
        }
    }
    // Strict-bound envelopes, solid teal.
    if let Some((b_lo, b_hi)) = super::bounds::edge_envelope(r, e.edge) {
        for band in [b_lo, b_hi] {
            for run in runs(n, |k| s(k).is_finite() && at(band, k).is_finite()) {
                let pts: Vec<(f64, f64)> = run.map(|k| (s(k), at(band, k))).collect();
                chart.draw_series(std::iter::once(PathElement::new(
                    pts,
                    BOUNDS.stroke_width(2),
                )))?;
            }
        }
    }
    // Limit.
    let mut limit_label: Option<(String, f64, f64, f64)> = None;
    if let Some(x) = &r.exceedance {
        let lim = u.temp(x.limit);
        if lim.is_finite() {
            chart.draw_series(std::iter::once(DashedPathElement::new(
                vec![(0.0, lim), (x_max, lim)],
                10,
                5,
                LIMIT.stroke_width(2),
            )))?;
            let (px0, _) = chart.backend_coord(&(0.0, lim));
            let (px1, py) = chart.backend_coord(&(x_max, lim));
            // drawn last, on a white box, clear of the hottest point's bars where it can be
            limit_label = Some((
                format!(
                    "limit {}  ·  P(exceeded) = {}{}",
                    u.temp_show(x.limit),
                    fixed(x.probability, 3),
                    if x.alarm { "  ·  ALARM" } else { "" }
                ),
                f64::from(px0) + 6.0,
                f64::from(px1) - 6.0,
                f64::from(py),
            ));
        }
    }
    // The estimate.
    for run in runs(n, |k| s(k).is_finite() && at(&e.estimate, k).is_finite()) {
        let pts: Vec<(f64, f64)> = run.map(|k| (s(k), at(&e.estimate, k))).collect();
        chart.draw_series(std::iter::once(PathElement::new(
            pts,
            ESTIMATE.stroke_width(2),
        )))?;
    }
    // Sensor positions along the axis.
    let to_px = |p: (f64, f64)| {
        let (x, y) = chart.backend_coord(&p);
        (f64::from(x), f64::from(y))
    };
    // Boxes the limit label must keep clear of.
    let mut taken: Vec<Rect> = Vec::new();
    // A flagged sensor is marked on this chart too, with its marker in place of the rug
    // triangle and its name: a reader of the profile alone sees that it was left out.
    let mut flagged_at: Vec<(f64, f64, &str)> = Vec::new();
    for sensor in &r.sensors {
        let pos = u.pos(shape, e.edge, shape.position_along(e.edge, sensor.position));
        if (0.0..=x_max).contains(&pos) {
            let (x, y) = to_px((pos, y_lo));
            if sensor.flag.is_some() {
                flagged_at.push((x, y, sensor.sensor.as_str()));
            } else {
                marker(root, Marker::Rug, x, y - 1.0, 4.0)?;
            }
        }
    }
    for &(x, y, id) in &flagged_at {
        marker(root, Marker::Flagged, x, y - 8.0, 5.0)?;
        let label = format!("{id} flagged");
        let w = crate::report::labels::bold_text_width(&label, TEXT_PX) + 6.0;
        let b = Rect::anchored(x, y - 26.0, w, TEXT_PX + 4.0, 0.5, 0.5);
        label_box(root, &b, 0.85)?;
        text(
            root,
            &label,
            b.x0 + 3.0,
            y - 25.0,
            TextOpts::new(TEXT_PX, Anchor::Left).bold(),
        )?;
        taken.push(b);
        taken.push(Rect::around(x, y - 8.0, 8.0));
    }
    // The hottest point with its intervals.
    let h = &r.hottest;
    if h.edge == e.edge {
        let (p, t) = (u.pos(shape, h.edge, h.position), u.temp(h.temperature));
        let (p0, p1) = (
            u.pos(shape, h.edge, h.position_interval[0]),
            u.pos(shape, h.edge, h.position_interval[1]),
        );
        // an arc through 0° is drawn as two pieces, to the right end and from the left end
        let wraps = p0 > p1;
        let (t0, t1) = (
            u.temp(h.temperature_interval[0]),
            u.temp(h.temperature_interval[1]),
        );
        if p.is_finite() && t.is_finite() {
            let (cx, cy) = to_px((p, t));
            let bar = HOTTEST.stroke_width(2);
            let cap = 6.0;
            if p0.is_finite() && p1.is_finite() {
                let (x0, _) = to_px((p0.max(0.0), t));
                let (x1, _) = to_px((p1.min(x_max), t));
                if wraps {
                    let (xe, _) = to_px((x_max, t));
                    let (xs, _) = to_px((0.0, t));
                    line(root, &[(x0, cy), (xe, cy)], bar)?;
                    line(root, &[(xs, cy), (x1, cy)], bar)?;
                } else {
                    line(root, &[(x0, cy), (x1, cy)], bar)?;
                }
                line(root, &[(x0, cy - cap), (x0, cy + cap)], bar)?;
                line(root, &[(x1, cy - cap), (x1, cy + cap)], bar)?;
            }
            if t0.is_finite() && t1.is_finite() {
                let (_, y0) = to_px((p, t0));
                let (_, y1) = to_px((p, t1));
                line(root, &[(cx, y0), (cx, y1)], bar)?;
                line(root, &[(cx - cap, y0), (cx + cap, y0)], bar)?;
                line(root, &[(cx - cap, y1), (cx + cap, y1)], bar)?;
            }
            marker(root, Marker::Hottest, cx, cy, 5.0)?;
            let (xa, _) = to_px((p0.max(0.0), t));
            let (xb, _) = to_px((p1.min(x_max), t));
            let (_, ya) = to_px((p, t1));
            let (_, yb) = to_px((p, t0));
            // the position bar and the temperature whisker as two boxes, so that a label
            // can sit in a corner between them
            taken.push(Rect {
                x0: xa.min(cx - cap).min(xb) - 2.0,
                x1: xb.max(cx + cap).max(xa) + 2.0,
                y0: cy - cap - 2.0,
                y1: cy + cap + 2.0,
            });
            taken.push(Rect {
                x0: cx - cap - 2.0,
                x1: cx + cap + 2.0,
                y0: ya.min(yb).min(cy - cap) - 2.0,
                y1: ya.max(yb).max(cy + cap) + 2.0,
            });
            // An interval that runs off both ends of the edge is no location at all: say so,
            // rather than leave a full-width bar to be read as one.
            let spans_edge =
                p0.is_finite() && p1.is_finite() && p0 <= 0.02 * x_max && p1 >= 0.98 * x_max;
            if spans_edge {
                let note = "position interval spans the whole edge: the readings cannot say \
                            where along it the hottest point lies";
                let w = text_width(note, TEXT_PX) + 6.0;
                let (mid, _) = to_px((0.5 * x_max, t));
                let b = Rect::anchored(mid, cy + cap + 14.0, w, TEXT_PX + 4.0, 0.5, 0.5);
                label_box(root, &b, 0.85)?;
                text(
                    root,
                    note,
                    b.x0 + 3.0,
                    cy + cap + 15.0,
                    TextOpts::new(TEXT_PX, Anchor::Left).colour(HOTTEST),
                )?;
                taken.push(b);
            }
        }
    }
    if let Some((label, xl, xr, y)) = limit_label {
        let w = crate::report::labels::bold_text_width(&label, TEXT_PX) + 6.0;
        let h = TEXT_PX + 4.0;
        // Candidates: above or below the line, flush right, then flush left; the boxes stop
        // 3 px short of the limit line, which stays whole. The first clear of the hottest
        // point's bars (and of the flagged-sensor labels) wins; when none is, the one that
        // covers the least of the bars.
        let cands = [
            (Rect::anchored(xr + 3.0, y - 11.0, w, h, 1.0, 0.5), y - 10.0),
            (Rect::anchored(xr + 3.0, y + 12.0, w, h, 1.0, 0.5), y + 12.0),
            (Rect::anchored(xl - 3.0, y - 11.0, w, h, 0.0, 0.5), y - 10.0),
            (Rect::anchored(xl - 3.0, y + 12.0, w, h, 0.0, 0.5), y + 12.0),
        ];
        let cover = |b: &Rect| -> f64 {
            taken
                .iter()
                .map(|o| {
                    let dx = b.x1.min(o.x1) - b.x0.max(o.x0);
                    let dy = b.y1.min(o.y1) - b.y0.max(o.y0);
                    if dx > 0.0 && dy > 0.0 { dx * dy } else { 0.0 }
                })
                .sum()
        };
        let (boxed, ty) = cands
            .iter()
            .copied()
            .find(|(b, _)| cover(b) == 0.0)
            .unwrap_or_else(|| {
                cands
                    .iter()
                    .copied()
                    .min_by(|a, b| cover(&a.0).total_cmp(&cover(&b.0)))
                    .unwrap_or(cands[0])
            });
        label_box(root, &boxed, 0.85)?;
        text(
            root,
            &label,
            boxed.x0 + 3.0,
            ty,
            TextOpts::new(TEXT_PX, Anchor::Left).colour(LIMIT).bold(),
        )?;
    }

    // Depth panel.
    let depth_top = top + CAPTION_H + TEMP_H;
    draw_depth_panel(root, r, e, depth_top, x_max, &u, coord)
}

#[allow(clippy::too_many_arguments)]
fn draw_depth_panel(
    root: &Area<'_>,
    r: &EstimateResult,
    e: &EdgeResult,
    top: f64,
    x_max: f64,
    u: &CaseUnits,
    coord: &str,
) -> DrawResult {
    let shape = r.plate.shape();
    // (position, depth) in case units; only sensors along this edge's span.
    let sensors: Vec<(usize, f64, f64)> = r
        .sensors
        .iter()
        .enumerate()
        .map(|(k, s)| {
            (
                k,
                u.pos(shape, e.edge, shape.position_along(e.edge, s.position)),
                u.len(shape.depth_from(e.edge, s.position)),
            )
        })
        .filter(|(_, p, d)| p.is_finite() && d.is_finite() && (0.0..=x_max).contains(p))
        .collect();
    let d_max = sensors.iter().map(|s| s.2).fold(0.0, f64::max);
    let d_max = if d_max > 0.0 { d_max * 1.25 } else { 1.0 };
    let area = root
        .clone()
        .shrink((0, top as i32), (WIDTH, DEPTH_H as u32));
    // Depth grows downwards from the edge at the top: plot -depth.
    let mut chart = ChartBuilder::on(&area)
        .margin_left(MARGIN as u32)
        .margin_right(CHART_RIGHT)
        .margin_top(4)
        .y_label_area_size(Y_LABEL_W)
        .x_label_area_size(56)
        .build_cartesian_2d(0.0..x_max, -d_max..0.0)?;
    let fmt_x = |v: &f64| tick(*v);
    let fmt_y = |v: &f64| tick(-*v);
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID.stroke_width(1))
        .axis_style(INK.stroke_width(1))
        .label_style((FAMILY, font(TEXT_PX)).into_font().color(&INK))
        .axis_desc_style((FAMILY, font(AXIS_PX)).into_font().color(&INK))
        .x_desc(format!(
            "position along the {} edge, {coord} [{}]",
            e.edge,
            u.pos_symbol(r.plate.shape(), e.edge)
        ))
        .y_desc(format!("depth [{}]", u.len_symbol()))
        .x_labels(12)
        .y_labels(4)
        .x_label_formatter(&fmt_x)
        .y_label_formatter(&fmt_y)
        .draw()?;
    let to_px = |p: (f64, f64)| {
        let (x, y) = chart.backend_coord(&p);
        (f64::from(x), f64::from(y))
    };
    // The edge itself, at depth 0.
    let (ex0, ey) = to_px((0.0, 0.0));
    let (ex1, _) = to_px((x_max, 0.0));
    line(root, &[(ex0, ey), (ex1, ey)], INK.stroke_width(4))?;
    let (bx0, by0) = to_px((0.0, 0.0));
    let (bx1, by1) = to_px((x_max, -d_max));
    let mut placer = Placer::new(Rect {
        x0: bx0 + 2.0,
        y0: by0 + 4.0,
        x1: bx1 - 2.0,
        y1: by1 - 2.0,
    });
    // Panel note, in a corner free of markers.
    let note = format!("sensor depth below the {} edge", e.edge);
    let (nw, nh) = (text_width(&note, TEXT_PX), 16.0);
    let marker_px: Vec<(usize, f64, f64)> = sensors
        .iter()
        .map(|&(k, p, d)| {
            let (x, y) = to_px((p, -d));
            (k, x, y)
        })
        .collect();
    for &(_, x, y) in &marker_px {
        placer.block(Rect::around(x, y, 7.0));
    }
    let corners = [
        Rect::anchored(bx1 - 6.0, by1 - 6.0, nw, nh, 1.0, 1.0),
        Rect::anchored(bx0 + 6.0, by1 - 6.0, nw, nh, 0.0, 1.0),
        Rect::anchored(bx1 - 6.0, by0 + 8.0, nw, nh, 1.0, 0.0),
    ];
    if let Some(b) = placer.place(&corners) {
        text(
            root,
            &note,
            b.x0,
            b.centre().1,
            TextOpts::new(TEXT_PX, Anchor::Left).colour(GREY),
        )?;
    }
    // Guides from each sensor up to the edge, then markers, then labels.
    for &(_, x, y) in &marker_px {
        line(root, &[(x, ey + 2.0), (x, y)], GRID.stroke_width(1))?;
    }
    for &(k, x, y) in &marker_px {
        marker(root, sensor_marker(&r.sensors[k]), x, y, 5.0)?;
    }
    for &(k, x, y) in &marker_px {
        let s = &r.sensors[k];
        let w = sensor_label_width(s, TEXT_PX);
        let h = 16.0;
        let cands = around_marker(x, y, 6.0, w, h);
        if let Some(b) = placer.place_best(&cands) {
            let mut o = TextOpts::new(TEXT_PX, Anchor::Left);
            if s.flag.is_some() || s.doubtful {
                o = o.bold();
            }
            text(root, &s.sensor, b.x0 + 1.0, b.centre().1, o)?;
        }
    }
    Ok(())
}

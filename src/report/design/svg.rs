//! `design.svg`: the plate to scale with the allowed and keep-out regions, the minimum
//! distance from the edges, the hidden edges and the sensors numbered as in `layout.csv`;
//! beneath it, for each hidden edge, the predicted band half-width along the edge for this
//! layout and for the one it was compared against. Uses the plot conventions of
//! [`crate::report`] (sizes, colours, markers, label placement).

use crate::design::{DesignResult, LayoutScore, z_of};
use crate::error::{Error, Result};
use crate::geometry::Edge;
use crate::report::draw::{
    AXIS_PX, Anchor, Area, BAND, DrawResult, ESTIMATE, FAMILY, FOOTER_H, GREY, GRID, Glyph,
    HOTTEST, INK, LEGEND_ROW_H, Marker, PLOT_SAFETY_NOTE, TEXT_PX, TITLE_PX, TextOpts, dashed,
    font, legend, legend_rows, line, marker, polygon, rect, text,
};
use crate::report::format::{CaseUnits, edge_coordinate, tick};
use crate::report::labels::{Placer, Rect, around_marker, text_width};
use plotters::element::DashedPathElement;
use plotters::prelude::*;

/// Picture width, px.
const WIDTH: u32 = 960;
/// Left and right margins, px.
const MARGIN: f64 = 16.0;
/// Width of the y tick-label and title area, px (the same in every panel, so that the
/// plate's x axis and the bottom and top edges' position axes line up).
const Y_LABEL_W: u32 = 82;
/// Right margin of the charts, px.
const CHART_RIGHT: u32 = 28;
/// Height of the x tick labels and title under the plate, px.
const PLATE_X_LABEL_H: u32 = 52;
/// Largest height of the plate drawing, px.
const PLATE_MAX_H: f64 = 340.0;
/// Smallest height of the plate drawing, px (a very long thin plate is drawn thicker than
/// to scale, and says so).
const PLATE_MIN_H: f64 = 90.0;
/// Height of the drawing of a round part, px.
const ROUND_H: f64 = 420.0;
/// Height of an edge's caption line, px.
const CAPTION_H: f64 = 30.0;
/// Height of an edge's half-width chart, px.
const EDGE_H: f64 = 260.0;
/// Space between blocks, px.
const GAP: f64 = 16.0;
/// Keep-out fill.
const KEEP_OUT: RGBColor = RGBColor(0xd4, 0xd4, 0xd4);

fn plot_width() -> f64 {
    f64::from(WIDTH) - MARGIN - f64::from(Y_LABEL_W) - f64::from(CHART_RIGHT)
}

fn legend_items(r: &DesignResult) -> Vec<(Glyph, String)> {
    let conf = percent(r.confidence);
    let mut items = vec![(Glyph::Swatch(BAND), "allowed region".to_string())];
    if !r.constraints.keep_out.is_empty() {
        items.push((Glyph::Swatch(KEEP_OUT), "keep-out".to_string()));
    }
    if r.constraints.edge_distance_m > 0.0 {
        items.push((
            Glyph::Dashed(GREY, 1),
            "minimum distance from the edges".to_string(),
        ));
    }
    items.extend([
        (Glyph::Edge, "hidden edge".to_string()),
        (
            Glyph::Marker(Marker::Sensor),
            if r.search.is_some() {
                "chosen sensor (number = row of layout.csv)".to_string()
            } else {
                "sensor (number = row of the layout)".to_string()
            },
        ),
    ]);
    if r.layout.iter().any(|s| s.fixed) && r.search.is_some() {
        items.push((
            Glyph::Marker(Marker::Flagged),
            "existing sensor, kept".to_string(),
        ));
    }
    if let Some(a) = &r.against {
        items.push((
            Glyph::Marker(Marker::SensorNoReading),
            format!("sensor of {}", a.name),
        ));
    }
    items.push((
        Glyph::Line(ESTIMATE, 2),
        format!("{conf} band half-width, this layout"),
    ));
    if let Some(a) = &r.against {
        items.push((
            Glyph::Dashed(HOTTEST, 2),
            format!("{conf} band half-width, {}", a.name),
        ));
    }
    items
}

fn percent(c: f64) -> String {
    let p = 100.0 * c;
    if (p - p.round()).abs() < 1e-9 {
        format!("{} %", p.round())
    } else {
        format!("{p:.1} %")
    }
}

/// Draw `design.svg`.
pub(crate) fn design_svg(r: &DesignResult) -> Result<String> {
    let items = legend_items(r);
    let rows = legend_rows(&items, f64::from(WIDTH) - 2.0 * MARGIN);
    let head_h = 74.0 + rows as f64 * LEGEND_ROW_H + 12.0;
    let (plate_h, _) = plate_height(r);
    let plate_block = CAPTION_H + plate_h + f64::from(PLATE_X_LABEL_H) + 8.0;
    let edges = r.score.edges.len() as f64;
    let height = head_h + plate_block + GAP + edges * (CAPTION_H + EDGE_H + GAP) + FOOTER_H;
    let mut buf = String::new();
    {
        let root =
            SVGBackend::with_string(&mut buf, (WIDTH, height.ceil() as u32)).into_drawing_area();
        draw(&root, r, &items, head_h, plate_h)
            .and_then(|()| root.present().map_err(Into::into))
            .map_err(|e| Error::Internal(format!("cannot draw design.svg: {e}")))?;
    }
    Ok(buf)
}

/// The plate's drawn depth (case units) and pixel height, and whether it is stretched.
fn plate_height(r: &DesignResult) -> (f64, bool) {
    let shape = r.plate.shape();
    if shape.is_round() {
        // a round part is drawn to scale, as tall as the panel allows
        return (ROUND_H, false);
    }
    let w = shape.width();
    let h = shape.height().unwrap_or_else(|| {
        r.constraints
            .allowed
            .iter()
            .map(|g| g.y_max)
            .fold(w, f64::max)
    });
    let scaled = plot_width() * h / w;
    let px = scaled.clamp(PLATE_MIN_H, PLATE_MAX_H);
    (px, px > scaled + 0.5)
}

fn draw(
    root: &Area<'_>,
    r: &DesignResult,
    items: &[(Glyph, String)],
    head_h: f64,
    plate_h: f64,
) -> DrawResult {
    root.fill(&WHITE)?;
    let u = CaseUnits::new(r.units);
    let new = r.layout.iter().filter(|s| !s.fixed).count();
    let title = if r.search.is_some() {
        format!(
            "Sensor layout: {new} sensors chosen for the \"{}\" criterion",
            r.criterion.name()
        )
    } else {
        format!("Sensor layout scored: {} sensors", r.layout.len())
    };
    text(
        root,
        &title,
        MARGIN,
        14.0,
        TextOpts::new(TITLE_PX, Anchor::TopLeft).bold(),
    )?;
    let mut sub = format!(
        "expected variation of the hidden profile {} ({} prior)  ·  reading noise {}  ·  {} \
         candidates",
        u.dtemp_show(r.prior.variation_k),
        crate::case::Smoothing::of_penalty_order(r.prior.order).name(),
        u.dtemp_show(r.noise_k),
        r.candidate_count,
    );
    if let Some(h) = r.candidate_spacing_m {
        sub.push_str(&format!(" on a {} grid", u.len_show(h)));
    }
    text(
        root,
        &sub,
        MARGIN,
        46.0,
        TextOpts::new(TEXT_PX + 1.0, Anchor::TopLeft),
    )?;
    legend(root, items, MARGIN, 72.0, f64::from(WIDTH) - 2.0 * MARGIN)?;
    let top = head_h;
    draw_plate(root, r, top, plate_h)?;
    let mut y = top + CAPTION_H + plate_h + f64::from(PLATE_X_LABEL_H) + 8.0 + GAP;
    for (k, e) in r.score.edges.iter().enumerate() {
        let other = r.against.as_ref().map(|a| (&a.score, &a.name));
        draw_edge(root, r, &r.score, k, other, y)?;
        let _ = e;
        y += CAPTION_H + EDGE_H + GAP;
    }
    text(
        root,
        PLOT_SAFETY_NOTE,
        MARGIN,
        y + 4.0,
        TextOpts::new(TEXT_PX, Anchor::TopLeft),
    )?;
    Ok(())
}

fn draw_plate(root: &Area<'_>, r: &DesignResult, top: f64, plate_h: f64) -> DrawResult {
    let u = CaseUnits::new(r.units);
    let shape = r.plate.shape();
    let (_, stretched) = plate_height(r);
    let w = u.len(shape.width());
    let h_m = shape.height().unwrap_or_else(|| {
        r.constraints
            .allowed
            .iter()
            .map(|g| g.y_max)
            .fold(shape.width(), f64::max)
    });
    let h = u.len(h_m);
    let lu = u.len_symbol();
    let cy = top + CAPTION_H / 2.0;
    let round = shape.is_round();
    let mut caption = format!(
        "The plate ({} × {})",
        u.len_show(shape.width()),
        u.len_show(h_m)
    );
    if let Some(a) = shape.radius_of(Edge::Inner) {
        caption = format!(
            "The wall (radius {} to {}; angles counter-clockwise from +x)",
            u.len_show(a),
            u.len_show(0.5 * shape.width())
        );
    } else if round {
        caption = format!(
            "The disk (radius {}; angles counter-clockwise from +x)",
            u.len_show(0.5 * shape.width())
        );
    }
    if shape.height().is_none() {
        caption = format!(
            "The plate (a long strip {} wide, drawn {} deep)",
            u.len_show(shape.width()),
            u.len_show(h_m)
        );
    }
    text(
        root,
        &caption,
        MARGIN,
        cy,
        TextOpts::new(AXIS_PX, Anchor::Left).bold(),
    )?;
    if stretched {
        text(
            root,
            "drawn thicker than to scale",
            f64::from(WIDTH) - f64::from(CHART_RIGHT),
            cy,
            TextOpts::new(TEXT_PX, Anchor::Right).colour(GREY),
        )?;
    }
    let area = root.clone().shrink(
        (0, (top + CAPTION_H) as i32),
        (WIDTH, (plate_h + f64::from(PLATE_X_LABEL_H)) as u32 + 4),
    );
    // a round part is centred, to scale: the x range widened to the panel's aspect
    let (x_range, y_range) = if round {
        let radius = 0.5 * w;
        let half_x = radius * plot_width() / (plate_h - 10.0).max(1.0);
        (-half_x..half_x, -radius..radius)
    } else {
        (0.0..w, 0.0..h)
    };
    let mut chart = ChartBuilder::on(&area)
        .margin_left(MARGIN as u32)
        .margin_right(CHART_RIGHT)
        .margin_top(4)
        .y_label_area_size(Y_LABEL_W)
        .x_label_area_size(PLATE_X_LABEL_H)
        .build_cartesian_2d(x_range, y_range)?;
    let fmt = |v: &f64| tick(*v);
    let y_ticks = ((plate_h / 40.0).round() as usize).clamp(2, 8);
    chart
        .configure_mesh()
        .disable_mesh()
        .axis_style(INK.stroke_width(1))
        .label_style((FAMILY, font(TEXT_PX)).into_font().color(&INK))
        .axis_desc_style((FAMILY, font(AXIS_PX)).into_font().color(&INK))
        .x_desc(format!("x [{lu}]"))
        .y_desc(format!("y [{lu}]"))
        .x_labels(12)
        .y_labels(y_ticks)
        .x_label_formatter(&fmt)
        .y_label_formatter(&fmt)
        .draw()?;
    let to_px = |x: f64, y: f64| {
        let (a, b) = chart.backend_coord(&(x, y));
        (f64::from(a), f64::from(b))
    };
    let c = &r.constraints;
    if round {
        return draw_round_plate(root, r, &to_px);
    }
    // Allowed regions, then keep-outs with hatching, then the edge-distance margin.
    for g in &c.allowed {
        let (x0, y0) = to_px(u.len(g.x_min), u.len(g.y_max.min(h_m)));
        let (x1, y1) = to_px(u.len(g.x_max), u.len(g.y_min));
        rect(root, x0, y0, x1, y1, BAND.filled())?;
    }
    for g in &c.keep_out {
        let (x0, y0) = to_px(u.len(g.x_min), u.len(g.y_max.min(h_m)));
        let (x1, y1) = to_px(u.len(g.x_max), u.len(g.y_min));
        rect(root, x0, y0, x1, y1, KEEP_OUT.filled())?;
        // diagonal hatching, clipped to the box
        let step = 8.0;
        let mut t = -(y1 - y0);
        while t < x1 - x0 {
            let (ax, ay) = (x0 + t.max(0.0), y1 - (t.max(0.0) - t));
            let run = (x1 - ax).min(ay - y0);
            if run > 0.0 {
                line(
                    root,
                    &[(ax, ay), (ax + run, ay - run)],
                    GREY.stroke_width(1),
                )?;
            }
            t += step;
        }
        rect(root, x0, y0, x1, y1, GREY.stroke_width(1))?;
    }
    let mut margin_line: Vec<(f64, f64)> = Vec::new();
    if c.edge_distance_m > 0.0 {
        let d = c.edge_distance_m;
        let (x0, _) = to_px(u.len(d), 0.0);
        let (x1, y1) = to_px(u.len(shape.width() - d), u.len(d));
        // a strip has no top edge: the margin stays open at the top of the drawing
        let pts = match shape.height() {
            Some(hh) => {
                let (_, y0) = to_px(0.0, u.len(hh - d));
                vec![(x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0)]
            }
            None => {
                let (_, y0) = to_px(0.0, h);
                vec![(x0, y0), (x0, y1), (x1, y1), (x1, y0)]
            }
        };
        dashed(root, &pts, 5, 4, GREY.stroke_width(1))?;
        margin_line = pts;
    }
    // Plate outline and hidden edges.
    let (px0, py0) = to_px(0.0, h);
    let (px1, py1) = to_px(w, 0.0);
    if shape.height().is_some() {
        rect(root, px0, py0, px1, py1, INK.stroke_width(1))?;
    } else {
        // a long strip: its sides run on beyond the drawing, and it has no top
        line(
            root,
            &[(px0, py0), (px0, py1), (px1, py1), (px1, py0)],
            INK.stroke_width(1),
        )?;
    }
    for e in r.plate.unknown_edges() {
        let seg = match e {
            Edge::Bottom => [(px0, py1), (px1, py1)],
            Edge::Top => [(px0, py0), (px1, py0)],
            Edge::Left => [(px0, py0), (px0, py1)],
            Edge::Right => [(px1, py0), (px1, py1)],
            // round parts are drawn by their own picture
            Edge::Inner | Edge::Outer | Edge::Rim => continue,
        };
        line(root, &seg, INK.stroke_width(5))?;
    }
    let mut placer = Placer::new(Rect {
        x0: px0 + 1.0,
        y0: py0 + 1.0,
        x1: px1 - 1.0,
        y1: py1 - 1.0,
    });
    // Sensor numbers keep off the dashed margin line and the hatched keep-outs.
    for seg in margin_line.windows(2) {
        let ((ax, ay), (bx, by)) = (seg[0], seg[1]);
        placer.block(Rect {
            x0: ax.min(bx) - 2.0,
            y0: ay.min(by) - 2.0,
            x1: ax.max(bx) + 2.0,
            y1: ay.max(by) + 2.0,
        });
    }
    for g in &c.keep_out {
        let (x0, y0) = to_px(u.len(g.x_min), u.len(g.y_max.min(h_m)));
        let (x1, y1) = to_px(u.len(g.x_max), u.len(g.y_min));
        placer.block(Rect {
            x0: x0.min(x1),
            y0: y0.min(y1),
            x1: x0.max(x1),
            y1: y0.max(y1),
        });
    }
    draw_layout_sensors(root, r, &to_px, &mut placer)
}

/// The chosen (and compared) sensors on the plate drawing, numbered by their row of
/// `layout.csv`, with labels placed clear of each other and of what `placer` holds.
fn draw_layout_sensors(
    root: &Area<'_>,
    r: &DesignResult,
    to_px: &dyn Fn(f64, f64) -> (f64, f64),
    placer: &mut Placer,
) -> DrawResult {
    let u = CaseUnits::new(r.units);
    // The comparison layout: hollow circles, no numbers.
    if let Some(a) = &r.against {
        for s in &a.layout {
            let (x, y) = to_px(u.len(s.position.x), u.len(s.position.y));
            placer.block(Rect::around(x, y, 6.0));
            marker(root, Marker::SensorNoReading, x, y, 4.0)?;
        }
    }
    let pts: Vec<(f64, f64)> = r
        .layout
        .iter()
        .map(|s| to_px(u.len(s.position.x), u.len(s.position.y)))
        .collect();
    for &(x, y) in &pts {
        placer.block(Rect::around(x, y, 7.0));
    }
    for (s, &(x, y)) in r.layout.iter().zip(&pts) {
        let m = if s.fixed && r.search.is_some() {
            Marker::Flagged
        } else {
            Marker::Sensor
        };
        marker(root, m, x, y, 5.0)?;
    }
    for (k, &(x, y)) in pts.iter().enumerate() {
        let label = format!("{}", k + 1);
        let tw = text_width(&label, TEXT_PX);
        // beside the marker, else a little farther out (a neighbour, the margin line or a
        // keep-out can take all the near places)
        let mut cands = around_marker(x, y, 6.0, tw, 15.0);
        cands.extend(around_marker(x, y, 16.0, tw, 15.0));
        cands.extend(around_marker(x, y, 28.0, tw, 15.0));
        if let Some(b) = placer.place_best(&cands) {
            if cands[8..].contains(&b) {
                // away from its marker: a leader ties them
                let (lx, ly) = (x.clamp(b.x0, b.x1), y.clamp(b.y0, b.y1));
                line(root, &[(x, y), (lx, ly)], INK.stroke_width(1))?;
            }
            crate::report::draw::label_box(root, &b, 0.8)?;
            text(
                root,
                &label,
                b.x0 + 1.0,
                b.centre().1,
                TextOpts::new(TEXT_PX, Anchor::Left).bold(),
            )?;
        }
    }
    Ok(())
}

/// The plate panel of a round part: the ring (or disk) with its allowed sectors, keep-outs,
/// the edge-distance circles, the hidden circle drawn thick, and the sensors.
fn draw_round_plate(
    root: &Area<'_>,
    r: &DesignResult,
    to_px: &dyn Fn(f64, f64) -> (f64, f64),
) -> DrawResult {
    let u = CaseUnits::new(r.units);
    let shape = r.plate.shape();
    let c = &r.constraints;
    let outer = 0.5 * shape.width();
    let inner = shape.radius_of(Edge::Inner).unwrap_or(0.0);
    let tau = std::f64::consts::TAU;
    // a ring sector as a polygon (case units), `steps` points per arc
    let sector_px = |r0: f64, r1: f64, a0: f64, span: f64| -> Vec<(f64, f64)> {
        let steps = ((span / tau) * 180.0).ceil().max(2.0) as usize;
        let mut pts = Vec::with_capacity(2 * steps + 2);
        for k in 0..=steps {
            let a = a0 + span * k as f64 / steps as f64;
            pts.push(to_px(u.len(r1 * a.cos()), u.len(r1 * a.sin())));
        }
        for k in (0..=steps).rev() {
            let a = a0 + span * k as f64 / steps as f64;
            pts.push(to_px(u.len(r0 * a.cos()), u.len(r0 * a.sin())));
        }
        pts
    };
    let region_px = |g: &crate::case::Region| match &g.sector {
        Some(sc) => {
            let span = (sc.end - sc.start).rem_euclid(tau);
            let span = if span <= 0.0 { tau } else { span };
            sector_px(sc.r_min.max(inner), sc.r_max.min(outer), sc.start, span)
        }
        // the whole part
        None => sector_px(inner, outer, 0.0, tau),
    };
    for g in &c.allowed {
        polygon(root, &region_px(g), BAND.filled())?;
    }
    let mut placer = Placer::new(Rect {
        x0: 0.0,
        y0: 0.0,
        x1: f64::from(WIDTH),
        y1: 1.0e6,
    });
    for g in &c.keep_out {
        let pts = region_px(g);
        polygon(root, &pts, KEEP_OUT.filled())?;
        let mut closed = pts.clone();
        closed.push(pts[0]);
        line(root, &closed, GREY.stroke_width(1))?;
        for p in &pts {
            placer.block(Rect::around(p.0, p.1, 3.0));
        }
    }
    let circle = |radius: f64| -> Vec<(f64, f64)> {
        (0..=180)
            .map(|k| {
                let a = tau * k as f64 / 180.0;
                to_px(u.len(radius * a.cos()), u.len(radius * a.sin()))
            })
            .collect()
    };
    if c.edge_distance_m > 0.0 {
        dashed(
            root,
            &circle(outer - c.edge_distance_m),
            5,
            4,
            GREY.stroke_width(1),
        )?;
        if inner > 0.0 {
            dashed(
                root,
                &circle(inner + c.edge_distance_m),
                5,
                4,
                GREY.stroke_width(1),
            )?;
        }
    }
    for e in shape.edges() {
        let Some(radius) = shape.radius_of(e) else {
            continue;
        };
        let width = if r.plate.unknown_edges().contains(&e) {
            5
        } else {
            1
        };
        line(root, &circle(radius), INK.stroke_width(width))?;
    }
    draw_layout_sensors(root, r, to_px, &mut placer)
}

fn edge_title(e: Edge) -> String {
    let (name, at) = match e {
        Edge::Bottom => ("Bottom", "y = 0"),
        Edge::Top => ("Top", "y = height"),
        Edge::Left => ("Left", "x = 0"),
        Edge::Right => ("Right", "x = width"),
        Edge::Inner => ("Inner", "r = inner radius"),
        Edge::Outer => ("Outer", "r = outer radius"),
        Edge::Rim => ("Rim", "r = radius"),
    };
    format!("{name} edge ({at})")
}

fn draw_edge(
    root: &Area<'_>,
    r: &DesignResult,
    score: &LayoutScore,
    k: usize,
    other: Option<(&LayoutScore, &String)>,
    top: f64,
) -> DrawResult {
    let u = CaseUnits::new(r.units);
    let z = z_of(r.confidence);
    let e = &score.edges[k];
    let conf = percent(r.confidence);
    let shape = r.plate.shape();
    let len = u.pos(
        shape,
        e.edge,
        shape.edge_length(e.edge).unwrap_or(shape.width()),
    );
    let cy = top + CAPTION_H / 2.0;
    text(
        root,
        &edge_title(e.edge),
        MARGIN,
        cy,
        TextOpts::new(AXIS_PX, Anchor::Left).bold(),
    )?;
    let prior_rms =
        (e.prior_sd.iter().map(|v| v * v).sum::<f64>() / e.prior_sd.len().max(1) as f64).sqrt();
    let mut details = format!("resolution {} (worst", u.len_show(e.resolution_worst.1));
    // The compared layout is named in the legend; its path, which can be long, stays out
    // of this line so that the line keeps clear of the title.
    if let Some((o, _)) = other {
        if let Some(oe) = o.edges.get(k) {
            details.push_str(&format!(
                "; compared layout {}",
                u.len_show(oe.resolution_worst.1)
            ));
        }
    }
    details.push_str(&format!(
        ")  ·  variation before any reading ±{}",
        u.dtemp_show(z * prior_rms)
    ));
    text(
        root,
        &details,
        f64::from(WIDTH) - f64::from(CHART_RIGHT),
        cy,
        TextOpts::new(TEXT_PX + 1.0, Anchor::Right).colour(GREY),
    )?;
    let hw = |s: &[f64]| -> Vec<f64> { s.iter().map(|v| u.dtemp(z * v)).collect() };
    let ours = hw(&e.sd);
    let theirs = other.and_then(|(o, _)| o.edges.get(k)).map(|oe| hw(&oe.sd));
    let y_max = ours
        .iter()
        .chain(theirs.iter().flatten())
        .copied()
        .fold(0.0, f64::max)
        .max(1e-9)
        * 1.1;
    let area = root
        .clone()
        .shrink((0, (top + CAPTION_H) as i32), (WIDTH, EDGE_H as u32));
    let mut chart = ChartBuilder::on(&area)
        .margin_left(MARGIN as u32)
        .margin_right(CHART_RIGHT)
        .margin_top(6)
        .y_label_area_size(Y_LABEL_W)
        .x_label_area_size(52)
        .build_cartesian_2d(0.0..len, 0.0..y_max)?;
    let fmt = |v: &f64| tick(*v);
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID.stroke_width(1))
        .axis_style(INK.stroke_width(1))
        .label_style((FAMILY, font(TEXT_PX)).into_font().color(&INK))
        .axis_desc_style((FAMILY, font(AXIS_PX)).into_font().color(&INK))
        .x_desc(format!(
            "position along the {} edge, {} [{}]",
            e.edge,
            edge_coordinate(e.edge),
            u.pos_symbol(shape, e.edge)
        ))
        .y_desc(format!("{conf} band half-width [{}]", u.temp_symbol()))
        .x_labels(12)
        .y_labels(6)
        .x_label_formatter(&fmt)
        .y_label_formatter(&fmt)
        .draw()?;
    let pos: Vec<f64> = e
        .positions
        .iter()
        .map(|p| u.pos(shape, e.edge, *p))
        .collect();
    if let Some(t) = &theirs {
        let pts: Vec<(f64, f64)> = pos.iter().copied().zip(t.iter().copied()).collect();
        chart.draw_series(std::iter::once(DashedPathElement::new(
            pts,
            8,
            5,
            HOTTEST.stroke_width(2),
        )))?;
    }
    let pts: Vec<(f64, f64)> = pos.iter().copied().zip(ours.iter().copied()).collect();
    chart.draw_series(std::iter::once(PathElement::new(
        pts,
        ESTIMATE.stroke_width(2),
    )))?;
    // Sensor positions along the edge, on the axis.
    for s in &r.layout {
        let p = u.pos(shape, e.edge, shape.position_along(e.edge, s.position));
        if (0.0..=len).contains(&p) {
            let (x, y) = chart.backend_coord(&(p, 0.0));
            marker(root, Marker::Rug, f64::from(x), f64::from(y) - 1.0, 4.0)?;
        }
    }
    Ok(())
}

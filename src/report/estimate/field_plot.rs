//! `field.svg`: a map of the estimated temperature over the plate, true to the plate's
//! aspect (a very long plate is stretched across, and the caption says by how much), with a
//! labelled colour bar, isotherms at round temperatures with their labels, the sensors with
//! their ids (flagged ones drawn distinctly), the unknown edges drawn thick and labelled,
//! and the hottest point.
//!
//! The map is drawn from the field grid interpolated bilinearly onto cells of about
//! [`CELL_PX`] pixels (coarse grids are not shown as coarse blocks, fine grids do not bloat
//! the file); the isotherms are traced by marching squares on the same cells.

use super::summary::percent;
use crate::error::{Error, Result};
use crate::estimate::EstimateResult;
use crate::geometry::{Edge, EdgeCondition, Shape};
use crate::report::contour::{contour, length, levels};
use crate::report::draw::{
    AXIS_PX, Anchor, Area, DrawResult, FAMILY, GREY, Glyph, INK, LEGEND_ROW_H, Marker,
    PLOT_SAFETY_NOTE, TEXT_PX, TITLE_PX, TextOpts, dashed, font, label_box, legend, legend_rows,
    line, marker, rect, rgb, sensor_label_width, sensor_marker, text,
};
use crate::report::format::{CaseUnits, fixed, step_decimals, tick};
use crate::report::labels::{Placer, Rect, around_marker, bold_text_width, text_width};
use crate::report::palette::colour;
use plotters::prelude::*;

/// Picture width, px.
const WIDTH: u32 = 960;
/// Left end of the map, px (room for the y ticks and title).
const MAP_LEFT: f64 = 96.0;
/// Top of the map, px (room for the title and subtitle).
const MAP_TOP: f64 = 84.0;
/// Largest map width, px.
const MAP_W_MAX: f64 = 828.0;
/// Largest map height, px.
const MAP_H_MAX: f64 = 520.0;
/// Smallest height-to-width ratio shown: a longer plate is stretched across to this ratio
/// so that its depth stays readable (the caption states the stretch).
const MIN_RATIO: f64 = 0.22;
/// Width of the y tick-label area, px.
const Y_LABEL_W: f64 = 80.0;
/// Height of the x tick-label area, px.
const X_LABEL_H: f64 = 50.0;
/// Target size of a map cell, px.
const CELL_PX: f64 = 10.0;
/// Colour bar width and height, px.
const BAR_W: f64 = 480.0;
const BAR_H: f64 = 16.0;
/// Height of the colour bar block (title, bar, tick labels), px.
const BAR_BLOCK_H: f64 = 78.0;
/// Height of a caption line, px.
const CAPTION_LINE_H: f64 = 19.0;

/// The field in case units, on the display grid.
struct Map {
    xs: Vec<f64>,
    ys: Vec<f64>,
    z: Vec<f64>,
    t_min: f64,
    t_max: f64,
    /// Whether the field is constant (no isotherms to draw).
    flat: bool,
}

/// Bilinear interpolation of `z` (nodes `xs × ys`, x fastest) at `(x, y)`.
fn bilinear(xs: &[f64], ys: &[f64], z: &[f64], x: f64, y: f64) -> f64 {
    let locate = |g: &[f64], v: f64| -> (usize, f64) {
        let n = g.len();
        let k = g.partition_point(|&q| q <= v).clamp(1, n - 1);
        let (a, b) = (g[k - 1], g[k]);
        let t = if b > a {
            ((v - a) / (b - a)).clamp(0.0, 1.0)
        } else {
            0.0
        };
        (k - 1, t)
    };
    let nx = xs.len();
    let (i, tx) = locate(xs, x);
    let (j, ty) = locate(ys, y);
    let at = |i: usize, j: usize| z[j * nx + i];
    let bottom = at(i, j) * (1.0 - tx) + at(i + 1, j) * tx;
    let top = at(i, j + 1) * (1.0 - tx) + at(i + 1, j + 1) * tx;
    bottom * (1.0 - ty) + top * ty
}

fn display_map(r: &EstimateResult, u: &CaseUnits, map_w: f64, map_h: f64) -> Option<Map> {
    let f = &r.field;
    let (nx, ny) = (f.xs.len(), f.ys.len());
    if nx < 2 || ny < 2 || f.estimate.len() != nx * ny {
        return None;
    }
    let xs: Vec<f64> = f.xs.iter().map(|&v| u.len(v)).collect();
    let ys: Vec<f64> = f.ys.iter().map(|&v| u.len(v)).collect();
    let z: Vec<f64> = f.estimate.iter().map(|&v| u.temp(v)).collect();
    let (x0, x1) = (xs[0], xs[nx - 1]);
    let (y0, y1) = (ys[0], ys[ny - 1]);
    if !(x1 > x0 && y1 > y0) {
        return None;
    }
    let cells_x = ((map_w / CELL_PX).round() as usize).clamp(1, 160);
    let cells_y = ((map_h / CELL_PX).round() as usize).clamp(1, 160);
    let dxs: Vec<f64> = (0..=cells_x)
        .map(|i| x0 + (x1 - x0) * i as f64 / cells_x as f64)
        .collect();
    let dys: Vec<f64> = (0..=cells_y)
        .map(|j| y0 + (y1 - y0) * j as f64 / cells_y as f64)
        .collect();
    let mut dz = Vec::with_capacity(dxs.len() * dys.len());
    for &y in &dys {
        for &x in &dxs {
            dz.push(bilinear(&xs, &ys, &z, x, y));
        }
    }
    let finite = z.iter().copied().filter(|v| v.is_finite());
    let t_min = finite.clone().fold(f64::INFINITY, f64::min);
    let t_max = finite.fold(f64::NEG_INFINITY, f64::max);
    if !(t_min.is_finite() && t_max.is_finite()) {
        return None;
    }
    let flat = t_max - t_min < 1e-9;
    let (t_min, t_max) = if flat {
        (t_min - 0.5, t_max + 0.5)
    } else {
        (t_min, t_max)
    };
    Some(Map {
        xs: dxs,
        ys: dys,
        z: dz,
        t_min,
        t_max,
        flat,
    })
}

/// The map's size in pixels for a plate `w × h` (case units), and the vertical stretch.
fn map_size(w: f64, h: f64) -> (f64, f64, f64) {
    let ratio = if w > 0.0 && h > 0.0 { h / w } else { 1.0 };
    let shown = ratio.max(MIN_RATIO);
    let (mw, mh) = if MAP_W_MAX * shown <= MAP_H_MAX {
        (MAP_W_MAX, MAP_W_MAX * shown)
    } else {
        (MAP_H_MAX / shown, MAP_H_MAX)
    };
    (mw.round(), mh.round(), shown / ratio)
}

/// Describe each edge's condition for the caption.
pub(super) fn edge_conditions(r: &EstimateResult, u: &CaseUnits) -> String {
    let parts: Vec<String> = Edge::ALL
        .iter()
        .filter_map(|&e| {
            let c = r.plate.condition(e)?;
            Some(match c {
                EdgeCondition::Unknown => format!("{e} unknown (thick line)"),
                EdgeCondition::Insulated => format!("{e} insulated"),
                EdgeCondition::Convective(cv) => match cv.known_h() {
                    Some(h) => format!(
                        "{e} convective (h {} W/(m² K)) to {}",
                        crate::report::format::significant_text(h, 3),
                        u.temp_show(cv.ambient_k)
                    ),
                    None => format!(
                        "{e} convective (h estimated) to {}",
                        u.temp_show(cv.ambient_k)
                    ),
                },
                EdgeCondition::Fixed(p) if p.is_constant() => {
                    format!("{e} fixed at {}", u.temp_show(p.temperatures()[0]))
                }
                EdgeCondition::Fixed(p) => {
                    let lo = p
                        .temperatures()
                        .iter()
                        .copied()
                        .fold(f64::INFINITY, f64::min);
                    let hi = p
                        .temperatures()
                        .iter()
                        .copied()
                        .fold(f64::NEG_INFINITY, f64::max);
                    format!(
                        "{e} fixed profile {} to {}",
                        u.temp_num(lo),
                        u.temp_show(hi)
                    )
                }
            })
        })
        .collect();
    format!("Edges: {}.", parts.join("  ·  "))
}

/// Gap kept round an isotherm label, px.
const ISO_GAP: f64 = 3.0;

/// A bold label in a box, at the best free place among `cands` (left out when none is free).
fn boxed_bold_label(
    root: &Area<'_>,
    placer: &mut Placer,
    cands: &[Rect],
    label: &str,
) -> DrawResult {
    if let Some(b) = placer.place_best(cands) {
        label_box(root, &b, 0.85)?;
        let (cx, cy) = b.centre();
        text(
            root,
            label,
            cx,
            cy,
            TextOpts::new(TEXT_PX, Anchor::Centre).bold(),
        )?;
    }
    Ok(())
}

/// Draw `field.svg`.
pub(crate) fn field_svg(r: &EstimateResult) -> Result<String> {
    let u = CaseUnits::new(r.units);
    let shape = r.plate.shape();
    let w = u.len(shape.width());
    let h = match shape {
        Shape::Rectangle { height_m, .. } => u.len(*height_m),
        Shape::Strip { .. } => r
            .field
            .ys
            .last()
            .map_or(w, |&y| u.len(y))
            .max(f64::MIN_POSITIVE),
        Shape::Disk { .. } | Shape::Annulus { .. } => return super::round_plot::field_svg(r),
    };
    let (map_w, map_h, stretch) = map_size(w, h);
    let map = display_map(r, &u, map_w, map_h);

    let mut captions = vec![edge_conditions(r, &u)];
    if matches!(shape, Shape::Strip { .. }) {
        captions.push(format!(
            "Long strip: shown from the bottom edge to {} deep; the plate continues upward \
             (dashed side).",
            u.case_len_show(h)
        ));
    }
    if stretch > 1.001 {
        captions.push(format!(
            "Depth drawn {}× larger than the length so that the long plate stays readable.",
            fixed(stretch, 2)
        ));
    }
    let outside = r
        .sensors
        .iter()
        .filter(|s| {
            let (x, y) = (u.len(s.position.x), u.len(s.position.y));
            !(0.0..=w).contains(&x) || !(0.0..=h).contains(&y)
        })
        .count();
    if outside > 0 {
        captions.push(format!(
            "{outside} sensor(s) lie beyond the region shown and are not drawn."
        ));
    }
    if let Some(c) = &r.conversion {
        captions.push(c.describe(&r.units));
    }
    captions.push(PLOT_SAFETY_NOTE.to_string());
    let legend_items = legend_items(r);
    let rows = legend_rows(&legend_items, f64::from(WIDTH) - 2.0 * 16.0);
    let legend_top = MAP_TOP + map_h + X_LABEL_H + BAR_BLOCK_H;
    let captions_top = legend_top + rows as f64 * LEGEND_ROW_H + 10.0;
    let height = captions_top + captions.len() as f64 * CAPTION_LINE_H + 14.0;

    let mut buf = String::new();
    {
        let root =
            SVGBackend::with_string(&mut buf, (WIDTH, height.ceil() as u32)).into_drawing_area();
        let layout = Layout {
            map_w,
            map_h,
            width: w,
            height: h,
            legend_top,
            captions_top,
        };
        draw(
            &root,
            r,
            &u,
            map.as_ref(),
            &layout,
            &legend_items,
            &captions,
        )
        .and_then(|()| root.present().map_err(Into::into))
        .map_err(|e| Error::Internal(format!("cannot draw field.svg: {e}")))?;
    }
    Ok(buf)
}

struct Layout {
    map_w: f64,
    map_h: f64,
    /// Extent shown, case units.
    width: f64,
    height: f64,
    legend_top: f64,
    captions_top: f64,
}

pub(super) fn legend_items(r: &EstimateResult) -> Vec<(Glyph, String)> {
    let mut items = vec![(Glyph::Marker(Marker::Sensor), "sensor".to_string())];
    if r.sensors.iter().any(|s| s.flag.is_some()) {
        items.push((Glyph::Marker(Marker::Flagged), "flagged sensor".to_string()));
    }
    if r.sensors.iter().any(|s| s.doubtful) {
        items.push((
            Glyph::Marker(Marker::Doubtful),
            "doubtful sensor (kept: a hot spot or a fault)".to_string(),
        ));
    }
    if r.sensors
        .iter()
        .any(|s| s.reading.is_none() && s.flag.is_none())
    {
        items.push((
            Glyph::Marker(Marker::SensorNoReading),
            "sensor without a reading".to_string(),
        ));
    }
    items.push((Glyph::Marker(Marker::Hottest), "hottest point".to_string()));
    items.push((Glyph::Edge, "unknown edge (reconstructed)".to_string()));
    items.push((Glyph::Isotherm, "isotherm".to_string()));
    items
}

fn draw(
    root: &Area<'_>,
    r: &EstimateResult,
    u: &CaseUnits,
    map: Option<&Map>,
    lay: &Layout,
    legend_items: &[(Glyph, String)],
    captions: &[String],
) -> DrawResult {
    root.fill(&WHITE)?;
    let shape = r.plate.shape();
    text(
        root,
        "Temperature field: estimate",
        16.0,
        14.0,
        TextOpts::new(TITLE_PX, Anchor::TopLeft).bold(),
    )?;
    let grid = format!("{} × {}", r.field.xs.len(), r.field.ys.len());
    text(
        root,
        &format!(
            "Steady temperature over the plate from the fitted edges ({grid} grid; the {} \
             pointwise bands are in field.csv)",
            percent(r.confidence)
        ),
        16.0,
        46.0,
        TextOpts::new(TEXT_PX + 1.0, Anchor::TopLeft),
    )?;

    let area = root.clone().shrink(
        ((MAP_LEFT - Y_LABEL_W) as i32, MAP_TOP as i32),
        (
            (Y_LABEL_W + lay.map_w) as u32,
            (lay.map_h + X_LABEL_H) as u32,
        ),
    );
    let mut chart = ChartBuilder::on(&area)
        .margin(0)
        .y_label_area_size(Y_LABEL_W as u32)
        .x_label_area_size(X_LABEL_H as u32)
        .build_cartesian_2d(0.0..lay.width, 0.0..lay.height)?;
    let fmt = |v: &f64| tick(*v);
    chart
        .configure_mesh()
        .disable_mesh()
        .axis_style(INK.stroke_width(1))
        .label_style((FAMILY, font(TEXT_PX)).into_font().color(&INK))
        .axis_desc_style((FAMILY, font(AXIS_PX)).into_font().color(&INK))
        .x_desc(format!("x [{}]", u.len_symbol()))
        .y_desc(format!("y [{}]", u.len_symbol()))
        .x_labels(((lay.map_w / 70.0) as usize).max(3))
        .y_labels(((lay.map_h / 40.0) as usize).clamp(3, 12))
        .x_label_formatter(&fmt)
        .y_label_formatter(&fmt)
        .draw()?;
    let coord = chart.as_coord_spec().clone();
    let to_px = |x: f64, y: f64| {
        let (px, py) = coord.translate(&(x, y));
        (f64::from(px), f64::from(py))
    };
    let (mx0, my1) = to_px(0.0, 0.0);
    let (mx1, my0) = to_px(lay.width, lay.height);
    // The plate's far end gets its own tick when the round ticks stop short of it (a 130 mm
    // plate with ticks every 20 mm), so that the reader sees where the plate ends; not when
    // its label would run into the last round one.
    {
        use plotters::coord::ranged1d::Ranged;
        let x_range: plotters::coord::types::RangedCoordf64 = (0.0..lay.width).into();
        let last = x_range
            .key_points(((lay.map_w / 70.0) as usize).max(3))
            .last()
            .copied();
        if let Some(last) = last {
            let (lx, _) = to_px(last, 0.0);
            let end = tick(lay.width);
            let room = 0.5 * (text_width(&end, TEXT_PX) + text_width(&tick(last), TEXT_PX)) + 6.0;
            if lay.width - last > 1e-9 * lay.width && mx1 - lx > room {
                line(
                    root,
                    &[(mx1, my1 + 1.0), (mx1, my1 + 6.0)],
                    INK.stroke_width(1),
                )?;
                text(
                    root,
                    &end,
                    mx1,
                    my1 + 18.0,
                    TextOpts::new(TEXT_PX, Anchor::Centre),
                )?;
            }
        }
    }

    // Colour cells.
    let mut level_list = Vec::new();
    let mut step = 1.0;
    if let Some(m) = map {
        let nx = m.xs.len();
        let span = m.t_max - m.t_min;
        // Each cell overlaps its right and lower neighbour by a pixel (clipped to the
        // map), so that no hairline seams show between cells at any zoom.
        for j in 0..m.ys.len() - 1 {
            for i in 0..nx - 1 {
                let corners = [
                    m.z[j * nx + i],
                    m.z[j * nx + i + 1],
                    m.z[(j + 1) * nx + i],
                    m.z[(j + 1) * nx + i + 1],
                ];
                let fill = if corners.iter().all(|v| v.is_finite()) {
                    let mean = corners.iter().sum::<f64>() / 4.0;
                    rgb(colour((mean - m.t_min) / span))
                } else {
                    RGBColor(0xbb, 0xbb, 0xbb)
                };
                let (x0, y0) = to_px(m.xs[i], m.ys[j + 1]);
                let (x1, y1) = to_px(m.xs[i + 1], m.ys[j]);
                rect(
                    root,
                    x0,
                    y0,
                    (x1 + 1.0).min(mx1),
                    (y1 + 1.0).min(my1),
                    fill.filled(),
                )?;
            }
        }
        let (lv, st) = levels(m.t_min, m.t_max, 8);
        if !m.flat {
            level_list = lv;
        }
        step = st;
    } else {
        text(
            root,
            "no field values to show",
            0.5 * (mx0 + mx1),
            0.5 * (my0 + my1),
            TextOpts::new(AXIS_PX, Anchor::Centre).colour(GREY),
        )?;
    }

    // Isotherms: halos first, then the lines, so that crossings stay clean.
    let decimals = step_decimals(step);
    let mut isotherms = Vec::new();
    if let Some(m) = map {
        for &level in &level_list {
            let lines = contour(&m.xs, &m.ys, &m.z, level);
            let px_lines: Vec<Vec<(f64, f64)>> = lines
                .iter()
                .map(|l| l.iter().map(|&(x, y)| to_px(x, y)).collect())
                .collect();
            isotherms.push((level, px_lines));
        }
    }
    for (_, lines) in &isotherms {
        for l in lines {
            line(root, l, WHITE.mix(0.6).stroke_width(3))?;
        }
    }
    for (_, lines) in &isotherms {
        for l in lines {
            line(root, l, INK.mix(0.85).stroke_width(1))?;
        }
    }

    // Plate outline; a strip's top is where the picture stops, not an edge.
    let outline = INK.stroke_width(1);
    line(
        root,
        &[(mx0, my0), (mx0, my1), (mx1, my1), (mx1, my0)],
        outline,
    )?;
    if matches!(shape, Shape::Strip { .. }) {
        dashed(root, &[(mx0, my0), (mx1, my0)], 6, 4, GREY.stroke_width(1))?;
    } else {
        line(root, &[(mx0, my0), (mx1, my0)], outline)?;
    }

    let mut placer = Placer::new(Rect {
        x0: mx0 + 2.0,
        y0: my0 + 2.0,
        x1: mx1 - 2.0,
        y1: my1 - 2.0,
    });

    // Unknown edges, thick.
    let edge_px = |e: Edge| -> [(f64, f64); 2] {
        match e {
            Edge::Bottom => [(mx0, my1), (mx1, my1)],
            Edge::Top => [(mx0, my0), (mx1, my0)],
            Edge::Left => [(mx0, my1), (mx0, my0)],
            Edge::Right => [(mx1, my1), (mx1, my0)],
            // never reached: round parts return early to their own picture
            Edge::Inner | Edge::Outer | Edge::Rim => [(mx0, my1), (mx0, my1)],
        }
    };
    let unknown = r.plate.unknown_edges();
    for &e in &unknown {
        let pts = edge_px(e);
        line(root, &pts, WHITE.stroke_width(9))?;
        line(root, &pts, INK.stroke_width(5))?;
        // Keep labels clear of the thick line.
        let [(ax, ay), (bx, by)] = pts;
        placer.block(Rect {
            x0: ax.min(bx) - 6.0,
            y0: ay.min(by) - 6.0,
            x1: ax.max(bx) + 6.0,
            y1: ay.max(by) + 6.0,
        });
    }

    // Sensors: markers first (they block label space), then ids.
    let inside: Vec<(usize, f64, f64)> = r
        .sensors
        .iter()
        .enumerate()
        .filter_map(|(k, s)| {
            let (x, y) = (u.len(s.position.x), u.len(s.position.y));
            ((0.0..=lay.width).contains(&x) && (0.0..=lay.height).contains(&y)).then(|| {
                let (px, py) = to_px(x, y);
                (k, px, py)
            })
        })
        .collect();
    for &(_, x, y) in &inside {
        placer.block(Rect::around(x, y, 7.0));
    }
    // The hottest point sits on its edge.
    let h = &r.hottest;
    let hot = shape.point_on(h.edge, h.position);
    let hot_px = {
        let (x, y) = (u.len(hot.x), u.len(hot.y));
        (x.is_finite() && y.is_finite() && x <= lay.width * 1.0001 && y <= lay.height * 1.0001)
            .then(|| to_px(x.clamp(0.0, lay.width), y.clamp(0.0, lay.height)))
    };
    if let Some((x, y)) = hot_px {
        placer.block(Rect::around(x, y, 9.0));
    }
    for &(k, x, y) in &inside {
        marker(root, sensor_marker(&r.sensors[k]), x, y, 4.0)?;
    }
    for &(k, x, y) in &inside {
        let s = &r.sensors[k];
        let w = sensor_label_width(s, TEXT_PX);
        let (w, hgt) = (w + 4.0, 16.0);
        if let Some(b) = placer.place_best(&around_marker(x, y, 5.0, w, hgt)) {
            label_box(root, &b, 0.75)?;
            let mut o = TextOpts::new(TEXT_PX, Anchor::Centre);
            if s.flag.is_some() || s.doubtful {
                o = o.bold();
            }
            let (cx, cy) = b.centre();
            text(root, &s.sensor, cx, cy, o)?;
        }
    }

    // Isotherm label candidates, on each level's longest line, where there is room; each box
    // carries a gap of ISO_GAP px so that it does not touch a sensor's label.
    let iso_cands: Vec<(String, Vec<Rect>)> = isotherms
        .iter()
        .filter_map(|(level, lines)| {
            let longest = lines
                .iter()
                .max_by(|a, b| length(a, (1.0, 1.0)).total_cmp(&length(b, (1.0, 1.0))))?;
            let total = length(longest, (1.0, 1.0));
            if total < 50.0 {
                return None;
            }
            let label = fixed(*level, decimals);
            let (w, hgt) = (
                text_width(&label, TEXT_PX - 1.0) + 4.0 + 2.0 * ISO_GAP,
                15.0 + 2.0 * ISO_GAP,
            );
            let cands = [0.5, 0.3, 0.7, 0.15, 0.85]
                .iter()
                .map(|&f| {
                    let (x, y) = point_at(longest, f * total);
                    Rect::anchored(x, y, w, hgt, 0.5, 0.5)
                })
                .collect();
            Some((label, cands))
        })
        .collect();

    // Hottest point and its label: where it leaves the isotherm labels their places if it
    // can (the hottest isotherms crowd round the hottest point), else where it fits.
    if let Some((x, y)) = hot_px {
        marker(root, Marker::Hottest, x, y, 6.0)?;
        let label = format!("hottest {}", u.temp_show(h.temperature));
        let (w, hgt) = (bold_text_width(&label, TEXT_PX) + 6.0, 17.0);
        let near = around_marker(x, y, 12.0, w, hgt);
        // farther off, tied to the marker by a thin leader line
        let mut far = Vec::new();
        for dy in [34.0, 58.0, 82.0] {
            for dx in [0.0, 50.0, -50.0, 100.0, -100.0, 150.0, -150.0] {
                far.push(Rect::anchored(x + dx, y - dy, w, hgt, 0.5, 0.5));
                far.push(Rect::anchored(x + dx, y + dy, w, hgt, 0.5, 0.5));
            }
        }
        let mut trial = placer.clone();
        for (_, c) in &iso_cands {
            trial.place(c);
        }
        let clear = near.iter().chain(&far).copied().find(|c| trial.is_free(c));
        let chosen = match clear {
            Some(c) => placer.place(&[c]),
            None => placer.place_best(&near),
        };
        if let Some(b) = chosen {
            if near.iter().all(|n| n != &b) {
                // a leader from the marker to the nearest point of the box
                let (lx, ly) = (x.clamp(b.x0, b.x1), y.clamp(b.y0, b.y1));
                line(root, &[(x, y), (lx, ly)], INK.stroke_width(1))?;
            }
            label_box(root, &b, 0.85)?;
            let (cx, cy) = b.centre();
            text(
                root,
                &label,
                cx,
                cy,
                TextOpts::new(TEXT_PX, Anchor::Centre).bold(),
            )?;
        }
    }

    // Unknown edge labels, inside along the edge.
    // A side edge's label is set level, so it points at its edge with an arrow and prefers
    // the middle of the edge: in a corner it would read as the label of the other edge.
    for &e in &unknown {
        let label = match e {
            Edge::Left => format!("\u{2190} {e} edge: unknown"),
            Edge::Right => format!("{e} edge: unknown \u{2192}"),
            Edge::Bottom | Edge::Top | Edge::Inner | Edge::Outer | Edge::Rim => {
                format!("{e} edge: unknown")
            }
        };
        let (w, hgt) = (bold_text_width(&label, TEXT_PX) + 6.0, 17.0);
        let [(ax, ay), (bx, by)] = edge_px(e);
        let inset = 12.0;
        let fractions: &[f64] = match e {
            Edge::Left | Edge::Right => &[0.5, 0.35, 0.65, 0.2, 0.8, 0.04, 0.96],
            _ => &[0.04, 0.96, 0.5, 0.25, 0.75],
        };
        let cands: Vec<Rect> = fractions
            .iter()
            .map(|&f| {
                let (x, y) = (ax + f * (bx - ax), ay + f * (by - ay));
                match e {
                    Edge::Bottom => Rect::anchored(x, y - inset, w, hgt, f, 1.0),
                    Edge::Top => Rect::anchored(x, y + inset, w, hgt, f, 0.0),
                    Edge::Left => Rect::anchored(x + inset, y, w, hgt, 0.0, 1.0 - f),
                    _ => Rect::anchored(x - inset, y, w, hgt, 1.0, 1.0 - f),
                }
            })
            .collect();
        boxed_bold_label(root, &mut placer, &cands, &label)?;
    }

    // Isotherm labels, drawn inside their gap.
    for (label, cands) in &iso_cands {
        if let Some(b) = placer.place(cands) {
            let inner = Rect {
                x0: b.x0 + ISO_GAP,
                y0: b.y0 + ISO_GAP,
                x1: b.x1 - ISO_GAP,
                y1: b.y1 - ISO_GAP,
            };
            label_box(root, &inner, 0.8)?;
            let (cx, cy) = inner.centre();
            text(
                root,
                label,
                cx,
                cy,
                TextOpts::new(TEXT_PX - 1.0, Anchor::Centre),
            )?;
        }
    }

    if let Some(m) = map {
        colour_bar(
            root,
            u,
            m,
            &level_list,
            decimals,
            step,
            MAP_TOP + lay.map_h + X_LABEL_H,
        )?;
    }
    legend(
        root,
        legend_items,
        16.0,
        lay.legend_top,
        f64::from(WIDTH) - 32.0,
    )?;
    for (k, c) in captions.iter().enumerate() {
        text(
            root,
            c,
            16.0,
            lay.captions_top + (k as f64 + 0.5) * CAPTION_LINE_H,
            TextOpts::new(TEXT_PX, Anchor::Left).colour(GREY),
        )?;
    }
    Ok(())
}

/// The point at arc length `d` along a polyline (pixels).
fn point_at(line: &[(f64, f64)], d: f64) -> (f64, f64) {
    let mut left = d;
    for w in line.windows(2) {
        let seg = (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1);
        if seg >= left && seg > 0.0 {
            let t = left / seg;
            return (
                w[0].0 + t * (w[1].0 - w[0].0),
                w[0].1 + t * (w[1].1 - w[0].1),
            );
        }
        left -= seg;
    }
    line.last().copied().unwrap_or((0.0, 0.0))
}

#[allow(clippy::too_many_arguments)]
fn colour_bar(
    root: &Area<'_>,
    u: &CaseUnits,
    m: &Map,
    level_list: &[f64],
    decimals: usize,
    step: f64,
    top: f64,
) -> DrawResult {
    let x0 = MAP_LEFT;
    let title_y = top + 16.0;
    let bar_top = top + 28.0;
    let mut title = format!("temperature [{}]", u.temp_symbol());
    if !level_list.is_empty() {
        title.push_str(&format!(
            "  ·  isotherms every {} {}",
            fixed(step, decimals),
            u.temp_symbol()
        ));
    }
    text(
        root,
        &title,
        x0,
        title_y,
        TextOpts::new(AXIS_PX, Anchor::Left),
    )?;
    let n = 120;
    for k in 0..n {
        let a = x0 + BAR_W * k as f64 / n as f64;
        let b = x0 + BAR_W * (k + 1) as f64 / n as f64;
        let t = (k as f64 + 0.5) / n as f64;
        let b = (b + 1.0).min(x0 + BAR_W);
        rect(
            root,
            a,
            bar_top,
            b,
            bar_top + BAR_H,
            rgb(colour(t)).filled(),
        )?;
    }
    rect(
        root,
        x0,
        bar_top,
        x0 + BAR_W,
        bar_top + BAR_H,
        INK.stroke_width(1),
    )?;
    let span = m.t_max - m.t_min;
    let mut ticks: Vec<(f64, String)> = level_list
        .iter()
        .map(|&v| (v, fixed(v, decimals)))
        .collect();
    if ticks.is_empty() {
        ticks = vec![(m.t_min, fixed(m.t_min, 2)), (m.t_max, fixed(m.t_max, 2))];
    }
    let mut last_right = f64::NEG_INFINITY;
    for (v, label) in ticks {
        let x = x0 + BAR_W * (v - m.t_min) / span;
        line(
            root,
            &[(x, bar_top + BAR_H), (x, bar_top + BAR_H + 5.0)],
            INK.stroke_width(1),
        )?;
        line(
            root,
            &[(x, bar_top), (x, bar_top + BAR_H)],
            WHITE.mix(0.5).stroke_width(1),
        )?;
        let w = text_width(&label, TEXT_PX);
        if x - w / 2.0 > last_right + 4.0 {
            text(
                root,
                &label,
                x,
                bar_top + BAR_H + 15.0,
                TextOpts::new(TEXT_PX, Anchor::Centre),
            )?;
            last_right = x + w / 2.0;
        }
    }
    // The ends: the coldest and hottest values on the map.
    let ends = format!(
        "map range {} to {}",
        fixed(m.t_min, 2),
        u.case_temp_show(m.t_max)
    );
    text(
        root,
        &ends,
        x0 + BAR_W + 14.0,
        bar_top + BAR_H / 2.0,
        TextOpts::new(TEXT_PX, Anchor::Left).colour(GREY),
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn map_keeps_aspect_or_states_the_stretch() {
        let (w, h, s) = map_size(100.0, 50.0);
        assert!((h / w - 0.5).abs() < 0.01);
        assert!((s - 1.0).abs() < 1e-12);
        let (w, h, s) = map_size(180.0, 28.0);
        assert!((h / w - MIN_RATIO).abs() < 0.01);
        assert!((s - MIN_RATIO / (28.0 / 180.0)).abs() < 1e-9);
        let (w, h, _) = map_size(20.0, 100.0);
        assert!(h <= MAP_H_MAX && w < h);
    }

    #[test]
    fn bilinear_is_exact_for_bilinear_fields() {
        let xs = [0.0, 1.0, 3.0];
        let ys = [0.0, 2.0];
        let f = |x: f64, y: f64| 1.0 + 2.0 * x + 3.0 * y + 0.5 * x * y;
        let z: Vec<f64> = ys
            .iter()
            .flat_map(|&y| xs.iter().map(move |&x| f(x, y)))
            .collect();
        for (x, y) in [(0.5, 1.0), (2.0, 0.3), (3.0, 2.0), (0.0, 0.0)] {
            assert!((bilinear(&xs, &ys, &z, x, y) - f(x, y)).abs() < 1e-12);
        }
    }
}

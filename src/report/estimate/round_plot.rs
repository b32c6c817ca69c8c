//! `field.svg` of a round part (a disk or a pipe wall): the part drawn as it is, centred,
//! with its field on the polar grid (one annular sector per grid cell, coloured by its mean),
//! isotherms traced by marching squares in (angle, radius) and mapped onto the part, the
//! unknown edges drawn thick, the sensors with their ids, the hottest point, the angle
//! convention (0° on +x, counter-clockwise), a colour bar and the captions.

use super::field_plot::{edge_conditions, legend_items};
use crate::error::{Error, Result};
use crate::estimate::EstimateResult;
use crate::geometry::Point;
use crate::report::contour::{contour, levels};
use crate::report::draw::{
    AXIS_PX, Anchor, Area, DrawResult, GREY, INK, LEGEND_ROW_H, Marker, PLOT_SAFETY_NOTE, TEXT_PX,
    TITLE_PX, TextOpts, label_box, legend, legend_rows, line, marker, polygon, rect, rgb,
    sensor_marker, text,
};
use crate::report::format::{CaseUnits, tick};
use crate::report::labels::{Rect, text_width};
use crate::report::palette::colour;
use plotters::prelude::*;
use std::f64::consts::TAU;

/// Picture width, px.
const WIDTH: u32 = 900;
/// Diameter of the drawn part, px.
const MAP_D: f64 = 520.0;
/// Top of the map, px.
const MAP_TOP: f64 = 104.0;
/// Colour bar size and block height, px.
const BAR_W: f64 = 420.0;
const BAR_H: f64 = 16.0;
const BAR_BLOCK_H: f64 = 78.0;
/// Height of a caption line, px.
const CAPTION_LINE_H: f64 = 19.0;
/// Angular subdivisions drawn per display cell (arcs look round).
const ARC_STEPS: usize = 2;
/// At most this many display cells per grid cell, round the circle and across the wall (the
/// field is interpolated bilinearly in angle and radius, so a coarse grid is not shown as
/// blocks).
const UPSAMPLE: (usize, usize) = (4, 3);
/// Display cells are made about this size, px, or larger: finer ones cannot be seen and only
/// make the picture heavier (a thin wall would otherwise be drawn in cells under a pixel).
const CELL_PX: f64 = 3.0;

/// Split `text` into lines no wider than `max_px` at `TEXT_PX`.
fn wrap(text: &str, max_px: f64) -> Vec<String> {
    let mut lines = Vec::new();
    let mut current = String::new();
    for word in text.split_whitespace() {
        let candidate = if current.is_empty() {
            word.to_string()
        } else {
            format!("{current} {word}")
        };
        if !current.is_empty() && text_width(&candidate, TEXT_PX) > max_px {
            lines.push(std::mem::replace(&mut current, word.to_string()));
        } else {
            current = candidate;
        }
    }
    if !current.is_empty() {
        lines.push(current);
    }
    lines
}

/// Draw `field.svg` for a disk or an annulus.
pub(crate) fn field_svg(r: &EstimateResult) -> Result<String> {
    let u = CaseUnits::new(r.units);
    let shape = r.plate.shape();
    let outer = 0.5 * shape.width();
    let mut captions = vec![edge_conditions(r, &u)];
    captions.push(format!(
        "Angles counter-clockwise from +x (0° at the right); origin at the centre; outer \
         radius {}.",
        u.len_show(outer)
    ));
    if let Some(c) = &r.conversion {
        captions.push(c.describe(&r.units));
    }
    captions.push(PLOT_SAFETY_NOTE.to_string());
    let captions: Vec<String> = captions
        .iter()
        .flat_map(|c| wrap(c, f64::from(WIDTH) - 32.0))
        .collect();
    let items = legend_items(r);
    let rows = legend_rows(&items, f64::from(WIDTH) - 32.0);
    let legend_top = MAP_TOP + MAP_D + 40.0 + BAR_BLOCK_H;
    let captions_top = legend_top + rows as f64 * LEGEND_ROW_H + 10.0;
    let height = captions_top + captions.len() as f64 * CAPTION_LINE_H + 14.0;
    let mut buf = String::new();
    {
        let root =
            SVGBackend::with_string(&mut buf, (WIDTH, height.ceil() as u32)).into_drawing_area();
        draw(&root, r, &u, legend_top, captions_top, &items, &captions)
            .and_then(|()| root.present().map_err(Into::into))
            .map_err(|e| Error::Internal(format!("cannot draw field.svg: {e}")))?;
    }
    Ok(buf)
}

/// `cells + 1` evenly spaced display positions from the first to the last of `grid` (at
/// least two points, increasing), each with the grid cell it falls in and its fraction of the
/// way across it: `(position, cell, fraction)`.
fn display_axis(grid: &[f64], cells: usize) -> Vec<(f64, usize, f64)> {
    let (first, last) = (grid[0], grid[grid.len() - 1]);
    (0..=cells)
        .map(|k| {
            let x = first + (last - first) * k as f64 / cells as f64;
            let i = grid
                .partition_point(|&g| g <= x)
                .saturating_sub(1)
                .min(grid.len() - 2);
            let width = grid[i + 1] - grid[i];
            let t = if width > 0.0 {
                ((x - grid[i]) / width).clamp(0.0, 1.0)
            } else {
                0.0
            };
            (x, i, t)
        })
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn draw(
    root: &Area<'_>,
    r: &EstimateResult,
    u: &CaseUnits,
    legend_top: f64,
    captions_top: f64,
    items: &[(crate::report::draw::Glyph, String)],
    captions: &[String],
) -> DrawResult {
    root.fill(&WHITE)?;
    let shape = r.plate.shape();
    let outer = 0.5 * shape.width();
    let cx = f64::from(WIDTH) / 2.0;
    let cy = MAP_TOP + MAP_D / 2.0;
    let scale = MAP_D / (2.0 * outer);
    let to_px = |x: f64, y: f64| (cx + x * scale, cy - y * scale);
    let title = "Estimated temperature field";
    text(
        root,
        title,
        cx,
        30.0,
        TextOpts::new(TITLE_PX, Anchor::Centre).bold(),
    )?;
    text(
        root,
        &format!(
            "colour: estimate ({}); thin lines: isotherms; thick: unknown edge",
            u.temp_symbol()
        ),
        cx,
        56.0,
        TextOpts::new(TEXT_PX, Anchor::Centre).colour(GREY),
    )?;

    // The field, in case units, wrapped once round the circle for drawing.
    let f = &r.field;
    let (na, nr) = (f.xs.len(), f.ys.len());
    let finite: Vec<f64> = f
        .estimate
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .map(|v| u.temp(v))
        .collect();
    let t_min = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let t_max = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let span = (t_max - t_min).max(1e-9);
    let norm = |t: f64| (t - t_min) / span;
    if na >= 2 && nr >= 2 && f.estimate.len() == na * nr && t_min.is_finite() {
        let mut grid_angles: Vec<f64> = f.xs.clone();
        grid_angles.push(f.xs[0] + TAU);
        let grid_z: Vec<f64> = (0..nr)
            .flat_map(|j| (0..=na).map(move |i| (i % na, j)))
            .map(|(i, j)| u.temp(f.estimate[j * na + i]))
            .collect();
        // the display grid: cells of about CELL_PX (at least the grid's own round the
        // circle, at most UPSAMPLE per grid cell), the field bilinear in (angle, radius)
        let cells = |px: f64, least: usize, most: usize| {
            ((px / CELL_PX).round() as usize).clamp(least.max(1), most.max(1))
        };
        let angles = display_axis(
            &grid_angles,
            cells(TAU * outer * scale, na, na * UPSAMPLE.0),
        );
        let radii = display_axis(
            &f.ys,
            cells((f.ys[nr - 1] - f.ys[0]) * scale, 1, (nr - 1) * UPSAMPLE.1),
        );
        let (fa, fr) = (angles.len(), radii.len());
        let mut z = Vec::with_capacity(fa * fr);
        for &(_, j, tj) in &radii {
            for &(_, i, ti) in &angles {
                let g = |i: usize, j: usize| grid_z[j * (na + 1) + i];
                let lo = g(i, j) + (g(i + 1, j) - g(i, j)) * ti;
                let hi = g(i, j + 1) + (g(i + 1, j + 1) - g(i, j + 1)) * ti;
                z.push(lo + (hi - lo) * tj);
            }
        }
        let (angles, radii): (Vec<f64>, Vec<f64>) = (
            angles.iter().map(|a| a.0).collect(),
            radii.iter().map(|r| r.0).collect(),
        );
        let at = |i: usize, j: usize| z[j * fa + i];
        for j in 0..fr - 1 {
            for i in 0..fa - 1 {
                let mean = 0.25 * (at(i, j) + at(i + 1, j) + at(i, j + 1) + at(i + 1, j + 1));
                let (r0, r1) = (radii[j], radii[j + 1]);
                let (a0, a1) = (angles[i], angles[i + 1]);
                let mut pts = Vec::with_capacity(2 * ARC_STEPS + 2);
                for k in 0..=ARC_STEPS {
                    let a = a0 + (a1 - a0) * k as f64 / ARC_STEPS as f64;
                    pts.push(to_px(r1 * a.cos(), r1 * a.sin()));
                }
                for k in (0..=ARC_STEPS).rev() {
                    let a = a0 + (a1 - a0) * k as f64 / ARC_STEPS as f64;
                    pts.push(to_px(r0 * a.cos(), r0 * a.sin()));
                }
                let c = rgb(colour(norm(mean)));
                polygon(root, &pts, c.filled())?;
                polygon(root, &pts, c.stroke_width(1))?;
            }
        }
        // isotherms: marching squares in (angle, radius), mapped onto the part
        let (lv, _) = levels(t_min, t_max, 8);
        for level in lv {
            for poly in contour(&angles, &radii, &z, level) {
                let pts: Vec<(f64, f64)> = poly
                    .iter()
                    .map(|&(a, rr)| to_px(rr * a.cos(), rr * a.sin()))
                    .collect();
                line(root, &pts, INK.mix(0.55).stroke_width(1))?;
            }
        }
    }

    // Outline: each circle of the part; unknown ones thick.
    for e in shape.edges() {
        let Some(radius) = shape.radius_of(e) else {
            continue;
        };
        let pts: Vec<(f64, f64)> = (0..=180)
            .map(|k| {
                let a = TAU * k as f64 / 180.0;
                to_px(radius * a.cos(), radius * a.sin())
            })
            .collect();
        let unknown = r.plate.unknown_edges().contains(&e);
        if unknown {
            line(root, &pts, WHITE.stroke_width(9))?;
            line(root, &pts, INK.stroke_width(5))?;
        } else {
            line(root, &pts, INK.stroke_width(1))?;
        }
    }
    // Angle ticks round the outside: 0°, 90°, 180°, 270°.
    for k in 0..4 {
        let a = TAU * k as f64 / 4.0;
        let (x, y) = to_px(outer * 1.07 * a.cos(), outer * 1.07 * a.sin());
        text(
            root,
            &format!("{}°", 90 * k),
            x,
            y,
            TextOpts::new(AXIS_PX, Anchor::Centre).colour(GREY),
        )?;
    }

    // Sensors with their ids.
    for s in &r.sensors {
        let (x, y) = to_px(s.position.x, s.position.y);
        marker(root, sensor_marker(s), x, y, 4.5)?;
        let w = text_width(&s.sensor, TEXT_PX) + 6.0;
        let b = Rect::anchored(x + 6.0, y - 8.0, w, TEXT_PX + 4.0, 0.0, 0.5);
        label_box(root, &b, 0.8)?;
        text(
            root,
            &s.sensor,
            b.x0 + 3.0,
            y - 8.0,
            TextOpts::new(TEXT_PX, Anchor::Left),
        )?;
    }
    // The hottest point.
    let h = &r.hottest;
    let p: Point = shape.point_on(h.edge, h.position);
    let (hx, hy) = to_px(p.x, p.y);
    marker(root, Marker::Hottest, hx, hy, 6.0)?;

    // Colour bar.
    let bar_x0 = cx - BAR_W / 2.0;
    let bar_y0 = MAP_TOP + MAP_D + 40.0;
    text(
        root,
        &format!("Temperature ({})", u.temp_symbol()),
        cx,
        bar_y0 + 8.0,
        TextOpts::new(TEXT_PX, Anchor::Centre),
    )?;
    let steps = 96;
    for k in 0..steps {
        let t0 = k as f64 / steps as f64;
        let x0 = bar_x0 + BAR_W * t0;
        let x1 = bar_x0 + BAR_W * (k + 1) as f64 / steps as f64;
        rect(
            root,
            x0,
            bar_y0 + 20.0,
            x1 + 0.5,
            bar_y0 + 20.0 + BAR_H,
            rgb(colour(t0 + 0.5 / steps as f64)).filled(),
        )?;
    }
    if t_min.is_finite() && t_max.is_finite() {
        let (ticks, _) = levels(t_min, t_max, 6);
        for t in ticks {
            let x = bar_x0 + BAR_W * norm(t);
            line(
                root,
                &[(x, bar_y0 + 20.0 + BAR_H), (x, bar_y0 + 26.0 + BAR_H)],
                INK.stroke_width(1),
            )?;
            text(
                root,
                &tick(t),
                x,
                bar_y0 + 40.0 + BAR_H,
                TextOpts::new(AXIS_PX, Anchor::Centre),
            )?;
        }
    }
    legend(root, items, 16.0, legend_top, f64::from(WIDTH) - 32.0)?;
    for (k, c) in captions.iter().enumerate() {
        text(
            root,
            c,
            16.0,
            captions_top + CAPTION_LINE_H * (k as f64 + 0.5),
            TextOpts::new(TEXT_PX, Anchor::Left).colour(GREY),
        )?;
    }
    Ok(())
}

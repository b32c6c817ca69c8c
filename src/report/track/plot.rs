//! `track.svg`: the hottest temperature of the hidden edge through the log with its band and
//! the alarm limit, and beneath it where on the edge the hottest point was. Drawn from the
//! bounded time bins of [`crate::track::series`], in the report's conventions (fonts, colours,
//! legend and markers of [`crate::report`]).
//!
//! Each bin is drawn as the mean hottest temperature of its rows, the band from the lowest
//! lower to the highest upper interval end in it, and (when a bin holds several rows) the
//! range of the hottest temperature as a thin darker band; alarm stretches are shaded.
//! Bins with no fitted row leave gaps. Time runs from the first row, in seconds, minutes,
//! hours or days as the span suits.

use crate::case::Case;
use crate::error::{Error, Result};
use crate::report::draw::{
    AXIS_PX, Anchor, Area, BAND, DrawResult, ESTIMATE, GREY, GRID, Glyph, HOTTEST, INK, LIMIT,
    PLOT_SAFETY_NOTE, TEXT_PX, TITLE_PX, TextOpts, dashed, legend, line, polygon, rect, text,
};
use crate::report::format::{CaseUnits, edge_coordinate, fixed};
use crate::track::TrackSummary;
use crate::track::series::Bin;
use plotters::prelude::*;

const WIDTH: u32 = 960;
const HEIGHT: u32 = 760;
const LEFT: f64 = 92.0;
const RIGHT: f64 = 28.0;
const TOP_PANEL: (f64, f64) = (120.0, 430.0);
const POS_PANEL: (f64, f64) = (500.0, 680.0);
/// Shade of alarm stretches.
const ALARM_SHADE: RGBColor = RGBColor(0xf6, 0xd5, 0xd0);
/// The range of the hottest temperature within a bin (drawn over the band).
const RANGE: RGBColor = RGBColor(0xa3, 0xb7, 0xd2);
/// Rows with a sensor left out (dark, so it stays apart from the shading in greyscale).
const LEFT_OUT: RGBColor = RGBColor(0x3a, 0x2a, 0x5c);

/// Render `track.svg`.
///
/// # Errors
/// [`Error::Internal`] if drawing fails.
pub fn track_svg(case: &Case, summary: &TrackSummary, bins: &[Bin]) -> Result<String> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (WIDTH, height(case))).into_drawing_area();
        draw(&root, case, summary, bins)
            .and_then(|()| root.present().map_err(Into::into))
            .map_err(|e| Error::Internal(format!("cannot draw track.svg: {e}")))?;
    }
    Ok(buf)
}

/// The picture's height: one more line when the readings were converted from voltages.
fn height(case: &Case) -> u32 {
    HEIGHT + if case.conversion().is_some() { 20 } else { 0 }
}

/// A "nice" tick step (1, 2 or 5 × 10ⁿ) giving about `target` ticks over `range`.
fn nice_step(range: f64, target: f64) -> f64 {
    let raw = (range / target).max(1e-12);
    let mag = 10f64.powf(raw.log10().floor());
    let f = raw / mag;
    mag * if f < 1.5 {
        1.0
    } else if f < 3.5 {
        2.0
    } else if f < 7.5 {
        5.0
    } else {
        10.0
    }
}

fn ticks(lo: f64, hi: f64, target: f64) -> (Vec<f64>, f64) {
    let step = nice_step(hi - lo, target);
    let mut v = Vec::new();
    let mut t = (lo / step).ceil() * step;
    while t <= hi + 1e-9 * step {
        v.push(t);
        t += step;
    }
    (v, step)
}

/// A clock-time tick step, seconds, giving at most about eight ticks over `span` seconds.
fn clock_step(span: f64) -> f64 {
    const STEPS: [f64; 14] = [
        60.0, 120.0, 300.0, 600.0, 900.0, 1800.0, 3600.0, 7200.0, 10_800.0, 21_600.0, 43_200.0,
        86_400.0, 172_800.0, 604_800.0,
    ];
    STEPS
        .iter()
        .copied()
        .find(|st| span / st <= 8.0)
        .unwrap_or((span / 8.0 / 86_400.0).ceil() * 86_400.0)
}

fn decimals(step: f64) -> usize {
    if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    }
}

fn draw(root: &Area<'_>, case: &Case, s: &TrackSummary, bins: &[Bin]) -> DrawResult {
    root.fill(&WHITE)?;
    let u = CaseUnits::new(case.units);
    let conf = crate::report::format::fixed(100.0 * s.confidence, 0);
    text(
        root,
        "Hidden edge through the log: hottest point and its interval",
        16.0,
        14.0,
        TextOpts::new(TITLE_PX, Anchor::TopLeft).bold(),
    )?;
    let t_first = bins.first().map_or(0.0, |b| b.t0);
    let t_last = bins.last().map_or(1.0, |b| b.t1);
    let span = (t_last - t_first).max(1e-9);
    let (unit, per) = if span <= 600.0 {
        ("s", 1.0)
    } else if span <= 3.0 * 3600.0 {
        ("min", 60.0)
    } else if span <= 5.0 * 86_400.0 {
        ("h", 3600.0)
    } else {
        ("days", 86_400.0)
    };
    let band_word = if s.bootstrap { "bootstrap" } else { "linear" };
    text(
        root,
        &format!(
            "{} rows from {} to {}  ·  {conf} % {band_word} interval  ·  {}",
            s.counts.rows,
            s.first_time.as_deref().unwrap_or("-"),
            s.last_time.as_deref().unwrap_or("-"),
            match bins.iter().map(|b| b.fitted + b.skipped).max().unwrap_or(1) {
                1 => "one row per point".to_string(),
                n => format!("up to {n} rows per point"),
            }
        ),
        16.0,
        44.0,
        TextOpts::new(TEXT_PX + 1.0, Anchor::TopLeft),
    )?;
    let mut items: Vec<(Glyph, String)> = vec![
        (
            Glyph::Swatch(BAND),
            format!("{conf} % interval of the hottest temperature"),
        ),
        (Glyph::Line(ESTIMATE, 2), "hottest temperature".to_string()),
    ];
    if bins.iter().any(|b| b.fitted > 1) {
        items[1].1 = "hottest temperature (mean of a point's rows)".to_string();
        items.push((Glyph::Swatch(RANGE), "its range within a point".to_string()));
    }
    if let Some(l) = s.limit {
        items.push((Glyph::Dashed(LIMIT, 2), format!("limit {}", u.temp_show(l))));
        items.push((
            Glyph::Swatch(ALARM_SHADE),
            "alarm (dark strip on top; paler shade: fewer rows)".to_string(),
        ));
    }
    if bins.iter().any(|b| b.skipped > 0) {
        items.push((
            Glyph::Swatch(GREY),
            "rows skipped (grey, at the foot)".to_string(),
        ));
    }
    if bins.iter().any(|b| b.left_out_rows > 0) {
        items.push((
            Glyph::Swatch(LEFT_OUT),
            "sensor left out or silent (strip at the foot)".to_string(),
        ));
    }
    legend(root, &items, 16.0, 68.0, f64::from(WIDTH) - 32.0)?;

    let x0 = LEFT;
    let x1 = f64::from(WIDTH) - RIGHT;
    let xmap = |t: f64| x0 + (t - t_first) / span * (x1 - x0);
    let fitted: Vec<&Bin> = bins.iter().filter(|b| b.fitted > 0).collect();

    // Temperature panel.
    let (ty0, ty1) = TOP_PANEL;
    let mut lo = fitted
        .iter()
        .map(|b| u.temp(b.lower_min))
        .fold(f64::INFINITY, f64::min);
    let mut hi = fitted
        .iter()
        .map(|b| u.temp(b.upper_max))
        .fold(f64::NEG_INFINITY, f64::max);
    if let Some(l) = s.limit {
        lo = lo.min(u.temp(l));
        hi = hi.max(u.temp(l));
    }
    if !lo.is_finite() {
        lo = 0.0;
        hi = 1.0;
    }
    let pad = 0.06 * (hi - lo).max(0.5);
    let (lo, hi) = (lo - pad, hi + pad);
    let ymap = |v: f64| ty1 - (v - lo) / (hi - lo) * (ty1 - ty0);
    // alarm shading, one box per stretch of bins in alarm
    let stretches = alarm_stretches(bins);
    for &(a, c, share) in &stretches {
        let (a, c) = (xmap(a), xmap(c).max(xmap(a) + 1.0));
        rect(root, a, ty0, c, ty1, ALARM_SHADE.mix(share).filled())?;
    }
    // and a dark strip along the panel's top, so that alarm reads apart from the band in
    // greyscale too (the two shades are close in lightness)
    for &(a, c, _) in &stretches {
        let (a, c) = (xmap(a), xmap(c).max(xmap(a) + 1.0));
        rect(root, a, ty0, c, ty0 + 7.0, LIMIT.filled())?;
    }
    // rows skipped (a dropout: no usable row in them, or some of a point's rows): a grey
    // strip just above the foot, so that a gap in the line is not read as a quiet spell
    for b in bins.iter().filter(|b| b.skipped > 0) {
        let (a, c) = (xmap(b.t0), xmap(b.t1).max(xmap(b.t0) + 1.5));
        rect(root, a, ty1 - 15.0, c, ty1 - 9.0, GREY.filled())?;
    }
    // rows with a sensor left out: a dark strip along the foot of the panel
    for b in bins.iter().filter(|b| b.left_out_rows > 0) {
        let (a, c) = (xmap(b.t0), xmap(b.t1).max(xmap(b.t0) + 1.5));
        rect(root, a, ty1 - 7.0, c, ty1, LEFT_OUT.filled())?;
    }
    let (tt, tstep) = ticks(lo, hi, 6.0);
    for &v in &tt {
        let y = ymap(v);
        line(root, &[(x0, y), (x1, y)], GRID.stroke_width(1))?;
        text(
            root,
            &fixed(v, decimals(tstep)),
            x0 - 8.0,
            y,
            TextOpts::new(TEXT_PX, Anchor::Right),
        )?;
    }
    // band and line, in runs of fitted bins
    for run in runs(bins) {
        let up: Vec<(f64, f64)> = run
            .iter()
            .map(|b| (xmap(0.5 * (b.t0 + b.t1)), ymap(u.temp(b.upper_max))))
            .collect();
        let mut poly = up.clone();
        poly.extend(
            run.iter()
                .rev()
                .map(|b| (xmap(0.5 * (b.t0 + b.t1)), ymap(u.temp(b.lower_min)))),
        );
        if run.len() == 1 {
            let b = run[0];
            let xm = xmap(0.5 * (b.t0 + b.t1));
            rect(
                root,
                xm - 1.5,
                ymap(u.temp(b.upper_max)),
                xm + 1.5,
                ymap(u.temp(b.lower_min)),
                BAND.filled(),
            )?;
        } else {
            polygon(root, &poly, BAND.filled())?;
        }
        if run.iter().any(|b| b.fitted > 1 && b.temp_max > b.temp_min) {
            let mut rng: Vec<(f64, f64)> = run
                .iter()
                .map(|b| (xmap(0.5 * (b.t0 + b.t1)), ymap(u.temp(b.temp_max))))
                .collect();
            rng.extend(
                run.iter()
                    .rev()
                    .map(|b| (xmap(0.5 * (b.t0 + b.t1)), ymap(u.temp(b.temp_min)))),
            );
            polygon(root, &rng, RANGE.filled())?;
        }
        let mean: Vec<(f64, f64)> = run
            .iter()
            .map(|b| (xmap(0.5 * (b.t0 + b.t1)), ymap(u.temp(b.temp_mean()))))
            .collect();
        line(root, &mean, ESTIMATE.stroke_width(2))?;
    }
    if let Some(l) = s.limit {
        let y = ymap(u.temp(l));
        dashed(root, &[(x0, y), (x1, y)], 8, 5, LIMIT.stroke_width(2))?;
    }
    rect(root, x0, ty0, x1, ty1, INK.stroke_width(1))?;
    text(
        root,
        &format!("hottest temperature ({})", u.temp_symbol()),
        22.0,
        0.5 * (ty0 + ty1),
        TextOpts {
            rotate: true,
            ..TextOpts::new(AXIS_PX, Anchor::Centre)
        },
    )?;

    // Position panel.
    let (py0, py1) = POS_PANEL;
    let shape = case.plate.shape();
    let edge = s.hottest.as_ref().and_then(|h| h.1.edge);
    let len = edge
        .and_then(|e| shape.edge_length(e))
        .unwrap_or(shape.width());
    // along a circle the position axis is the angle in degrees
    let to_pos = |m: f64| match edge {
        Some(e) => u.pos(shape, e, m),
        None => u.len(m),
    };
    let plen = to_pos(len);
    let pmap = |m: f64| py1 - to_pos(m) / plen * (py1 - py0);
    for &(a, c, share) in &stretches {
        let (a, c) = (xmap(a), xmap(c).max(xmap(a) + 1.0));
        rect(root, a, py0, c, py1, ALARM_SHADE.mix(share).filled())?;
    }
    let (pt, pstep) = ticks(0.0, plen, 4.0);
    for &v in &pt {
        let y = py1 - v / plen * (py1 - py0);
        line(root, &[(x0, y), (x1, y)], GRID.stroke_width(1))?;
        text(
            root,
            &fixed(v, decimals(pstep)),
            x0 - 8.0,
            y,
            TextOpts::new(TEXT_PX, Anchor::Right),
        )?;
    }
    for b in &fitted {
        let x = xmap(0.5 * (b.t0 + b.t1));
        if b.pos_max > b.pos_min {
            line(
                root,
                &[(x, pmap(b.pos_min)), (x, pmap(b.pos_max))],
                HOTTEST.mix(0.45).stroke_width(2),
            )?;
        }
        root.draw(&Circle::new(
            (x.round() as i32, pmap(b.pos_mean()).round() as i32),
            2,
            HOTTEST.filled(),
        ))?;
    }
    rect(root, x0, py0, x1, py1, INK.stroke_width(1))?;
    let coord = edge.map_or("x", edge_coordinate);
    text(
        root,
        &format!(
            "{coord} ({})",
            edge.map_or(u.len_symbol(), |e| u.pos_symbol(shape, e))
        ),
        22.0,
        0.5 * (py0 + py1),
        TextOpts {
            rotate: true,
            ..TextOpts::new(AXIS_PX, Anchor::Centre)
        },
    )?;
    text(
        root,
        &format!(
            "Where the hottest point is along the {} edge (dot: mean of the rows in a point; bar: their range)",
            edge.map_or("hidden", |e| e.name())
        ),
        x0,
        py0 - 12.0,
        TextOpts::new(TEXT_PX + 1.0, Anchor::Left).colour(GREY),
    )?;
    // time axis (both panels): clock time when the log's times are dates and times (as the
    // header and the text output give them), else time since the first row
    let clock = s
        .first_time
        .as_deref()
        .is_some_and(|t| t.contains('-') && t.contains(':'));
    let (xt, title): (Vec<(f64, String)>, String) = if clock {
        let step = clock_step(span);
        let mut v = Vec::new();
        let mut t = (t_first / step).ceil() * step;
        while t <= t_last + 1e-6 {
            let iso = crate::track::synthetic::iso_time(t);
            // HH:MM, with the day when it changes within the log
            let label = if span > 86_400.0 && t.rem_euclid(86_400.0) < 1.0 {
                format!("{} {}", &iso[5..10], &iso[11..16])
            } else {
                iso[11..16].to_string()
            };
            v.push((t - t_first, label));
            t += step;
        }
        let zone = if s.first_time.as_deref().is_some_and(|t| t.ends_with('Z')) {
            "UTC"
        } else {
            "as in the log"
        };
        (
            v,
            format!(
                "clock time ({zone}, HH:MM), first row {}",
                s.first_time.as_deref().unwrap_or("-")
            ),
        )
    } else {
        let (xt, xstep) = ticks(0.0, span / per, 8.0);
        (
            xt.iter()
                .map(|&v| (v * per, fixed(v, decimals(xstep))))
                .collect(),
            format!(
                "time since the first row ({unit}), first row {}",
                s.first_time.as_deref().unwrap_or("-")
            ),
        )
    };
    for (dt, label) in &xt {
        let x = x0 + dt / span * (x1 - x0);
        for (_, c) in [TOP_PANEL, POS_PANEL] {
            line(root, &[(x, c), (x, c + 5.0)], INK.stroke_width(1))?;
        }
        for y in [ty1 + 16.0, py1 + 16.0] {
            text(root, label, x, y, TextOpts::new(TEXT_PX, Anchor::Centre))?;
        }
    }
    text(
        root,
        &title,
        0.5 * (x0 + x1),
        py1 + 40.0,
        TextOpts::new(AXIS_PX, Anchor::Centre),
    )?;
    // readings converted from voltages say so on the picture too
    if let Some(c) = case.conversion() {
        text(
            root,
            &c.describe(&case.units),
            16.0,
            f64::from(height(case)) - 46.0,
            TextOpts::new(TEXT_PX, Anchor::TopLeft),
        )?;
    }
    text(
        root,
        PLOT_SAFETY_NOTE,
        16.0,
        f64::from(height(case)) - 26.0,
        TextOpts::new(TEXT_PX, Anchor::TopLeft),
    )?;
    Ok(())
}

/// Time stretches (first, last second, share of rows in alarm) of consecutive bins with
/// the same share of rows in alarm (in tenths, so that neighbours merge).
#[allow(clippy::float_cmp)] // shares rounded to tenths: equal means the same tenth
fn alarm_stretches(bins: &[Bin]) -> Vec<(f64, f64, f64)> {
    let mut out: Vec<(f64, f64, f64)> = Vec::new();
    let mut prev = 0.0;
    for b in bins {
        let rows = (b.fitted + b.skipped).max(1) as f64;
        let share = if b.alarm_rows > 0 {
            ((b.alarm_rows as f64 / rows) * 10.0).ceil() / 10.0
        } else {
            0.0
        };
        if share > 0.0 {
            match out.last_mut() {
                Some(last) if prev == share => last.1 = b.t1,
                _ => out.push((b.t0, b.t1, share)),
            }
        }
        prev = share;
    }
    out
}

/// Runs of consecutive bins with fitted rows.
fn runs(bins: &[Bin]) -> Vec<Vec<&Bin>> {
    let mut out: Vec<Vec<&Bin>> = Vec::new();
    let mut cur: Vec<&Bin> = Vec::new();
    for b in bins {
        if b.fitted > 0 {
            cur.push(b);
        } else if !cur.is_empty() {
            out.push(std::mem::take(&mut cur));
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

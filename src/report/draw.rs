//! Small drawing helpers over the `plotters` SVG backend, in pixel coordinates of the whole
//! picture: text with an anchor, lines, dashed lines, boxes and markers, plus the shared
//! colours and font sizes of the two plots.
//!
//! `plotters` writes a `<text>` element whose `font-size` is the requested size divided by
//! 1.24 (its convention for the SVG backend); [`font`] undoes that so that sizes here are
//! the sizes a reader sees, in CSS pixels.

use super::palette::Rgb;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// A drawing area in pixel coordinates of the whole picture.
pub(crate) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// The result of drawing operations.
pub(crate) type DrawResult<T = ()> = std::result::Result<T, Box<dyn std::error::Error>>;

/// Sans-serif family: every viewer has one, and the layout estimates assume one.
pub(crate) const FAMILY: &str = "sans-serif";

/// Body text size for labels and ticks, px.
pub(crate) const TEXT_PX: f64 = 13.0;

/// The safety caution in the short form that fits under a plot (the full wording is in the
/// text summary, `summary.json` and `report.html`).
pub(crate) const PLOT_SAFETY_NOTE: &str = "Estimates, not measurements: decisions about live, \
     hot or pressurised equipment follow local codes and licensed practice.";

/// Height of the footer line that carries [`PLOT_SAFETY_NOTE`], px.
pub(crate) const FOOTER_H: f64 = 26.0;
/// Axis titles, px.
pub(crate) const AXIS_PX: f64 = 15.0;
/// Plot titles, px.
pub(crate) const TITLE_PX: f64 = 20.0;

/// Near-black for text and outlines.
pub(crate) const INK: RGBColor = RGBColor(0x1a, 0x1a, 0x1a);
/// Mid grey for secondary text.
pub(crate) const GREY: RGBColor = RGBColor(0x55, 0x55, 0x55);
/// Light grey for grid lines.
pub(crate) const GRID: RGBColor = RGBColor(0xe2, 0xe2, 0xe2);
/// The estimate line: a dark navy that prints near black.
pub(crate) const ESTIMATE: RGBColor = RGBColor(0x14, 0x21, 0x3d);
/// The pointwise band: a pale steel blue that prints light grey.
pub(crate) const BAND: RGBColor = RGBColor(0xc9, 0xd6, 0xe8);
/// The simultaneous band's dashed lines.
pub(crate) const SIMULTANEOUS: RGBColor = RGBColor(0x3d, 0x5a, 0x80);
/// The hottest point: vermilion (mid-dark grey in print; its shape tells it apart).
pub(crate) const HOTTEST: RGBColor = RGBColor(0xc8, 0x43, 0x1a);
/// The limit line: a dark red.
pub(crate) const LIMIT: RGBColor = RGBColor(0x9b, 0x11, 0x1e);
/// The strict-bound envelopes: a dark teal, apart from the bootstrap bands' blues.
pub(crate) const BOUNDS: RGBColor = RGBColor(0x0f, 0x6e, 0x5c);

/// A `plotters` font size that renders at `px` CSS pixels.
pub(crate) fn font(px: f64) -> f64 {
    px * 1.24
}

/// An RGB triple as a `plotters` colour.
pub(crate) fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

/// How a text is anchored at its point.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Anchor {
    /// Left end, vertically centred.
    Left,
    /// Centre.
    Centre,
    /// Right end, vertically centred.
    Right,
    /// Left end, top at the point.
    TopLeft,
}

/// Text options.
#[derive(Debug, Clone, Copy)]
pub(crate) struct TextOpts {
    pub px: f64,
    pub anchor: Anchor,
    pub colour: RGBColor,
    pub bold: bool,
    pub rotate: bool,
}

impl TextOpts {
    pub(crate) fn new(px: f64, anchor: Anchor) -> Self {
        TextOpts {
            px,
            anchor,
            colour: INK,
            bold: false,
            rotate: false,
        }
    }
    pub(crate) fn bold(mut self) -> Self {
        self.bold = true;
        self
    }
    pub(crate) fn colour(mut self, c: RGBColor) -> Self {
        self.colour = c;
        self
    }
}

/// Draw `s` at pixel `(x, y)`.
pub(crate) fn text(area: &Area<'_>, s: &str, x: f64, y: f64, o: TextOpts) -> DrawResult {
    let pos = match o.anchor {
        Anchor::Left => Pos::new(HPos::Left, VPos::Center),
        Anchor::Centre => Pos::new(HPos::Center, VPos::Center),
        Anchor::Right => Pos::new(HPos::Right, VPos::Center),
        Anchor::TopLeft => Pos::new(HPos::Left, VPos::Top),
    };
    let mut f = (FAMILY, font(o.px)).into_font();
    if o.bold {
        f = f.style(FontStyle::Bold);
    }
    if o.rotate {
        f = f.transform(FontTransform::Rotate270);
    }
    let style = f.color(&o.colour).pos(pos);
    area.draw(&Text::new(s.to_string(), px(x, y), style))?;
    Ok(())
}

/// A pixel coordinate.
pub(crate) fn px(x: f64, y: f64) -> (i32, i32) {
    (x.round() as i32, y.round() as i32)
}

/// A polyline.
pub(crate) fn line(area: &Area<'_>, pts: &[(f64, f64)], style: ShapeStyle) -> DrawResult {
    let pts: Vec<(i32, i32)> = pts.iter().map(|&(x, y)| px(x, y)).collect();
    area.draw(&PathElement::new(pts, style))?;
    Ok(())
}

/// A dashed polyline: dashes of `dash` pixels separated by `gap` pixels.
pub(crate) fn dashed(
    area: &Area<'_>,
    pts: &[(f64, f64)],
    dash: u32,
    gap: u32,
    style: ShapeStyle,
) -> DrawResult {
    let pts: Vec<(i32, i32)> = pts.iter().map(|&(x, y)| px(x, y)).collect();
    area.draw(&DashedPathElement::new(pts, dash, gap, style))?;
    Ok(())
}

/// A rectangle from `(x0, y0)` to `(x1, y1)`.
pub(crate) fn rect(
    area: &Area<'_>,
    x0: f64,
    y0: f64,
    x1: f64,
    y1: f64,
    style: ShapeStyle,
) -> DrawResult {
    area.draw(&Rectangle::new([px(x0, y0), px(x1, y1)], style))?;
    Ok(())
}

/// A filled polygon.
pub(crate) fn polygon(area: &Area<'_>, pts: &[(f64, f64)], style: ShapeStyle) -> DrawResult {
    let pts: Vec<(i32, i32)> = pts.iter().map(|&(x, y)| px(x, y)).collect();
    area.draw(&Polygon::new(pts, style))?;
    Ok(())
}

/// The marker of a sensor in the estimate's plots: flagged, kept as doubtful, without a
/// reading, or used.
pub(crate) fn sensor_marker(s: &crate::estimate::SensorResult) -> Marker {
    if s.flag.is_some() {
        Marker::Flagged
    } else if s.doubtful {
        Marker::Doubtful
    } else if s.reading.is_none() {
        Marker::SensorNoReading
    } else {
        Marker::Sensor
    }
}

/// Width of a sensor's label, px (flagged and doubtful sensors are labelled in bold).
pub(crate) fn sensor_label_width(s: &crate::estimate::SensorResult, font_px: f64) -> f64 {
    if s.flag.is_some() || s.doubtful {
        super::labels::bold_text_width(&s.sensor, font_px)
    } else {
        super::labels::text_width(&s.sensor, font_px)
    }
}

/// Marker shapes shared by the legend and the plots.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Marker {
    /// A sensor that took part in the fit: a dark disc with a white rim.
    Sensor,
    /// A sensor with no reading: a hollow circle.
    SensorNoReading,
    /// A flagged sensor: a black square with a white cross.
    Flagged,
    /// A sensor kept although its reading stands out (a hot spot or a fault): a dark disc
    /// inside a ring.
    Doubtful,
    /// The hottest point: a vermilion diamond.
    Hottest,
    /// A sensor position on an axis: a small upward triangle.
    Rug,
}

/// Draw a marker centred at `(x, y)`; `r` is its half-size in pixels.
pub(crate) fn marker(area: &Area<'_>, m: Marker, x: f64, y: f64, r: f64) -> DrawResult {
    match m {
        Marker::Sensor => {
            area.draw(&Circle::new(px(x, y), (r + 1.0) as u32, WHITE.filled()))?;
            area.draw(&Circle::new(px(x, y), r as u32, INK.filled()))?;
        }
        Marker::SensorNoReading => {
            area.draw(&Circle::new(px(x, y), r as u32, WHITE.filled()))?;
            area.draw(&Circle::new(px(x, y), r as u32, INK.stroke_width(2)))?;
        }
        Marker::Flagged => {
            let s = r + 1.0;
            rect(
                area,
                x - s - 1.0,
                y - s - 1.0,
                x + s + 1.0,
                y + s + 1.0,
                WHITE.filled(),
            )?;
            rect(area, x - s, y - s, x + s, y + s, INK.filled())?;
            let d = s - 2.5;
            let white = WHITE.stroke_width(2);
            line(area, &[(x - d, y - d), (x + d, y + d)], white)?;
            line(area, &[(x - d, y + d), (x + d, y - d)], white)?;
        }
        Marker::Doubtful => {
            area.draw(&Circle::new(px(x, y), (r + 4.0) as u32, WHITE.filled()))?;
            area.draw(&Circle::new(
                px(x, y),
                (r + 3.0) as u32,
                INK.stroke_width(2),
            ))?;
            area.draw(&Circle::new(
                px(x, y),
                (r - 1.0).max(2.0) as u32,
                INK.filled(),
            ))?;
        }
        Marker::Hottest => {
            let s = r + 1.5;
            let diamond = [(x, y - s), (x + s, y), (x, y + s), (x - s, y)];
            polygon(area, &diamond, HOTTEST.filled())?;
            let mut closed = diamond.to_vec();
            closed.push(diamond[0]);
            line(area, &closed, INK.stroke_width(1))?;
        }
        Marker::Rug => {
            polygon(
                area,
                &[(x, y - r * 1.6), (x + r, y), (x - r, y)],
                GREY.filled(),
            )?;
        }
    }
    Ok(())
}

/// A white box with a little transparency behind a label, so that it reads over lines and
/// colours.
pub(crate) fn label_box(area: &Area<'_>, r: &super::labels::Rect, opacity: f64) -> DrawResult {
    rect(area, r.x0, r.y0, r.x1, r.y1, WHITE.mix(opacity).filled())
}

/// What a legend entry shows.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Glyph {
    /// A filled swatch.
    Swatch(RGBColor),
    /// A solid line of the given width.
    Line(RGBColor, u32),
    /// A dashed line of the given width.
    Dashed(RGBColor, u32),
    /// A marker.
    Marker(Marker),
    /// The hottest point with its two interval bars.
    HottestBars,
    /// An unknown edge: a thick dark line with a white rim.
    Edge,
    /// An isotherm: a thin dark line with a white halo.
    Isotherm,
}

/// Width of a legend glyph, px.
const GLYPH_W: f64 = 30.0;
/// Space between legend entries, px.
const ENTRY_GAP: f64 = 22.0;
/// Height of a legend row, px.
pub(crate) const LEGEND_ROW_H: f64 = 22.0;

fn entry_width(label: &str) -> f64 {
    GLYPH_W + 6.0 + super::labels::text_width(label, TEXT_PX) + ENTRY_GAP
}

/// Rows a legend needs within `max_w` pixels.
pub(crate) fn legend_rows(items: &[(Glyph, String)], max_w: f64) -> usize {
    let mut rows = 1;
    let mut x = 0.0;
    for (_, label) in items {
        let w = entry_width(label);
        if x > 0.0 && x + w > max_w {
            rows += 1;
            x = 0.0;
        }
        x += w;
    }
    rows
}

/// Draw a legend from `(x0, y0)` (top-left), wrapping rows within `max_w` pixels.
pub(crate) fn legend(
    area: &Area<'_>,
    items: &[(Glyph, String)],
    x0: f64,
    y0: f64,
    max_w: f64,
) -> DrawResult {
    let mut x = x0;
    let mut y = y0 + LEGEND_ROW_H / 2.0;
    for (glyph, label) in items {
        let w = entry_width(label);
        if x > x0 && x + w > x0 + max_w {
            x = x0;
            y += LEGEND_ROW_H;
        }
        let (gx0, gx1, gc) = (x, x + GLYPH_W, x + GLYPH_W / 2.0);
        match *glyph {
            Glyph::Swatch(c) => rect(area, gx0, y - 6.0, gx1, y + 6.0, c.filled())?,
            Glyph::Line(c, w) => line(area, &[(gx0, y), (gx1, y)], c.stroke_width(w))?,
            Glyph::Dashed(c, w) => dashed(area, &[(gx0, y), (gx1, y)], 6, 4, c.stroke_width(w))?,
            Glyph::Marker(m) => marker(area, m, gc, y, 5.0)?,
            Glyph::HottestBars => {
                let bar = HOTTEST.stroke_width(2);
                line(area, &[(gx0 + 2.0, y), (gx1 - 2.0, y)], bar)?;
                line(area, &[(gc, y - 8.0), (gc, y + 8.0)], bar)?;
                marker(area, Marker::Hottest, gc, y, 4.0)?;
            }
            Glyph::Edge => {
                line(area, &[(gx0, y), (gx1, y)], WHITE.stroke_width(9))?;
                line(area, &[(gx0, y), (gx1, y)], INK.stroke_width(5))?;
            }
            Glyph::Isotherm => {
                line(area, &[(gx0, y), (gx1, y)], WHITE.mix(0.7).stroke_width(4))?;
                line(area, &[(gx0, y), (gx1, y)], INK.stroke_width(1))?;
            }
        }
        text(
            area,
            label,
            gx1 + 6.0,
            y,
            TextOpts::new(TEXT_PX, Anchor::Left),
        )?;
        x += w;
    }
    Ok(())
}

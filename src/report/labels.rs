//! Placing text labels on the plots without overlaps: a greedy placer over a few candidate
//! positions per label, with boxes measured from an estimate of the text's width.
//!
//! The SVG files carry text as `<text>` elements that the viewer lays out with its own
//! fonts, so widths can only be estimated; the estimate below is that of a common
//! sans-serif face (DejaVu Sans, one of the widest common faces: about 0.6 em per lower-case
//! letter, more for capitals, digits and bold), so that labels keep a gap in narrower faces.

/// An axis-aligned box in pixels (`x0 < x1`, `y0 < y1`, y downwards).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Rect {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Rect {
    /// The box of a label whose anchor (`(x, y)`) is at the given fraction of its width and
    /// height (0 left/top, 0.5 centre, 1 right/bottom).
    pub(crate) fn anchored(x: f64, y: f64, w: f64, h: f64, fx: f64, fy: f64) -> Rect {
        let x0 = x - fx * w;
        let y0 = y - fy * h;
        Rect {
            x0,
            y0,
            x1: x0 + w,
            y1: y0 + h,
        }
    }

    /// A box around a point, `r` pixels each way.
    pub(crate) fn around(x: f64, y: f64, r: f64) -> Rect {
        Rect {
            x0: x - r,
            y0: y - r,
            x1: x + r,
            y1: y + r,
        }
    }

    fn overlaps(&self, other: &Rect) -> bool {
        self.x0 < other.x1 && other.x0 < self.x1 && self.y0 < other.y1 && other.y0 < self.y1
    }

    fn inside(&self, bounds: &Rect) -> bool {
        self.x0 >= bounds.x0 && self.x1 <= bounds.x1 && self.y0 >= bounds.y0 && self.y1 <= bounds.y1
    }

    /// The centre.
    pub(crate) fn centre(&self) -> (f64, f64) {
        (0.5 * (self.x0 + self.x1), 0.5 * (self.y0 + self.y1))
    }
}

/// Estimated width in pixels of `text` set at `font_px` in a regular sans-serif face.
pub(crate) fn text_width(text: &str, font_px: f64) -> f64 {
    let units: f64 = text
        .chars()
        .map(|c| match c {
            'i' | 'j' | 'l' | '.' | ',' | ':' | ';' | '\'' | '|' | '!' | ' ' | '(' | ')' => 0.34,
            'f' | 't' | 'r' => 0.42,
            'm' | 'w' | 'M' | 'W' | '@' => 0.95,
            c if c.is_ascii_uppercase() => 0.72,
            c if c.is_ascii_digit() => 0.64,
            _ => 0.6,
        })
        .sum();
    units * font_px + 2.0
}

/// Estimated width in pixels of `text` set at `font_px` in bold.
pub(crate) fn bold_text_width(text: &str, font_px: f64) -> f64 {
    1.12 * text_width(text, font_px)
}

/// Boxes already taken on a plot, and the region labels must stay in.
#[derive(Debug, Clone)]
pub(crate) struct Placer {
    bounds: Rect,
    taken: Vec<Rect>,
}

impl Placer {
    /// An empty plot region.
    pub(crate) fn new(bounds: Rect) -> Placer {
        Placer {
            bounds,
            taken: Vec::new(),
        }
    }

    /// Mark a box as taken (a marker, say), whether or not it fits the bounds.
    pub(crate) fn block(&mut self, r: Rect) {
        self.taken.push(r);
    }

    /// Whether `r` is free and inside the bounds.
    pub(crate) fn is_free(&self, r: &Rect) -> bool {
        r.inside(&self.bounds) && !self.taken.iter().any(|t| t.overlaps(r))
    }

    /// Take the first free candidate, if any.
    pub(crate) fn place(&mut self, candidates: &[Rect]) -> Option<Rect> {
        let found = candidates.iter().find(|r| self.is_free(r)).copied()?;
        self.taken.push(found);
        Some(found)
    }

    /// Take the first free candidate, or (when none is free) the one that overlaps the
    /// fewest taken boxes and stays inside the bounds; `None` only when no candidate fits
    /// the bounds.
    pub(crate) fn place_best(&mut self, candidates: &[Rect]) -> Option<Rect> {
        if let Some(r) = self.place(candidates) {
            return Some(r);
        }
        let best = candidates
            .iter()
            .filter(|r| r.inside(&self.bounds))
            .min_by_key(|r| self.taken.iter().filter(|t| t.overlaps(r)).count())
            .copied()?;
        self.taken.push(best);
        Some(best)
    }
}

/// Candidate boxes for a label of size `w × h` beside a marker of radius `r` at `(x, y)`:
/// right, left, above, below, then the four diagonals.
pub(crate) fn around_marker(x: f64, y: f64, r: f64, w: f64, h: f64) -> Vec<Rect> {
    let gap = r + 3.0;
    vec![
        Rect::anchored(x + gap, y, w, h, 0.0, 0.5),
        Rect::anchored(x - gap, y, w, h, 1.0, 0.5),
        Rect::anchored(x, y - gap, w, h, 0.5, 1.0),
        Rect::anchored(x, y + gap, w, h, 0.5, 0.0),
        Rect::anchored(x + gap, y - gap, w, h, 0.0, 1.0),
        Rect::anchored(x - gap, y - gap, w, h, 1.0, 1.0),
        Rect::anchored(x + gap, y + gap, w, h, 0.0, 0.0),
        Rect::anchored(x - gap, y + gap, w, h, 1.0, 0.0),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn placer_avoids_overlaps_and_bounds() {
        let mut p = Placer::new(Rect {
            x0: 0.0,
            y0: 0.0,
            x1: 100.0,
            y1: 100.0,
        });
        let a = p
            .place(&around_marker(50.0, 50.0, 4.0, 30.0, 12.0))
            .unwrap();
        // the same label again cannot take the same box
        let b = p
            .place(&around_marker(50.0, 50.0, 4.0, 30.0, 12.0))
            .unwrap();
        assert_ne!(a, b);
        assert!(!a.overlaps(&b));
        // near the right border the label goes left
        let c = p
            .place(&around_marker(95.0, 20.0, 4.0, 30.0, 12.0))
            .unwrap();
        assert!(c.x1 <= 100.0);
        assert!(text_width("TC01", 13.0) > text_width("il", 13.0));
    }
}

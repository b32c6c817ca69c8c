//! The colour scale of the field map: a sequential palette of our own whose lightness rises
//! steadily from cold to hot, so that it reads in the right order on screen, in print and
//! in grey.
//!
//! The palette is defined in the OKLab space (B. Ottosson, "A perceptual color space for
//! image processing", 2020), whose lightness `L` tracks perceived lightness: along
//! `t ∈ [0, 1]`
//!
//! ```text
//! L(t) = 0.30 + 0.66 t,   C(t) = 0.05 + 0.12 sin(π t),   h(t) = 255° + 200° t
//! ```
//!
//! (a dark steel blue through plum, brick red and amber to a pale straw), converted to
//! sRGB (IEC 61966-2-1 transfer function) with the chroma reduced where a colour would fall
//! outside the sRGB gamut. Because `L` is linear in `t` and gamut mapping only lowers the
//! chroma, equal steps of temperature are equal steps of lightness.

/// An sRGB colour, 8 bits per channel.
pub(crate) type Rgb = (u8, u8, u8);

/// The colour at `t ∈ [0, 1]` (clamped; NaN maps to the middle).
pub(crate) fn colour(t: f64) -> Rgb {
    let t = if t.is_nan() { 0.5 } else { t.clamp(0.0, 1.0) };
    let l = 0.30 + 0.66 * t;
    let c = 0.05 + 0.12 * (std::f64::consts::PI * t).sin();
    let h = (255.0 + 200.0 * t).to_radians();
    // Largest chroma up to `c` that stays inside the gamut, by bisection.
    let in_gamut = |c: f64| {
        let rgb = oklab_to_linear_srgb(l, c * h.cos(), c * h.sin());
        rgb.iter().all(|v| (-1e-9..=1.0 + 1e-9).contains(v))
    };
    let chroma = if in_gamut(c) {
        c
    } else {
        let (mut lo, mut hi) = (0.0, c);
        for _ in 0..30 {
            let mid = 0.5 * (lo + hi);
            if in_gamut(mid) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        lo
    };
    let [r, g, b] = oklab_to_linear_srgb(l, chroma * h.cos(), chroma * h.sin());
    (encode(r), encode(g), encode(b))
}

/// OKLab → linear sRGB (Ottosson 2020, the published matrices).
fn oklab_to_linear_srgb(l: f64, a: f64, b: f64) -> [f64; 3] {
    let l_ = l + 0.396_337_777_4 * a + 0.215_803_757_3 * b;
    let m_ = l - 0.105_561_345_8 * a - 0.063_854_172_8 * b;
    let s_ = l - 0.089_484_177_5 * a - 1.291_485_548_0 * b;
    let (l3, m3, s3) = (l_ * l_ * l_, m_ * m_ * m_, s_ * s_ * s_);
    [
        4.076_741_662_1 * l3 - 3.307_711_591_3 * m3 + 0.230_969_929_2 * s3,
        -1.268_438_004_6 * l3 + 2.609_757_401_1 * m3 - 0.341_319_396_5 * s3,
        -0.004_196_086_3 * l3 - 0.703_418_614_7 * m3 + 1.707_614_701_0 * s3,
    ]
}

/// Linear → 8-bit sRGB with the IEC 61966-2-1 transfer function.
fn encode(v: f64) -> u8 {
    let v = v.clamp(0.0, 1.0);
    let e = if v <= 0.003_130_8 {
        12.92 * v
    } else {
        1.055 * v.powf(1.0 / 2.4) - 0.055
    };
    (e * 255.0).round() as u8
}

/// Relative luminance of an sRGB colour (IEC 61966-2-1 decoding; Rec. 709 primaries'
/// weights 0.2126, 0.7152, 0.0722), what a greyscale print keeps.
#[cfg(test)]
fn luminance(rgb: Rgb) -> f64 {
    let decode = |c: u8| {
        let v = f64::from(c) / 255.0;
        if v <= 0.040_45 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    0.2126 * decode(rgb.0) + 0.7152 * decode(rgb.1) + 0.0722 * decode(rgb.2)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Ottosson 2020 gives OKLab (1, 0, 0) for white; the matrices must round-trip it.
    #[test]
    fn oklab_white_is_white() {
        let rgb = oklab_to_linear_srgb(1.0, 0.0, 0.0);
        for v in rgb {
            assert!((v - 1.0).abs() < 1e-6, "{rgb:?}");
        }
    }

    #[test]
    fn lightness_rises_monotonically_so_grey_prints_keep_the_order() {
        let mut previous = -1.0;
        for i in 0..=200 {
            let y = luminance(colour(f64::from(i) / 200.0));
            assert!(
                y > previous,
                "luminance falls at step {i}: {y} after {previous}"
            );
            previous = y;
        }
        // a usable spread from dark to light
        assert!(luminance(colour(0.0)) < 0.08);
        assert!(luminance(colour(1.0)) > 0.8);
    }
}

//! Hot loops built twice: for the baseline processor and for one with AVX2, the second chosen
//! at run time (`is_x86_feature_detected!`). The released binary stays portable (a build for
//! `x86-64-v3` stops with an illegal instruction on a processor without AVX2) while the
//! loops that gain from four lanes get them. Both builds give the same numbers: Rust never
//! fuses a multiplication and an addition on its own, and vectorising does not reorder a
//! loop's operations, so the roundings are the same (DEVELOPERS.md, Benchmarks).

/// `avx2_dispatch! { /// doc
/// fn name(a: A, b: B) -> R = body; }` defines `name`, which calls `body(a, b)` compiled for
/// AVX2 when the processor has it and as it is otherwise. `body` should be
/// `#[inline(always)]`, so that it is compiled into the AVX2 function rather than called.
/// The AVX2 build is an `unsafe fn` with `#[target_feature]` (a safe one needs Rust 1.86;
/// the crate declares 1.85), called only after the feature check.
macro_rules! avx2_dispatch {
    ($(#[$meta:meta])* $vis:vis fn $name:ident($($arg:ident: $ty:ty),* $(,)?) $(-> $ret:ty)? = $body:path;) => {
        $(#[$meta])*
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            #[cfg(target_arch = "x86_64")]
            {
                #[target_feature(enable = "avx2")]
                unsafe fn avx2($($arg: $ty),*) $(-> $ret)? {
                    $body($($arg),*)
                }
                if std::arch::is_x86_feature_detected!("avx2") {
                    // SAFETY: the processor has AVX2, the only feature `avx2` is built for.
                    return unsafe { avx2($($arg),*) };
                }
            }
            $body($($arg),*)
        }
    };
}

pub(crate) use avx2_dispatch;

use nalgebra::{DMatrix, DVector};

/// `y = A x` (`subtract` false) or `y = y − A x` (`subtract` true): the same numbers, bit for
/// bit, as nalgebra's `y.gemv(1.0, a, x, 0.0)` and `y.gemv(-1.0, a, x, 1.0)`, which add the
/// columns' products one column after another into `y` in memory. Here a block of rows is
/// held in registers across all the columns instead (each entry still gets the products in
/// column order: the same roundings), and the loop is built for AVX2 when the processor has
/// it ([`avx2_dispatch`]).
///
/// # Panics
/// When the shapes do not match (as nalgebra's `gemv`).
pub fn gemv(y: &mut DVector<f64>, a: &DMatrix<f64>, x: &DVector<f64>, subtract: bool) {
    assert!(
        a.nrows() == y.len() && a.ncols() == x.len(),
        "gemv: dimensions mismatch"
    );
    gemv_slices(
        a.as_slice(),
        a.nrows(),
        x.as_slice(),
        y.as_mut_slice(),
        subtract,
    );
}

avx2_dispatch! {
    /// [`gemv`] on the column-major slice of `a` (`rows` rows).
    fn gemv_slices(a: &[f64], rows: usize, x: &[f64], y: &mut [f64], subtract: bool) = gemv_body;
}

/// The body of [`gemv_slices`]: blocks of 32 rows, then of 8, then single rows.
#[inline(always)]
fn gemv_body(a: &[f64], rows: usize, x: &[f64], y: &mut [f64], subtract: bool) {
    if x.is_empty() {
        if !subtract {
            y.fill(0.0);
        }
        return;
    }
    let mut i0 = 0;
    while i0 + 32 <= rows {
        gemv_block::<32>(a, rows, x, &mut y[i0..i0 + 32], i0, subtract);
        i0 += 32;
    }
    while i0 + 8 <= rows {
        gemv_block::<8>(a, rows, x, &mut y[i0..i0 + 8], i0, subtract);
        i0 += 8;
    }
    while i0 < rows {
        gemv_block::<1>(a, rows, x, &mut y[i0..=i0], i0, subtract);
        i0 += 1;
    }
}

/// Rows `i0 .. i0 + B` of [`gemv_body`], the `B` sums in registers.
#[inline(always)]
fn gemv_block<const B: usize>(
    a: &[f64],
    rows: usize,
    x: &[f64],
    y: &mut [f64],
    i0: usize,
    subtract: bool,
) {
    let mut acc = [0.0_f64; B];
    let col = |j: usize| -> &[f64] { &a[j * rows + i0..j * rows + i0 + B] };
    if subtract {
        // nalgebra: y ← (−1·a) x + 1·y, which is y − a x exactly
        acc.copy_from_slice(y);
        for (j, &xj) in x.iter().enumerate() {
            for (s, &v) in acc.iter_mut().zip(col(j)) {
                *s -= v * xj;
            }
        }
    } else {
        // nalgebra: y ← (1·a) x for the first column, then y ← (1·a) x + 1·y
        for (s, &v) in acc.iter_mut().zip(col(0)) {
            *s = v * x[0];
        }
        for (j, &xj) in x.iter().enumerate().skip(1) {
            for (s, &v) in acc.iter_mut().zip(col(j)) {
                *s += v * xj;
            }
        }
    }
    y.copy_from_slice(&acc);
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn gemv_is_nalgebras_bit_for_bit() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for &(rows, cols) in &[
            (0, 3),
            (3, 0),
            (1, 1),
            (7, 5),
            (8, 9),
            (32, 32),
            (33, 17),
            (65, 30),
            (130, 64),
        ] {
            // values of very different sizes, so that the order of the additions shows
            let a = DMatrix::from_fn(rows, cols, |_, _| {
                rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8))
            });
            let x = DVector::from_fn(cols, |_, _| {
                rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8))
            });
            let y0 = DVector::from_fn(rows, |_, _| rng.random_range(-1.0..1.0));
            for subtract in [false, true] {
                let mut expected = y0.clone();
                if subtract {
                    expected.gemv(-1.0, &a, &x, 1.0);
                } else {
                    expected.gemv(1.0, &a, &x, 0.0);
                }
                let mut got = y0.clone();
                gemv(&mut got, &a, &x, subtract);
                let bits = |v: &DVector<f64>| v.iter().map(|t| t.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&got), bits(&expected), "{rows} x {cols}, {subtract}");
            }
        }
    }
}

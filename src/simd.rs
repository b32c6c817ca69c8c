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

avx2_dispatch! {
    /// Thirty-two rows at once: rows `k0 .. k0 + 32` of the column-major `a` (`rows` rows, at
    /// least `x.len()` columns) times `x`. Each entry is its products added in column order
    /// from −0.0 — the same number, bit for bit, as [`dot`] of the row and `x` — with the
    /// rows side by side in the lanes: eight independent four-lane sums, enough to keep the
    /// additions' pipeline full (one sum's additions must wait for each other).
    ///
    /// # Panics
    /// When `a` is shorter than `rows · x.len()` or `k0 + 32 > rows`.
    pub fn dots32(a: &[f64], rows: usize, k0: usize, x: &[f64]) -> [f64; 32] = dots32_body;
}

/// The plain loop of [`dots32`].
#[inline(always)]
fn dots32_body(a: &[f64], rows: usize, k0: usize, x: &[f64]) -> [f64; 32] {
    assert!(
        k0 + 32 <= rows && a.len() >= rows * x.len(),
        "dots32: shapes"
    );
    let mut acc = [-0.0_f64; 32];
    for (col, &xj) in a.chunks_exact(rows).zip(x) {
        let col: &[f64; 32] = col[k0..k0 + 32].try_into().unwrap_or(&[0.0; 32]);
        for (s, &v) in acc.iter_mut().zip(col) {
            *s += v * xj;
        }
    }
    acc
}

/// `Σ a_i b_i` over the shorter of the two, added in order from −0.0 (as `Iterator::sum`):
/// one row of [`dots32`].
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).fold(-0.0, |s, (x, y)| s + x * y)
}

avx2_dispatch! {
    /// `Σ a_i b_i` over the shorter of the two in four interleaved partial sums (sum `l`
    /// adds the terms `i ≡ l mod 4` of the whole chunks of four, in order, the terms left
    /// add on sum 0; then `(s0 + s1) + (s2 + s3)`): its own rounding, not [`dot`]'s, with
    /// four additions in flight instead of one.
    pub fn dot4(a: &[f64], b: &[f64]) -> f64 = dot4_body;
}

/// The plain loop of [`dot4`].
#[inline(always)]
fn dot4_body(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut s = [-0.0_f64; 4];
    for (x, y) in a.chunks_exact(4).zip(b.chunks_exact(4)) {
        for l in 0..4 {
            s[l] += x[l] * y[l];
        }
    }
    for (x, y) in a
        .chunks_exact(4)
        .remainder()
        .iter()
        .zip(b.chunks_exact(4).remainder())
    {
        s[0] += x * y;
    }
    (s[0] + s[1]) + (s[2] + s[3])
}

/// For four rows `a[g]` of equal length `r` and a vector `v` (at least `r` long): per row, the
/// four lane sums of `a[g][i] · v[i]` (lane `l` adds the terms `i ≡ l mod 4` of the whole
/// chunks of four, in order; the `r mod 4` terms left add on lane 0, in order). The same
/// numbers as the plain loop ([`lane_sums4_body`]) in either build: with AVX2 the four rows'
/// chunks go through four-lane multiplications and additions written out, which the compiler
/// did not find on its own for this loop (it mixed the rows in shuffles).
pub fn lane_sums4(a: [&[f64]; 4], v: &[f64]) -> [[f64; 4]; 4] {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2, the only feature the function is built for.
            return unsafe { lane_sums4_avx2(a, v) };
        }
    }
    lane_sums4_body(a, v)
}

/// The plain loop of [`lane_sums4`].
#[inline(always)]
fn lane_sums4_body(a: [&[f64]; 4], v: &[f64]) -> [[f64; 4]; 4] {
    let r = a[0].len();
    let whole = r - r % 4;
    let mut acc = [[0.0f64; 4]; 4];
    for (acc_g, a_g) in acc.iter_mut().zip(a) {
        for c in (0..whole).step_by(4) {
            for l in 0..4 {
                acc_g[l] += a_g[c + l] * v[c + l];
            }
        }
        for c in whole..r {
            acc_g[0] += a_g[c] * v[c];
        }
    }
    acc
}

/// [`lane_sums4`] with AVX2: lane `l` of register `g` is `acc[g][l]`, and each step is one
/// multiplication and one addition per lane, as in the plain loop.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn lane_sums4_avx2(a: [&[f64]; 4], v: &[f64]) -> [[f64; 4]; 4] {
    use std::arch::x86_64::{
        _mm256_add_pd, _mm256_loadu_pd, _mm256_mul_pd, _mm256_setzero_pd, _mm256_storeu_pd,
    };
    let r = a[0].len();
    assert!(
        a.iter().all(|x| x.len() == r) && v.len() >= r,
        "lane_sums4: lengths"
    );
    let whole = r - r % 4;
    let mut acc = [[0.0f64; 4]; 4];
    // SAFETY: every load reads four values at `c < whole ≤ r`, inside each row and `v`
    // (lengths checked above); the stores write four values into each `acc[g]`.
    unsafe {
        let (mut s0, mut s1, mut s2, mut s3) = (
            _mm256_setzero_pd(),
            _mm256_setzero_pd(),
            _mm256_setzero_pd(),
            _mm256_setzero_pd(),
        );
        for c in (0..whole).step_by(4) {
            let x = _mm256_loadu_pd(v.as_ptr().add(c));
            s0 = _mm256_add_pd(s0, _mm256_mul_pd(_mm256_loadu_pd(a[0].as_ptr().add(c)), x));
            s1 = _mm256_add_pd(s1, _mm256_mul_pd(_mm256_loadu_pd(a[1].as_ptr().add(c)), x));
            s2 = _mm256_add_pd(s2, _mm256_mul_pd(_mm256_loadu_pd(a[2].as_ptr().add(c)), x));
            s3 = _mm256_add_pd(s3, _mm256_mul_pd(_mm256_loadu_pd(a[3].as_ptr().add(c)), x));
        }
        _mm256_storeu_pd(acc[0].as_mut_ptr(), s0);
        _mm256_storeu_pd(acc[1].as_mut_ptr(), s1);
        _mm256_storeu_pd(acc[2].as_mut_ptr(), s2);
        _mm256_storeu_pd(acc[3].as_mut_ptr(), s3);
    }
    for (acc_g, a_g) in acc.iter_mut().zip(a) {
        for c in whole..r {
            acc_g[0] += a_g[c] * v[c];
        }
    }
    acc
}

/// `y = Aᵀ x`: the same numbers, bit for bit, as nalgebra's `y.gemv_tr(1.0, a, x, 0.0)`, whose
/// entry `j` is `1 · (a_j · x)` with the dot product of `Matrix::dot`: eight accumulators
/// over each run of eight rows, combined as `((((0 + (s₀ + s₄)) + (s₁ + s₅)) + (s₂ + s₆)) +
/// (s₃ + s₇))`, then the rows after the last whole run added one by one. Here the eight
/// accumulators are two vectors, built for AVX2 when the processor has it
/// ([`avx2_dispatch`]).
///
/// # Panics
/// When the shapes do not match (as nalgebra's `gemv_tr`).
pub fn gemv_tr(y: &mut DVector<f64>, a: &DMatrix<f64>, x: &DVector<f64>) {
    assert!(
        a.nrows() == x.len() && a.ncols() == y.len(),
        "gemv_tr: dimensions mismatch"
    );
    gemv_tr_slices(a.as_slice(), a.nrows(), x.as_slice(), y.as_mut_slice());
}

avx2_dispatch! {
    /// [`gemv_tr`] on the column-major slice of `a` (`rows` rows).
    fn gemv_tr_slices(a: &[f64], rows: usize, x: &[f64], y: &mut [f64]) = gemv_tr_body;
}

/// The body of [`gemv_tr_slices`].
#[inline(always)]
fn gemv_tr_body(a: &[f64], rows: usize, x: &[f64], y: &mut [f64]) {
    if rows == 0 {
        // every dot product is empty: nalgebra's 1 · 0
        y.fill(0.0);
        return;
    }
    let x = &x[..rows];
    let whole = rows - rows % 8;
    for (yj, column) in y.iter_mut().zip(a.chunks_exact(rows)) {
        let mut acc = [0.0_f64; 8];
        for (c8, x8) in column[..whole]
            .chunks_exact(8)
            .zip(x[..whole].chunks_exact(8))
        {
            for l in 0..8 {
                acc[l] += c8[l] * x8[l];
            }
        }
        let mut res = 0.0;
        res += acc[0] + acc[4];
        res += acc[1] + acc[5];
        res += acc[2] + acc[6];
        res += acc[3] + acc[7];
        for (c, xv) in column[whole..].iter().zip(&x[whole..]) {
            res += c * xv;
        }
        *yj = 1.0 * res;
    }
}

/// The values beyond two cuts, gathered: `v_i = estimate − src_i` (or `src_i` when
/// `estimate` is `None`) goes to `low` when `v_i ≤ below` and to `high` when `v_i ≥ above`,
/// each in the order of `i`. Returns how many each received and whether some `v_i` is NaN
/// (NaN is never gathered). `low` and `high` must hold `src.len() + 4` values: the AVX2
/// build stores four at a time past the count.
///
/// # Panics
/// When `low` or `high` is too short.
pub fn gather_tails(
    src: &[f64],
    estimate: Option<f64>,
    (below, above): (f64, f64),
    low: &mut [f64],
    high: &mut [f64],
) -> (usize, usize, bool) {
    assert!(
        low.len() >= src.len() + 4 && high.len() >= src.len() + 4,
        "gather_tails: buffers too short"
    );
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2; the lengths were checked above.
            return unsafe { gather_tails_avx2(src, estimate, (below, above), low, high) };
        }
    }
    gather_tails_plain(src, estimate, (below, above), low, high, (0, 0, false))
}

/// The plain loop of [`gather_tails`], from `src`'s first value on, with the counts and the
/// NaN flag so far: branch-free, every value stored and the count moved only for a value
/// beyond its cut.
fn gather_tails_plain(
    src: &[f64],
    estimate: Option<f64>,
    (below, above): (f64, f64),
    low: &mut [f64],
    high: &mut [f64],
    (mut n_low, mut n_high, mut nan): (usize, usize, bool),
) -> (usize, usize, bool) {
    for &x in src {
        let v = estimate.map_or(x, |e| e - x);
        low[n_low] = v;
        n_low += usize::from(v <= below);
        high[n_high] = v;
        n_high += usize::from(v >= above);
        nan |= v.is_nan();
    }
    (n_low, n_high, nan)
}

/// For each 4-bit mask, the 32-bit lane indices that move the masked 64-bit lanes of a
/// vector to its front, in order (the rest of the vector is don't-care).
#[cfg(target_arch = "x86_64")]
const LEFT_PACK: [[u32; 8]; 16] = {
    let mut table = [[0u32; 8]; 16];
    let mut mask = 0;
    while mask < 16 {
        let mut at = 0;
        let mut lane = 0;
        while lane < 4 {
            if mask & (1 << lane) != 0 {
                table[mask][2 * at] = 2 * lane as u32;
                table[mask][2 * at + 1] = 2 * lane as u32 + 1;
                at += 1;
            }
            lane += 1;
        }
        mask += 1;
    }
    table
};

/// [`gather_tails`] with AVX2: four values compared at once, the ones beyond a cut moved to
/// the front of the vector (a lane permutation looked up from the comparison's mask) and the
/// whole vector stored at the count, which then moves by the number gathered. The same
/// comparisons as the plain loop (`≤` and `≥` are false for NaN), the same values in the
/// same order.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn gather_tails_avx2(
    src: &[f64],
    estimate: Option<f64>,
    (below, above): (f64, f64),
    low: &mut [f64],
    high: &mut [f64],
) -> (usize, usize, bool) {
    use std::arch::x86_64::{
        _CMP_GE_OQ, _CMP_LE_OQ, _CMP_UNORD_Q, _mm256_castpd_ps, _mm256_castps_pd, _mm256_cmp_pd,
        _mm256_loadu_pd, _mm256_loadu_si256, _mm256_movemask_pd, _mm256_permutevar8x32_ps,
        _mm256_set1_pd, _mm256_storeu_pd, _mm256_sub_pd,
    };
    let whole = src.len() - src.len() % 4;
    let (mut n_low, mut n_high) = (0usize, 0usize);
    let mut nan_mask = 0;
    let (lo_cut, hi_cut) = (_mm256_set1_pd(below), _mm256_set1_pd(above));
    let e = _mm256_set1_pd(estimate.unwrap_or(0.0));
    for c in (0..whole).step_by(4) {
        // SAFETY: `c + 4 ≤ whole ≤ src.len()`; the stores write four values from a count at
        // most `c`, inside `low` and `high` (at least `src.len() + 4` long, checked by the
        // caller); the table index is a 4-bit mask.
        unsafe {
            let x = _mm256_loadu_pd(src.as_ptr().add(c));
            let v = if estimate.is_some() {
                _mm256_sub_pd(e, x)
            } else {
                x
            };
            nan_mask |= _mm256_movemask_pd(_mm256_cmp_pd::<_CMP_UNORD_Q>(v, v));
            let m_low = _mm256_movemask_pd(_mm256_cmp_pd::<_CMP_LE_OQ>(v, lo_cut)) as usize;
            let m_high = _mm256_movemask_pd(_mm256_cmp_pd::<_CMP_GE_OQ>(v, hi_cut)) as usize;
            let pack = |m: usize| {
                let idx = _mm256_loadu_si256(LEFT_PACK[m].as_ptr().cast());
                _mm256_castps_pd(_mm256_permutevar8x32_ps(_mm256_castpd_ps(v), idx))
            };
            _mm256_storeu_pd(low.as_mut_ptr().add(n_low), pack(m_low));
            n_low += m_low.count_ones() as usize;
            _mm256_storeu_pd(high.as_mut_ptr().add(n_high), pack(m_high));
            n_high += m_high.count_ones() as usize;
        }
    }
    gather_tails_plain(
        &src[whole..],
        estimate,
        (below, above),
        low,
        high,
        (n_low, n_high, nan_mask != 0),
    )
}

/// [`gather_tails`] of single-precision values, without an estimate: `src_i` goes to `low`
/// when `src_i ≤ below` and to `high` when `src_i ≥ above`, each in the order of `i`.
/// Returns how many each received and whether some value is NaN (never gathered). `low` and
/// `high` must hold `src.len() + 8` values: the AVX2 build stores eight at a time past the
/// count.
///
/// # Panics
/// When `low` or `high` is too short.
pub fn gather_tails_single(
    src: &[f32],
    (below, above): (f32, f32),
    low: &mut [f32],
    high: &mut [f32],
) -> (usize, usize, bool) {
    assert!(
        low.len() >= src.len() + 8 && high.len() >= src.len() + 8,
        "gather_tails_single: buffers too short"
    );
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2; the lengths were checked above.
            return unsafe { gather_tails_single_avx2(src, (below, above), low, high) };
        }
    }
    gather_tails_single_plain(src, (below, above), low, high, (0, 0, false))
}

/// The plain loop of [`gather_tails_single`], from `src`'s first value on, with the counts
/// and the NaN flag so far (branch-free, as [`gather_tails_plain`]).
fn gather_tails_single_plain(
    src: &[f32],
    (below, above): (f32, f32),
    low: &mut [f32],
    high: &mut [f32],
    (mut n_low, mut n_high, mut nan): (usize, usize, bool),
) -> (usize, usize, bool) {
    for &v in src {
        low[n_low] = v;
        n_low += usize::from(v <= below);
        high[n_high] = v;
        n_high += usize::from(v >= above);
        nan |= v.is_nan();
    }
    (n_low, n_high, nan)
}

/// For each 8-bit mask, the 32-bit lane indices that move the masked lanes of a vector to
/// its front, in order (the rest of the vector is don't-care): 8 KB, in the first-level
/// cache while a band is gathered.
#[cfg(target_arch = "x86_64")]
static LEFT_PACK_SINGLE: [[u32; 8]; 256] = {
    let mut table = [[0u32; 8]; 256];
    let mut mask = 0;
    while mask < 256 {
        let mut at = 0;
        let mut lane = 0;
        while lane < 8 {
            if mask & (1 << lane) != 0 {
                table[mask][at] = lane as u32;
                at += 1;
            }
            lane += 1;
        }
        mask += 1;
    }
    table
};

/// [`gather_tails_single`] with AVX2: eight values compared at once, the ones beyond a cut
/// moved to the front of the vector (a lane permutation looked up from the comparison's
/// mask) and the whole vector stored at the count, which then moves by the number gathered.
/// The same comparisons as the plain loop, the same values in the same order.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn gather_tails_single_avx2(
    src: &[f32],
    (below, above): (f32, f32),
    low: &mut [f32],
    high: &mut [f32],
) -> (usize, usize, bool) {
    use std::arch::x86_64::{
        _CMP_GE_OQ, _CMP_LE_OQ, _CMP_UNORD_Q, _mm256_cmp_ps, _mm256_loadu_ps, _mm256_loadu_si256,
        _mm256_movemask_ps, _mm256_permutevar8x32_ps, _mm256_set1_ps, _mm256_storeu_ps,
    };
    let whole = src.len() - src.len() % 8;
    let (mut n_low, mut n_high) = (0usize, 0usize);
    let mut nan_mask = 0;
    let (lo_cut, hi_cut) = (_mm256_set1_ps(below), _mm256_set1_ps(above));
    for c in (0..whole).step_by(8) {
        // SAFETY: `c + 8 ≤ whole ≤ src.len()`; the stores write eight values from a count at
        // most `c`, inside `low` and `high` (at least `src.len() + 8` long, checked by the
        // caller); the table index is an 8-bit mask.
        unsafe {
            let v = _mm256_loadu_ps(src.as_ptr().add(c));
            nan_mask |= _mm256_movemask_ps(_mm256_cmp_ps::<_CMP_UNORD_Q>(v, v));
            let m_low = _mm256_movemask_ps(_mm256_cmp_ps::<_CMP_LE_OQ>(v, lo_cut)) as usize;
            let m_high = _mm256_movemask_ps(_mm256_cmp_ps::<_CMP_GE_OQ>(v, hi_cut)) as usize;
            let pack = |m: usize| {
                let idx = _mm256_loadu_si256(LEFT_PACK_SINGLE[m].as_ptr().cast());
                _mm256_permutevar8x32_ps(v, idx)
            };
            _mm256_storeu_ps(low.as_mut_ptr().add(n_low), pack(m_low));
            n_low += m_low.count_ones() as usize;
            _mm256_storeu_ps(high.as_mut_ptr().add(n_high), pack(m_high));
            n_high += m_high.count_ones() as usize;
        }
    }
    gather_tails_single_plain(
        &src[whole..],
        (below, above),
        low,
        high,
        (n_low, n_high, nan_mask != 0),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gathered_single_tails_are_the_plain_loops() {
        // as `gathered_tails_are_the_plain_loops`, for single-precision values and lengths
        // around the runs of eight
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        let mut gathered = 0;
        for len in [0, 1, 7, 8, 9, 15, 16, 63, 64, 257, 2000] {
            for trial in 0..4 {
                let src: Vec<f32> = (0..len)
                    .map(|_| match rng.random_range(0..20) {
                        0 if trial == 3 => f32::NAN,
                        1 => 0.0,
                        2 => -0.0,
                        3 => -1.0,
                        4 => 1.0,
                        _ => rng.random_range(-3.0..3.0),
                    })
                    .collect();
                let cuts = (-1.0, 1.0);
                let mut want = (vec![0.0; len + 8], vec![0.0; len + 8]);
                let w =
                    gather_tails_single_plain(&src, cuts, &mut want.0, &mut want.1, (0, 0, false));
                let mut got = (vec![0.0; len + 8], vec![0.0; len + 8]);
                let g = gather_tails_single(&src, cuts, &mut got.0, &mut got.1);
                assert_eq!(g, w, "len {len} trial {trial}");
                let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&got.0[..g.0]), bits(&want.0[..w.0]), "low, len {len}");
                assert_eq!(bits(&got.1[..g.1]), bits(&want.1[..w.1]), "high, len {len}");
                gathered += g.0.min(g.1);
            }
        }
        assert!(
            gathered > 1000,
            "the cuts gathered almost nothing: {gathered}"
        );
    }
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn gemv_tr_is_nalgebras_bit_for_bit() {
        // invented matrices with every row count around the runs of eight (and zero rows)
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for rows in [0, 1, 5, 7, 8, 9, 16, 31, 32, 33] {
            for cols in [1, 3, 30] {
                let a = DMatrix::from_fn(rows, cols, |_, _| rng.random_range(-1.0..1.0) * 1e3);
                let x = DVector::from_fn(rows, |_, _| rng.random_range(-1.0..1.0));
                let mut want = DVector::from_element(cols, f64::NAN);
                want.gemv_tr(1.0, &a, &x, 0.0);
                let mut got = DVector::from_element(cols, f64::NAN);
                gemv_tr(&mut got, &a, &x);
                for j in 0..cols {
                    assert_eq!(
                        got[j].to_bits(),
                        want[j].to_bits(),
                        "{rows} x {cols}, column {j}"
                    );
                }
            }
        }
    }

    #[test]
    fn gathered_tails_are_the_plain_loops() {
        // invented draws with NaN, signed zeros, values exactly on a cut and every length
        // remainder: the dispatched gathering (AVX2 on such a machine) must give the plain
        // loop's counts, flag and values in order
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        let mut gathered = 0;
        for len in [0, 1, 3, 4, 5, 8, 63, 64, 257, 2000] {
            for trial in 0..4 {
                let src: Vec<f64> = (0..len)
                    .map(|_| match rng.random_range(0..20) {
                        0 if trial == 3 => f64::NAN,
                        1 => 0.0,
                        2 => -0.0,
                        3 => -1.0,
                        4 => 1.0,
                        _ => rng.random_range(-3.0..3.0),
                    })
                    .collect();
                let cuts = (-1.0, 1.0);
                for estimate in [None, Some(0.0), Some(0.25)] {
                    let mut want = (vec![0.0; len + 4], vec![0.0; len + 4]);
                    let w = gather_tails_plain(
                        &src,
                        estimate,
                        cuts,
                        &mut want.0,
                        &mut want.1,
                        (0, 0, false),
                    );
                    let mut got = (vec![0.0; len + 4], vec![0.0; len + 4]);
                    let g = gather_tails(&src, estimate, cuts, &mut got.0, &mut got.1);
                    assert_eq!(g, w, "len {len} trial {trial} {estimate:?}");
                    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                    assert_eq!(bits(&got.0[..g.0]), bits(&want.0[..w.0]), "low, len {len}");
                    assert_eq!(bits(&got.1[..g.1]), bits(&want.1[..w.1]), "high, len {len}");
                    gathered += g.0.min(g.1);
                }
            }
        }
        assert!(gathered > 1000, "both tails gathered values: {gathered}");
    }

    #[test]
    fn dots32_is_the_plain_dot_bit_for_bit() {
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        for &(rows, cols) in &[(32, 0), (32, 1), (32, 7), (45, 64), (288, 64), (70, 33)] {
            // values of very different sizes, so that the order of the additions shows
            let a: Vec<f64> = (0..rows * cols)
                .map(|_| rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8)))
                .collect();
            let x: Vec<f64> = (0..cols)
                .map(|_| rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8)))
                .collect();
            for k0 in 0..=rows - 32 {
                let got = dots32(&a, rows, k0, &x);
                for (b, g) in got.iter().enumerate() {
                    let row: Vec<f64> = (0..cols).map(|j| a[j * rows + k0 + b]).collect();
                    let plain: f64 = row.iter().zip(&x).map(|(p, q)| p * q).sum();
                    assert_eq!(g.to_bits(), plain.to_bits(), "{rows}x{cols} row {}", k0 + b);
                    assert_eq!(g.to_bits(), dot(&row, &x).to_bits());
                }
            }
        }
    }

    #[test]
    fn dot4_adds_in_four_interleaved_sums() {
        let mut rng = ChaCha8Rng::seed_from_u64(13);
        for n in [0, 1, 3, 4, 5, 64, 67] {
            let a: Vec<f64> = (0..n)
                .map(|_| rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8)))
                .collect();
            let b: Vec<f64> = (0..n + 2).map(|_| rng.random_range(-1.0..1.0)).collect();
            let mut s = [-0.0_f64; 4];
            for i in 0..n - n % 4 {
                s[i % 4] += a[i] * b[i];
            }
            for i in n - n % 4..n {
                s[0] += a[i] * b[i];
            }
            let expected = (s[0] + s[1]) + (s[2] + s[3]);
            assert_eq!(dot4(&a, &b).to_bits(), expected.to_bits(), "n = {n}");
            let plain: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum();
            assert!((dot4(&a, &b) - plain).abs() <= 1e-12 * a.iter().map(|x| x.abs()).sum::<f64>());
        }
    }

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

    #[test]
    fn lane_sums4_is_the_plain_loop_bit_for_bit() {
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        for r in [0, 1, 3, 4, 5, 8, 31, 33, 64] {
            let rows: Vec<Vec<f64>> = (0..4)
                .map(|_| {
                    (0..r)
                        .map(|_| rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8)))
                        .collect()
                })
                .collect();
            let v: Vec<f64> = (0..r + 2)
                .map(|_| rng.random_range(-1.0..1.0) * 10f64.powi(rng.random_range(-8..8)))
                .collect();
            let a = [&rows[0][..], &rows[1][..], &rows[2][..], &rows[3][..]];
            // the loop written out once more, one term at a time
            let mut expected = [[0.0f64; 4]; 4];
            for g in 0..4 {
                for i in 0..r {
                    let lane = if i < r - r % 4 { i % 4 } else { 0 };
                    expected[g][lane] += a[g][i] * v[i];
                }
            }
            let bits = |x: [[f64; 4]; 4]| x.map(|row| row.map(f64::to_bits));
            assert_eq!(bits(lane_sums4(a, &v)), bits(expected), "r = {r}");
            assert_eq!(bits(lane_sums4_body(a, &v)), bits(expected), "r = {r}");
        }
    }
}

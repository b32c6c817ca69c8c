//! Helpers shared by the unit tests (compiled only for them).

/// Invented values in [−0.5, 0.5) from Marsaglia's xorshift64 (shifts 13, 7, 17; Marsaglia
/// 2003, J. Stat. Softw. 8(14)) started at `seed` (not zero): the same sequence on every
/// machine, for tests that compare two computations bit for bit on many inputs.
pub(crate) fn uniform(seed: u64) -> impl FnMut() -> f64 {
    let mut x = seed;
    move || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }
}

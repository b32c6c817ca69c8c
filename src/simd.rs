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

//! Loops compiled a second time for wider vectors where the processor has them.
//!
//! The release build targets the x86-64 baseline, whose vectors hold two doubles. Most
//! processors since 2013 have AVX2, whose vectors hold four. [`wide`] runs a closure in code
//! compiled for AVX2 when the running processor has it, else as it is. No FMA is enabled, so every
//! operation rounds exactly as in the baseline build: the results are the same bits either way
//! (the tests compare both paths).

/// Runs `f`, compiled for AVX2 where the processor has it. For short, hot loops over cells or
/// faces; `f` is inlined into the AVX2 copy.
#[inline(always)]
pub fn wide<R>(f: impl FnOnce() -> R) -> R {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor has just been seen to support AVX2.
        return unsafe { avx2(f) };
    }
    f()
}

/// Whether [`wide`] takes the AVX2 copy on this processor (for the tests that compare both
/// paths).
#[cfg(test)]
pub fn is_wide() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx2")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// The AVX2 copy: `f` inlined into a function compiled with the feature.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn avx2<R>(f: impl FnOnce() -> R) -> R {
    f()
}

/// Runs `f` as the baseline build compiles it (for the tests that compare both paths).
#[cfg(test)]
pub fn narrow<R>(f: impl FnOnce() -> R) -> R {
    f()
}

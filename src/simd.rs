//! Runtime CPU dispatch. The wheel is built for the x86-64 baseline; where
//! the CPU has AVX2 and FMA, kernels run in a copy of the loop compiled with
//! those features, so `f64::mul_add` becomes one instruction instead of a
//! library call and LLVM may use 256-bit vectors. Both copies compute the
//! same operations in the same order (FMA is exactly rounded either way, and
//! no contraction of `a * b + c` is allowed), so results are bit-identical.

/// Whether the AVX2+FMA copy can run here (cached by std).
#[inline]
pub fn has_fma() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// Runs `f` in the fastest copy the CPU supports (`fast` from [`has_fma`]).
/// `f` is inlined into the feature-enabled function, so everything it
/// inlines is compiled for that target.
#[inline(always)]
pub fn dispatch<R>(fast: bool, f: impl FnOnce() -> R) -> R {
    #[cfg(target_arch = "x86_64")]
    {
        if fast {
            // SAFETY: `fast` is true only when the CPU has AVX2 and FMA.
            return unsafe { avx2_fma(f) };
        }
    }
    let _ = fast;
    f()
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn avx2_fma<R>(f: impl FnOnce() -> R) -> R {
    f()
}

/// Forces the baseline copy (for tests that compare the two paths).
pub fn baseline<R>(f: impl FnOnce() -> R) -> R {
    f()
}

//! Runtime CPU dispatch. The wheel is built for the x86-64 baseline; where
//! the CPU has AVX2 and FMA, kernels run in a copy of the loop compiled with
//! those features, so `f64::mul_add` becomes one instruction instead of a
//! library call and LLVM may use 256-bit vectors. Both copies compute the
//! same operations in the same order (FMA is exactly rounded either way, and
//! no contraction of `a * b + c` is allowed), so results are bit-identical.

/// The instruction-set tiers, best first.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Tier {
    /// AVX-512 (F, DQ, VL) with FMA: 8 doubles per register.
    Avx512,
    /// AVX2 with FMA: 4 doubles per register.
    Avx2,
    /// The x86-64 (SSE2) or other baseline. On aarch64 this is NEON with
    /// FMA (mandatory in ARMv8-A), so no runtime dispatch is needed there.
    Baseline,
}

/// The best tier this CPU runs (std caches the detection). The environment
/// variable `GYROKIT_SIMD` (`avx512`, `avx2`, `baseline`) caps it, so tests
/// can check that every tier gives identical results.
pub fn best_tier() -> Tier {
    static TIER: std::sync::OnceLock<Tier> = std::sync::OnceLock::new();
    *TIER.get_or_init(|| {
        let cap = match std::env::var("GYROKIT_SIMD").as_deref() {
            Ok("baseline") => Tier::Baseline,
            Ok("avx2") => Tier::Avx2,
            _ => Tier::Avx512,
        };
        let hw = detect();
        let rank = |t: Tier| match t {
            Tier::Avx512 => 2,
            Tier::Avx2 => 1,
            Tier::Baseline => 0,
        };
        if rank(cap) < rank(hw) {
            cap
        } else {
            hw
        }
    })
}

fn detect() -> Tier {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::is_x86_feature_detected as has;
        if has!("avx512f") && has!("avx512dq") && has!("avx512vl") && has!("avx2") && has!("fma") {
            return Tier::Avx512;
        }
        if has!("avx2") && has!("fma") {
            return Tier::Avx2;
        }
    }
    Tier::Baseline
}

/// Whether a vector tier is available (kept for callers that only ask
/// whether to leave the baseline).
#[inline]
pub fn has_fma() -> bool {
    best_tier() != Tier::Baseline
}

/// Runs `f` in the best copy the CPU supports. `f` is inlined into the
/// feature-enabled function, so everything it inlines is compiled for that
/// target.
#[inline(always)]
pub fn dispatch<R>(fast: bool, f: impl FnOnce() -> R) -> R {
    #[cfg(target_arch = "x86_64")]
    {
        if fast {
            match best_tier() {
                // SAFETY: the tier was detected on this CPU.
                Tier::Avx512 => return unsafe { avx512(f) },
                Tier::Avx2 => return unsafe { avx2_fma(f) },
                Tier::Baseline => {}
            }
        }
    }
    let _ = fast;
    f()
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f,avx512dq,avx512vl,avx2,fma")]
unsafe fn avx512<R>(f: impl FnOnce() -> R) -> R {
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

/// A hint to bring the cache line holding `p` into the caches ahead of a
/// load (for gathers from large arrays at random indices). Never changes a
/// result; a no-op where the architecture has no such instruction here.
#[inline(always)]
pub fn prefetch<T>(p: *const T) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: PREFETCHT0 is a hint: it never faults and has no architectural
    // effect, whatever the address (SSE, part of the x86-64 baseline).
    unsafe {
        std::arch::x86_64::_mm_prefetch(p as *const i8, std::arch::x86_64::_MM_HINT_T0)
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = p;
}

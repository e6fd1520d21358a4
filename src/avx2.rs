//! Hot loops compiled a second time for AVX2 and chosen at run time.
//!
//! [`twice_compiled!`] defines a function that runs its body through a copy compiled with
//! `#[target_feature(enable = "avx2")]` when the CPU has AVX2 (checked by
//! `is_x86_feature_detected!`, a cached flag), and through the baseline build otherwise.
//! Only AVX2 is enabled, never FMA, and the compiler does not reorder floating-point sums,
//! so both copies give the same bits: the wider registers only take independent sums four
//! at a time. A body written for this keeps its sums independent (several accumulators,
//! each adding in order), never a reduction that would need reassociating, and is marked
//! `#[inline(always)]` so each copy inlines it with its own instruction set.

/// `twice_compiled!(/// docs
/// fn name(a: A, b: B) -> R => body);` defines `name`, which calls `body(a, b)` compiled
/// for AVX2 where the CPU has it (see the module notes). `body` must be
/// `#[inline(always)]`.
macro_rules! twice_compiled {
    ($(#[$attr:meta])* $vis:vis fn $name:ident($($arg:ident: $ty:ty),* $(,)?) $(-> $ret:ty)? => $body:path;) => {
        $(#[$attr])*
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            #[cfg(target_arch = "x86_64")]
            {
                #[target_feature(enable = "avx2")]
                fn with_avx2($($arg: $ty),*) $(-> $ret)? {
                    $body($($arg),*)
                }
                if std::arch::is_x86_feature_detected!("avx2") {
                    // SAFETY: the CPU has AVX2, checked just above, the only feature the
                    // function is compiled for beyond the baseline.
                    return unsafe { with_avx2($($arg),*) };
                }
            }
            $body($($arg),*)
        }
    };
}

pub(crate) use twice_compiled;

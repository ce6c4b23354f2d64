//! Which vector instruction set the hot loops run in, chosen at run time: the fast
//! dedispersion kernel's plain loops, which the compiler vectorises, and the matched
//! filter's marking; kernels with only an AVX2 build ask [`Isa::cpu_has`] (the period
//! scan, which also needs FMA, detects both itself). Built once more for AVX-512 (32 sixteen-bit lanes instead of 16),
//! the kernel benchmark ran 5–10 % faster, median against median, on a 2-core Xeon
//! (docs/benchmarks.md, 2026-12-03; single runs overlap). Every choice gives the same
//! output, bit for bit: the loops work lane by lane, in the same order whatever the
//! vector width, and tests compare every set the CPU has.

/// A vector instruction set this CPU has. Only [`Isa::detect`] and
/// [`Isa::available`] make one, so holding an `Isa` proves that the CPU can run code
/// compiled for it (what every `unsafe` dispatch on it relies on).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Isa(IsaLevel);

/// The instruction sets, narrowest first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum IsaLevel {
    /// The build's baseline (SSE2 on x86-64).
    Portable,
    /// AVX2.
    Avx2,
    /// AVX-512 with byte/word (16-bit) and vector-length extensions.
    Avx512,
}

impl Isa {
    /// The widest instruction set this CPU has (detected once).
    pub(crate) fn detect() -> Isa {
        static WIDEST: std::sync::OnceLock<Isa> = std::sync::OnceLock::new();
        *WIDEST.get_or_init(|| {
            *Isa::available()
                .last()
                .expect("the portable level is always available")
        })
    }

    /// Every instruction set this CPU has, narrowest first (for tests comparing them).
    pub(crate) fn available() -> Vec<Isa> {
        let mut levels = vec![Isa(IsaLevel::Portable)];
        #[cfg(target_arch = "x86_64")]
        {
            use std::arch::is_x86_feature_detected as has;
            if has!("avx2") {
                levels.push(Isa(IsaLevel::Avx2));
                if has!("avx512f") && has!("avx512bw") && has!("avx512vl") {
                    levels.push(Isa(IsaLevel::Avx512));
                }
            }
        }
        levels
    }

    /// Whether the widest instruction set this CPU has includes `level` (AVX-512 CPUs
    /// have AVX2): for the kernels that only have an AVX2 build.
    pub(crate) fn cpu_has(level: IsaLevel) -> bool {
        Isa::detect().level() >= level
    }

    /// The instruction set's level, to dispatch on.
    pub(crate) fn level(self) -> IsaLevel {
        self.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn detection_picks_the_widest_available_level() {
        let all = Isa::available();
        assert_eq!(all[0].level(), IsaLevel::Portable);
        assert!(all.windows(2).all(|w| w[0].level() < w[1].level()));
        assert_eq!(Isa::detect(), *all.last().unwrap());
    }
}

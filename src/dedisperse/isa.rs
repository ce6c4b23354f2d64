//! Which vector instruction set the fast kernel's loops are compiled for, chosen at
//! run time. The loops are plain Rust that the compiler vectorises; compiling them
//! once more with AVX-512 (32 sixteen-bit lanes instead of 16) made the kernel
//! benchmark 5–10 % faster, median against median, on a 2-core Xeon
//! (docs/benchmarks.md, 2026-12-03; single runs overlap). Every choice
//! gives the same output, bit for bit: the loops add lane by lane along time, in the
//! same order whatever the vector width.

/// A vector instruction set this CPU has. Only [`Isa::detect`] and
/// [`Isa::available`] make one, so holding an `Isa` proves that the CPU can run code
/// compiled for it (what the kernel's `unsafe` dispatch relies on).
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
    /// The widest instruction set this CPU has.
    pub(crate) fn detect() -> Isa {
        *Isa::available()
            .last()
            .expect("the portable level is always available")
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

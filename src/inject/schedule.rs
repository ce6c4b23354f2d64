//! Placing injected bursts in time: no two bursts of one pass overlap (dispersion
//! sweep and pulse extent plus a guard), none touches a candidate the search already
//! finds in the untouched data, every burst lies wholly inside the file, and every
//! burst starts where the search looks for pulse starts (the last `max_delay`
//! samples of a file cannot be dedispersed at the highest trial DM, so the search
//! leaves them out of its exposure, `samples_searched`; completeness is measured
//! within that exposure, not across it). Bursts that do not fit go to a further pass.

use rand::Rng;
use rand_chacha::ChaCha8Rng;

use crate::error::{Error, Result};
use crate::obs::Header;
use crate::simulate::Burst;

/// Random positions tried in a pass before the burst moves on to the next pass.
const TRIES_PER_PASS: usize = 64;

/// A burst with its arrival time chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placed {
    /// Index of the burst in the drawn list.
    pub index: usize,
    /// The pass (search of the file) it is injected into.
    pub pass: usize,
    /// The burst, `t_inf_s` set.
    pub burst: Burst,
}

/// Chooses arrival times for `bursts` (their `t_inf_s` is ignored) and spreads them
/// over as few passes as the first-fit random placement needs.
///
/// `guard` samples are kept free on both sides of every burst's extent
/// ([`Burst::sample_span`]); `busy` are sample ranges `[first, end)` no burst may
/// touch; a burst's extent starts before sample `start_limit`.
///
/// # Errors
/// A burst whose sweep is longer than the file, or no free room in an empty pass.
pub fn place(
    bursts: &[Burst],
    header: &Header,
    guard: i64,
    busy: &[(i64, i64)],
    start_limit: i64,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<Placed>> {
    let mut passes: Vec<Vec<(i64, i64)>> = Vec::new();
    let mut placed = Vec::with_capacity(bursts.len());
    for (index, b) in bursts.iter().enumerate() {
        let (lo, hi) = arrival_room(b, header, start_limit).map_err(Error::Config)?;
        let free = |intervals: &[(i64, i64)], s: (i64, i64)| {
            intervals
                .iter()
                .chain(busy)
                .all(|&(f, g)| s.1 + guard <= f || s.0 >= g + guard)
        };
        let mut pass = 0;
        let found = loop {
            if pass == passes.len() {
                passes.push(Vec::new());
            }
            let hit = (0..TRIES_PER_PASS).find_map(|_| {
                let t_inf_s = rng.random_range(lo as f64..hi as f64) * header.tsamp_s;
                let burst = Burst { t_inf_s, ..*b };
                let span = burst.sample_span(header);
                free(&passes[pass], span).then_some((burst, span))
            });
            match hit {
                Some(h) => break h,
                None if passes[pass].is_empty() => {
                    return Err(Error::Config(format!(
                        "no room for a burst at DM {:.1}: the candidates of the untouched \
                         data leave too little of the file free",
                        b.dm
                    )));
                }
                None => pass += 1,
            }
        };
        passes[pass].push(found.1);
        placed.push(Placed {
            index,
            pass,
            burst: found.0,
        });
    }
    Ok(placed)
}

/// The range `[lo, hi)` of arrival times, in samples at infinite frequency, that keeps
/// `burst` (its `t_inf_s` ignored) wholly inside the file and starting before sample
/// `start_limit`; kept one sample inside so rounding cannot spill. Costs a few
/// arithmetic operations, so it can vet a burst before anything is computed from it.
///
/// # Errors
/// A one-line message when no such time exists: the sweep (plus the pulse) is longer
/// than the searched part of the file.
pub fn arrival_room(
    burst: &Burst,
    header: &Header,
    start_limit: i64,
) -> std::result::Result<(i64, i64), String> {
    let n = header.n_samples as i64;
    let at_zero = Burst {
        t_inf_s: 0.0,
        ..*burst
    };
    let (a, e) = at_zero.sample_span(header);
    let (lo, hi) = (
        1i64.saturating_sub(a),
        n.saturating_sub(e)
            .min(start_limit.saturating_sub(a))
            .saturating_sub(1),
    );
    if hi <= lo {
        return Err(format!(
            "a burst at DM {:.1} of width {:.3} ms spans {} samples with its sweep, \
             longer than the searched part of the file ({n} samples, pulse starts \
             searched before sample {start_limit})",
            burst.dm,
            burst.width_s * 1e3,
            e.saturating_sub(a)
        ));
    }
    Ok((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::Spectrum;
    use rand::SeedableRng;

    #[test]
    fn bursts_of_a_pass_never_overlap_and_stay_inside() {
        let header = crate::simulate::test_header(16, 20_000);
        let bursts: Vec<Burst> = (0..60)
            .map(|i| Burst {
                t_inf_s: 0.0,
                dm: 20.0 * (i % 5) as f64,
                width_s: 1e-3,
                scatter_1ghz_s: 0.0,
                spectrum: Spectrum::PowerLaw { index: 0.0 },
                amplitude: 1.0,
            })
            .collect();
        let busy = [(5000, 6000)];
        let guard = 50;
        let placed = place(
            &bursts,
            &header,
            guard,
            &busy,
            19_000,
            &mut ChaCha8Rng::seed_from_u64(9),
        )
        .unwrap();
        assert_eq!(placed.len(), 60);
        let n_pass = placed.iter().map(|p| p.pass).max().unwrap() + 1;
        assert!(n_pass >= 2, "60 bursts should not fit one 1.3-s pass");
        for p in 0..n_pass {
            let mut spans: Vec<_> = placed
                .iter()
                .filter(|x| x.pass == p)
                .map(|x| x.burst.sample_span(&header))
                .collect();
            spans.sort();
            for s in &spans {
                assert!(s.0 >= 0 && s.1 <= 20_000 && s.0 < 19_000, "{s:?}");
                assert!(
                    s.1 + guard <= 5000 || s.0 >= 6000 + guard,
                    "{s:?} touches busy"
                );
            }
            for w in spans.windows(2) {
                assert!(w[0].1 + guard <= w[1].0, "{w:?} overlap");
            }
        }
    }

    #[test]
    fn a_sweep_longer_than_the_file_is_refused() {
        let header = crate::simulate::test_header(16, 1000);
        let b = Burst {
            t_inf_s: 0.0,
            dm: 2000.0,
            width_s: 1e-3,
            scatter_1ghz_s: 0.0,
            spectrum: Spectrum::PowerLaw { index: 0.0 },
            amplitude: 1.0,
        };
        let e = place(
            &[b],
            &header,
            0,
            &[],
            1000,
            &mut ChaCha8Rng::seed_from_u64(1),
        )
        .unwrap_err();
        assert!(
            e.to_string().contains("longer than the searched part"),
            "{e}"
        );
    }
}

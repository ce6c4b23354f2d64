//! Dropped data: rows a recorder filled with zeros where samples were lost (missed
//! packets, a stalled disk). Such a row holds no noise and, in unsigned or offset
//! data, lies far below every channel's level: left in, it drags the running
//! baseline and the robust σ down (a stretch longer than half a block makes the MAD
//! zero) and its edges look like bright broadband pulses at every DM. The search
//! sets these rows aside: channel statistics and normalisation see only the other
//! rows, and the dropped rows hold seeded unit noise after normalisation
//! (`search::channels`), counted as masked. Recognising lost data by zero fill is
//! common practice.

use std::ops::Range;

use ndarray::{ArrayView1, ArrayView2};
use rayon::prelude::*;

use crate::obs::Sample;

/// Fewest channels a zero run needs to count as dropped data: in real low-bit data
/// shorter runs of exact zeros are too likely (for 1-bit samples 2⁻ⁿ of the runs of
/// n channels are zero; 1.5 × 10⁻⁵ at 16).
pub const MIN_CHANNELS: usize = 16;

/// Zero runs that noise alone may make per read, at most: the run length is chosen
/// so that a read of independent samples, each zero as often as in the read, holds
/// fewer than this many by chance.
const CHANCE_RUNS_PER_READ: f64 = 1e-3;

/// Dropped data: rows `rows` of channels `chans` (indices into a read) are exactly
/// zero. Channels in `chans` that were masked may hold anything.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Dropout {
    /// Rows of the read.
    pub rows: Range<usize>,
    /// Channels, from the first to one past the last of the zero run.
    pub chans: Range<usize>,
}

/// The dropped data of `raw` (`[time, channel]`): in each row, the runs of
/// consecutive channels not in `mask` that are all exactly zero and long enough
/// that noise would not make them (at least [`MIN_CHANNELS`], longer when zeros are
/// common in the read, but never more than every such channel, so a whole row of
/// zeros always counts), merged over consecutive rows. Lost packets of one part of
/// the band thus show as a rectangle, and of the whole band as whole rows. A
/// channel that is zero throughout the read is a dead channel, not lost data: it is
/// left to the channel flagging (it is constant) and never part of a run.
pub fn dropouts<T: Sample>(raw: ArrayView2<'_, T>, mask: &[bool]) -> Vec<Dropout> {
    let (n_rows, n_chan) = raw.dim();
    let dead: Vec<bool> = (0..n_chan)
        .map(|c| mask[c] || raw.column(c).iter().all(|&v| is_zero(v)))
        .collect();
    let live: Vec<usize> = (0..n_chan).filter(|&c| !dead[c]).collect();
    if live.len() < MIN_CHANNELS || n_rows == 0 {
        return Vec::new();
    }
    // A run of at least MIN_CHANNELS live channels holds one whose place among them
    // is a multiple of MIN_CHANNELS: only rows with a zero there can hold a run, so
    // most reads are cleared by a look at one sample in MIN_CHANNELS.
    let probes: Vec<usize> = live.iter().copied().step_by(MIN_CHANNELS).collect();
    // The probes touch every cache line of the read (0.8 % of the CPU time of a
    // reference-survey search, profiled), so they run on every core.
    let suspects: Vec<usize> = (0..n_rows)
        .into_par_iter()
        .filter(|&t| probes.iter().any(|&c| is_zero(raw[[t, c]])))
        .collect();
    if suspects.is_empty() {
        return Vec::new();
    }
    let zeros: usize = (0..n_rows)
        .into_par_iter()
        .map(|t| live.iter().filter(|&&c| is_zero(raw[[t, c]])).count())
        .sum();
    let cells = n_rows * live.len();
    let min_run = min_run(zeros as f64 / cells as f64, cells).clamp(MIN_CHANNELS, live.len());
    let runs: Vec<(usize, Vec<Range<usize>>)> = suspects
        .into_par_iter()
        .map(|t| (t, zero_runs(raw.row(t), &live, min_run)))
        .collect();
    let mut found: Vec<Dropout> = Vec::new();
    // Rectangles that reached the row before.
    let mut open: Vec<usize> = Vec::new();
    for (t, row_runs) in runs {
        let mut still_open = Vec::new();
        for chans in row_runs {
            let extends = open
                .iter()
                .copied()
                .find(|&k| found[k].chans == chans && found[k].rows.end == t);
            match extends {
                Some(k) => {
                    found[k].rows.end = t + 1;
                    still_open.push(k);
                }
                None => {
                    still_open.push(found.len());
                    found.push(Dropout {
                        rows: t..t + 1,
                        chans,
                    });
                }
            }
        }
        open = still_open;
    }
    found
}

/// The runs of at least `min_run` consecutive `live` channels that are exactly zero
/// in `row`, as channel ranges from the run's first to one past its last channel.
fn zero_runs<T: Sample>(
    row: ArrayView1<'_, T>,
    live: &[usize],
    min_run: usize,
) -> Vec<Range<usize>> {
    let mut runs = Vec::new();
    let mut first = 0;
    for (i, &c) in live.iter().enumerate() {
        if !is_zero(row[c]) {
            first = i + 1;
        } else if i + 1 == live.len() || !is_zero(row[live[i + 1]]) {
            // The run first..=i ends here.
            if i + 1 - first >= min_run {
                runs.push(live[first]..c + 1);
            }
        }
    }
    runs
}

/// Whether a sample is exactly zero, the fill of lost data.
fn is_zero<T: Sample>(v: T) -> bool {
    v.into() == 0.0
}

/// Shortest zero run that `cells` independent samples, each zero with probability
/// `p_zero`, make fewer than [`CHANCE_RUNS_PER_READ`] times (about `cells` starts,
/// each beginning a run of `n` with probability `p_zero`ⁿ).
fn min_run(p_zero: f64, cells: usize) -> usize {
    if p_zero >= 1.0 {
        return usize::MAX;
    }
    let n = (CHANCE_RUNS_PER_READ / cells as f64).ln() / p_zero.ln();
    n.ceil().max(1.0) as usize
}

/// The rows of a read of `n_rows` rows in no dropout, ascending.
pub fn untouched_rows(dropouts: &[Dropout], n_rows: usize) -> Vec<usize> {
    let mut touched = vec![false; n_rows];
    for d in dropouts {
        touched[d.rows.clone()].fill(true);
    }
    (0..n_rows).filter(|&t| !touched[t]).collect()
}

/// The rows of channel `chan` in no dropout, ascending; `None` when none of its
/// rows is in one.
pub fn live_rows(dropouts: &[Dropout], chan: usize, n_rows: usize) -> Option<Vec<usize>> {
    let covering: Vec<&Dropout> = dropouts
        .iter()
        .filter(|d| d.chans.contains(&chan))
        .collect();
    if covering.is_empty() {
        return None;
    }
    Some(
        (0..n_rows)
            .filter(|t| covering.iter().all(|d| !d.rows.contains(t)))
            .collect(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn whole_rows_of_zeros_in_every_unmasked_channel_are_dropped() {
        let n_chan = MIN_CHANNELS + 1;
        let mut raw = Array2::from_elem((6, n_chan), 96.0f32);
        raw.row_mut(1).fill(0.0);
        raw.row_mut(2).fill(0.0);
        raw[[2, 5]] = 1.0; // one channel holds data: runs of 5 and 11, too short
        raw.row_mut(4).fill(0.0);
        raw[[4, 0]] = 7.0; // only a masked channel holds data
        let mut mask = vec![false; n_chan];
        mask[0] = true;
        let all = 1..n_chan;
        assert_eq!(
            dropouts(raw.view(), &mask),
            vec![
                Dropout {
                    rows: 1..2,
                    chans: all.clone()
                },
                Dropout {
                    rows: 4..5,
                    chans: all
                }
            ]
        );
        assert_eq!(
            untouched_rows(&dropouts(raw.view(), &mask), 6),
            vec![0, 2, 3, 5]
        );
        // Too few channels to tell lost data from low-bit samples.
        mask[1] = true;
        assert!(dropouts(raw.view(), &mask).is_empty());
    }

    #[test]
    fn a_zero_filled_sub_band_is_one_rectangle_and_dead_channels_are_not_data() {
        let n_chan = 64;
        let mut raw = Array2::from_shape_fn((100, n_chan), |(t, c)| (1 + (t + c) % 5) as f32);
        for t in 30..70 {
            raw.row_mut(t).slice_mut(ndarray::s![16..48]).fill(0.0);
        }
        raw.column_mut(40).fill(0.0); // dead throughout: not part of a run
        let mask = vec![false; n_chan];
        let found = dropouts(raw.view(), &mask);
        assert_eq!(
            found,
            vec![Dropout {
                rows: 30..70,
                chans: 16..48
            }]
        );
        assert_eq!(live_rows(&found, 5, 100), None);
        let live = live_rows(&found, 20, 100).unwrap();
        assert_eq!(live.len(), 60);
        assert!(!live.contains(&30) && live.contains(&70));
        // Ten zero channels are too short a run to be lost data.
        let mut short = Array2::from_elem((50, n_chan), 3.0f32);
        short.row_mut(10).slice_mut(ndarray::s![0..10]).fill(0.0);
        assert!(dropouts(short.view(), &mask).is_empty());
    }

    #[test]
    fn zero_runs_span_masked_channels_and_reach_the_band_edges() {
        let row = ndarray::arr1(&[0.0f32, 0.0, 5.0, 0.0, 9.0, 0.0, 0.0, 0.0]);
        // Channel 4 is masked: the run 3..8 passes over it.
        let live = [0, 1, 2, 3, 5, 6, 7];
        assert_eq!(zero_runs(row.view(), &live, 2), vec![0..2, 3..8]);
        assert_eq!(zero_runs(row.view(), &live, 4), vec![3..8]);
        assert!(zero_runs(row.view(), &live, 5).is_empty());
    }

    // The probes (one live channel in MIN_CHANNELS) against a plain scan of every
    // channel of every row: seeded reads with zero rectangles of random size (many
    // too short to count), a masked and a dead channel, must mark the same cells.
    #[test]
    fn probed_scan_marks_what_a_plain_scan_of_every_row_marks() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        for _ in 0..40 {
            let n_chan = rng.random_range(MIN_CHANNELS..100);
            let n_rows = rng.random_range(1..300);
            let mut raw =
                Array2::from_shape_fn((n_rows, n_chan), |_| f32::from(rng.random_range(1u8..=9)));
            for _ in 0..rng.random_range(0..6) {
                let (c0, t0) = (rng.random_range(0..n_chan), rng.random_range(0..n_rows));
                let c1 = rng.random_range(c0..=n_chan);
                let t1 = rng.random_range(t0..=n_rows.min(t0 + 40));
                raw.slice_mut(ndarray::s![t0..t1, c0..c1]).fill(0.0);
            }
            let mut mask = vec![false; n_chan];
            mask[rng.random_range(0..n_chan)] = true;
            raw.column_mut(rng.random_range(0..n_chan)).fill(0.0);
            let mut found = Array2::from_elem((n_rows, n_chan), false);
            for d in dropouts(raw.view(), &mask) {
                found.slice_mut(ndarray::s![d.rows, d.chans]).fill(true);
            }
            // Plain: every row, every channel, the same run length rule.
            let live: Vec<usize> = (0..n_chan)
                .filter(|&c| !mask[c] && raw.column(c).iter().any(|&v| v != 0.0))
                .collect();
            let mut expected = Array2::from_elem((n_rows, n_chan), false);
            if live.len() >= MIN_CHANNELS {
                let zeros = live
                    .iter()
                    .map(|&c| raw.column(c).iter().filter(|&&v| v == 0.0).count())
                    .sum::<usize>();
                let cells = n_rows * live.len();
                let min_run =
                    min_run(zeros as f64 / cells as f64, cells).clamp(MIN_CHANNELS, live.len());
                for t in 0..n_rows {
                    let mut run: Vec<usize> = Vec::new();
                    for &c in live.iter().chain([&usize::MAX]) {
                        if c != usize::MAX && raw[[t, c]] == 0.0 {
                            run.push(c);
                            continue;
                        }
                        if run.len() >= min_run {
                            let span = run[0]..run[run.len() - 1] + 1;
                            expected.slice_mut(ndarray::s![t, span]).fill(true);
                        }
                        run.clear();
                    }
                }
            }
            // Masked and dead channels inside a run may be covered or not.
            let free: Vec<usize> = (0..n_chan).filter(|c| !live.contains(c)).collect();
            for &c in &free {
                found.column_mut(c).fill(false);
                expected.column_mut(c).fill(false);
            }
            assert_eq!(found, expected);
        }
    }

    // With half the samples zero (1-bit data), runs of 16 zeros happen by chance
    // (2⁻¹⁶ per start): the run needed grows to log₂(cells / 10⁻³) ≈ 26.6 → 27 for
    // a read of 10⁵ cells, and a noise read of that kind yields no dropout.
    #[test]
    fn common_zeros_need_longer_runs() {
        assert_eq!(min_run(0.5, 100_000), 27);
        assert_eq!(min_run(1e-3, 100_000), 3);
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let raw = Array2::from_shape_fn((4_000, 64), |_| f32::from(rng.random::<bool>()));
        assert!(dropouts(raw.view(), &[false; 64]).is_empty());
    }
}

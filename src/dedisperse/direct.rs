//! The bottom levels of a sub-band's merge tree, computed in one pass straight from
//! the channels.
//!
//! Level by level, each merge reads two rows and writes one, and a level of a tile
//! (a few hundred rows of a few thousand samples) overflows L2, so each level costs
//! memory traffic more than arithmetic. A row of level
//! [`DIRECT_DEPTH`] sums the [`DIRECT_TAPS`] channels of its node, each at its path's
//! delay; those channels' rows of a tile fit in L1, so summing them directly costs
//! more adds (the levels below no longer share partial sums) but writes only the one
//! level. The sums are exact integer adds, so the rows are the same as the tree's.

use super::tree::StepTree;

/// Tree levels replaced by the direct sums; 2³ = 8 channels per row. On the reference
/// survey depth 2 was no faster and depth 4 (16 channel rows, beyond L1) slower
/// (docs/benchmarks.md).
pub(crate) const DIRECT_DEPTH: usize = 3;
/// Channels summed per direct row.
pub(crate) const DIRECT_TAPS: usize = 1 << DIRECT_DEPTH;

/// The rows of one tree level as sums of channel rows.
#[derive(Debug, Clone, Default)]
pub(crate) struct DirectLevel {
    /// Tree levels this level replaces (0: none, the tree starts from the channels).
    pub depth: usize,
    /// Per row, [`DIRECT_TAPS`] (channel row, delay) pairs; a node with fewer channels
    /// is padded with row `n_chan` (one past the channels, all zeros) at delay 0.
    pub taps: Vec<[(usize, usize); DIRECT_TAPS]>,
    /// Per row, samples needed beyond the tile (the tree row's reach) and its largest
    /// delay.
    pub reach: Vec<usize>,
    pub max_delay: Vec<usize>,
    /// Additions per sample over all rows (padding taps add nothing).
    pub adds: usize,
}

impl DirectLevel {
    /// The direct level for `tree` over `n_chan` channels: as deep as
    /// [`DIRECT_DEPTH`], but below the tree's top level (which is stored, not kept).
    pub(crate) fn new(tree: &StepTree, n_chan: usize) -> Self {
        let depth = DIRECT_DEPTH.min(tree.levels.len().saturating_sub(1));
        if depth == 0 {
            return DirectLevel::default();
        }
        let paths = tree.taps(depth);
        let adds = paths.iter().map(|row| row.len() - 1).sum();
        let taps: Vec<[(usize, usize); DIRECT_TAPS]> = paths
            .into_iter()
            .map(|row| {
                let mut padded = [(n_chan, 0); DIRECT_TAPS];
                padded[..row.len()].copy_from_slice(&row);
                padded
            })
            .collect();
        DirectLevel {
            depth,
            reach: tree.levels[depth - 1].iter().map(|m| m.reach).collect(),
            max_delay: taps
                .iter()
                .map(|row| row.iter().map(|&(_, d)| d).max().unwrap_or(0))
                .collect(),
            taps,
            adds,
        }
    }
}

/// `out[t] = Σ_j rows[j][t]`, all slices `out.len()` long; saturating like the tree's
/// merges (only infinite input reaches the limits).
#[inline(always)]
pub(crate) fn sum_taps(out: &mut [i16], rows: &[&[i16]; DIRECT_TAPS]) {
    let n = out.len();
    let rows: [&[i16]; DIRECT_TAPS] = std::array::from_fn(|j| &rows[j][..n]);
    for (t, o) in out.iter_mut().enumerate() {
        let mut sum = rows[0][t];
        for row in &rows[1..] {
            sum = sum.saturating_add(row[t]);
        }
        *o = sum;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::delay_between_s;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// The rows of the tree's level `depth`, merged level by level as the tree does.
    fn merged_levels(tree: &StepTree, channels: &[Vec<i16>], depth: usize) -> Vec<Vec<i16>> {
        let mut rows = channels.to_vec();
        for level in &tree.levels[..depth] {
            rows = level
                .iter()
                .map(|m| {
                    let n = match m.lower {
                        Some(l) => rows[m.upper].len().min(rows[l].len() - m.shift),
                        None => rows[m.upper].len(),
                    };
                    (0..n)
                        .map(|t| match m.lower {
                            Some(l) => rows[m.upper][t].saturating_add(rows[l][t + m.shift]),
                            None => rows[m.upper][t],
                        })
                        .collect()
                })
                .collect();
        }
        rows
    }

    // Direct sums equal the tree's merged rows on random channels, for sub-bands of
    // 1 to 64 channels (odd counts pass nodes through and pad the taps with zeros).
    #[test]
    fn direct_rows_equal_the_trees_merged_rows() {
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        for n_chan in [1, 2, 3, 5, 8, 13, 64] {
            let freqs: Vec<f64> = (0..n_chan).map(|i| 1500.0 - 0.39 * i as f64).collect();
            let dms: Vec<f64> = (0..40).map(|i| 20.0 * i as f64).collect();
            let tsamp_s = 64e-6;
            let top_offsets = vec![0.0; dms.len()];
            let span = delay_between_s(dms[39], freqs[n_chan - 1], freqs[0]) / tsamp_s;
            let tree = StepTree::new(&freqs, &dms, &top_offsets, tsamp_s, 1, span as usize + 2);
            let direct = DirectLevel::new(&tree, n_chan);
            assert_eq!(
                direct.depth,
                DIRECT_DEPTH.min(tree.levels.len().saturating_sub(1))
            );
            if direct.depth == 0 {
                continue;
            }
            let width = 300;
            let mut channels: Vec<Vec<i16>> = (0..n_chan)
                .map(|_| (0..width).map(|_| rng.random_range(-500..500)).collect())
                .collect();
            let want = merged_levels(&tree, &channels, direct.depth);
            channels.push(vec![0; width]);
            assert_eq!(want.len(), direct.taps.len());
            let mut adds = 0;
            for (r, taps) in direct.taps.iter().enumerate() {
                // The direct row reaches at least as far as the merged one.
                let n = want[r].len();
                assert!(width - direct.max_delay[r] >= n);
                let inputs = taps.map(|(c, d)| &channels[c][d..][..n]);
                let mut got = vec![0i16; n];
                sum_taps(&mut got, &inputs);
                assert_eq!(got[..], want[r][..n], "{n_chan} channels, row {r}");
                adds += taps.iter().filter(|&&(c, _)| c < n_chan).count() - 1;
            }
            assert_eq!(direct.adds, adds);
            assert_eq!(
                direct.reach,
                tree.levels[direct.depth - 1]
                    .iter()
                    .map(|m| m.reach)
                    .collect::<Vec<_>>()
            );
        }
    }
}

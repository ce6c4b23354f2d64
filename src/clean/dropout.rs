//! Dropped data: rows a recorder filled with zeros where samples were lost (missed
//! packets, a stalled disk). Such a row holds no noise and, in unsigned or offset
//! data, lies far below every channel's level: left in, it drags the running
//! baseline and the robust σ down (a stretch longer than half a block makes the MAD
//! zero) and its edges look like bright broadband pulses at every DM. The search
//! sets these rows aside: channel statistics and normalisation see only the other
//! rows, and the dropped rows hold seeded unit noise after normalisation
//! (`search::channels`), counted as masked. Recognising lost data by zero fill is
//! common practice.

use ndarray::ArrayView2;

/// Unmasked channels a row needs before "all exactly zero" means dropped data: with
/// fewer, an all-zero row is too likely in real low-bit data (for 1-bit samples
/// 2⁻ⁿ of the rows of n channels are all zero; 1.5 × 10⁻⁵ at 16).
pub const MIN_CHANNELS: usize = 16;

/// Indices of the rows of `raw` (`[time, channel]`) in which every channel not in
/// `mask` holds exactly zero; none if fewer than [`MIN_CHANNELS`] are unmasked.
pub fn dropped_rows(raw: ArrayView2<'_, f32>, mask: &[bool]) -> Vec<usize> {
    let unmasked: Vec<usize> = (0..mask.len()).filter(|&c| !mask[c]).collect();
    if unmasked.len() < MIN_CHANNELS {
        return Vec::new();
    }
    raw.rows()
        .into_iter()
        .enumerate()
        .filter(|(_, row)| unmasked.iter().all(|&c| row[c] == 0.0))
        .map(|(t, _)| t)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn only_rows_zero_in_every_unmasked_channel_are_dropped() {
        let n_chan = MIN_CHANNELS + 1;
        let mut raw = Array2::from_elem((6, n_chan), 96.0f32);
        raw.row_mut(1).fill(0.0);
        raw.row_mut(2).fill(0.0);
        raw[[2, 5]] = 1.0; // one channel holds data: not dropped
        raw.row_mut(4).fill(0.0);
        raw[[4, 0]] = 7.0; // only a masked channel holds data
        let mut mask = vec![false; n_chan];
        mask[0] = true;
        assert_eq!(dropped_rows(raw.view(), &mask), vec![1, 4]);
        // Too few channels to tell lost data from low-bit samples.
        mask[1] = true;
        assert!(dropped_rows(raw.view(), &mask).is_empty());
    }
}

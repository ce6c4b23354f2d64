//! The zero-DM filter (Eatough, Keane & Lyne 2009, MNRAS 395, 410): subtract the band
//! average of every time sample, removing anything that arrives at all frequencies at
//! once. A dispersed pulse loses only about W/(T_sweep + W) of its peak.

use ndarray::ArrayViewMut2;

/// Subtracts, at every time sample, the mean over unmasked channels from each unmasked
/// channel of `data` (`[channel, time]`). Masked channels stay as they are.
pub fn apply(mut data: ArrayViewMut2<'_, f32>, mask: &[bool]) {
    let n_used = mask.iter().filter(|&&m| !m).count();
    if n_used == 0 {
        return;
    }
    let n_time = data.ncols();
    let mut mean = vec![0.0f64; n_time];
    for (row, _) in data.rows().into_iter().zip(mask).filter(|(_, m)| !**m) {
        for (acc, &v) in mean.iter_mut().zip(row.iter()) {
            *acc += f64::from(v);
        }
    }
    let mean: Vec<f32> = mean.iter().map(|s| (s / n_used as f64) as f32).collect();
    for (mut row, _) in data.rows_mut().into_iter().zip(mask).filter(|(_, m)| !**m) {
        for (v, &m) in row.iter_mut().zip(&mean) {
            *v -= m;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    // The defining property (Eatough, Keane & Lyne 2009): a DM-0 pulse, identical in
    // every channel, vanishes; the output equals that of the noise alone.
    #[test]
    fn dm0_pulse_vanishes_exactly() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let noise = Array2::from_shape_fn((13, 200), |_| StandardNormal.sample(&mut rng));
        let mut with_pulse = noise.clone();
        for mut row in with_pulse.rows_mut() {
            for t in 90..94 {
                row[t] += 64.0; // exact in f32, so the sums below round identically
            }
        }
        let mask: Vec<bool> = (0..13).map(|c| c == 4).collect();
        let mut clean_noise = noise.clone();
        apply(clean_noise.view_mut(), &mask);
        apply(with_pulse.view_mut(), &mask);
        for c in (0..13).filter(|&c| c != 4) {
            for t in 0..200 {
                let d = (with_pulse[[c, t]] - clean_noise[[c, t]]).abs();
                assert!(d < 1e-5, "c={c} t={t} residual {d}");
            }
        }
        assert_eq!(
            with_pulse[[4, 91]],
            noise[[4, 91]] + 64.0,
            "masked channel untouched"
        );
    }

    // Retained fraction of a dispersed pulse, 1 − W/(T_sweep + W) to first order
    // (approximation derived from Eatough, Keane & Lyne 2009): a 1-sample pulse swept
    // across 64 channels over 63 samples keeps 1 − 1/64 of its peak.
    #[test]
    fn dispersed_pulse_mostly_survives() {
        let mut d = Array2::<f32>::zeros((64, 100));
        for c in 0..64 {
            d[[c, 10 + c]] = 1.0;
        }
        apply(d.view_mut(), &[false; 64]);
        let summed: f32 = (0..64).map(|c| d[[c, 10 + c]]).sum();
        assert!(
            (summed / 64.0 - (1.0 - 1.0 / 64.0)).abs() < 1e-6,
            "{summed}"
        );
    }
}

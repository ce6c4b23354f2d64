//! Clipping of strong broadband impulses: time samples whose band sum is far above
//! the noise are zeroed in every channel. Runs on normalised data (zero mean, unit
//! variance per channel), so zero is the baseline (common practice).

use ndarray::ArrayViewMut2;

use crate::robust::median_sigma;

/// Zeroes every time sample of `data` (`[channel, time]`, normalised) whose sum over
/// unmasked channels exceeds `threshold` robust σ of all such sums. Returns the number
/// of samples zeroed; `threshold == 0` disables clipping.
pub fn clip(mut data: ArrayViewMut2<'_, f32>, mask: &[bool], threshold: f64) -> usize {
    if threshold == 0.0 {
        return 0;
    }
    let n_time = data.ncols();
    let sums = super::band_sum(data.view(), mask);
    let (med, sigma) = median_sigma(&sums, 1, &mut Vec::new());
    if sigma.is_nan() || sigma <= 0.0 {
        return 0;
    }
    let hot: Vec<usize> = (0..n_time)
        .filter(|&t| f64::from((sums[t] - med) / sigma) > threshold)
        .collect();
    for mut row in data.rows_mut() {
        for &t in &hot {
            row[t] = 0.0;
        }
    }
    hot.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    #[test]
    fn zeroes_a_strong_impulse_and_nothing_else() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut d = Array2::from_shape_fn((32, 5000), |_| StandardNormal.sample(&mut rng));
        for c in 0..32 {
            d[[c, 1234]] += 5.0; // band sum S/N ≈ 5·32/√32 ≈ 28
        }
        let n = clip(d.view_mut(), &[false; 32], 6.0);
        assert_eq!(
            n, 1,
            "Gaussian noise exceeds 6σ with probability 1e-9 per sample"
        );
        assert!(d.column(1234).iter().all(|&v| v == 0.0));
        assert_eq!(clip(d.view_mut(), &[false; 32], 0.0), 0);
    }
}

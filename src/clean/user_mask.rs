//! Channels masked before any statistics: zero header weights and user frequency ranges.

/// The static mask of an observation: `true` where the channel weight is 0 or the
/// channel centre (MHz) lies in one of `ranges_mhz` (inclusive).
pub fn static_mask(freqs_mhz: &[f64], weights: &[f32], ranges_mhz: &[[f64; 2]]) -> Vec<bool> {
    freqs_mhz
        .iter()
        .zip(weights)
        .map(|(&f, &w)| w == 0.0 || ranges_mhz.iter().any(|r| f >= r[0] && f <= r[1]))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn masks_ranges_and_zero_weights() {
        let freqs: Vec<f64> = (0..8).map(|i| 1575.0 - 50.0 * i as f64).collect();
        let mut weights = vec![1.0; 8];
        weights[0] = 0.0;
        let m = static_mask(&freqs, &weights, &[[1300.0, 1400.0]]);
        assert_eq!(
            m,
            vec![true, false, false, false, true, true, false, false],
            "1575 weight 0; 1375 and 1325 inside the range"
        );
    }
}

//! Lomb–Scargle periodogram with a floating mean and weights (the generalised form of
//! Zechmeister & Kürster 2009, A&A 496, 577; see VanderPlas 2018, ApJS 236, 16), in
//! the "standard" normalisation (fraction of weighted variance explained), and the
//! false-alarm probability of its highest peak after Baluev (2008, MNRAS 385, 1279).

use std::f64::consts::PI;

use statrs::function::gamma::ln_gamma;

use super::coherence::fap_with_upcrossings;

/// Power at each of `freqs` for samples `y` ± `dy` at times `t` (frequency in inverse
/// time units of `t`). Powers lie in [0, 1]; a degenerate frequency gives 0.
///
/// # Panics
/// If the three slices differ in length (a caller bug).
pub fn lomb_scargle(t: &[f64], y: &[f64], dy: &[f64], freqs: &[f64]) -> Vec<f64> {
    assert!(
        t.len() == y.len() && y.len() == dy.len(),
        "t, y, dy lengths differ"
    );
    let w_raw: Vec<f64> = dy.iter().map(|d| 1.0 / (d * d)).collect();
    let w_sum: f64 = w_raw.iter().sum();
    let w: Vec<f64> = w_raw.iter().map(|x| x / w_sum).collect();
    let ybar: f64 = w.iter().zip(y).map(|(w, y)| w * y).sum();
    let yy: f64 = w.iter().zip(y).map(|(w, y)| w * (y - ybar).powi(2)).sum();
    freqs
        .iter()
        .map(|&f| {
            let (mut c, mut s, mut yc, mut ys, mut cc, mut ss, mut cs) =
                (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
            for i in 0..t.len() {
                let (sn, cn) = (2.0 * PI * f * t[i]).sin_cos();
                let yi = y[i] - ybar;
                c += w[i] * cn;
                s += w[i] * sn;
                yc += w[i] * yi * cn;
                ys += w[i] * yi * sn;
                cc += w[i] * cn * cn;
                ss += w[i] * sn * sn;
                cs += w[i] * cn * sn;
            }
            // Centred moments (yi already has the weighted mean removed).
            let cc = cc - c * c;
            let ss = ss - s * s;
            let cs = cs - c * s;
            let d = cc * ss - cs * cs;
            if d <= 0.0 || yy <= 0.0 {
                return 0.0;
            }
            (ss * yc * yc + cc * ys * ys - 2.0 * cs * yc * ys) / (yy * d)
        })
        .collect()
}

/// Weighted variance of the times with weights 1/dy².
fn weighted_var(t: &[f64], dy: &[f64]) -> f64 {
    let w: Vec<f64> = dy.iter().map(|d| 1.0 / (d * d)).collect();
    let ws: f64 = w.iter().sum();
    let mean: f64 = w.iter().zip(t).map(|(w, t)| w * t).sum::<f64>() / ws;
    let mean2: f64 = w.iter().zip(t).map(|(w, t)| w * t * t).sum::<f64>() / ws;
    mean2 - mean * mean
}

/// γ(n) = √(2/n)·Γ(n/2)/Γ((n−1)/2) (Baluev 2008), about 1 − 0.75/n.
fn baluev_gamma(n: f64) -> f64 {
    (2.0 / n).sqrt() * (ln_gamma(n / 2.0) - ln_gamma((n - 1.0) / 2.0)).exp()
}

/// Single-frequency chance probability of power ≥ `z` for `n` points, standard
/// normalisation: (1 − z)^((n−3)/2) (Baluev 2008, Table 1).
pub fn fap_single(z: f64, n: usize) -> f64 {
    (1.0 - z.clamp(0.0, 1.0)).powf(0.5 * (n as f64 - 3.0))
}

/// False-alarm probability of the highest peak `z` of a periodogram searched up to
/// `f_max`: 1 − (1 − p₁)·e^{−τ}, τ = γ(N−1)·W·(1−z)^{(N−4)/2}·√((N−1)z/2),
/// W = f_max·√(4π·Var(t)) (Baluev 2008, eq. 6; weighted variance with 1/dy²).
pub fn fap_baluev(z: f64, f_max: f64, t: &[f64], dy: &[f64]) -> f64 {
    let n = t.len() as f64;
    if n < 5.0 {
        return 1.0;
    }
    let z = z.clamp(0.0, 1.0);
    let w = f_max * (4.0 * PI * weighted_var(t, dy)).sqrt();
    let tau =
        baluev_gamma(n - 1.0) * w * (1.0 - z).powf(0.5 * (n - 4.0)) * (0.5 * (n - 1.0) * z).sqrt();
    fap_with_upcrossings(fap_single(z, t.len()), tau)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sinusoid_peaks_at_its_frequency() {
        let t: Vec<f64> = (1..=60)
            .map(|i| 100.0 * (i as f64 * 0.618_033_988_749_894_9).fract())
            .collect();
        let y: Vec<f64> = t.iter().map(|x| (2.0 * PI * x / 7.3).sin()).collect();
        let dy = vec![1.0; t.len()];
        let p = lomb_scargle(&t, &y, &dy, &[1.0 / 7.3, 0.31]);
        assert!((p[0] - 1.0).abs() < 1e-9 && p[1] < 0.5);
        assert!(fap_baluev(0.9, 2.0, &t, &dy) < 1e-20);
        assert!(fap_baluev(0.01, 2.0, &t, &dy) > 0.99);
    }
}

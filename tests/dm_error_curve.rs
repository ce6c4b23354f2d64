//! The S/N lost to a DM error, measured through the search's dedispersion on a
//! noise-free Gaussian pulse, against the analytic curve of Cordes & McLaughlin 2003
//! (ApJ 596, 1142): ζ = 6.91 × 10⁻³ δDM Δν_MHz / (W_ms ν_GHz³), peak ratio
//! (√π/2) erf(ζ)/ζ.
//!
//! Compared quantity: the PEAK ratio (the dedispersed series' maximum at DM + δDM over
//! its maximum at the true DM, i.e. a one-sample boxcar on a pulse 50 samples wide),
//! not the re-matched S/N. The formula linearises the dispersion sweep across the band,
//! so a narrow fractional band (1350–1450 MHz) is used. The burst comes from the
//! simulator's signal model (which includes the small intra-channel smearing).

mod common;

use burstbook::dedisperse::{DmPlan, reference};
use burstbook::triage::{cm03_peak_ratio, cm03_zeta};
use common::{add, burst, header_band};
use ndarray::Array2;

#[test]
fn peak_ratio_follows_cordes_mclaughlin() {
    let (n_chan, n_time, tsamp) = (256, 6000, 20e-6);
    let h = header_band(n_chan, n_time as u64, tsamp, 1350.0, 1450.0);
    let mut data = vec![0.0f32; n_time * n_chan];
    let dm = 100.0;
    // Put the burst at the top channel 20 ms into the data; the amplitude is arbitrary.
    let t_inf_s = 0.02 - common::K_HANDBOOK_S_MHZ2 * dm / h.freqs_mhz[0].powi(2);
    add(&h, &mut data, &burst(&h, t_inf_s, dm, 1e-3, 100.0));
    let input = Array2::from_shape_vec((n_time, n_chan), data).unwrap();
    let input = input.t().as_standard_layout().to_owned();

    let zetas = [0.25, 0.5, 1.0, 2.0, 3.0, 5.0];
    let per_zeta = 1.0 / cm03_zeta(1.0, 100.0, 1.0, 1.4); // δDM for ζ = 1
    let mut dms = vec![dm];
    dms.extend(zetas.iter().map(|z| dm + z * per_zeta));
    let mut plan = DmPlan::uniform(h.freqs_mhz.clone(), h.chan_bw_mhz, tsamp, 0.0, 0.0, 1);
    plan.steps[0].dms = dms;
    let out = &reference::dedisperse(input.view(), &plan)[0];
    let peak = |d: usize| out.row_f32(d).into_iter().fold(f32::MIN, f32::max) as f64;
    let at_true = peak(0);
    for (i, &z) in zetas.iter().enumerate() {
        let measured = peak(i + 1) / at_true;
        let expected = cm03_peak_ratio(z);
        eprintln!("ζ {z}: measured {measured:.4}, Cordes & McLaughlin {expected:.4}");
        assert!(
            (measured - expected).abs() < 0.02,
            "ζ {z}: {measured} vs {expected}"
        );
    }
}

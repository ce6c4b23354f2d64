//! The plain reference kernel: per-channel integer shifts and sums. Slow and obvious;
//! every fast kernel is tested against it.

use ndarray::ArrayView2;

use super::{Dedispersed, DmPlan, Extent, bf16, channel_delays};

/// Dedisperses `input` (`[channel, time]`) for every step of `plan`, every step to
/// the common end ([`Extent::Common`]).
///
/// # Panics
/// If `input` has a different channel count from the plan (a caller bug).
pub fn dedisperse(input: ArrayView2<'_, f32>, plan: &DmPlan) -> Vec<Dedispersed> {
    dedisperse_over(input, plan, Extent::Common)
}

/// [`dedisperse`] with each step's output running as far as `extent` says.
///
/// # Panics
/// As [`dedisperse`].
pub fn dedisperse_over(
    input: ArrayView2<'_, f32>,
    plan: &DmPlan,
    extent: Extent,
) -> Vec<Dedispersed> {
    let (n_chan, n_time) = input.dim();
    assert_eq!(
        n_chan,
        plan.freqs_mhz.len(),
        "input channels disagree with the plan"
    );
    plan.steps
        .iter()
        .map(|step| {
            let ds = step.downsample;
            let row_lens: Vec<usize> = step
                .dms
                .iter()
                .map(|&dm| plan.valid_samples(dm, ds, n_time, extent))
                .collect();
            let n_out = row_lens.iter().copied().max().unwrap_or(0);
            let mut data = vec![0; step.dms.len() * n_out];
            for (d, &dm) in step.dms.iter().enumerate() {
                let delays = channel_delays(&plan.freqs_mhz, dm, plan.tsamp_s);
                let mut row = vec![0.0f32; row_lens[d]];
                for (c, &delay) in delays.iter().enumerate() {
                    let chan = input.row(c);
                    for (t, out) in row.iter_mut().enumerate() {
                        let start = t * ds + delay;
                        *out += (start..start + ds).map(|i| chan[i]).sum::<f32>();
                    }
                }
                // Stored as every kernel stores its series.
                bf16::encode(&row, &mut data[d * n_out..][..row_lens[d]]);
            }
            Dedispersed {
                dms: step.dms.clone(),
                downsample: ds,
                n_time: n_out,
                row_lens,
                data,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn impulse_along_the_dispersion_curve_sums_coherently() {
        let freqs: Vec<f64> = (0..16).map(|i| 1600.0 - 25.0 * (i as f64 + 0.5)).collect();
        let tsamp = 1e-3;
        let dm = 100.0;
        let plan = DmPlan::uniform(freqs.clone(), 25.0, tsamp, 0.0, 200.0, 3);
        let n_time = plan.max_delay_samples() + 50;
        let mut input = Array2::<f32>::zeros((16, n_time));
        for (c, d) in channel_delays(&freqs, dm, tsamp).into_iter().enumerate() {
            input[[c, 10 + d]] = 1.0;
        }
        let out = dedisperse(input.view(), &plan);
        assert_eq!(out.len(), 1);
        let series = &out[0];
        assert_eq!(series.n_time, 50);
        assert_eq!(
            series.row_f32(1)[10],
            16.0,
            "all channels line up at the true DM"
        );
        assert!(series.row_f32(0)[10] < 16.0 && series.row_f32(2)[10] < 16.0);
    }
}

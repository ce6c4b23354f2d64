//! The DM plan: which trial DMs to search and at what time resolution.

use serde::{Deserialize, Serialize};

use super::{Extent, channel_delays};
use crate::error::{Error, Result};
use crate::obs::RADIO_WINDOW_MHZ;
use crate::units::{DISPERSION_CONSTANT_S_MHZ2, channel_smearing_s};

/// More trials than this is almost certainly a mistaken request.
const MAX_TRIALS: usize = 10_000_000;

/// More channels than this is almost certainly a mistaken request (search backends
/// record thousands to tens of thousands; common practice).
const MAX_CHANNELS: usize = 1 << 20;

/// A sweep across the band longer than this many samples cannot be held in any
/// block (with 64 channels of f32 it is half a terabyte): a sample time or band in
/// the wrong unit, caught before any tree is sized for it.
const MAX_SWEEP_SAMPLES: f64 = (1u64 << 31) as f64;

/// What the user asks of a DM plan; [`DmPlan`] is what the planner makes of it.
/// Keys missing from a serialised request (e.g. a partial `[plan]` table of a search
/// configuration) take their [`Default`] values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PlanRequest {
    /// Lowest trial DM in pc cm⁻³.
    pub dm_min: f64,
    /// Highest trial DM in pc cm⁻³.
    pub dm_max: f64,
    /// Narrowest intrinsic pulse width searched, in seconds.
    pub min_width_s: f64,
    /// Allowed growth of the effective width over one full step between neighbouring
    /// trials (e.g. 1.25: a burst at the next trial's DM, searched at this one, is
    /// smeared to at most 1.25 × the effective width). Half-way between trials, the
    /// worst case, the width grows by at most √(1 + (tol² − 1)/4) (1.068 for 1.25).
    pub tolerance: f64,
    /// Largest time-resolution reduction factor (a power of two).
    pub max_downsample: usize,
    /// Largest fraction of the intra-channel smearing t_chan(DM) at the band centre
    /// that one downsampled sample may span: the downsampling is the largest power of
    /// two n with n·t_s ≤ `smearing_fraction`·t_chan. 1 reduces the resolution as soon
    /// as the smearing allows (cheapest); the default ½ keeps a narrow burst's
    /// smeared pulse at least two samples long, so it loses little to where it falls
    /// on the sample grid.
    pub smearing_fraction: f64,
}

impl Default for PlanRequest {
    fn default() -> Self {
        PlanRequest {
            dm_min: 0.0,
            // Wide enough for the highest-DM bursts of the demo survey; the search's
            // default, and what a `[plan]` table without `dm_max` gets.
            dm_max: 2000.0,
            min_width_s: 0.0,
            tolerance: 1.25,
            max_downsample: 64,
            smearing_fraction: 0.5,
        }
    }
}

impl PlanRequest {
    /// The request with `dm_max` lowered, if need be, to the DM whose sweep across
    /// the channel centres `freqs_mhz` spans `duration_s`: a recording that long holds
    /// no whole sweep at any higher DM, so those trials could search nothing, and
    /// planning them would size the kernel for nothing (a `dm_max` of 10⁹ asked for
    /// terabytes). Never below `dm_min`; unchanged for an empty or degenerate band.
    pub fn within_sweep(&self, freqs_mhz: &[f64], duration_s: f64) -> PlanRequest {
        let lo = freqs_mhz.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = freqs_mhz.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let sweep_s_per_dm = crate::units::delay_between_s(1.0, lo, hi);
        let mut capped = self.clone();
        if sweep_s_per_dm.is_finite() && sweep_s_per_dm > 0.0 && duration_s >= 0.0 {
            let fit = duration_s / sweep_s_per_dm;
            capped.dm_max = self.dm_max.min(fit).max(self.dm_min);
        }
        capped
    }
}

/// A run of trial DMs searched at one time resolution.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DmStep {
    /// Trial DMs in pc cm⁻³, ascending.
    pub dms: Vec<f64>,
    /// Input samples summed per output sample (a power of two).
    pub downsample: usize,
}

/// Everything a kernel needs to dedisperse a block: band, sample time and trials.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DmPlan {
    /// Channel centre frequencies in MHz, in data order.
    pub freqs_mhz: Vec<f64>,
    /// Channel width in MHz.
    pub chan_bw_mhz: f64,
    /// Input sample time in seconds.
    pub tsamp_s: f64,
    /// Trial groups in ascending DM.
    pub steps: Vec<DmStep>,
}

impl DmPlan {
    /// A plan with evenly spaced DMs `dm_min..=dm_max` (`n` trials) at full resolution.
    pub fn uniform(
        freqs_mhz: Vec<f64>,
        chan_bw_mhz: f64,
        tsamp_s: f64,
        dm_min: f64,
        dm_max: f64,
        n: usize,
    ) -> Self {
        let dms = (0..n)
            .map(|i| {
                if n == 1 {
                    dm_min
                } else {
                    dm_min + (dm_max - dm_min) * i as f64 / (n - 1) as f64
                }
            })
            .collect();
        DmPlan {
            freqs_mhz,
            chan_bw_mhz,
            tsamp_s,
            steps: vec![DmStep { dms, downsample: 1 }],
        }
    }

    /// Plans trial DMs `request.dm_min..=request.dm_max` so that the effective width
    /// grows by at most `request.tolerance` from one trial to the next, reducing the
    /// time resolution where dispersion smearing already exceeds it.
    ///
    /// With B = k(ν_lo⁻² − ν_hi⁻²) the dispersion sweep per unit DM across the band
    /// (edges) and ν_c the band centre (Cordes & McLaughlin 2003, ApJ 596, 1142):
    /// - downsampling n(DM): largest power of two with n·t_s ≤ f·t_chan(DM, ν_c)
    ///   (f = `smearing_fraction`), at least 1 and capped at `max_downsample`;
    /// - W_eff(DM)² = W_int² + (n·t_s)² + t_chan(DM, ν_c)²;
    /// - DM_{i+1} = DM_i + √(tol² − 1)·W_eff(DM_i)/B, since a DM error δDM smears the
    ///   burst by B·δDM, added in quadrature to W_eff.
    ///
    /// The last trial is `dm_max` itself. Consecutive trials with the same
    /// downsampling form one [`DmStep`].
    ///
    /// # Errors
    /// [`Error::Config`] for an empty band, non-positive sample time or channel width,
    /// a negative or inverted DM range, `tolerance <= 1`, a negative width, a
    /// `max_downsample` that is not a power of two, a `smearing_fraction` that is not
    /// positive, or more than ten million trials.
    pub fn build(
        freqs_mhz: &[f64],
        chan_bw_mhz: f64,
        tsamp_s: f64,
        request: &PlanRequest,
    ) -> Result<DmPlan> {
        let planner = Planner::new(freqs_mhz, chan_bw_mhz, tsamp_s, request)?;
        let mut steps: Vec<DmStep> = Vec::new();
        let mut dm = request.dm_min;
        let mut n_trials = 0usize;
        loop {
            let downsample = planner.downsample_at(dm);
            match steps.last_mut() {
                Some(step) if step.downsample == downsample => step.dms.push(dm),
                _ => steps.push(DmStep {
                    dms: vec![dm],
                    downsample,
                }),
            }
            n_trials += 1;
            if n_trials > MAX_TRIALS {
                return Err(Error::Config(format!(
                    "more than {MAX_TRIALS} trial DMs: raise the tolerance or narrow the DM range"
                )));
            }
            if dm >= request.dm_max {
                break;
            }
            dm = (dm + planner.step_at(dm)).min(request.dm_max);
        }
        Ok(DmPlan {
            freqs_mhz: freqs_mhz.to_vec(),
            chan_bw_mhz,
            tsamp_s,
            steps,
        })
    }

    /// Total number of trial DMs.
    pub fn n_trials(&self) -> usize {
        self.steps.iter().map(|s| s.dms.len()).sum()
    }

    /// All trial DMs in ascending order, with their step's downsampling factor.
    pub fn trials(&self) -> impl Iterator<Item = (f64, usize)> + '_ {
        self.steps
            .iter()
            .flat_map(|s| s.dms.iter().map(move |&dm| (dm, s.downsample)))
    }

    /// Largest trial DM in pc cm⁻³ (0 for an empty plan).
    pub fn max_dm(&self) -> f64 {
        self.steps
            .iter()
            .flat_map(|s| s.dms.iter().copied())
            .fold(0.0, f64::max)
    }

    /// Largest channel delay in input samples over all trials: the rows a block must
    /// carry beyond its last valid output sample.
    pub fn max_delay_samples(&self) -> usize {
        self.delay_samples(self.max_dm())
    }

    /// Valid output samples of a trial at `dm` with `downsample`, for a block of
    /// `n_time` input samples, with exactly rounded delays (the reference kernel's).
    /// With [`Extent::Common`] every trial gets the same, whatever its `dm`.
    pub fn valid_samples(
        &self,
        dm: f64,
        downsample: usize,
        n_time: usize,
        extent: Extent,
    ) -> usize {
        let delay = match extent {
            Extent::Common => self.max_delay_samples(),
            Extent::PerTrial => self.delay_samples(dm),
        };
        n_time.saturating_sub(delay) / downsample
    }

    /// Largest channel delay in input samples at `dm`.
    pub fn delay_samples(&self, dm: f64) -> usize {
        channel_delays(&self.freqs_mhz, dm, self.tsamp_s)
            .into_iter()
            .max()
            .unwrap_or(0)
    }

    /// Largest channel delay in input samples over the trials of step `step`.
    pub fn step_delay_samples(&self, step: usize) -> usize {
        self.delay_samples(self.steps[step].dms.iter().copied().fold(0.0, f64::max))
    }
}

/// How many trials apart boxcars of each width need testing, per plan step:
/// `strides[i][j]` for plan step `i` and width `widths_s[i][j]` (seconds).
///
/// The planner spaces trials so that a DM error of one step widens the narrowest
/// pulse, of effective width W_eff, by at most the tolerance. The widening adds the
/// same smearing B·δDM in quadrature to any pulse, so a boxcar of width w — matched
/// to a pulse of effective width √(W_eff² + w²) — tolerates a spacing larger by
/// √(1 + (w/W_eff)²) (Cordes & McLaughlin 2003, ApJ 596, 1142). The stride is the
/// largest power of two within that factor at the step's last, most smeared, trial,
/// where the factor is smallest; powers of two make the widths tested at any trial a
/// prefix of the ladder.
///
/// # Errors
/// The request is not a valid plan request for the plan's band.
pub fn boxcar_strides(
    plan: &DmPlan,
    request: &PlanRequest,
    widths_s: &[Vec<f64>],
) -> Result<Vec<Vec<usize>>> {
    let planner = Planner::new(&plan.freqs_mhz, plan.chan_bw_mhz, plan.tsamp_s, request)?;
    Ok(plan
        .steps
        .iter()
        .zip(widths_s)
        .map(|(step, widths)| {
            let last = step.dms.last().copied().unwrap_or(0.0);
            let w_eff = planner.effective_width_s(last);
            widths
                .iter()
                .map(|&w| {
                    let factor = (1.0 + (w / w_eff).powi(2)).sqrt();
                    let mut k = 1;
                    while (2 * k) as f64 <= factor && 2 * k <= step.dms.len() {
                        k *= 2;
                    }
                    k
                })
                .collect()
        })
        .collect())
}

/// The plan formulae for one band and request (see [`DmPlan::build`]).
#[derive(Debug, Clone)]
pub(crate) struct Planner {
    tsamp_s: f64,
    chan_bw_mhz: f64,
    centre_mhz: f64,
    /// Sweep across the band per unit DM, seconds per pc cm⁻³.
    sweep_s_per_dm: f64,
    min_width_s: f64,
    tolerance: f64,
    max_downsample: usize,
    smearing_fraction: f64,
}

impl Planner {
    pub(crate) fn new(
        freqs_mhz: &[f64],
        chan_bw_mhz: f64,
        tsamp_s: f64,
        request: &PlanRequest,
    ) -> Result<Planner> {
        let bad = |msg: String| Err(Error::Config(msg));
        if freqs_mhz.is_empty() || freqs_mhz.iter().any(|f| !(f.is_finite() && *f > 0.0)) {
            return bad("the band needs at least one positive channel frequency".into());
        }
        if freqs_mhz.len() > MAX_CHANNELS {
            return bad(format!(
                "{} channels is more than {MAX_CHANNELS}: is the channel count right?",
                freqs_mhz.len()
            ));
        }
        if let Some(f) = freqs_mhz.iter().find(|f| !RADIO_WINDOW_MHZ.contains(*f)) {
            return bad(format!(
                "channel frequency {f} MHz is outside the radio window of {} to {} MHz \
                 (frequencies are in MHz)",
                RADIO_WINDOW_MHZ.start(),
                RADIO_WINDOW_MHZ.end()
            ));
        }
        if !(chan_bw_mhz.is_finite() && chan_bw_mhz != 0.0) {
            return bad(format!(
                "channel width must be non-zero, got {chan_bw_mhz} MHz"
            ));
        }
        if !(tsamp_s.is_finite() && tsamp_s > 0.0) {
            return bad(format!("sample time must be positive, got {tsamp_s} s"));
        }
        let PlanRequest {
            dm_min,
            dm_max,
            min_width_s,
            tolerance,
            max_downsample,
            smearing_fraction,
        } = *request;
        if !(dm_min.is_finite() && dm_max.is_finite() && 0.0 <= dm_min && dm_min <= dm_max) {
            return bad(format!(
                "DM range must satisfy 0 <= dm_min <= dm_max, got {dm_min}..{dm_max}"
            ));
        }
        if !(tolerance.is_finite() && tolerance > 1.0) {
            return bad(format!("tolerance must exceed 1, got {tolerance}"));
        }
        if !(min_width_s.is_finite() && min_width_s >= 0.0) {
            return bad(format!("minimum width must be >= 0, got {min_width_s} s"));
        }
        if !(smearing_fraction.is_finite() && smearing_fraction > 0.0) {
            return bad(format!(
                "smearing fraction must be positive, got {smearing_fraction}"
            ));
        }
        if !max_downsample.is_power_of_two() {
            return bad(format!(
                "max downsample must be a power of two, got {max_downsample}"
            ));
        }
        let half = chan_bw_mhz.abs() / 2.0;
        let lo = freqs_mhz.iter().copied().fold(f64::INFINITY, f64::min) - half;
        let hi = freqs_mhz.iter().copied().fold(f64::NEG_INFINITY, f64::max) + half;
        if lo <= 0.0 {
            return bad(format!("band edge {lo} MHz is not positive"));
        }
        let sweep_s_per_dm = DISPERSION_CONSTANT_S_MHZ2 * (lo.powi(-2) - hi.powi(-2));
        let sweep_samples = dm_max * sweep_s_per_dm / tsamp_s;
        if sweep_samples > MAX_SWEEP_SAMPLES {
            return bad(format!(
                "the sweep at DM {dm_max} across {lo:.3}–{hi:.3} MHz spans {sweep_samples:.3e} \
                 samples of {tsamp_s:e} s, more than {MAX_SWEEP_SAMPLES:.3e}: is the sample \
                 time (or the DM range) right?"
            ));
        }
        Ok(Planner {
            tsamp_s,
            chan_bw_mhz: chan_bw_mhz.abs(),
            centre_mhz: (lo + hi) / 2.0,
            sweep_s_per_dm,
            min_width_s,
            tolerance,
            max_downsample,
            smearing_fraction,
        })
    }

    /// Intra-channel smearing at the band centre, seconds.
    fn channel_smearing_s(&self, dm: f64) -> f64 {
        channel_smearing_s(dm, self.chan_bw_mhz, self.centre_mhz)
    }

    /// Largest power of two n with n·t_s ≤ f·t_chan(ν_c), at least 1, capped.
    pub(crate) fn downsample_at(&self, dm: f64) -> usize {
        let mut n = 1;
        while n < self.max_downsample
            && 2.0 * n as f64 * self.tsamp_s <= self.smearing_fraction * self.channel_smearing_s(dm)
        {
            n *= 2;
        }
        n
    }

    /// W_eff² = W_int² + (n·t_s)² + t_chan², seconds.
    pub(crate) fn effective_width_s(&self, dm: f64) -> f64 {
        let sample = self.downsample_at(dm) as f64 * self.tsamp_s;
        self.min_width_s
            .hypot(sample)
            .hypot(self.channel_smearing_s(dm))
    }

    /// DM step from a trial at `dm`, pc cm⁻³.
    pub(crate) fn step_at(&self, dm: f64) -> f64 {
        (self.tolerance.powi(2) - 1.0).sqrt() * self.effective_width_s(dm) / self.sweep_s_per_dm
    }
}

#[cfg(test)]
#[path = "plan_tests.rs"]
mod tests;

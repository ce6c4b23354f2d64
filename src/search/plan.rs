//! Stand-in trial-DM plan until the planner lands: evenly spaced DMs whose step keeps
//! the smearing growth at the band's mid DM within the requested tolerance
//! (step = √(tol² − 1) · W_eff / B, detection notes §3), all at full time resolution.

use crate::dedisperse::{DmPlan, PlanRequest};
use crate::obs::Header;
use crate::units::{channel_smearing_s, delay_between_s};

/// Trial DMs for `header`'s band as requested.
pub(super) fn build_plan(header: &Header, req: &PlanRequest) -> DmPlan {
    let (f_lo, f_hi) = (header.freq_lo_mhz(), header.freq_hi_mhz());
    let sweep_per_dm = delay_between_s(1.0, f_lo, f_hi).max(header.tsamp_s);
    let mid_dm = 0.5 * (req.dm_min + req.dm_max);
    let t_chan = channel_smearing_s(mid_dm, header.chan_bw_mhz, 0.5 * (f_lo + f_hi));
    let w_eff = (header.tsamp_s.powi(2) + t_chan.powi(2) + req.min_width_s.powi(2)).sqrt();
    let step = (req.tolerance.powi(2) - 1.0).max(1e-6).sqrt() * w_eff / sweep_per_dm;
    let span = req.dm_max - req.dm_min;
    let n = if span > 0.0 {
        (span / step).ceil() as usize + 1
    } else {
        1
    };
    DmPlan::uniform(
        header.freqs_mhz.clone(),
        header.chan_bw_mhz,
        header.tsamp_s,
        req.dm_min,
        req.dm_max,
        n,
    )
}

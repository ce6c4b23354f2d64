//! Everything the candidate figure shows, computed from the header, the candidate row
//! and a re-read stretch of the observation.

use std::path::Path;

use super::dm_curve::{self, DmCurve};
use super::stretch::{self, Normalised};
use super::waterfall::{self, Waterfall, Window};
use crate::candidate::Candidate;
use crate::dedisperse::{DmPlan, channel_delays};
use crate::error::{Error, Result};
use crate::obs::{Averaging, Block, Header};
use crate::units::delay_to_infinity_s;

/// Time columns in the waterfall and profile.
pub const N_COLS: usize = 128;
/// Boxcar width in columns the time binning aims for, so the pulse stays resolved.
const COLS_PER_BOXCAR: usize = 4;
/// Sub-bands shown at most.
pub const MAX_BANDS: usize = 64;
/// Trial DMs in the S/N-versus-DM curve.
pub const N_DM_TRIALS: usize = 61;

/// Which stretch of the file a candidate's figure needs and how it is cut.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cut {
    /// File sample at which the top of the band sees the pulse start.
    pub top_arrival: u64,
    /// Boxcar width in samples (at least 1).
    pub width: usize,
    /// The waterfall window; `window.start` is a file sample here.
    pub window: Window,
    /// Trial DM range in pc cm⁻³ for the S/N-versus-DM curve.
    pub dm_range: (f64, f64),
    /// Rows to read from `window.start` on: the window plus the largest delay.
    pub stretch_len: usize,
}

impl Cut {
    /// Plans the cut for `cand` in an observation described by `header`.
    pub fn new(header: &Header, cand: &Candidate) -> Cut {
        let tsamp = header.tsamp_s;
        let top_s = cand.t_inf_s + delay_to_infinity_s(cand.dm, header.freq_hi_mhz());
        let top_arrival = (top_s / tsamp).round().max(0.0) as u64;
        let width = ((cand.width_ms * 1e-3 / tsamp).round() as usize).max(1);
        let bin = (width / COLS_PER_BOXCAR).max(1);
        let centre = top_arrival + width as u64 / 2;
        let start = centre.saturating_sub((N_COLS / 2 * bin) as u64);
        let centre_ghz = (header.freq_lo_mhz() + header.freq_hi_mhz()) / 2e3;
        let half = dm_curve::half_power_delta_dm(
            header.bandwidth_mhz(),
            centre_ghz,
            width as f64 * tsamp * 1e3,
        );
        let dm_range = dm_curve::trial_range(cand.dm, cand.dm_lo, cand.dm_hi, half);
        let max_delay = channel_delays(&header.freqs_mhz, dm_range.1, tsamp)
            .into_iter()
            .max()
            .unwrap_or(0);
        Cut {
            top_arrival,
            width,
            window: Window {
                start: start as usize,
                bin,
                n_cols: N_COLS,
            },
            dm_range,
            stretch_len: N_COLS * bin + max_delay + 1,
        }
    }

    /// Milliseconds from the top-of-band arrival to the leading edge of column `col`.
    pub fn col_ms(&self, col: f64, tsamp_s: f64) -> f64 {
        let samples =
            self.window.start as f64 + col * self.window.bin as f64 - self.top_arrival as f64;
        samples * tsamp_s * 1e3
    }
}

/// The arrays behind the waterfall and profile panels.
#[derive(Debug, Clone)]
pub struct Panels {
    pub cut: Cut,
    pub waterfall: Waterfall,
}

/// Bytes of f32 samples a figure's stretch may take before it is averaged on read.
/// At low frequencies a sweep lasts minutes, and a stretch at the file's own
/// resolution would need tens of GB where the search itself averaged.
pub const STRETCH_BUDGET_BYTES: usize = 256 << 20;

/// The averaging that keeps the stretch `cut` (planned on `header`) within
/// `budget_bytes`: none when it fits; else adjacent channels down to [`MAX_BANDS`]
/// (the most sub-bands the figure shows, so the waterfall loses nothing), then time
/// by what is still missing.
pub fn averaging_within(header: &Header, cut: &Cut, budget_bytes: usize) -> Averaging {
    let n_chan = header.n_chan();
    let bytes = |chan_groups: usize| cut.stretch_len * chan_groups * size_of::<f32>();
    if bytes(n_chan) <= budget_bytes {
        return Averaging::default();
    }
    let channels = (1..=n_chan / MAX_BANDS)
        .rev()
        .find(|f| n_chan.is_multiple_of(*f))
        .unwrap_or(1);
    Averaging {
        samples: bytes(n_chan / channels).div_ceil(budget_bytes.max(1)),
        channels,
    }
}

/// What a figure of one candidate reads from its file.
#[derive(Debug, Clone)]
pub struct FileStretch {
    /// The header the figure is drawn on: the averaged one, if averaged.
    pub header: Header,
    /// The averaging applied on read ([`averaging_within`]).
    pub averaging: Averaging,
    /// The cut, planned on `header`.
    pub cut: Cut,
    /// Its rows.
    pub stretch: Block,
}

/// The stretch of the observation at `path` a figure of `cand` needs, averaged on
/// read when it would exceed `budget_bytes` ([`averaging_within`]).
///
/// # Errors
/// The file cannot be opened or read.
pub fn read_for(path: &Path, cand: &Candidate, budget_bytes: usize) -> Result<FileStretch> {
    let source = crate::obs::open(path)?;
    let file_cut = Cut::new(source.header(), cand);
    let averaging = averaging_within(source.header(), &file_cut, budget_bytes);
    let source = averaging.wrap(source, &path.display().to_string())?;
    let header = source.header().clone();
    let cut = Cut::new(&header, cand);
    let stretch = stretch::read_stretch(source, cut.window.start as u64, cut.stretch_len)?;
    Ok(FileStretch {
        header,
        averaging,
        cut,
        stretch,
    })
}

/// Normalises `stretch` (which must start at `cut.window.start` and hold at least
/// `cut.stretch_len` rows) for `header`.
///
/// # Errors
/// [`Error::Config`] if the stretch does not cover the cut.
pub fn normalise_for(header: &Header, stretch: &Block, cut: &Cut) -> Result<Normalised> {
    if stretch.start_sample != cut.window.start as u64
        || stretch.n_time() < cut.stretch_len
        || stretch.n_chan != header.n_chan()
    {
        return Err(Error::Config(format!(
            "stretch of {} rows from sample {} does not cover the {} rows from sample {} the plot needs",
            stretch.n_time(),
            stretch.start_sample,
            cut.stretch_len,
            cut.window.start
        )));
    }
    Ok(stretch::normalise(stretch, &header.weights))
}

/// The dedispersed waterfall and profile at the candidate's DM.
pub fn panels(header: &Header, input: &Normalised, cut: &Cut, dm: f64) -> Panels {
    let window = Window {
        start: 0,
        ..cut.window
    };
    Panels {
        cut: *cut,
        waterfall: waterfall::build(
            input,
            &header.freqs_mhz,
            header.tsamp_s,
            dm,
            window,
            MAX_BANDS,
        ),
    }
}

/// S/N against DM over `cut.dm_range` with the candidate's boxcar.
pub fn dm_curve(header: &Header, input: &Normalised, cut: &Cut) -> DmCurve {
    let plan = DmPlan::uniform(
        header.freqs_mhz.clone(),
        header.chan_bw_mhz,
        header.tsamp_s,
        cut.dm_range.0,
        cut.dm_range.1,
        N_DM_TRIALS,
    );
    let expected = (cut.top_arrival - cut.window.start as u64) as usize;
    let search = (2 * cut.width).max(2 * cut.window.bin);
    dm_curve::measure(input, &plan, cut.width, expected, search)
}

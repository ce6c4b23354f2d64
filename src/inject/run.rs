//! One injection-recovery run: search the untouched data, draw and place bursts,
//! search every pass with the bursts streamed in, match, summarise.

use indicatif::ProgressBar;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

use super::matching::{Matcher, Target};
use super::ranges::{Drawn, InjectionRanges};
use super::schedule::{arrival_room, place};
use super::source::{InjectingSource, channel_sigma};
use super::summary::{Summary, summarise};
use crate::candidate::{Candidate, Verdict};
use crate::error::{Error, Result};
use crate::obs::{Header, SampleSource};
use crate::search::{SearchConfig, memory, search_source};
use crate::simulate::Burst;
use crate::units::delay_to_infinity_s;

/// Settings of an injection run other than the search configuration.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InjectOptions {
    /// Bursts to inject in total (over all passes).
    pub count: usize,
    /// Seed of the burst parameters and positions.
    pub seed: u64,
    /// Parameter ranges.
    pub ranges: InjectionRanges,
    /// Rows at the start of the file used to estimate each channel's noise σ.
    pub sigma_rows: usize,
    /// Count a recovered burst that triage calls interference as found.
    pub count_rfi_as_found: bool,
    /// Expected S/N above which bursts are "bright" in the summary (per-DM and
    /// per-width completeness and S/N ratio).
    pub bright_snr: f64,
}

impl Default for InjectOptions {
    fn default() -> Self {
        InjectOptions {
            count: 200,
            seed: 1,
            ranges: InjectionRanges::default(),
            sigma_rows: 16_384,
            count_rfi_as_found: false,
            bright_snr: 10.0,
        }
    }
}

impl InjectOptions {
    /// Checks the settings that do not depend on the file (the ranges are checked
    /// against its header by [`InjectionRanges::validate`]).
    ///
    /// # Errors
    /// [`Error::Config`] for no bursts or a bright-S/N level that is not a number > 0.
    pub fn validate(&self) -> Result<()> {
        if self.count == 0 {
            return Err(Error::Config(
                "--count must be at least 1: there is nothing to measure without bursts".into(),
            ));
        }
        if !(self.bright_snr.is_finite() && self.bright_snr > 0.0) {
            return Err(Error::Config(format!(
                "--bright-snr must be a finite expected S/N > 0, got {}",
                self.bright_snr
            )));
        }
        Ok(())
    }
}

/// One injected burst and what the search made of it (a CSV row).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InjectionRow {
    /// Index in draw order.
    pub index: usize,
    /// Pass (search of the file) it was injected into.
    pub pass: usize,
    /// Injected arrival time at infinite frequency, seconds after the file start.
    pub t_inf_s: f64,
    /// Injected DM in pc cm⁻³.
    pub dm: f64,
    /// Intrinsic Gaussian FWHM in ms.
    pub width_ms: f64,
    /// Scattering time at 1 GHz in ms.
    pub scatter_ms_1ghz: f64,
    /// Spectral shape, e.g. `power_law(index=-1.5)`.
    pub spectrum: String,
    /// Expected S/N (simulator definition).
    pub expected_snr: f64,
    /// Ideal boxcar width in ms.
    pub ideal_width_ms: f64,
    /// Fluence in Jy ms where the spectrum is 1 (with an SEFD).
    pub fluence_jy_ms: Option<f64>,
    /// Recovered: matched, and not called interference unless those count.
    pub found: bool,
    /// Matched by some candidate, whatever its verdict.
    pub detected: bool,
    /// Verdict of the matching candidate.
    pub verdict: Option<String>,
    /// Reported S/N.
    pub reported_snr: Option<f64>,
    /// Reported DM.
    pub reported_dm: Option<f64>,
    /// Reported arrival time at infinite frequency.
    pub reported_t_inf_s: Option<f64>,
    /// Reported boxcar width in ms.
    pub reported_width_ms: Option<f64>,
}

impl InjectionRow {
    /// Reported / expected S/N when detected.
    pub fn snr_ratio(&self) -> Option<f64> {
        self.reported_snr.map(|s| s / self.expected_snr)
    }
}

/// Everything an injection run produced.
#[derive(Debug, Clone, Serialize)]
pub struct InjectionResult {
    /// The observation, as named by the caller.
    pub file: String,
    /// The header of the recording as searched (averaged when the search averages).
    #[serde(skip)]
    pub header: Header,
    /// Hash of the search configuration ([`SearchConfig::hash`]).
    pub config_hash: String,
    /// Injection settings.
    pub options: InjectOptions,
    /// Candidates of the untouched data (excluded from matching).
    pub original_candidates: usize,
    /// Passes over the file.
    pub n_passes: usize,
    /// Noise σ per channel used to scale the bursts (raw data units).
    pub channel_sigma: Vec<f32>,
    /// One row per injected burst, in draw order.
    pub rows: Vec<InjectionRow>,
    /// Completeness levels, curves and binned figures.
    pub summary: Summary,
}

/// Runs injection-recovery on the recording `open` yields (it is called once per
/// search, so each pass streams the data afresh; nothing is written back), averaged
/// as `config.average` asks.
/// `progress`, if given, counts searches (the untouched one plus one per pass).
///
/// # Errors
/// Read errors, an invalid configuration or ranges, or bursts that do not fit.
pub fn inject_source<F>(
    open: F,
    label: &str,
    config: &SearchConfig,
    options: &InjectOptions,
    progress: Option<&ProgressBar>,
) -> Result<InjectionResult>
where
    F: Fn() -> Result<Box<dyn SampleSource>> + Sync,
{
    config.validate()?;
    options.validate()?;
    // Everything below, bursts included, lives on the averaged recording: a burst
    // modelled in its wider samples and channels is the average of one modelled finely.
    let open = || config.average.wrap(open()?, label);
    let first = open()?;
    let header = first.header().clone();
    if header.weights.iter().all(|&w| w == 0.0) {
        return Err(Error::bad_input(
            label,
            "every channel is masked (weight 0): there is no band to inject bursts into",
        ));
    }
    options.ranges.validate(&header)?;
    // The untouched search reads through the same wrapper as the passes (with no
    // bursts, so its rows are the file's): a file the search could read as bytes is
    // then read as f32 by every search, and a memory limit that only a byte read
    // fits refuses the run here rather than after the untouched search.
    let n_chan = header.n_chan();
    let plain = InjectingSource::new(first, &[], vec![0.0; n_chan]);
    let untouched = search_source(Box::new(plain), label, config, None)?;
    if let Some(pb) = progress {
        pb.inc(1);
    }
    let sigma = channel_sigma(&mut open()?, options.sigma_rows)?;

    let layout = &untouched.layout;
    // The search looks for pulse starts only where every trial DM can be dedispersed.
    let start_limit = header.n_samples as i64 - (layout.max_delay + layout.margin) as i64;
    // Refused here, before any burst is modelled: the widest burst the ranges allow
    // must fit (a DM far beyond the file would otherwise model a sweep of years).
    arrival_room(&options.ranges.widest(), &header, start_limit)
        .map_err(|msg| Error::bad_input(label, msg))?;
    let mut rng = ChaCha8Rng::seed_from_u64(options.seed);
    let drawn: Vec<Drawn> = (0..options.count)
        .map(|_| options.ranges.draw(&header, &mut rng))
        .collect::<Result<_>>()?;
    let time_link = (config.cluster.time_link_s / header.tsamp_s).ceil() as i64;
    let guard = (layout.margin as i64) + time_link;
    let busy: Vec<(i64, i64)> = untouched
        .candidates
        .iter()
        .map(|c| candidate_span(c, &header))
        .collect();
    let bursts: Vec<Burst> = drawn.iter().map(|d| d.burst).collect();
    let placed = place(&bursts, &header, guard, &busy, start_limit, &mut rng)?;
    let n_passes = placed.iter().map(|p| p.pass + 1).max().unwrap_or(0);
    if let Some(pb) = progress {
        pb.set_length(1 + n_passes as u64);
    }

    let matcher = Matcher::new(&untouched.plan, &header);
    // Passes run side by side on machines with threads to spare (their serial parts
    // then overlap), but only as many as the memory limit holds: each search checks
    // its own need against the limit, not its neighbours'. The untouched search read
    // f32 too, so its layout and plan are each pass's.
    let need = memory::estimate_bytes(layout, &untouched.plan, n_chan, size_of::<f32>());
    let side_by_side = concurrent_passes(
        need,
        memory::limit_bytes(config.memory_limit_gib),
        rayon::current_num_threads(),
    );
    let passes: Vec<usize> = (0..n_passes).collect();
    let mut per_pass: Vec<Vec<InjectionRow>> = Vec::with_capacity(n_passes);
    for group in passes.chunks(side_by_side) {
        let rows: Vec<Vec<InjectionRow>> = group
            .par_iter()
            .map(|&pass| {
                let mine: Vec<_> = placed.iter().filter(|p| p.pass == pass).collect();
                let pass_bursts: Vec<Burst> = mine.iter().map(|p| p.burst).collect();
                let source = InjectingSource::new(open()?, &pass_bursts, sigma.clone());
                let result = search_source(Box::new(source), label, config, None)?;
                let targets: Vec<Target> = mine
                    .iter()
                    .map(|p| Target {
                        burst: p.burst,
                        width_s: drawn[p.index].ideal_width_samples as f64 * header.tsamp_s,
                    })
                    .collect();
                let hits = matcher.recover(&targets, &result.candidates, &untouched.candidates);
                if let Some(pb) = progress {
                    pb.inc(1);
                }
                Ok(mine
                    .iter()
                    .zip(hits)
                    .map(|(p, hit)| {
                        row(
                            p.index,
                            pass,
                            &p.burst,
                            &drawn[p.index],
                            &header,
                            hit,
                            options,
                        )
                    })
                    .collect())
            })
            .collect::<Result<_>>()?;
        per_pass.extend(rows);
    }
    let mut rows: Vec<InjectionRow> = per_pass.into_iter().flatten().collect();
    rows.sort_by_key(|r| r.index);
    let summary = summarise(&rows, header.sefd_jy.is_some(), options.bright_snr);
    Ok(InjectionResult {
        file: label.to_string(),
        header,
        config_hash: config.hash(),
        options: options.clone(),
        original_candidates: untouched.candidates.len(),
        n_passes,
        channel_sigma: sigma,
        rows,
        summary,
    })
}

/// Threads one pass is given before another runs beside it. A search keeps about two
/// threads busy (1.85 CPU seconds a second on two cores), and two passes side by side
/// on two threads were slower than one after the other: 48–57 s against 40–48 s wall
/// for 30 bursts on the reference survey band, with 3–5× the system time, as the two
/// searches' fresh buffers faulted in together (docs/inject.md).
const THREADS_PER_PASS: usize = 2;

/// How many searches of `need_bytes` each may run at once within `limit_bytes`
/// (`None`: no limit) on `threads` threads: at least one (a single search that does
/// not fit is refused by the search itself), at most one per [`THREADS_PER_PASS`].
fn concurrent_passes(need_bytes: f64, limit_bytes: Option<f64>, threads: usize) -> usize {
    let fit = limit_bytes.map_or(usize::MAX, |limit| (limit / need_bytes).floor() as usize);
    fit.min(threads / THREADS_PER_PASS).max(1)
}

/// [`inject_source`] on a file any reader of [`crate::obs::open`] understands.
///
/// # Errors
/// As [`inject_source`].
pub fn inject_file(
    path: &std::path::Path,
    config: &SearchConfig,
    options: &InjectOptions,
    progress: Option<&ProgressBar>,
) -> Result<InjectionResult> {
    inject_source(
        || crate::obs::open(path),
        &path.display().to_string(),
        config,
        options,
        progress,
    )
}

/// Samples a candidate of the untouched data occupies: its sweep across the band
/// widened by its boxcar on both sides.
fn candidate_span(c: &Candidate, h: &Header) -> (i64, i64) {
    let w = c.width_ms * 1e-3;
    let t0 = c.t_inf_s + delay_to_infinity_s(c.dm, h.freq_hi_mhz()) - w;
    let t1 = c.t_inf_s + delay_to_infinity_s(c.dm, h.freq_lo_mhz()) + w;
    (
        (t0 / h.tsamp_s).floor() as i64,
        (t1 / h.tsamp_s).ceil() as i64,
    )
}

fn row(
    index: usize,
    pass: usize,
    b: &Burst,
    d: &Drawn,
    h: &Header,
    hit: Option<&Candidate>,
    options: &InjectOptions,
) -> InjectionRow {
    let detected = hit.is_some();
    let found = hit.is_some_and(|c| options.count_rfi_as_found || c.verdict != Verdict::Rfi);
    InjectionRow {
        index,
        pass,
        t_inf_s: b.t_inf_s,
        dm: b.dm,
        width_ms: b.width_s * 1e3,
        scatter_ms_1ghz: b.scatter_1ghz_s * 1e3,
        spectrum: b.spectrum.describe(),
        expected_snr: d.expected_snr,
        ideal_width_ms: d.ideal_width_samples as f64 * h.tsamp_s * 1e3,
        fluence_jy_ms: d.fluence_jy_ms,
        found,
        detected,
        verdict: hit.map(|c| c.verdict.as_str().to_string()),
        reported_snr: hit.map(|c| c.snr),
        reported_dm: hit.map(|c| c.dm),
        reported_t_inf_s: hit.map(|c| c.t_inf_s),
        reported_width_ms: hit.map(|c| c.width_ms),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn passes_run_side_by_side_only_as_memory_allows() {
        const GIB: f64 = (1u64 << 30) as f64;
        // Two threads, plenty of memory: one pass at a time.
        assert_eq!(concurrent_passes(2.2 * GIB, Some(21.6 * GIB), 2), 1);
        assert_eq!(concurrent_passes(2.2 * GIB, None, 1), 1);
        // Eight threads, no limit: one pass per two threads.
        assert_eq!(concurrent_passes(2.2 * GIB, None, 8), 4);
        // Room for one search but not two: one at a time.
        assert_eq!(concurrent_passes(2.2 * GIB, Some(3.0 * GIB), 4), 1);
        // Room for three searches of eight threads' four.
        assert_eq!(concurrent_passes(1.0 * GIB, Some(3.5 * GIB), 8), 3);
        // Not even one fits: still one (the search itself refuses it).
        assert_eq!(concurrent_passes(4.0 * GIB, Some(3.0 * GIB), 2), 1);
    }
}

//! `burstbook plan`: choose trial DMs and time resolutions for a band, and show the cost.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::PathBuf;

use anyhow::{Context, bail};
use burstbook::dedisperse::{DmPlan, PlanReport, PlanRequest, channel_centres_mhz};
use burstbook::obs::Averaging;

const EXAMPLES: &str = "\
Examples:
  # Plan for an observation's own band and sample time
  burstbook plan demo-data/demo.json --dm-max 1500

  # The same file as a search averaging 4 samples and 2 channels on read sees it
  burstbook plan demo-data/demo.json --average-samples 4 --average-channels 2

  # Plan for a band given by hand: 1024 channels over 1200-1600 MHz, 64 us samples
  burstbook plan --freq-lo-mhz 1200 --freq-hi-mhz 1600 --channels 1024 --tsamp-us 64 \\
      --dm-max 2000 --tolerance 1.25

  # Coarser plan for bursts of at least 1 ms, as JSON (includes every trial DM)
  burstbook plan --freq-lo-mhz 1200 --freq-hi-mhz 1600 --channels 1024 --tsamp-us 64 \\
      --min-width-ms 1 --json > plan.json";

/// Arguments of `plan`.
#[derive(clap::Args, Debug)]
#[command(after_help = EXAMPLES)]
pub struct Args {
    /// Observation whose band and sample time to plan for (.json native header or
    /// FITS search mode). Alternatively give the band flags below.
    #[arg(conflicts_with_all = ["freq_lo_mhz", "freq_hi_mhz", "channels", "tsamp_us"])]
    pub file: Option<PathBuf>,
    /// Lower band edge in MHz (with --freq-hi-mhz, --channels, --tsamp-us).
    #[arg(long, requires_all = ["freq_hi_mhz", "channels", "tsamp_us"])]
    pub freq_lo_mhz: Option<f64>,
    /// Upper band edge in MHz.
    #[arg(long, requires = "freq_lo_mhz")]
    pub freq_hi_mhz: Option<f64>,
    /// Number of equal channels across the band.
    #[arg(long, requires = "freq_lo_mhz")]
    pub channels: Option<usize>,
    /// Sample time in microseconds.
    #[arg(long, requires = "freq_lo_mhz")]
    pub tsamp_us: Option<f64>,
    /// Plan for the file averaged in time by N samples, as `search --average-samples`.
    #[arg(long, value_name = "N", requires = "file")]
    pub average_samples: Option<usize>,
    /// Plan for the file averaged by N adjacent channels, as `search --average-channels`.
    #[arg(long, value_name = "N", requires = "file")]
    pub average_channels: Option<usize>,
    /// Lowest trial DM in pc cm⁻³.
    #[arg(long, default_value_t = PlanRequest::default().dm_min)]
    pub dm_min: f64,
    /// Highest trial DM in pc cm⁻³ (the search's default).
    #[arg(long, default_value_t = PlanRequest::default().dm_max)]
    pub dm_max: f64,
    /// Allowed growth of the effective width from one trial to the next (> 1).
    #[arg(long, default_value_t = PlanRequest::default().tolerance)]
    pub tolerance: f64,
    /// Narrowest intrinsic burst width searched, in ms.
    #[arg(long, default_value_t = 0.0)]
    pub min_width_ms: f64,
    /// Largest time-resolution reduction (a power of two).
    #[arg(long, default_value_t = PlanRequest::default().max_downsample)]
    pub max_downsample: usize,
    /// Largest fraction of the channel smearing one downsampled sample may span
    /// (1 = coarsest and cheapest).
    #[arg(long, default_value_t = PlanRequest::default().smearing_fraction)]
    pub smearing_fraction: f64,
    /// Print the plan, its summary and cost as JSON.
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let (freqs, chan_bw, tsamp_s, duration_s) = band(&args)?;
    let asked = PlanRequest {
        dm_min: args.dm_min,
        dm_max: args.dm_max,
        min_width_s: args.min_width_ms * 1e-3,
        tolerance: args.tolerance,
        max_downsample: args.max_downsample,
        smearing_fraction: args.smearing_fraction,
    };
    // As a search of the file would: no trial beyond the sweep the file can hold.
    let request = match duration_s {
        Some(d) => asked.within_sweep(&freqs, d),
        None => asked.clone(),
    };
    let plan = DmPlan::build(&freqs, chan_bw, tsamp_s, &request).context("planning trial DMs")?;
    let report = plan.report();
    let text = if args.json {
        serde_json::to_string_pretty(&report)? + "\n"
    } else {
        let mut text = format_report(&report, &request)?;
        if let Some(d) = duration_s.filter(|_| request.dm_max < asked.dm_max) {
            text += &format!(
                "Note: the recording's {d:.1} s hold whole sweeps only up to DM {:.1}; \
                 the plan stops there, as a search of it does.\n",
                request.dm_max
            );
        }
        text
    };
    // A closed pipe (e.g. `| head`) is not an error worth reporting.
    match std::io::stdout().lock().write_all(text.as_bytes()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Channel centres (MHz), channel width (MHz), sample time (s) and, for a file, its
/// length (s), from the file or flags.
fn band(args: &Args) -> anyhow::Result<(Vec<f64>, f64, f64, Option<f64>)> {
    if let Some(path) = &args.file {
        let source = burstbook::obs::open(path)
            .with_context(|| format!("reading the header of {}", path.display()))?;
        let averaging = Averaging {
            samples: args.average_samples.unwrap_or(1),
            channels: args.average_channels.unwrap_or(1),
        };
        let h = &averaging
            .header(source.header())
            .map_err(|m| anyhow::anyhow!("{}: {m}", path.display()))?;
        return Ok((
            h.freqs_mhz.clone(),
            h.chan_bw_mhz,
            h.tsamp_s,
            Some(h.duration_s()),
        ));
    }
    match (
        args.freq_lo_mhz,
        args.freq_hi_mhz,
        args.channels,
        args.tsamp_us,
    ) {
        (Some(lo), Some(hi), Some(n), Some(ts)) => {
            if !(lo > 0.0 && hi > lo && n > 0 && ts > 0.0) {
                bail!("need 0 < --freq-lo-mhz < --freq-hi-mhz, --channels > 0 and --tsamp-us > 0");
            }
            let (freqs, bw) = channel_centres_mhz(lo, hi, n);
            Ok((freqs, bw, ts * 1e-6, None))
        }
        _ => bail!(
            "give an observation file, or --freq-lo-mhz, --freq-hi-mhz, --channels and --tsamp-us"
        ),
    }
}

fn format_report(report: &PlanReport, request: &PlanRequest) -> Result<String, std::fmt::Error> {
    let mut out = String::new();
    let plan = &report.plan;
    let lo = plan.freqs_mhz.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = plan
        .freqs_mhz
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let half = plan.chan_bw_mhz.abs() / 2.0;
    writeln!(
        out,
        "Band {:.3}-{:.3} MHz, {} channels of {:.4} MHz, {:.1} us samples",
        lo - half,
        hi + half,
        plan.freqs_mhz.len(),
        plan.chan_bw_mhz.abs(),
        plan.tsamp_s * 1e6
    )?;
    writeln!(
        out,
        "DM {}-{} pc cm^-3, tolerance {}, minimum width {} ms, smearing fraction {}: \
         {} trials in {} steps\n",
        request.dm_min,
        request.dm_max,
        request.tolerance,
        request.min_width_s * 1e3,
        request.smearing_fraction,
        report.n_trials,
        report.steps.len()
    )?;
    writeln!(
        out,
        "{:>10} {:>10} {:>7} {:>10} {:>12} {:>21}",
        "DM first", "DM last", "trials", "downsample", "resolution", "DM spacing first/last"
    )?;
    for s in &report.steps {
        writeln!(
            out,
            "{:>10.3} {:>10.3} {:>7} {:>10} {:>9.1} us {:>10.4} / {:<9.4}",
            s.dm_first,
            s.dm_last,
            s.n_trials,
            s.downsample,
            s.resolution_s * 1e6,
            s.dm_step_first,
            s.dm_step_last
        )?;
    }
    let c = &report.cost;
    writeln!(out, "\nPer second of data:")?;
    writeln!(
        out,
        "  reference kernel   {:.3e} additions",
        c.reference_adds_per_s
    )?;
    writeln!(
        out,
        "  fast kernel        {:.3e} additions ({:.0}x fewer)",
        c.fast_adds_per_s,
        c.reference_adds_per_s / c.fast_adds_per_s.max(1.0)
    )?;
    writeln!(
        out,
        "  output             {:.1} MB",
        c.output_bytes_per_s / 1e6
    )?;
    writeln!(
        out,
        "Fast-kernel scratch {:.0} MB; each block must overlap the next by {} samples ({:.3} s).",
        c.fast_scratch_bytes / 1e6,
        c.overlap_samples,
        c.overlap_samples as f64 * plan.tsamp_s
    )?;
    Ok(out)
}

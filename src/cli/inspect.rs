//! `burstbook inspect FILE`: what is in a recording, and does it look healthy?

use std::path::PathBuf;

use anyhow::Context;
use burstbook::obs::stats::{self, ObsStats};
use burstbook::obs::{self, Container, Header, OpenOptions, geodesy};

/// Arguments of `inspect`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook inspect demo-data/demo.json            header, statistics, suspicious channels
  burstbook inspect survey.fits --channels        plus a line per channel
  burstbook inspect survey.fits --json > s.json   everything, machine-readable

Reads the whole file once, a block at a time (memory stays small for any length).
NaN/Inf samples are counted here; the other commands refuse them.")]
pub struct Args {
    /// Observation file: a native `.json` header (with its `.npy`) or a FITS
    /// search-mode file.
    pub file: PathBuf,
    /// Print a line of statistics for every channel.
    #[arg(long)]
    pub channels: bool,
    /// Print the header and statistics as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let container = Container::detect(&args.file)?;
    let options = OpenOptions {
        allow_non_finite: true,
    };
    let source = obs::open_with(&args.file, options)?;
    let header = source.header().clone();
    let bar = burstbook::progress::bar(header.n_samples, "reading");
    let stats = stats::compute(source, |n| bar.inc(n))
        .with_context(|| format!("inspecting {}", args.file.display()))?;
    bar.finish_and_clear();
    let mut text = String::new();
    if args.json {
        let out = serde_json::json!({
            "file": args.file,
            "container": container,
            "header": header,
            "start_utc": header.start.to_iso(),
            "duration_s": header.duration_s(),
            "statistics": stats,
        });
        text = serde_json::to_string_pretty(&out)? + "\n";
    } else {
        write_header(&mut text, &args.file, container, &header);
        write_stats(&mut text, &stats, args.channels)?;
    }
    emit(&text)
}

/// Writes `text` to stdout; a closed pipe (`inspect … | head`) is not an error.
fn emit(text: &str) -> anyhow::Result<()> {
    use std::io::Write;
    match std::io::stdout().lock().write_all(text.as_bytes()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        other => Ok(other?),
    }
}

fn write_header(out: &mut String, file: &std::path::Path, container: Container, h: &Header) {
    let order = if h.is_descending() {
        "descending"
    } else {
        "ascending"
    };
    let mut row = |k: &str, v: String| out.push_str(&format!("{k:<12} {v}\n"));
    let kind = match container {
        Container::Native => "native .json + .npy",
        Container::Fits => "FITS search mode",
    };
    row(
        "file",
        format!("{} ({kind}, {}-bit samples)", file.display(), h.nbits),
    );
    row("source", h.source.clone());
    row("telescope", h.telescope.clone());
    row(
        "site",
        format!(
            "{}: lon {:.6}°, lat {:.6}°, height {:.1} m (WGS84)",
            h.site.name, h.site.lon_deg, h.site.lat_deg, h.site.height_m
        ),
    );
    row(
        "position",
        format!(
            "RA {} ({}°), Dec {} ({:.6}°)",
            geodesy::format_ra_hms(h.ra_deg, 3),
            geodesy::format_ra_deg(h.ra_deg, 6),
            geodesy::format_sexagesimal(h.dec_deg, 2, true),
            h.dec_deg
        ),
    );
    row(
        "start",
        format!("{} UTC (MJD {:.9})", h.start.to_iso(), h.start.to_mjd_f64()),
    );
    row("tsamp", format!("{} µs", h.tsamp_s * 1e6));
    row(
        "band",
        format!(
            "{:.4}–{:.4} MHz, {} channels of {} MHz, {order}",
            h.freq_lo_mhz() - h.chan_bw_mhz / 2.0,
            h.freq_hi_mhz() + h.chan_bw_mhz / 2.0,
            h.n_chan(),
            h.chan_bw_mhz
        ),
    );
    row(
        "duration",
        format!("{:.3} s ({} samples)", h.duration_s(), h.n_samples),
    );
    row(
        "SEFD",
        h.sefd_jy.map_or("unknown".into(), |s| format!("{s} Jy")),
    );
    if let Some(beam) = &h.beam {
        row("beam", beam.clone());
    }
}

fn write_stats(out: &mut String, s: &ObsStats, per_channel: bool) -> std::fmt::Result {
    use std::fmt::Write;
    let d = &s.data;
    writeln!(
        out,
        "{:<12} mean {:.4}, std {:.4}, min {:.4}, max {:.4}, NaN {}, Inf {}",
        "data", d.mean, d.std, d.min, d.max, d.nan_count, d.inf_count
    )?;
    if per_channel {
        writeln!(
            out,
            "{:>6} {:>12} {:>6} {:>12} {:>12} {:>12} {:>12} {:>8}",
            "chan", "freq_mhz", "weight", "mean", "std", "median", "robust_std", "non_fin"
        )?;
        for c in &s.channels {
            writeln!(
                out,
                "{:>6} {:>12.4} {:>6} {:>12.4} {:>12.4} {:>12.4} {:>12.4} {:>8}",
                c.index, c.freq_mhz, c.weight, c.mean, c.std, c.median, c.robust_std, c.non_finite
            )?;
        }
    }
    if s.bad_channels.is_empty() {
        writeln!(out, "{:<12} none look bad", "channels")?;
        return Ok(());
    }
    writeln!(
        out,
        "{:<12} {} of {} look bad:",
        "channels",
        s.bad_channels.len(),
        s.channels.len()
    )?;
    for b in &s.bad_channels {
        writeln!(
            out,
            "  {:>5} ({:.4} MHz): {}",
            b.index,
            b.freq_mhz,
            b.reasons.join("; ")
        )?;
    }
    Ok(())
}

//! `book summary`.

use burstbook::catalogue::Catalogue;

use super::flags;
use super::output::{Format, opt, write_rows};

/// Arguments of `book summary`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Counts bursts with S/N >= --snr-min against the exposure searched at least that
deep (intervals with a threshold <= --snr-min, or none recorded), overlaps merged.
Bursts that arrived outside that exposure are counted in outside_exposure and left
out of the rate. The rate interval uses exact Poisson limits (Gehrels 1986, ApJ 303, 336).

Examples:
  burstbook book summary
  burstbook book summary FIELD-7 --snr-min 8 --confidence 0.99 --format json")]
pub struct SummaryArgs {
    /// Sources to summarise [default: all].
    sources: Vec<String>,
    /// S/N threshold for bursts and exposure.
    #[arg(long)]
    snr_min: Option<f64>,
    /// Confidence level of the single-sided rate limits.
    #[arg(long, default_value_t = 0.95)]
    confidence: f64,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

pub fn run(cat: &Catalogue, a: SummaryArgs) -> anyhow::Result<()> {
    flags::finite_if_given("--snr-min", a.snr_min)?;
    let names = if a.sources.is_empty() {
        cat.sources()?.into_iter().map(|s| s.name).collect()
    } else {
        a.sources
    };
    let rows = names
        .iter()
        .map(|n| cat.summary(n, a.snr_min, a.confidence))
        .collect::<Result<Vec<_>, _>>()?;
    let headers = [
        "source",
        "bursts",
        "outside_exposure",
        "exposure_h",
        "rate_per_h",
        "rate_lo_per_h",
        "rate_hi_per_h",
        "fluence_min_jy_ms",
        "fluence_max_jy_ms",
        "dm_mean",
        "dm_std",
    ];
    write_rows(
        &mut std::io::stdout().lock(),
        a.format,
        &headers,
        &rows,
        |s| {
            vec![
                s.source.clone(),
                s.n_bursts.to_string(),
                s.n_outside_exposure.to_string(),
                format!("{:.3}", s.exposure_hours),
                opt(s.rate_per_hour, 4),
                opt(s.rate_interval_per_hour.map(|r| r.lower), 4),
                opt(s.rate_interval_per_hour.map(|r| r.upper), 4),
                opt(s.fluence_range_jy_ms.map(|r| r.0), 3),
                opt(s.fluence_range_jy_ms.map(|r| r.1), 3),
                opt(s.dm_mean, 2),
                opt(s.dm_std, 2),
            ]
        },
    )
}

//! `burstbook inject FILE --out DIR`: injection-recovery completeness of a search.

use std::path::PathBuf;

use anyhow::Context;
use burstbook::catalogue::Catalogue;
use burstbook::inject::{self, Brightness, InjectOptions, InjectionRanges, output};
use burstbook::search::SearchConfig;

/// Arguments of `inject`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook inject demo-data/demo.json --out completeness --count 100
  burstbook inject obs.fits --config search.toml --count 500 --seed 7 --dm 0:2000 \\
      --width-ms 0.1:50 --snr 5:20 --out inj
  burstbook inject obs.json --config search.toml --fluence-jy-ms 0.1:10 \\
      --spectral-index -3:1 --band-limited-fraction 0.3 --scatter-ms 0.01:5 --out inj

The file is only read; bursts are added to the samples in memory. Writes
injections.csv (one row per burst), summary.json, completeness.csv and
completeness.png to --out and records the 50 %/90 % levels in the catalogue.")]
pub struct Args {
    /// Observation file (.json native header or FITS search mode).
    pub file: PathBuf,
    /// TOML search configuration, exactly as given to `search --config` [default: built-in defaults].
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Directory for injections.csv, summary.json, completeness.csv and completeness.png.
    #[arg(long)]
    pub out: PathBuf,
    /// Bursts to inject in total (spread over as many passes as needed).
    #[arg(long, default_value_t = 200)]
    pub count: usize,
    /// Seed of burst parameters and positions.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// DM range LO:HI in pc cm⁻³, uniform [default: the search's DM range].
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair)]
    pub dm: Option<[f64; 2]>,
    /// Intrinsic width (FWHM) range in ms, log-uniform.
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair, default_value = "0.5:20")]
    pub width_ms: [f64; 2],
    /// Scattering time at 1 GHz range in ms, log-uniform [default: no scattering].
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair)]
    pub scatter_ms: Option<[f64; 2]>,
    /// Power-law spectral index range, uniform.
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair, default_value = "0:0", allow_hyphen_values = true)]
    pub spectral_index: [f64; 2],
    /// Fraction of bursts given a Gaussian band-limited envelope instead of a power law.
    #[arg(long, default_value_t = 0.0)]
    pub band_limited_fraction: f64,
    /// FWHM range of the Gaussian envelopes in MHz.
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair, default_value = "100:300")]
    pub envelope_fwhm_mhz: [f64; 2],
    /// Expected S/N range, uniform [default 4:20 unless --fluence-jy-ms is given].
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair, conflicts_with = "fluence_jy_ms")]
    pub snr: Option<[f64; 2]>,
    /// Fluence range in Jy ms, log-uniform (needs the SEFD in the header).
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair)]
    pub fluence_jy_ms: Option<[f64; 2]>,
    /// Expected S/N from which bursts count as bright in the per-DM/width summary.
    #[arg(long, default_value_t = 10.0)]
    pub bright_snr: f64,
    /// Count recovered bursts that triage calls interference as found.
    #[arg(long)]
    pub count_rfi: bool,
    /// Memory the searches may use together, in GiB [default: 90 % of physical
    /// memory]: passes run side by side only as far as it holds them.
    #[arg(long, value_name = "GIB")]
    pub memory_limit_gib: Option<f64>,
    /// Catalogue file [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, value_name = "PATH")]
    pub catalogue: Option<PathBuf>,
    /// Do not record the result in the catalogue.
    #[arg(long)]
    pub no_catalogue: bool,
}

fn parse_pair(s: &str) -> Result<[f64; 2], String> {
    let (lo, hi) = s
        .split_once(':')
        .ok_or_else(|| format!("expected LO:HI, got {s:?}"))?;
    let lo: f64 = lo.trim().parse().map_err(|e| format!("{lo:?}: {e}"))?;
    let hi: f64 = hi.trim().parse().map_err(|e| format!("{hi:?}: {e}"))?;
    Ok([lo, hi])
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let mut config = match &args.config {
        Some(p) => SearchConfig::from_toml_file(p)?,
        None => SearchConfig::default(),
    };
    config.memory_limit_gib = args.memory_limit_gib;
    let brightness = match (args.snr, args.fluence_jy_ms) {
        (_, Some(f)) => Brightness::FluenceJyMs(f),
        (Some(s), None) => Brightness::Snr(s),
        (None, None) => Brightness::Snr([4.0, 20.0]),
    };
    let options = InjectOptions {
        count: args.count,
        seed: args.seed,
        ranges: InjectionRanges {
            dm: args.dm.unwrap_or([config.plan.dm_min, config.plan.dm_max]),
            width_ms: args.width_ms,
            scatter_ms_1ghz: args.scatter_ms,
            spectral_index: args.spectral_index,
            band_limited_fraction: args.band_limited_fraction,
            envelope_fwhm_mhz: args.envelope_fwhm_mhz,
            brightness,
        },
        bright_snr: args.bright_snr,
        count_rfi_as_found: args.count_rfi,
        ..InjectOptions::default()
    };
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("cannot create output directory {}", args.out.display()))?;
    let bar = burstbook::progress::bar(1, "inject");
    let result = inject::inject_file(&args.file, &config, &options, Some(&bar))?;
    bar.finish_and_clear();

    let rows = args.out.join("injections.csv");
    let curve = args.out.join("completeness.csv");
    let json = args.out.join("summary.json");
    let png = args.out.join("completeness.png");
    output::write_rows_csv(&rows, &result.rows)?;
    output::write_curve_csv(&curve, &result)?;
    if !result.rows.is_empty() {
        output::write_curve_png(&png, &result, &config)?;
    }
    burstbook::atomic_file::write(&json, output::summary_json(&result, &config))?;
    if !args.no_catalogue {
        let path = Catalogue::resolve_path(args.catalogue.as_deref());
        let mut cat = Catalogue::open(&path)?;
        output::record(&mut cat, &args.file, &result, &config)?;
        say!("recorded completeness in {}", path.display())?;
    }
    print_summary(&result)?;
    say!(
        "wrote {}, {}, {} and {}",
        rows.display(),
        curve.display(),
        png.display(),
        json.display()
    )?;
    Ok(())
}

fn print_summary(r: &inject::InjectionResult) -> std::io::Result<()> {
    let s = &r.summary;
    let opt = |v: Option<f64>| v.map_or("-".to_string(), |x| format!("{x:.2}"));
    say!(
        "{}: {} bursts in {} passes ({} candidates of the untouched data excluded); \
         {} recovered, {} detected with any verdict",
        r.file,
        s.n_injected,
        r.n_passes,
        r.original_candidates,
        s.n_found,
        s.n_detected
    )?;
    say!(
        "completeness 50 % at S/N {} and 90 % at S/N {} (probit fit; interpolated {} and {})",
        opt(s.snr50),
        opt(s.snr90),
        opt(s.snr50_interpolated),
        opt(s.snr90_interpolated)
    )?;
    if s.fluence50_jy_ms.is_some() {
        say!(
            "in fluence: 50 % at {} Jy ms, 90 % at {} Jy ms",
            opt(s.fluence50_jy_ms),
            opt(s.fluence90_jy_ms)
        )?;
    }
    let b = &s.bright;
    say!(
        "expected S/N >= {}: {} of {} recovered ({} %), median reported/expected S/N {}",
        b.min_expected_snr,
        b.n_found,
        b.n,
        opt(b.fraction.map(|f| 100.0 * f)),
        opt(b.median_snr_ratio)
    )?;
    Ok(())
}

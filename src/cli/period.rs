//! `burstbook period rotation|activity|stats|synth`: periodicity tests on arrival times.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context;
use burstbook::period::activity::{ActivityConfig, ActivityResult, search_activity};
use burstbook::period::powerlaw::fit_power_law;
use burstbook::period::rotation::{RotationConfig, RotationResult, search_rotation, test_period};
use burstbook::period::synth::{RotatingSource, activity_cycle, irregular_sessions, rng};
use burstbook::period::times::{
    ArrivalTimes, Exposure, read_arrival_csv, read_exposure_csv, read_number_csv,
};
use burstbook::period::waiting::waiting_time_stats;
use burstbook::progress;

/// Arguments of `period`.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(subcommand)]
    command: PeriodCommand,
}

#[derive(clap::Subcommand, Debug)]
enum PeriodCommand {
    /// Search arrival times for a rotation period (ms–s) with Z²ₙ and the H-test.
    #[command(after_help = "Examples:\n  burstbook period rotation\n  \
        burstbook period rotation --toas toas.csv --min-period-s 0.05 --max-period-s 10 --json\n  \
        burstbook period rotation --toas toas.csv --period-s 0.41370 --fit-pdot")]
    Rotation(RotationArgs),
    /// Search bursts and observing sessions for an activity cycle (days–months).
    #[command(after_help = "Examples:\n  burstbook period activity\n  \
        burstbook period activity --toas bursts.csv --exposure sessions.csv --max-period-days 60 --sims 2000 --json")]
    Activity(ActivityArgs),
    /// Waiting times (Poisson, Weibull) and the power-law index of fluences.
    #[command(after_help = "Examples:\n  burstbook period stats\n  \
        burstbook period stats --toas bursts.csv --exposure sessions.csv --values bursts.csv --column fluence_jy_ms")]
    Stats(StatsArgs),
    /// Write invented demo sets (a sparse rotator; a repeater with an activity cycle).
    #[command(
        after_help = "Example:\n  burstbook period synth --out-dir demo-data/period --seed 1"
    )]
    Synth(SynthArgs),
}

#[derive(clap::Args, Debug)]
struct RotationArgs {
    /// CSV of barycentric (TDB) arrival times with an MJD column.
    #[arg(long, default_value = "demo-data/period/rotator_toas.csv")]
    toas: PathBuf,
    /// Name of the MJD column.
    #[arg(long, default_value = "mjd")]
    column: String,
    /// Shortest trial period, s.
    #[arg(long, default_value_t = 1e-3)]
    min_period_s: f64,
    /// Longest trial period, s.
    #[arg(long, default_value_t = 10.0)]
    max_period_s: f64,
    /// Harmonics n of the scanned Z²ₙ (1–20).
    #[arg(long, default_value_t = 2)]
    harmonics: usize,
    /// Grid points per peak of the n-th harmonic.
    #[arg(long, default_value_t = 3.0)]
    oversample: f64,
    /// Merge arrivals closer than this (components of one burst), s.
    #[arg(long, default_value_t = 1e-3)]
    merge_gap_s: f64,
    /// Also fit a period derivative.
    #[arg(long)]
    fit_pdot: bool,
    /// Tolerance of the common-divisor check, cycles (0 turns it off).
    #[arg(long, default_value_t = 0.05)]
    divisor_tol: f64,
    /// Test this period instead of searching (no trials), s.
    #[arg(long)]
    period_s: Option<f64>,
    /// Period derivative for --period-s.
    #[arg(long, default_value_t = 0.0, requires = "period_s")]
    pdot: f64,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Write the (peak-preserving, decimated) periodogram to this CSV.
    #[arg(long)]
    periodogram_out: Option<PathBuf>,
}

/// Burst arrival times and the observing sessions they were found in.
#[derive(clap::Args, Debug)]
struct BurstInputs {
    /// CSV of burst arrival times with an MJD column.
    #[arg(long, default_value = "demo-data/period/repeater_bursts.csv")]
    toas: PathBuf,
    /// Name of the MJD column.
    #[arg(long, default_value = "mjd")]
    column: String,
    /// CSV of observing sessions with columns start_mjd,end_mjd.
    #[arg(long, default_value = "demo-data/period/repeater_exposure.csv")]
    exposure: PathBuf,
}

#[derive(clap::Args, Debug)]
struct ActivityArgs {
    #[command(flatten)]
    input: BurstInputs,
    /// Shortest trial period, days.
    #[arg(long, default_value_t = 1.5)]
    min_period_days: f64,
    /// Longest trial period, days (default: half the observing span).
    #[arg(long)]
    max_period_days: Option<f64>,
    /// Phase bins.
    #[arg(long, default_value_t = 10)]
    bins: usize,
    /// Frequency step 1/(oversample × span).
    #[arg(long, default_value_t = 10.0)]
    oversample: f64,
    /// Monte Carlo sets keeping the real exposure.
    #[arg(long, default_value_t = 1000)]
    sims: usize,
    /// Seed of the Monte Carlo.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Number of future active windows to list.
    #[arg(long, default_value_t = 3)]
    forecast: usize,
    /// List windows ending after this MJD (default: end of the last session).
    #[arg(long)]
    after_mjd: Option<f64>,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Write the curves over trial periods to this CSV.
    #[arg(long)]
    periodogram_out: Option<PathBuf>,
}

#[derive(clap::Args, Debug)]
struct StatsArgs {
    #[command(flatten)]
    input: BurstInputs,
    /// CSV holding fluences or energies for the power-law fit.
    #[arg(long, default_value = "demo-data/period/repeater_bursts.csv")]
    values: PathBuf,
    /// Column of --values to fit.
    #[arg(long, default_value = "fluence_jy_ms")]
    value_column: String,
    /// Completeness limit S_min (default: chosen by the Kolmogorov–Smirnov distance).
    #[arg(long)]
    s_min: Option<f64>,
    /// Simulated sets for the power-law goodness of fit.
    #[arg(long, default_value_t = 500)]
    boot: usize,
    /// Seed of those simulations.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
}

#[derive(clap::Args, Debug)]
struct SynthArgs {
    /// Directory to write rotator_toas.csv, repeater_bursts.csv, repeater_exposure.csv.
    #[arg(long, default_value = "demo-data/period")]
    out_dir: PathBuf,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    seed: u64,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    match args.command {
        PeriodCommand::Rotation(a) => rotation(a),
        PeriodCommand::Activity(a) => activity(a),
        PeriodCommand::Stats(a) => stats(a),
        PeriodCommand::Synth(a) => synth(a),
    }
}

fn print_json<T: serde::Serialize>(value: &T) -> anyhow::Result<()> {
    println!("{}", serde_json::to_string_pretty(value)?);
    Ok(())
}

fn create(path: &Path) -> anyhow::Result<std::io::BufWriter<std::fs::File>> {
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    }
    let f = std::fs::File::create(path).with_context(|| format!("creating {}", path.display()))?;
    Ok(std::io::BufWriter::new(f))
}

fn rotation(a: RotationArgs) -> anyhow::Result<()> {
    let toas = read_arrival_csv(&a.toas, &a.column)?;
    let cfg = RotationConfig {
        min_period_s: a.min_period_s,
        max_period_s: a.max_period_s,
        harmonics: a.harmonics,
        oversample: a.oversample,
        merge_gap_s: a.merge_gap_s,
        fit_pdot: a.fit_pdot,
        divisor_tol_cycles: a.divisor_tol,
        ..Default::default()
    };
    if let Some(p) = a.period_s {
        let h = test_period(&toas.t_s, p, a.pdot, &cfg)
            .with_context(|| format!("{}", a.toas.display()))?;
        if a.json {
            return print_json(&h);
        }
        println!(
            "Hypothesis P = {p} s (Ṗ = {}) on {} arrivals",
            a.pdot, h.n_toas
        );
        println!(
            "  Z²_{} = {:.3}   chance p = {:.3e}",
            h.harmonics, h.z2n, h.z2n_p
        );
        println!(
            "  H = {:.3} (m = {})   chance p = exp(-0.4 H) = {:.3e}",
            h.h.h, h.h.harmonics, h.h_p
        );
        if let Some(t) = &h.timing {
            println!(
                "  timing fit: P = {:.12} ± {:.2e} s, residual rms {:.3e} s ({:.4} cycles)",
                t.period_s, t.period_err_s, t.rms_s, t.rms_cycles
            );
        }
        return Ok(());
    }
    let grid_len = burstbook::period::rotation::rotation_grid(
        &toas.merge_closer_than(cfg.merge_gap_s).t_s,
        &cfg,
    )
    .len;
    let bar = progress::bar(grid_len as u64, "Z² scan");
    let r = search_rotation(&toas.t_s, &cfg, &|n| bar.inc(n))
        .with_context(|| format!("{}", a.toas.display()))?;
    bar.finish_and_clear();
    if let Some(path) = &a.periodogram_out {
        write_rotation_periodogram(path, &r)?;
    }
    if a.json {
        return print_json(&r);
    }
    print_rotation(&r, &toas);
    Ok(())
}

fn write_rotation_periodogram(path: &Path, r: &RotationResult) -> anyhow::Result<()> {
    let mut w = create(path)?;
    writeln!(w, "freq_hz,period_s,z2n")?;
    for (f, z) in r.periodogram.freq_hz.iter().zip(&r.periodogram.power) {
        writeln!(w, "{f:.12},{:.12},{z}", 1.0 / f)?;
    }
    w.flush()
        .with_context(|| format!("writing {}", path.display()))
}

fn print_rotation(r: &RotationResult, toas: &ArrivalTimes) {
    println!(
        "{} arrivals over {:.1} s; {} trial frequencies (step {:.3e} Hz, ~{:.0} independent)",
        r.n_toas, r.span_s, r.grid.len, r.grid.df_hz, r.independent_frequencies
    );
    println!(
        "{:>3} {:>16} {:>9} {:>10} {:>10} {:>8} {:>3} {:>10}",
        "#", "period_s", "Z2n", "p_single", "FAP(Z2n)", "H", "m", "FAP(H)*"
    );
    for (i, c) in r.candidates.iter().enumerate().take(10) {
        println!(
            "{:>3} {:>16.10} {:>9.2} {:>10.2e} {:>10.2e} {:>8.2} {:>3} {:>10.2e}{}",
            i,
            c.period_s,
            c.z2n,
            c.z2n_p_single,
            c.z2n_fap,
            c.h.h,
            c.h.harmonics,
            c.h_fap,
            if i == r.best { "  <- chosen" } else { "" }
        );
    }
    println!("  * H FAP is a union bound; optimistic for small N (see docs/period.md).");
    println!(
        "Best period: {:.12} ± {:.2e} s   FAP = {:.3e}",
        r.period_s, r.period_err_s, r.fap
    );
    if let Some(t) = &r.timing {
        println!(
            "  phase-connected: epoch MJD {:.12}, residual rms {:.3e} s ({:.4} cycles), pulses {}..{}",
            toas.mjd_of(t.epoch_s),
            t.rms_s,
            t.rms_cycles,
            t.pulse_numbers.first().unwrap_or(&0),
            t.pulse_numbers.last().unwrap_or(&0)
        );
        if let (Some(pd), Some(e)) = (t.pdot, t.pdot_err) {
            println!("  Ṗ = {pd:.3e} ± {e:.1e}");
        }
    } else {
        println!("  no phase-connected solution (residuals above 0.25 cycles)");
    }
    match &r.divisor {
        Some(d) => println!(
            "Common divisor: P = {:.12} s (smallest gap {:.6} s = {} turns), chance ≈ {:.1e}; P/k also fits",
            d.solution.period_s, d.smallest_gap_s, d.turns_in_smallest_gap, d.chance_probability
        ),
        None => println!("Common divisor: no period ≥ the minimum connects all arrivals"),
    }
}

impl BurstInputs {
    fn read(&self) -> anyhow::Result<(ArrivalTimes, Exposure)> {
        let t = read_arrival_csv(&self.toas, &self.column)?;
        let e = read_exposure_csv(&self.exposure, t.ref_mjd)?;
        Ok((t, e))
    }

    fn describe(&self) -> String {
        format!("{} with {}", self.toas.display(), self.exposure.display())
    }
}

fn activity(a: ActivityArgs) -> anyhow::Result<()> {
    let (toas, exposure) = a.input.read()?;
    let cfg = ActivityConfig {
        min_period_days: a.min_period_days,
        max_period_days: a.max_period_days,
        bins: a.bins,
        oversample: a.oversample,
        sims: a.sims,
        seed: a.seed,
        forecast: a.forecast,
        after_day: a.after_mjd.map(|m| m - toas.ref_mjd as f64),
    };
    let bar = progress::bar(a.sims as u64, "simulations");
    let r = search_activity(
        &toas.days(),
        &exposure.sessions_days,
        toas.ref_mjd,
        &cfg,
        &|n| bar.inc(n),
    )
    .with_context(|| a.input.describe())?;
    bar.finish_and_clear();
    if let Some(path) = &a.periodogram_out {
        let mut w = create(path)?;
        writeln!(w, "period_days,chi2,window_fraction,ls_power")?;
        let p = &r.periodogram;
        for i in 0..p.period_days.len() {
            writeln!(
                w,
                "{},{},{},{}",
                p.period_days[i], p.chi2[i], p.window_fraction[i], p.ls_power[i]
            )?;
        }
        w.flush()
            .with_context(|| format!("writing {}", path.display()))?;
    }
    if a.json {
        return print_json(&r);
    }
    print_activity(&r);
    Ok(())
}

fn print_activity(r: &ActivityResult) {
    println!(
        "{} bursts in {} sessions ({:.2} d on source over {:.1} d); {} trial periods",
        r.n_bursts,
        r.n_sessions,
        r.exposure_days,
        r.span_days,
        r.periodogram.period_days.len()
    );
    println!(
        "Best period: {:.4} ± {:.4} d (epoch of phase 0: MJD {})",
        r.period_days, r.period_err_days, r.epoch_mjd
    );
    println!(
        "  folded χ² = {:.2} ({} dof, single-trial p = {:.2e}); Monte Carlo FAP = {:.4} ({} sets, real exposure)",
        r.fold.chi2, r.fold.dof, r.chi2_p_single, r.fap, r.config.sims
    );
    println!(
        "  all bursts within {:.3} of a cycle (centre phase {:.3}); half within {:.3}; window FAP = {:.4}",
        r.window_fraction, r.centre_phase, r.half_window_fraction, r.window_fap
    );
    println!(
        "  Lomb–Scargle of session rates: best {:.4} d, power {:.3}, Baluev FAP {:.2e}",
        r.ls_period_days, r.ls_power, r.ls_fap
    );
    println!(
        "{:>5} {:>8} {:>10} {:>9}",
        "bin", "bursts", "expected", "exp_days"
    );
    for (j, ((c, e), x)) in r
        .profile
        .counts
        .iter()
        .zip(&r.profile.expected)
        .zip(&r.profile.exposure_days)
        .enumerate()
    {
        println!("{j:>5} {c:>8} {e:>10.2} {x:>9.3}");
    }
    println!("Next active windows (MJD, widened by the period uncertainty):");
    for w in &r.next_windows {
        println!(
            "  cycle {:>5}: {:.2} – {:.2}   (nominal {:.2} – {:.2})",
            w.cycle, w.start_mjd, w.end_mjd, w.nominal_start_mjd, w.nominal_end_mjd
        );
    }
}

fn stats(a: StatsArgs) -> anyhow::Result<()> {
    let (toas, exposure) = a.input.read()?;
    let waiting = waiting_time_stats(&toas.days(), &exposure.sessions_days)
        .with_context(|| a.input.describe())?;
    let values = read_number_csv(&a.values, &a.value_column)?;
    let power = fit_power_law(&values, a.s_min, a.boot, a.seed)
        .with_context(|| format!("{}", a.values.display()))?;
    if a.json {
        return print_json(&serde_json::json!({ "waiting": waiting, "power_law": power }));
    }
    let (p, w) = (&waiting.poisson, &waiting.weibull);
    println!(
        "{} bursts in {} sessions, {:.3} d on source ({} outside sessions ignored)",
        waiting.n_bursts, waiting.n_sessions, waiting.exposure_days, waiting.n_outside
    );
    println!(
        "Poisson: rate {:.3} ± {:.3} /d (68% limits {:.3}–{:.3}), ln L = {:.3}",
        p.rate_per_day, p.rate_err_per_day, p.rate_lo_per_day, p.rate_hi_per_day, p.log_likelihood
    );
    println!(
        "Weibull: k = {:.3} ± {:.3}, rate {:.3} ± {:.3} /d, ln L = {:.3}",
        w.k, w.k_err, w.rate_per_day, w.rate_err_per_day, w.log_likelihood
    );
    println!(
        "  likelihood ratio {:.2}: chance under Poisson p = {:.3e} (k < 1 means clustering)",
        waiting.likelihood_ratio, waiting.poisson_p
    );
    println!(
        "Power law of {}: dN/dS ∝ S^-α above S_min = {:.4} ({}; {} values): α = {:.3} ± {:.3} \
         (n−1 form {:.3}), cumulative γ = {:.3}, KS D = {:.3}, fit p = {}",
        a.value_column,
        power.s_min,
        if power.s_min_chosen {
            "KS-chosen"
        } else {
            "given"
        },
        power.n_tail,
        power.alpha,
        power.alpha_err,
        power.alpha_unbiased,
        power.gamma_cumulative,
        power.ks_distance,
        power.gof_p.map_or("-".to_string(), |p| format!("{p:.3}"))
    );
    Ok(())
}

/// Invented demo sets: a sparse 0.4137 s rotator over two hours, and a repeater
/// active 30 % of a 23.7-day cycle seen in 90 irregular sessions over 300 days.
fn synth(a: SynthArgs) -> anyhow::Result<()> {
    let ref_mjd = 61_000i64;
    let mut r = rng(a.seed, 0);
    let rotator = RotatingSource {
        period_s: 0.413_702_9,
        pdot: 0.0,
        epoch_s: 3.1,
        pulse_fraction: 0.02,
        jitter_s: 0.001,
    };
    let toas = rotator.arrivals(&[(0.0, 1800.0), (2700.0, 4500.0), (5400.0, 7200.0)], &mut r);
    let mut w = create(&a.out_dir.join("rotator_toas.csv"))?;
    writeln!(w, "mjd")?;
    for t in &toas {
        writeln!(w, "{}", mjd_text(ref_mjd, t / 86_400.0))?;
    }
    w.flush()?;
    let sessions = irregular_sessions(90, 300.0, 0.125, &mut r);
    let bursts = activity_cycle(23.7, 0.3, 0.4, 8.0, &sessions, &mut r);
    let mut w = create(&a.out_dir.join("repeater_bursts.csv"))?;
    writeln!(w, "mjd,fluence_jy_ms")?;
    for t in &bursts {
        // Fluences from a power law dN/dS ∝ S^-2.3 above 0.5 Jy ms.
        let s = 0.5 * (1.0 - rand::Rng::random::<f64>(&mut r)).powf(-1.0 / 1.3);
        writeln!(w, "{},{s:.4}", mjd_text(ref_mjd, *t))?;
    }
    w.flush()?;
    let mut w = create(&a.out_dir.join("repeater_exposure.csv"))?;
    writeln!(w, "start_mjd,end_mjd")?;
    for (s, e) in &sessions {
        writeln!(w, "{},{}", mjd_text(ref_mjd, *s), mjd_text(ref_mjd, *e))?;
    }
    w.flush()?;
    println!(
        "wrote {} rotator arrivals and {} repeater bursts in {} sessions to {}",
        toas.len(),
        bursts.len(),
        sessions.len(),
        a.out_dir.display()
    );
    Ok(())
}

/// MJD text with 15 decimals from an integer day and a day offset (keeps ~0.1 ns).
fn mjd_text(ref_mjd: i64, days: f64) -> String {
    let whole = days.floor();
    let frac = format!("{:.15}", days - whole);
    let (carry, digits) = if frac.starts_with("1.") {
        (1, "000000000000000")
    } else {
        (0, &frac[2..])
    };
    format!("{}.{digits}", ref_mjd + whole as i64 + carry)
}

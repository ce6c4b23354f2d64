//! `burstbook period rotation`: rotation-period search or a stated-period test.

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context;
use burstbook::atomic_file::AtomicFile;
use burstbook::period::rotation::{RotationConfig, RotationResult, search_rotation, test_period};
use burstbook::period::times::{ArrivalTimes, read_arrival_csv};
use burstbook::progress;

use super::{Probability, SourceInput, create, print_json};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// CSV of barycentric (TDB) arrival times with an MJD column.
    #[arg(long, default_value = "demo-data/period/rotator_toas.csv")]
    toas: PathBuf,
    /// Name of the MJD column.
    #[arg(long, default_value = "mjd")]
    column: String,
    #[command(flatten)]
    catalogue: SourceInput,
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
    /// Null sets (the arrivals each moved at random over 20 longest periods) searched
    /// the same way, for Monte Carlo FAPs of Z²ₙ and H; each costs one more scan.
    #[arg(long, default_value_t = 0)]
    sims: usize,
    /// Seed of the null sets.
    #[arg(long, default_value_t = 1)]
    seed: u64,
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

pub fn run(a: Args) -> anyhow::Result<()> {
    let (toas, what) = match a.catalogue.load(None)? {
        Some((_, arrivals)) => (arrivals.toas, a.catalogue.describe()),
        None => (
            read_arrival_csv(&a.toas, &a.column)?,
            a.toas.display().to_string(),
        ),
    };
    let cfg = RotationConfig {
        min_period_s: a.min_period_s,
        max_period_s: a.max_period_s,
        harmonics: a.harmonics,
        oversample: a.oversample,
        merge_gap_s: a.merge_gap_s,
        fit_pdot: a.fit_pdot,
        divisor_tol_cycles: a.divisor_tol,
        null_sets: a.sims,
        seed: a.seed,
        ..Default::default()
    };
    if let Some(p) = a.period_s {
        let h = test_period(&toas.t_s, p, a.pdot, &cfg).with_context(|| what.clone())?;
        if a.json {
            return print_json(&h);
        }
        say!(
            "Hypothesis P = {p} s (Ṗ = {}) on {} arrivals",
            a.pdot,
            h.n_toas
        )?;
        say!(
            "  Z²_{} = {:.3}   chance p = {}",
            h.harmonics,
            h.z2n,
            Probability(h.z2n_p, 3)
        )?;
        say!(
            "  H = {:.3} (m = {})   chance p = exp(-0.4 H) = {}",
            h.h.h,
            h.h.harmonics,
            Probability(h.h_p, 3)
        )?;
        if let Some(t) = &h.timing {
            say!(
                "  timing fit: P = {:.12} ± {:.2e} s, residual rms {:.3e} s ({:.4} cycles)",
                t.period_s,
                t.period_err_s,
                t.rms_s,
                t.rms_cycles
            )?;
        }
        if let Some(why) = &h.timing_failure {
            say!("  no timing fit: {why}")?;
        }
        return Ok(());
    }
    // Opened before the search, so a bad path fails at once rather than after it.
    let periodogram = a.periodogram_out.as_deref().map(create).transpose()?;
    let grid_len = burstbook::period::rotation::rotation_grid(
        &toas.merge_closer_than(cfg.merge_gap_s).t_s,
        &cfg,
    )
    .len;
    let scans = 1 + a.sims as u64;
    let bar = progress::bar(grid_len as u64 * scans, "Z² scans");
    let r = search_rotation(&toas.t_s, &cfg, &|n| bar.inc(n)).with_context(|| what.clone())?;
    bar.finish_and_clear();
    if let Some(w) = periodogram {
        write_rotation_periodogram(w, &r)?;
    }
    if a.json {
        return print_json(&r);
    }
    print_rotation(&r, &toas)?;
    Ok(())
}

fn write_rotation_periodogram(mut w: AtomicFile, r: &RotationResult) -> anyhow::Result<()> {
    writeln!(w, "freq_hz,period_s,z2n")?;
    for (f, z) in r.periodogram.freq_hz.iter().zip(&r.periodogram.power) {
        writeln!(w, "{f:.12},{:.12},{z}", 1.0 / f)?;
    }
    Ok(w.commit()?)
}

fn print_rotation(r: &RotationResult, toas: &ArrivalTimes) -> std::io::Result<()> {
    say!(
        "{} arrivals over {:.1} s; {} trial frequencies (step {:.3e} Hz, ~{:.0} independent)",
        r.n_toas,
        r.span_s,
        r.grid.len,
        r.grid.df_hz,
        r.independent_frequencies
    )?;
    if let Some(asked) = r.max_period_asked_s {
        say!(
            "  longest trial period cut from {asked} s to the arrivals' span of {:.6} s: \
             a longer one holds them within one turn and cannot be tested",
            r.config.max_period_s
        )?;
    }
    let mc_header = match r.null {
        Some(_) => format!(" {:>9} {:>9}", "MC(Z2n)", "MC(H)"),
        None => String::new(),
    };
    say!(
        "{:>3} {:>16} {:>9} {:>10} {:>10} {:>8} {:>3} {:>10}{mc_header}",
        "#",
        "period_s",
        "Z2n",
        "p_single",
        "FAP(Z2n)",
        "H",
        "m",
        "FAP(H)*"
    )?;
    for (i, c) in r.candidates.iter().enumerate().take(10) {
        let mc = match c.null_faps {
            Some(f) => format!(" {:>9.4} {:>9.4}", f.z2n, f.h),
            None => String::new(),
        };
        say!(
            "{:>3} {:>16.10} {:>9.2} {:>10} {:>10} {:>8.2} {:>3} {:>10}{mc}{}",
            i,
            c.period_s,
            c.z2n,
            Probability(c.z2n_p_single, 2),
            Probability(c.z2n_fap, 2),
            c.h.h,
            c.h.harmonics,
            Probability(c.h_fap, 2),
            if i == r.best { "  <- chosen" } else { "" }
        )?;
    }
    say!("  * H FAP is a union bound, optimistic for small N; --sims K gives Monte Carlo FAPs.")?;
    if let Some(null) = &r.null {
        say!(
            "  MC: share of {} null sets (arrivals moved at random over {:.0} s, seed {}) \
             whose strongest value reaches it; at least 1/{}.",
            null.sets,
            null.jitter_s,
            null.seed,
            null.sets + 1
        )?;
    }
    let chosen_mc = match r.candidates[r.best].null_faps {
        Some(f) => format!("   MC FAP = {:.4} (H: {:.4})", f.z2n, f.h),
        None => String::new(),
    };
    say!(
        "Best period: {:.12} ± {:.2e} s   FAP = {}{chosen_mc}",
        r.period_s,
        r.period_err_s,
        Probability(r.fap, 3)
    )?;
    if let Some(t) = &r.timing {
        say!(
            "  phase-connected: epoch MJD {:.12}, residual rms {:.3e} s ({:.4} cycles), pulses {}..{}",
            toas.mjd_of(t.epoch_s),
            t.rms_s,
            t.rms_cycles,
            t.pulse_numbers.first().unwrap_or(&0),
            t.pulse_numbers.last().unwrap_or(&0)
        )?;
        if let (Some(pd), Some(e)) = (t.pdot, t.pdot_err) {
            say!("  Ṗ = {pd:.3e} ± {e:.1e}")?;
        }
    }
    if let Some(why) = &r.timing_failure {
        say!("  no phase-connected solution: {why}")?;
    }
    match &r.divisor {
        Some(d) => say!(
            "Common divisor: P = {:.12} s (smallest gap {:.6} s = {} turns), chance ≈ {:.1e}; P/k also fits",
            d.solution.period_s,
            d.smallest_gap_s,
            d.turns_in_smallest_gap,
            d.chance_probability
        )?,
        None => say!("Common divisor: no period ≥ the minimum connects all arrivals")?,
    }
    Ok(())
}

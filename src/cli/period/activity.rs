//! `burstbook period activity`: activity-cycle search with the real exposure.

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context;
use burstbook::period::activity::{ActivityConfig, ActivityResult, search_activity};
use burstbook::progress;

use super::{BurstInputs, OnSource, Probability, create, print_json};

#[derive(clap::Args, Debug)]
pub struct Args {
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

pub fn run(a: Args) -> anyhow::Result<()> {
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
    // Opened before the search, so a bad path fails at once rather than after it.
    let periodogram = a.periodogram_out.as_deref().map(create).transpose()?;
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
    if let Some(mut w) = periodogram {
        writeln!(w, "period_days,chi2,window_fraction,ls_power")?;
        let p = &r.periodogram;
        for i in 0..p.period_days.len() {
            writeln!(
                w,
                "{},{},{},{}",
                p.period_days[i], p.chi2[i], p.window_fraction[i], p.ls_power[i]
            )?;
        }
        w.commit()?;
    }
    if a.json {
        return print_json(&r);
    }
    print_activity(&r)?;
    Ok(())
}

fn print_activity(r: &ActivityResult) -> std::io::Result<()> {
    say!(
        "{} bursts in {} sessions ({} on source over {:.1} d); {} trial periods",
        r.n_bursts,
        r.n_sessions,
        OnSource(r.exposure_days),
        r.span_days,
        r.periodogram.period_days.len()
    )?;
    say!(
        "Best period: {:.4} ± {:.4} d (epoch of phase 0: MJD {})",
        r.period_days,
        r.period_err_days,
        r.epoch_mjd
    )?;
    // No Monte Carlo sets, no false-alarm probabilities (the library gives NaN).
    let fap = r.fap_text();
    let window_fap = match r.config.sims {
        0 => "window FAP not computed".to_string(),
        _ => format!("window FAP {:.4}", r.window_fap),
    };
    print_harmonic_check(r)?;
    say!(
        "  folded χ² = {:.2} ({} dof, single-trial p = {}); {fap}",
        r.fold.chi2,
        r.fold.dof,
        Probability(r.chi2_p_single, 2)
    )?;
    say!(
        "  all bursts within {:.3} of a cycle (centre phase {:.3}); half within {:.3}; {window_fap}",
        r.window_fraction,
        r.centre_phase,
        r.half_window_fraction
    )?;
    say!(
        "  Lomb–Scargle of session rates: best {:.4} d, power {:.3}, Baluev FAP {}",
        r.ls_period_days,
        r.ls_power,
        Probability(r.ls_fap, 2)
    )?;
    say!(
        "{:>5} {:>8} {:>10} {:>9}",
        "bin",
        "bursts",
        "expected",
        "exp_days"
    )?;
    for (j, ((c, e), x)) in r
        .profile
        .counts
        .iter()
        .zip(&r.profile.expected)
        .zip(&r.profile.exposure_days)
        .enumerate()
    {
        say!("{j:>5} {c:>8} {e:>10.2} {x:>9.3}")?;
    }
    say!("Next active windows (MJD, widened by the period uncertainty):")?;
    for w in &r.next_windows {
        say!(
            "  cycle {:>5}: {:.2} – {:.2}   (nominal {:.2} – {:.2})",
            w.cycle,
            w.start_mjd,
            w.end_mjd,
            w.nominal_start_mjd,
            w.nominal_end_mjd
        )?;
    }
    if let Some(cycle) = r.forecast_stopped_at_cycle {
        say!(
            "  (stopped at cycle {cycle}: widened by the period uncertainty, its window is longer \
             than the period, so it and every later one would cover every day)"
        )?;
    }
    Ok(())
}

/// What the sub-harmonic check did: the scan's own best period and score when it was
/// replaced, else the sub-harmonics the data ruled out.
fn print_harmonic_check(r: &ActivityResult) -> std::io::Result<()> {
    let h = &r.harmonic;
    let tried = |t: &burstbook::period::harmonic::SubHarmonic| {
        format!("P/{} = {:.4} d, p = {:.3}", t.k, t.period_days, t.p)
    };
    if h.changed {
        let t = h.sub_harmonics.last().expect("a change comes from a test");
        let fap = match r.config.sims {
            0 => "no Monte Carlo".to_string(),
            _ => format!("Monte Carlo FAP {:.4}", h.scan_fap),
        };
        say!(
            "  sub-harmonic check: the scan scored {:.4} ± {:.4} d best (χ² = {:.2}, {fap}); \
             its {} cycles do not differ ({}), so its 1/{} is reported",
            h.scan_period_days,
            h.scan_period_err_days,
            h.scan_chi2,
            t.k,
            tried(t),
            t.k
        )
    } else if h.sub_harmonics.is_empty() {
        say!("  sub-harmonic check: no P/2 or P/3 within the scanned periods")
    } else {
        let tests: Vec<String> = h.sub_harmonics.iter().map(tried).collect();
        say!(
            "  sub-harmonic check: kept; the cycles of its sub-harmonics differ ({})",
            tests.join("; ")
        )
    }
}

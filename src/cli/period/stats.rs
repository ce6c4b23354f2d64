//! `burstbook period stats`: waiting-time and power-law fits.

use std::path::PathBuf;

use anyhow::Context;
use burstbook::Error;
use burstbook::catalogue::{Catalogue, DEFAULT_LOCK_WAIT};
use burstbook::period::from_catalogue::source_fluences_jy_ms;
use burstbook::period::powerlaw::fit_power_law;
use burstbook::period::times::read_positive_csv;
use burstbook::period::waiting::waiting_time_stats;

use super::{BurstInputs, OnSource, Probability, print_json};

#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    input: BurstInputs,
    /// CSV holding fluences or energies for the power-law fit [default: with
    /// --source, the bursts' catalogue fluences; else demo-data/period/repeater_bursts.csv].
    #[arg(long)]
    values: Option<PathBuf>,
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

pub fn run(a: Args) -> anyhow::Result<()> {
    let (toas, exposure) = a.input.read()?;
    let waiting = waiting_time_stats(&toas.days(), &exposure.sessions_days)
        .with_context(|| a.input.describe())?;
    // Fluences from the catalogue are whatever its bursts have (none without an
    // SEFD): a fit they cannot support is reported, and the waiting times still are.
    let from_catalogue = a.values.is_none() && a.input.catalogue.source.is_some();
    let (values, values_from) = match (&a.values, &a.input.catalogue.source) {
        (None, Some(source)) => {
            let path = Catalogue::resolve_path(a.input.catalogue.catalogue.as_deref());
            let cat = Catalogue::open_existing(&path, DEFAULT_LOCK_WAIT)?;
            let what = format!("fluence_jy_ms of {}", a.input.catalogue.describe());
            (source_fluences_jy_ms(&cat, source, a.input.snr_min)?, what)
        }
        (path, _) => {
            let path = path
                .clone()
                .unwrap_or_else(|| PathBuf::from("demo-data/period/repeater_bursts.csv"));
            let what = format!("{} of {}", a.value_column, path.display());
            (read_positive_csv(&path, &a.value_column)?, what)
        }
    };
    let (power, not_fitted) = match fit_power_law(&values, a.s_min, a.boot, a.seed) {
        Ok(power) => (Some(power), None),
        Err(_) if from_catalogue && values.is_empty() => (
            None,
            Some(format!(
                "{values_from}: no fluence known (no SEFD in the headers of its observations)"
            )),
        ),
        Err(Error::Numerical(why)) if from_catalogue => {
            (None, Some(format!("{values_from}: {why}")))
        }
        Err(e) => return Err(anyhow::Error::new(e).context(values_from)),
    };
    if a.json {
        return print_json(&serde_json::json!({
            "waiting": waiting,
            "power_law": power,
            "power_law_not_fitted": not_fitted,
        }));
    }
    let (p, w) = (&waiting.poisson, &waiting.weibull);
    say!(
        "{} bursts in {} sessions, {} on source ({} outside sessions ignored)",
        waiting.n_bursts,
        waiting.n_sessions,
        OnSource(waiting.exposure_days),
        waiting.n_outside
    )?;
    say!(
        "Poisson: rate {:.3} ± {:.3} /d (68% limits {:.3}–{:.3}), ln L = {:.3}",
        p.rate_per_day,
        p.rate_err_per_day,
        p.rate_lo_per_day,
        p.rate_hi_per_day,
        p.log_likelihood
    )?;
    say!(
        "Weibull: k = {:.3} ± {:.3}, rate {:.3} ± {:.3} /d, ln L = {:.3}",
        w.k,
        w.k_err,
        w.rate_per_day,
        w.rate_err_per_day,
        w.log_likelihood
    )?;
    say!(
        "  likelihood ratio {:.2}: chance under Poisson p = {} (k < 1 means clustering)",
        waiting.likelihood_ratio,
        Probability(waiting.poisson_p, 3)
    )?;
    let Some(power) = power else {
        say!("Power law: not fitted ({})", not_fitted.unwrap_or_default())?;
        return Ok(());
    };
    say!(
        "Power law of {values_from}: dN/dS ∝ S^-α above S_min = {:.4} ({}; {} values{}): α = {:.3} ± {:.3} \
         (n−1 form {:.3}), cumulative γ = {:.3}, KS D = {:.3}, fit p = {}",
        power.s_min,
        if power.s_min_chosen {
            "KS-chosen"
        } else {
            "given"
        },
        power.n_tail,
        match power.n_excluded {
            0 => String::new(),
            n => format!("; {n} not > 0 left out"),
        },
        power.alpha,
        power.alpha_err,
        power.alpha_unbiased,
        power.gamma_cumulative,
        power.ks_distance,
        power.gof_p.map_or("-".to_string(), |p| format!("{p:.3}"))
    )?;
    Ok(())
}

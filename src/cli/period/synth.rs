//! `burstbook period synth`: invented demo sets.

use std::io::Write;
use std::path::PathBuf;

use burstbook::period::synth::{RotatingSource, activity_cycle, irregular_sessions, rng};

use super::create;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Directory to write rotator_toas.csv, repeater_bursts.csv, repeater_exposure.csv.
    #[arg(long, default_value = "demo-data/period")]
    out_dir: PathBuf,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    seed: u64,
}

/// Invented demo sets: a sparse 0.4137 s rotator over two hours, and a repeater
/// active 30 % of a 23.7-day cycle seen in 90 irregular sessions over 300 days.
pub fn run(a: Args) -> anyhow::Result<()> {
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
    w.commit()?;
    let sessions = irregular_sessions(90, 300.0, 0.125, &mut r);
    let bursts = activity_cycle(23.7, 0.3, 0.4, 8.0, &sessions, &mut r);
    let mut w = create(&a.out_dir.join("repeater_bursts.csv"))?;
    writeln!(w, "mjd,fluence_jy_ms")?;
    for t in &bursts {
        // Fluences from a power law dN/dS ∝ S^-2.3 above 0.5 Jy ms.
        let s = 0.5 * (1.0 - rand::Rng::random::<f64>(&mut r)).powf(-1.0 / 1.3);
        writeln!(w, "{},{s:.4}", mjd_text(ref_mjd, *t))?;
    }
    w.commit()?;
    let mut w = create(&a.out_dir.join("repeater_exposure.csv"))?;
    writeln!(w, "start_mjd,end_mjd")?;
    for (s, e) in &sessions {
        writeln!(w, "{},{}", mjd_text(ref_mjd, *s), mjd_text(ref_mjd, *e))?;
    }
    w.commit()?;
    say!(
        "wrote {} rotator arrivals and {} repeater bursts in {} sessions to {}",
        toas.len(),
        bursts.len(),
        sessions.len(),
        a.out_dir.display()
    )?;
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

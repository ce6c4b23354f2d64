//! `book barycentre`: fill the bursts' barycentric TDB arrival times.

use burstbook::catalogue::Catalogue;
use burstbook::obs::UtcEpoch;
use burstbook::timing::{Barycentrer, Ephemeris, WarningTally};

/// Arguments of `book barycentre`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Converts each burst's topocentric UTC arrival (at infinite frequency) at its
observing site, towards its source's catalogue position, to TDB at the solar-system
barycentre (burstbook::timing, embedded JPL DE421 fit), and stores it. Existing
values are recomputed.

Examples:
  burstbook book barycentre
  burstbook book barycentre FIELD-7")]
pub struct BarycentreArgs {
    /// Sources whose bursts to convert [default: all].
    sources: Vec<String>,
}

pub fn run(cat: &mut Catalogue, a: BarycentreArgs) -> anyhow::Result<()> {
    let names = if a.sources.is_empty() {
        cat.sources()?.into_iter().map(|s| s.name).collect()
    } else {
        a.sources
    };
    for name in names {
        let bursts = cat.burst_timing(&name)?;
        let mut toas = Vec::with_capacity(bursts.len());
        let mut warnings = WarningTally::new("burst", "id");
        for b in &bursts {
            let bary = Barycentrer::new(&b.site, b.ra_deg, b.dec_deg, Ephemeris::Embedded)?;
            let result = bary.convert(UtcEpoch::from_mjd_f64(b.mjd_utc))?;
            warnings.add(b.burst_id, &result.warnings);
            toas.push((b.burst_id, result.tdb.to_mjd_f64()));
        }
        cat.set_barycentric_toas(&toas)?;
        for w in warnings.lines() {
            note!("burstbook: warning: {name}: {w}");
        }
        say!("{name}: {} barycentric TOA(s) stored", toas.len())?;
    }
    Ok(())
}

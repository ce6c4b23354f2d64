//! `book voevent`.

use std::path::PathBuf;

use anyhow::bail;
use burstbook::catalogue::{Catalogue, VoEventOptions, voevent_xml};

use super::output::write_out;

/// Arguments of `book voevent`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Examples:
  burstbook book voevent 3 --out burst-3.xml
  burstbook book voevent 3 --ivorn-root ivo://example.invalid/mysurvey --role observation")]
pub struct VoeventArgs {
    /// Burst id (see `burstbook book bursts`).
    burst: i64,
    /// IVORN of the publishing stream; the packet is `<root>#burst-<id>`.
    #[arg(long, default_value = "ivo://example.invalid/burstbook")]
    ivorn_root: String,
    /// Contact name for Who/Author [default: $USER].
    #[arg(long)]
    contact: Option<String>,
    /// Position uncertainty radius in degrees (e.g. the beam half-width).
    #[arg(long, default_value_t = 0.25)]
    position_error_deg: f64,
    /// Packet role: observation or test.
    #[arg(long, default_value = "test", value_parser = ["observation", "test"])]
    role: String,
    /// Write to this file instead of standard output.
    #[arg(long)]
    out: Option<PathBuf>,
}

pub fn run(cat: &Catalogue, a: VoeventArgs) -> anyhow::Result<()> {
    // A packet is meant for publication: refuse what its readers cannot use.
    let r = a.position_error_deg;
    if !(r > 0.0 && r <= 180.0) {
        bail!("--position-error-deg {r} must be a radius above 0 and at most 180 degrees");
    }
    let authority = a
        .ivorn_root
        .strip_prefix("ivo://")
        .and_then(|rest| rest.split('/').next())
        .unwrap_or_default();
    if authority.is_empty()
        || a.ivorn_root
            .contains(|c: char| c == '#' || c.is_whitespace())
    {
        bail!(
            "--ivorn-root {:?} must be an IVORN: ivo:// then an authority and path, without '#' or spaces",
            a.ivorn_root
        );
    }
    let packet = cat.burst_packet(a.burst)?;
    let opt = VoEventOptions {
        ivorn_root: a.ivorn_root,
        contact: a
            .contact
            .or_else(|| std::env::var("USER").ok())
            .unwrap_or_else(|| "unknown".into()),
        position_error_deg: a.position_error_deg,
        role: a.role,
    };
    let date = chrono::Utc::now().format("%Y-%m-%dT%H:%M:%S").to_string();
    write_out(&a.out, |out| {
        writeln!(out, "{}", voevent_xml(&packet, &opt, &date))?;
        Ok(())
    })
}

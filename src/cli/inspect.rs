//! `burstbook inspect FILE`.

use std::path::PathBuf;

/// Arguments of `inspect`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Observation file (.json native header or FITS search mode).
    pub file: PathBuf,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let source = burstbook::obs::open(&args.file)?;
    println!("{:#?}", source.header());
    Ok(())
}

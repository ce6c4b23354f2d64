//! The single-pulse search: normalisation, boxcar matched filter, the per-block driver
//! and its configuration. Entry points: [`search_file`] and [`search_source`].
//!
//! Data flow per block: [`crate::clean`] flags channels on raw samples →
//! [`normalise`] makes every channel zero-mean, unit-variance and transposes to
//! `[channel, time]` → impulse clipping / zero-DM → dedispersion → each dedispersed
//! series is normalised again → [`boxcar`] matched filter → [`crate::cluster`] →
//! features and [`crate::triage`].

mod blocks;
pub mod boxcar;
mod channels;
mod config;
mod driver;
mod features;
pub mod fluence;
pub mod join;
pub mod memory;
pub mod normalise;
pub mod output;
mod transpose;
pub mod trials;

pub use blocks::{BlockLayout, StageSeconds};
pub use config::{ClusterConfig, SearchConfig, TriageConfig};
pub use driver::{
    FileResult, Workspace, block_layout, check_files, drop_repeats_across_cut, run_on_rows,
    search_file, search_run_on_in, search_source, search_source_in,
};
pub use trials::TrialCount;

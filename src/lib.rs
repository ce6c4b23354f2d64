//! burstbook: find dispersed radio bursts in long dynamic spectra, keep a catalogue of
//! the ones confirmed, and test their arrival times for hidden periods.
//!
//! Data flows one way, one module per stage:
//! [`obs`] (read/write recordings) → `clean` (interference excision) →
//! `dedisperse` (DM plan and kernels) → `search` (matched filter) → `cluster` /
//! `triage` → `catalogue` (SQLite) → `timing` (barycentric TOAs) → `period`
//! (periodicity tests) → `report` (plots, HTML, review). `simulate` makes
//! synthetic recordings for tests and demos.

pub mod atomic_file;
pub mod candidate;
pub mod catalogue;
pub mod clean;
pub mod cluster;
pub mod dedisperse;
pub mod error;
pub mod inject;
mod isa;
pub mod obs;
pub mod period;
pub mod progress;
pub mod report;
pub mod robust;
pub mod search;
pub mod simulate;
pub mod timing;
pub mod triage;
pub mod units;

pub use candidate::{Candidate, TriageFeatures, Verdict};
pub use error::{Error, Result};

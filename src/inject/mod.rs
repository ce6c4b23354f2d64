//! Injection-recovery: how complete is a search on a given recording?
//!
//! Synthetic bursts ([`crate::simulate::Burst`]) are drawn with a seed over user
//! ranges ([`InjectionRanges`]), placed so that no two of one pass overlap
//! ([`schedule`]), and streamed into the recording's rows by an adapter
//! ([`InjectingSource`]) — the file itself is never written. Each pass runs the
//! exact search the configuration describes ([`crate::search::search_source`]);
//! found candidates are matched to the bursts ([`matching`]) after removing the
//! events the untouched data already contains. The result is a per-burst table and
//! a completeness curve ([`curve`], [`Summary`]). Entry points: [`inject_file`],
//! [`inject_source`].

pub mod curve;
pub mod matching;
pub mod output;
pub mod plot;
mod ranges;
mod run;
pub mod schedule;
mod source;
mod summary;

pub use ranges::{Brightness, Drawn, InjectionRanges};
pub use run::{InjectOptions, InjectionResult, InjectionRow, inject_file, inject_source};
pub use source::{InjectingSource, channel_sigma};
pub use summary::{Bright, Summary};

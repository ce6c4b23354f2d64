//! Periodicity tests on burst arrival times (barycentric TDB).
//!
//! * Rotation periods (ms–s): [`rotation::search_rotation`] scans Z²ₙ over trial
//!   frequencies ([`scan`]), applies the H-test to the strongest peaks
//!   ([`coherence`]), cross-checks with the common-divisor method ([`divisor`]) and
//!   refines by phase-connected timing ([`timing`]); optional Monte Carlo FAPs come
//!   from null sets of the same arrivals ([`null_sets`]).
//! * Activity cycles (days–months): [`activity::search_activity`] folds bursts and
//!   exposure ([`fold`]), checks whether a sub-harmonic of the best period explains
//!   the bursts as well ([`harmonic`]), with Lomb–Scargle of session rates ([`lomb`])
//!   and Monte Carlo significance that keeps the real exposure.
//! * Burst statistics: waiting times ([`waiting`]) and power-law indices ([`powerlaw`]).
//! * [`synth`] makes seeded synthetic sets for tests, benchmarks and demos.
//!
//! Every entry point takes plain slices of times (seconds or days after a reference
//! MJD, see [`times`]) so catalogue rows convert with [`times::ArrivalTimes::from_mjd`];
//! [`from_catalogue`] reads a source's bursts and exposure, both on barycentric TDB.

pub mod activity;
pub mod coherence;
pub mod divisor;
pub mod fold;
pub mod from_catalogue;
pub mod harmonic;
pub mod lomb;
pub mod null_sets;
pub mod powerlaw;
pub mod rotation;
pub mod scan;
pub mod synth;
pub mod times;
pub mod timing;
pub mod waiting;

//! The search's product: one clustered candidate per event, with triage features and
//! a verdict. Shared by the search, the catalogue, the report and injection stages.

use serde::{Deserialize, Serialize};

/// What triage (or a person) thinks a candidate is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// A dispersed pulse from the sky.
    Astrophysical,
    /// Man-made interference or an instrumental artefact.
    Rfi,
    /// Neither test is conclusive.
    Unsure,
}

impl Verdict {
    /// The lower-case name used in files and the catalogue.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Astrophysical => "astrophysical",
            Verdict::Rfi => "rfi",
            Verdict::Unsure => "unsure",
        }
    }

    /// Parses the lower-case name.
    pub fn parse(s: &str) -> Option<Verdict> {
        match s {
            "astrophysical" => Some(Verdict::Astrophysical),
            "rfi" => Some(Verdict::Rfi),
            "unsure" => Some(Verdict::Unsure),
            _ => None,
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Numbers triage uses to tell a dispersed pulse from interference.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
pub struct TriageFeatures {
    /// S/N of the same time window at DM 0 divided by the peak S/N.
    pub snr_dm0_ratio: f64,
    /// RMS difference between the measured S/N-versus-DM curve (normalised to its
    /// peak) and the curve expected for a dispersed pulse of the detected width
    /// (Cordes & McLaughlin 2003).
    pub dm_curve_misfit: f64,
    /// Fraction of unmasked channels that carry the signal.
    pub band_fraction: f64,
    /// Spectral modulation index of the on-pulse spectrum, σ_ν(I)/⟨I⟩_ν.
    pub modulation_index: f64,
}

/// One clustered event found by the search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Candidate {
    /// The observation file it came from, as given on the command line.
    pub file: String,
    /// Arrival time at infinite frequency in seconds after the first sample's start.
    pub t_inf_s: f64,
    /// Topocentric UTC MJD of the arrival at infinite frequency.
    pub mjd_inf: f64,
    /// Best dispersion measure in pc cm⁻³.
    pub dm: f64,
    /// Lowest DM in pc cm⁻³ among the cluster's members.
    pub dm_lo: f64,
    /// Highest DM in pc cm⁻³ among the cluster's members.
    pub dm_hi: f64,
    /// Width of the best boxcar in milliseconds.
    pub width_ms: f64,
    /// Best S/N over the cluster.
    pub snr: f64,
    /// Number of (time, DM, width) detections merged into this candidate.
    pub cluster_size: usize,
    /// Triage verdict.
    pub verdict: Verdict,
    /// Human-readable reasons behind the verdict.
    pub reasons: Vec<String>,
    /// The numbers triage looked at.
    pub features: TriageFeatures,
    /// Fluence in Jy ms from the radiometer equation, when the SEFD is known.
    pub fluence_jy_ms: Option<f64>,
}

//! The search configuration: every knob of a run, serialisable (TOML in, JSON out)
//! with a stable hash so a catalogue can record exactly how a candidate was found.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::clean::CleanConfig;
use crate::dedisperse::{Kernel, PlanRequest};
use crate::error::{Error, Result, toml_message};
use crate::obs::Averaging;

/// How detections are merged into candidates (see [`crate::cluster`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ClusterConfig {
    /// Two detections are friends if their trial DMs are at most this many trials
    /// apart (in the plan's ascending DM order).
    pub dm_link_trials: usize,
    /// Extra time slack in seconds added to the half-sum of the two boxcar widths.
    pub time_link_s: f64,
}

impl Default for ClusterConfig {
    fn default() -> Self {
        ClusterConfig {
            dm_link_trials: 3,
            time_link_s: 0.002,
        }
    }
}

/// Thresholds of the triage verdict (see [`crate::triage`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct TriageConfig {
    /// Largest allowed excess of the DM-0 S/N ratio over the ratio expected for a
    /// dispersed pulse before the candidate is called undispersed interference.
    pub max_dm0_excess: f64,
    /// Expected DM-0 ratio above which the DM is too low to tell a pulse from
    /// undispersed interference.
    pub ambiguous_dm0_ratio: f64,
    /// Smallest gap between a candidate's S/N and its S/N at DM 0 for it to count as
    /// dispersed; a smaller gap is within the noise of an undispersed pulse.
    pub min_dm0_snr_gap: f64,
    /// RMS misfit of the S/N-versus-DM curve above which the candidate is interference.
    pub max_dm_curve_misfit: f64,
    /// Band fraction below which a signal that passes the dispersion tests is only
    /// `unsure`: a band-limited burst or narrow-band interference.
    pub min_band_fraction: f64,
}

impl Default for TriageConfig {
    fn default() -> Self {
        TriageConfig {
            max_dm0_excess: 0.25,
            ambiguous_dm0_ratio: 0.7,
            min_dm0_snr_gap: 3.0,
            max_dm_curve_misfit: 0.25,
            min_band_fraction: 0.15,
        }
    }
}

/// The baseline window of the default widest boxcar (0.1 s), in seconds.
const DEFAULT_BASELINE_S: f64 = 1.0;

/// Baseline window per unit of the widest boxcar when no baseline is set: ten times
/// keeps a pulse's own contribution to the running median below a tenth of the window
/// (common practice), as the defaults (1 s against 0.1 s) do.
pub const BASELINE_PER_WIDTH: f64 = 10.0;

/// Everything that defines a search run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SearchConfig {
    /// Trial DMs requested of the planner.
    pub plan: PlanRequest,
    /// Detection threshold on the matched-filter S/N.
    pub snr_threshold: f64,
    /// Widest boxcar in seconds.
    pub max_width_s: f64,
    /// Ratio between neighbouring boxcar widths (√2 keeps the worst-case loss for a
    /// Gaussian pulse at 0.933 of the best boxcar; see `search::boxcar`).
    pub width_ratio: f64,
    /// Length of the running baseline (median) window in seconds; must be well above
    /// `max_width_s` so a pulse does not pull its own baseline. Unless a
    /// configuration file sets it, it follows the widest boxcar:
    /// max(1 s, `BASELINE_PER_WIDTH` (10) × `max_width_s`) (see [`Self::set_max_width_s`]).
    pub baseline_s: f64,
    /// Whether `baseline_s` was set by the user (a configuration file's key) rather
    /// than derived from `max_width_s`. Not part of the JSON or the hash: the
    /// baseline used is.
    #[serde(skip)]
    pub baseline_is_set: bool,
    /// New samples per block in seconds (each block also carries the overlap).
    pub block_s: f64,
    /// Time samples and channels averaged as the recording is read (`[average]`;
    /// none by default). Left out of the JSON, and so of the hash, when nothing is
    /// averaged, so configurations from before it existed keep their hashes.
    #[serde(skip_serializing_if = "Averaging::is_none")]
    pub average: Averaging,
    /// Dedispersion kernel (`fast` or `reference`).
    pub kernel: Kernel,
    /// Interference excision.
    pub clean: CleanConfig,
    /// Clustering of detections into candidates.
    pub cluster: ClusterConfig,
    /// Triage verdict thresholds.
    pub triage: TriageConfig,
    /// Memory the search may use, GiB (`None`: 90 % of physical memory; see
    /// [`super::memory`]). A resource, not a setting of the science: it is neither
    /// read from TOML nor part of [`Self::to_json`] and [`Self::hash`].
    #[serde(skip)]
    pub memory_limit_gib: Option<f64>,
}

impl Default for SearchConfig {
    fn default() -> Self {
        SearchConfig {
            plan: PlanRequest::default(),
            snr_threshold: 7.5,
            max_width_s: 0.1,
            width_ratio: std::f64::consts::SQRT_2,
            baseline_s: DEFAULT_BASELINE_S,
            baseline_is_set: false,
            block_s: 4.0,
            average: Averaging::default(),
            kernel: Kernel::default(),
            clean: CleanConfig::default(),
            cluster: ClusterConfig::default(),
            triage: TriageConfig::default(),
            memory_limit_gib: None,
        }
    }
}

impl SearchConfig {
    /// Reads a TOML file; missing keys keep their defaults.
    ///
    /// # Errors
    /// Unreadable file, bad TOML, unknown keys or values out of range.
    pub fn from_toml_file(path: &std::path::Path) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        let table: toml::Table =
            toml::from_str(&text).map_err(|e| Error::bad_input(path, toml_message(&text, &e)))?;
        let mut config: SearchConfig =
            toml::from_str(&text).map_err(|e| Error::bad_input(path, toml_message(&text, &e)))?;
        config.baseline_is_set = table.contains_key("baseline_s");
        config.set_max_width_s(config.max_width_s);
        config.validate().map_err(|e| match e {
            Error::Config(msg) => Error::bad_input(path, msg),
            other => other,
        })?;
        Ok(config)
    }

    /// Sets the widest boxcar, in seconds; a baseline window the user did not set
    /// follows it (max(1 s, `BASELINE_PER_WIDTH` (10) × width)), so asking for wider
    /// boxcars needs no second setting.
    pub fn set_max_width_s(&mut self, max_width_s: f64) {
        self.max_width_s = max_width_s;
        if !self.baseline_is_set && max_width_s.is_finite() {
            self.baseline_s = DEFAULT_BASELINE_S.max(BASELINE_PER_WIDTH * max_width_s);
        }
    }

    /// The configuration as compact JSON (field order fixed by the struct).
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("a search configuration always serialises")
    }

    /// A stable identifier of the configuration: SHA-256 of [`Self::to_json`], hex.
    ///
    /// Equal configurations give equal hashes across runs and machines (serde_json
    /// prints floats in shortest round-trip form).
    pub fn hash(&self) -> String {
        Sha256::digest(self.to_json().as_bytes())
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect()
    }

    /// Checks ranges and consistency.
    ///
    /// # Errors
    /// [`Error::Config`] naming the offending value.
    pub fn validate(&self) -> Result<()> {
        let p = &self.plan;
        let bad = |m: String| Err(Error::Config(m));
        if !(p.dm_min >= 0.0 && p.dm_max >= p.dm_min && p.dm_max.is_finite()) {
            return bad(format!(
                "DM range {}..{} (dm_min..dm_max, flags --dm-min/--dm-max) must satisfy \
                 0 <= min <= max",
                p.dm_min, p.dm_max
            ));
        }
        if !(self.snr_threshold.is_finite() && self.snr_threshold > 0.0) {
            return bad(format!(
                "S/N threshold must be positive, got {}",
                self.snr_threshold
            ));
        }
        if !(self.max_width_s.is_finite() && self.max_width_s > 0.0) {
            return bad(format!(
                "maximum width must be positive, got {} s",
                self.max_width_s
            ));
        }
        if !(self.width_ratio > 1.0 && self.width_ratio <= 4.0) {
            return bad(format!(
                "width ratio must be in (1, 4], got {}",
                self.width_ratio
            ));
        }
        if self.baseline_s.is_nan() || self.baseline_s < 2.0 * self.max_width_s {
            return bad(format!(
                "baseline window {} s must be at least twice the widest boxcar {} s \
                 (raise baseline_s in the configuration file, or leave it out to have \
                 it follow the widest boxcar)",
                self.baseline_s, self.max_width_s
            ));
        }
        if !(self.block_s.is_finite() && self.block_s > 0.0) {
            return bad(format!(
                "block length must be positive, got {} s",
                self.block_s
            ));
        }
        if let Some(gib) = self.memory_limit_gib
            && !(gib.is_finite() && gib > 0.0)
        {
            return bad(format!("memory limit must be positive, got {gib} GiB"));
        }
        self.average.validate().map_err(Error::Config)?;
        self.clean.validate()?;
        self.cluster.validate()?;
        self.triage.validate()
    }
}

impl ClusterConfig {
    /// # Errors
    /// [`Error::Config`] for a negative or non-finite time slack.
    pub fn validate(&self) -> Result<()> {
        if !(self.time_link_s.is_finite() && self.time_link_s >= 0.0) {
            return Err(Error::Config(format!(
                "[cluster] time_link_s must be >= 0, got {}",
                self.time_link_s
            )));
        }
        Ok(())
    }
}

impl TriageConfig {
    /// # Errors
    /// [`Error::Config`] for a threshold outside the range its quantity can take: the
    /// DM-0 ratios and the band fraction lie in [0, 1], the misfit is positive.
    pub fn validate(&self) -> Result<()> {
        let fractions = [
            ("max_dm0_excess", self.max_dm0_excess),
            ("ambiguous_dm0_ratio", self.ambiguous_dm0_ratio),
            ("min_band_fraction", self.min_band_fraction),
        ];
        if let Some((name, value)) = fractions.iter().find(|(_, v)| !(0.0..=1.0).contains(v)) {
            return Err(Error::Config(format!(
                "[triage] {name} must be in [0, 1], got {value}"
            )));
        }
        // Infinite: the shape test never calls a candidate interference.
        if self.max_dm_curve_misfit.is_nan() || self.max_dm_curve_misfit <= 0.0 {
            return Err(Error::Config(format!(
                "[triage] max_dm_curve_misfit must be > 0, got {}",
                self.max_dm_curve_misfit
            )));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn toml_overrides_defaults_and_hash_is_stable() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(
            &path,
            "snr_threshold = 8.0\n[plan]\ndm_min = 0.0\ndm_max = 300.0\nmin_width_s = 0.0\n\
             tolerance = 1.25\nmax_downsample = 8\n[clean]\nzero_dm = true\n",
        )
        .unwrap();
        let c = SearchConfig::from_toml_file(&path).unwrap();
        assert_eq!(c.snr_threshold, 8.0);
        assert_eq!(c.plan.dm_max, 300.0);
        assert!(c.clean.zero_dm);
        assert_eq!(c.max_width_s, SearchConfig::default().max_width_s);
        assert_eq!(c.hash(), c.clone().hash());
        assert_eq!(c.hash().len(), 64);
        assert_ne!(c.hash(), SearchConfig::default().hash());
        let back: SearchConfig = serde_json::from_str(&c.to_json()).unwrap();
        assert_eq!(back, c);
    }

    #[test]
    fn partial_plan_table_keeps_the_other_defaults() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, "[plan]\ndm_min = 50.0\ntolerance = 1.1\n").unwrap();
        let c = SearchConfig::from_toml_file(&path).unwrap();
        let d = SearchConfig::default();
        assert_eq!((c.plan.dm_min, c.plan.tolerance), (50.0, 1.1));
        assert_eq!(c.plan.dm_max, d.plan.dm_max);
        assert_eq!(c.plan.min_width_s, d.plan.min_width_s);
        assert_eq!(c.plan.max_downsample, d.plan.max_downsample);
        // Unknown keys inside [plan] are still refused.
        std::fs::write(&path, "[plan]\ndm_maks = 50.0\n").unwrap();
        let e = SearchConfig::from_toml_file(&path).unwrap_err().to_string();
        assert!(e.contains("dm_maks"), "{e}");
    }

    #[test]
    fn rejects_unknown_keys_and_bad_values() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, "snr_treshold = 8.0\n").unwrap();
        let e = SearchConfig::from_toml_file(&path).unwrap_err().to_string();
        assert!(e.contains("s.toml"), "{e}");
        let mut c = SearchConfig::default();
        c.baseline_s = c.max_width_s;
        assert!(c.validate().is_err());
    }

    // Asking for wider boxcars needs no second setting: a baseline the user did not
    // set follows the widest boxcar; one the user set is kept, and checked.
    #[test]
    fn an_unset_baseline_follows_the_widest_boxcar() {
        let mut c = SearchConfig::default();
        c.set_max_width_s(0.8);
        assert_eq!(c.baseline_s, 8.0);
        assert!(c.validate().is_ok());
        c.set_max_width_s(0.01);
        assert_eq!(c.baseline_s, 1.0);

        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, "max_width_s = 0.5\n").unwrap();
        let c = SearchConfig::from_toml_file(&path).unwrap();
        assert_eq!(c.baseline_s, 5.0);

        std::fs::write(&path, "baseline_s = 1.5\n").unwrap();
        let mut c = SearchConfig::from_toml_file(&path).unwrap();
        c.set_max_width_s(0.8);
        assert_eq!(c.baseline_s, 1.5);
        let e = c.validate().unwrap_err().to_string();
        assert!(e.contains("baseline window 1.5 s"), "{e}");
        std::fs::write(&path, "baseline_s = 1.5\nmax_width_s = 0.9\n").unwrap();
        assert!(SearchConfig::from_toml_file(&path).is_err());
    }

    // Averaging is part of the configuration (and its hash) only when it averages:
    // configurations from before it existed keep their JSON and hashes.
    #[test]
    fn averaging_enters_the_hash_only_when_it_averages() {
        let plain = SearchConfig::default();
        assert!(!plain.to_json().contains("average"), "{}", plain.to_json());
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, "[average]\nsamples = 8\nchannels = 2\n").unwrap();
        let c = SearchConfig::from_toml_file(&path).unwrap();
        assert_eq!((c.average.samples, c.average.channels), (8, 2));
        assert!(
            c.to_json()
                .contains(r#""average":{"samples":8,"channels":2}"#)
        );
        assert_ne!(c.hash(), plain.hash());
        let back: SearchConfig = serde_json::from_str(&plain.to_json()).unwrap();
        assert!(back.average.is_none());
        std::fs::write(&path, "[average]\nsamples = 0\n").unwrap();
        let e = SearchConfig::from_toml_file(&path).unwrap_err().to_string();
        assert!(e.contains("s.toml") && e.contains("at least 1"), "{e}");
    }

    // Every problem of a configuration file comes back on one line naming the file:
    // where a TOML error is (without the excerpt the parser draws over several
    // lines), and which value is out of the range its quantity can take.
    #[test]
    fn file_errors_name_the_file_and_the_place_on_one_line() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bad.toml");
        let cases = [
            (
                "snr_threshold = 8.0\nbogus = 1\n",
                "line 2, column 1: unknown field `bogus`",
            ),
            (
                "snr_threshold = \"high\"\n",
                "line 1, column 17: invalid type",
            ),
            ("[triage\n", "line 1, column 8"),
            (
                "[triage]\nmin_band_fraction = 5.0\n",
                "min_band_fraction must be in [0, 1]",
            ),
            (
                "[triage]\nmax_dm0_excess = nan\n",
                "max_dm0_excess must be in [0, 1], got NaN",
            ),
            (
                "[triage]\nmax_dm_curve_misfit = 0.0\n",
                "max_dm_curve_misfit must be > 0",
            ),
            (
                "[cluster]\ntime_link_s = -1.0\n",
                "time_link_s must be >= 0",
            ),
            (
                "[clean]\nkurtosis_flag_fraction = 2.0\n",
                "kurtosis_flag_fraction must be in (0, 1]",
            ),
            (
                "[plan]\ndm_min = 500.0\ndm_max = 100.0\n",
                "DM range 500..100",
            ),
        ];
        for (text, needle) in cases {
            std::fs::write(&path, text).unwrap();
            let e = SearchConfig::from_toml_file(&path).unwrap_err().to_string();
            assert!(e.starts_with(&format!("{}: ", path.display())), "{e}");
            assert!(e.contains(needle) && !e.contains('\n'), "{text:?}: {e}");
        }
        // The limits themselves are allowed: an infinite misfit turns the test off.
        std::fs::write(
            &path,
            "[triage]\nmax_dm_curve_misfit = inf\nmin_band_fraction = 0.0\n",
        )
        .unwrap();
        assert!(SearchConfig::from_toml_file(&path).is_ok());
    }
}

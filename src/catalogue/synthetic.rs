//! Invented catalogue content for tests, benchmarks and the hidden
//! `burstbook book fill-synthetic` command that the crash and concurrency tests
//! drive as a separate process. Nothing here touches real data.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use sha2::{Digest, Sha256};

use super::{CompletenessRecord, ObservationRecord, RunRecord};
use crate::candidate::{Candidate, TriageFeatures, Verdict};
use crate::obs::{Header, Site, UtcEpoch};

/// A one-hour observation of `source` at an invented site; `seed` picks its start
/// day and its content hash, so different seeds are different files.
pub fn observation(source: &str, seed: u64) -> ObservationRecord {
    let n_chan = 64;
    let bw = 400.0 / n_chan as f64;
    let mut weights = vec![1.0f32; n_chan];
    weights[3] = 0.0;
    let header = Header {
        source: source.to_string(),
        telescope: "Heronsgate 40 m".into(),
        ra_deg: 123.25,
        dec_deg: -12.5,
        site: Site {
            name: "Heronsgate".into(),
            lon_deg: 7.5,
            lat_deg: 47.25,
            height_m: 820.0,
        },
        start: UtcEpoch::new(60000 + seed as i64, 3600.0),
        tsamp_s: 1.0 / 1024.0,
        freqs_mhz: (0..n_chan)
            .map(|i| 1600.0 - bw * (i as f64 + 0.5))
            .collect(),
        chan_bw_mhz: bw,
        weights,
        n_samples: 3600 * 1024,
        nbits: 8,
        sefd_jy: Some(20.0),
        beam: None,
    };
    let hash = |what: &str| {
        let h = Sha256::digest(format!("synthetic {what} {source} {seed}").as_bytes());
        h.iter().map(|b| format!("{b:02x}")).collect()
    };
    ObservationRecord {
        path: format!("synthetic/{source}-{seed}.fits"),
        content_sha256: hash("observation"),
        data_sha256: hash("samples"),
        header,
    }
}

/// `first` as another search run of the same recording finds it: each event at a
/// DM 0.8 higher (which moves t_inf by k·0.8/ν², 1.3–2.3 ms over 1200–1600 MHz;
/// Lorimer & Kramer 2005), 2 ms later and 1.5 times wider, plus a DM-0 flash at the
/// first event's instant, which is another event.
#[cfg(test)]
fn found_again(first: &[Candidate]) -> Vec<Candidate> {
    let mut again = first.to_vec();
    for c in &mut again {
        (c.dm, c.dm_lo, c.dm_hi) = (c.dm + 0.8, c.dm_lo + 0.8, c.dm_hi + 0.8);
        c.t_inf_s += 2e-3;
        c.mjd_inf += 2e-3 / crate::units::SECONDS_PER_DAY;
        c.width_ms *= 1.5;
    }
    let mut flash = first[0].clone();
    (flash.dm, flash.dm_lo, flash.dm_hi) = (0.0, 0.0, 1.0);
    again.push(flash);
    again
}

/// A catalogue in `dir` holding one observation of FIELD-7 searched twice: two
/// events, then [`found_again`]'s three finds; with the candidate ids in order (the
/// first run's two, the second run's two, the flash).
#[cfg(test)]
pub fn searched_twice(dir: &std::path::Path) -> (super::Catalogue, Vec<i64>) {
    let mut cat = super::Catalogue::open(&dir.join("c.sqlite")).unwrap();
    let obs = observation("FIELD-7", 3);
    let first = candidates(&obs, 2, 3);
    cat.record_search(&obs, &run(7.0), &first).unwrap();
    cat.record_search(&obs, &run(8.0), &found_again(&first))
        .unwrap();
    let mut ids: Vec<i64> = cat
        .candidates(&super::CandidateFilter::default())
        .unwrap()
        .iter()
        .map(|r| r.id)
        .collect();
    ids.sort();
    (cat, ids)
}

/// Adds source "OTHER" at RA 10°, Dec 20°, with no DM or notes: a second source
/// for tests that promote to two.
#[cfg(test)]
pub fn add_other_source(cat: &mut super::Catalogue) {
    cat.edit_source(&super::SourceEdit {
        name: "OTHER".into(),
        ra_deg: 10.0,
        dec_deg: 20.0,
        dm_ref: None,
        notes: None,
    })
    .unwrap();
}

/// The ids of the candidates `filter` selects, ascending.
#[cfg(test)]
pub fn candidate_ids(cat: &super::Catalogue, filter: &super::CandidateFilter) -> Vec<i64> {
    let mut ids: Vec<i64> = cat
        .candidates(filter)
        .unwrap()
        .iter()
        .map(|r| r.id)
        .collect();
    ids.sort();
    ids
}

/// The catalogue's tables, in the order of [`row_counts`].
#[cfg(test)]
pub const TABLES: [&str; 8] = [
    "source",
    "observation",
    "search_run",
    "candidate",
    "exposure",
    "burst",
    "review_label",
    "injection_completeness",
];

/// Rows per table, in [`TABLES`] order.
#[cfg(test)]
pub fn row_counts(cat: &super::Catalogue) -> Vec<i64> {
    TABLES
        .iter()
        .map(|t| {
            let sql = format!("SELECT count(*) FROM {t}");
            cat.conn().query_row(&sql, [], |r| r.get(0)).unwrap()
        })
        .collect()
}

/// Asserts the catalogue sound, every run whole, and no row pointing at a
/// missing one.
#[cfg(test)]
pub fn assert_whole(cat: &super::Catalogue) {
    cat.verify().unwrap();
    let dangling: i64 = cat
        .conn()
        .query_row("SELECT count(*) FROM pragma_foreign_key_check", [], |r| {
            r.get(0)
        })
        .unwrap();
    assert_eq!(dangling, 0);
}

/// `n` seeded candidates inside `obs`, DMs in 10..1000 pc cm⁻³, S/N 6..50.
pub fn candidates(obs: &ObservationRecord, n: usize, seed: u64) -> Vec<Candidate> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let duration_s = obs.header.duration_s();
    let start_mjd = obs.span_mjd().0;
    (0..n)
        .map(|_| {
            let t = rng.random_range(0.0..duration_s);
            let dm = rng.random_range(10.0..1000.0);
            let verdict = match rng.random_range(0..3) {
                0 => Verdict::Astrophysical,
                1 => Verdict::Rfi,
                _ => Verdict::Unsure,
            };
            Candidate {
                file: obs.path.clone(),
                t_inf_s: t,
                mjd_inf: start_mjd + t / crate::units::SECONDS_PER_DAY,
                dm,
                dm_lo: dm - 1.5,
                dm_hi: dm + 2.0,
                width_ms: rng.random_range(0.5..20.0),
                snr: rng.random_range(6.0..50.0),
                cluster_size: rng.random_range(1..40),
                verdict,
                reasons: vec![format!("synthetic {}", verdict.as_str())],
                features: TriageFeatures {
                    snr_dm0_ratio: rng.random_range(0.0..1.0),
                    dm_curve_misfit: rng.random_range(0.0..0.5),
                    band_fraction: rng.random_range(0.0..1.0),
                    modulation_index: rng.random_range(0.0..3.0),
                },
                fluence_jy_ms: Some(rng.random_range(0.1..10.0)),
            }
        })
        .collect()
}

/// A completeness result of `run`'s configuration with fluences 0.4 and 0.9 Jy ms
/// at 50 % and 90 % completeness, and no S/N levels.
pub fn fluence_completeness(run: &RunRecord) -> CompletenessRecord {
    CompletenessRecord {
        config_json: run.config_json.clone(),
        snr50: None,
        snr90: None,
        fluence50_jy_ms: Some(0.4),
        fluence90_jy_ms: Some(0.9),
        result_json: "{}".into(),
    }
}

/// A run record whose configuration differs only by its S/N threshold.
pub fn run(snr_threshold: f64) -> RunRecord {
    RunRecord::finished_now(
        format!(r#"{{"snr_threshold":{snr_threshold},"dm_max":1000.0,"widths_ms":[1,2,4,8]}}"#),
        r#"{"steps":[{"dms":[0.0,1.0],"downsample":1}]}"#.into(),
        Some(snr_threshold),
        super::now_utc(),
    )
}

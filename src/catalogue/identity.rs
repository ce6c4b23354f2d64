//! How the catalogue knows an observation: by the hash of its files (`content_sha256`)
//! and, since schema version 4, by the hash of its samples alone (`data_sha256`), so
//! that one recording is one observation whatever its header file is called or how
//! it is written. A second header over the same samples (two JSON files naming one
//! `.npy`, a FITS file whose header cards were edited) is the same observation if
//! it says the same; if it says something else (another start, source, band …) it
//! is refused naming what differs: recording it again would count the recording's
//! exposure twice and give every burst in it a twin. If the recorded header was the
//! wrong one, [`super::forget`] removes its observation so the corrected file can be
//! recorded.

use std::io::Read;
use std::ops::Range;
use std::path::{Path, PathBuf};

use rusqlite::{Connection, OptionalExtension, params};
use sha2::{Digest, Sha256};

use super::ObservationRecord;
use crate::error::{Error, Result};
use crate::obs::fits::FitsReader;
use crate::obs::{Container, Header};

/// Hex SHA-256 of an observation's bytes, read in 1 MiB pieces.
///
/// For a native observation (JSON header + `.npy` samples) both files are hashed:
/// each contributes its length as 8 little-endian bytes, then its bytes. The
/// samples file is the header's `data` entry (relative to the header), else
/// `NAME.npy`.
///
/// # Errors
/// A file cannot be read.
pub fn content_hash(path: &Path) -> Result<String> {
    let mut content = Sha256::new();
    match Container::detect(path) {
        Ok(Container::Native) => {
            hash_file(path, &mut [Sink::whole(&mut content, true)])?;
            hash_file(
                &native_data_path(path)?,
                &mut [Sink::whole(&mut content, true)],
            )?;
        }
        _ => hash_file(path, &mut [Sink::whole(&mut content, false)])?,
    }
    Ok(hex(&content.finalize()))
}

/// The content hash ([`content_hash`]) and the samples hash of an observation, in
/// one pass over its bytes. The samples hash is the SHA-256 of the `.npy` file of a
/// native observation, and of the `SUBINT` table rows (not the header cards) of a
/// FITS file.
///
/// # Errors
/// A file cannot be read, or a FITS file cannot be parsed.
pub(super) fn observation_hashes(path: &Path) -> Result<(String, String)> {
    let (mut content, mut data) = (Sha256::new(), Sha256::new());
    if Container::detect(path)? == Container::Native {
        hash_file(path, &mut [Sink::whole(&mut content, true)])?;
        let samples = native_data_path(path)?;
        hash_file(
            &samples,
            &mut [
                Sink::whole(&mut content, true),
                Sink::whole(&mut data, false),
            ],
        )?;
    } else {
        let rows = FitsReader::open(path, true)?.table_bytes();
        hash_file(
            path,
            &mut [
                Sink::whole(&mut content, false),
                Sink {
                    hasher: &mut data,
                    range: rows,
                    length_prefix: false,
                },
            ],
        )?;
    }
    Ok((hex(&content.finalize()), hex(&data.finalize())))
}

/// The samples file a native JSON header points at.
fn native_data_path(header_path: &Path) -> Result<PathBuf> {
    let text = std::fs::read_to_string(header_path).map_err(|e| Error::io(header_path, e))?;
    let json: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| Error::bad_input(header_path, format!("bad JSON header: {e}")))?;
    Ok(match json.get("data").and_then(|d| d.as_str()) {
        Some(name) => header_path.parent().unwrap_or(Path::new("")).join(name),
        None => header_path.with_extension("npy"),
    })
}

/// A hash fed the bytes of a file that lie in `range`, after the file's length
/// (8 little-endian bytes) when `length_prefix`.
struct Sink<'a> {
    hasher: &'a mut Sha256,
    range: Range<u64>,
    length_prefix: bool,
}

impl<'a> Sink<'a> {
    fn whole(hasher: &'a mut Sha256, length_prefix: bool) -> Sink<'a> {
        Sink {
            hasher,
            range: 0..u64::MAX,
            length_prefix,
        }
    }
}

/// Reads `path` once, in 1 MiB pieces, feeding each sink its part.
fn hash_file(path: &Path, sinks: &mut [Sink<'_>]) -> Result<()> {
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let len = f.metadata().map_err(|e| Error::io(path, e))?.len();
    for s in sinks.iter_mut().filter(|s| s.length_prefix) {
        s.hasher.update(len.to_le_bytes());
    }
    let mut buf = vec![0u8; 1 << 20];
    let mut at = 0u64;
    loop {
        let n = f.read(&mut buf).map_err(|e| Error::io(path, e))?;
        if n == 0 {
            return Ok(());
        }
        let end = at + n as u64;
        for s in sinks.iter_mut() {
            let (from, to) = (s.range.start.max(at), s.range.end.min(end));
            if from < to {
                s.hasher
                    .update(&buf[(from - at) as usize..(to - at) as usize]);
            }
        }
        at = end;
    }
}

pub(super) fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// The catalogue's observation of `obs`, if it holds one: the one with the same
/// content, else the one with the same samples if its header says the same.
///
/// # Errors
/// [`Error::BadInput`] naming `obs.path` when the catalogue holds these samples
/// under a header that differs (and which fields differ); an SQLite failure.
pub(super) fn find_observation(
    conn: &Connection,
    catalogue: &Path,
    obs: &ObservationRecord,
) -> Result<Option<i64>> {
    let sql = |e| super::sql_error(catalogue, e);
    let by_content: Option<i64> = conn
        .query_row(
            "SELECT id FROM observation WHERE content_sha256 = ?1",
            [&obs.content_sha256],
            |r| r.get(0),
        )
        .optional()
        .map_err(sql)?;
    if by_content.is_some() {
        return Ok(by_content);
    }
    let by_data: Option<(i64, String, String, String)> = conn
        .query_row(
            "SELECT id, path, recorded_utc, header_json FROM observation WHERE data_sha256 = ?1",
            [&obs.data_sha256],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
        )
        .optional()
        .map_err(sql)?;
    let Some((id, held_path, recorded, held_json)) = by_data else {
        return Ok(None);
    };
    // Both sides through the same JSON text, so a float compares as it was stored.
    let reread = |json: &str| serde_json::from_str::<Header>(json).ok();
    let new_json = serde_json::to_string(&obs.header).ok();
    let differ = match (reread(&held_json), new_json.as_deref().and_then(reread)) {
        (Some(held), Some(new)) => held.differing_fields(&new),
        _ => vec!["header"],
    };
    if differ.is_empty() {
        return Ok(Some(id));
    }
    Err(Error::bad_input(
        &obs.path,
        format!(
            "holds the same samples as {held_path}, in the catalogue {} since {recorded} \
             (observation {id}), under a header that differs in {}; not recorded, as one \
             recording counted twice doubles its exposure and its bursts (make the headers \
             agree, leave this file out of the catalogue, or, if the recorded header was \
             wrong, remove observation {id} with `burstbook book --catalogue {} forget {id}` \
             and search again)",
            catalogue.display(),
            differ.join(", "),
            catalogue.display()
        ),
    ))
}

/// The id of `obs` in the catalogue, recording it first if new (see
/// [`find_observation`]). An observation recorded before samples were hashed is
/// given its samples hash when its file is recorded again, unless another
/// observation already holds it (two headers recorded before; both are kept).
///
/// # Errors
/// As [`find_observation`].
pub(super) fn upsert_observation(
    tx: &Connection,
    catalogue: &Path,
    obs: &ObservationRecord,
    header_json: &str,
) -> Result<i64> {
    let sql = |e| super::sql_error(catalogue, e);
    if let Some(id) = find_observation(tx, catalogue, obs)? {
        tx.execute(
            "UPDATE observation SET data_sha256 = ?2 WHERE id = ?1 AND data_sha256 IS NULL
                 AND NOT EXISTS (SELECT 1 FROM observation WHERE data_sha256 = ?2)",
            params![id, obs.data_sha256],
        )
        .map_err(sql)?;
        return Ok(id);
    }
    let h = &obs.header;
    let (start_mjd, _) = obs.span_mjd();
    tx.execute(
        "INSERT INTO observation (content_sha256, data_sha256, path, source_name, ra_deg,
             dec_deg, site, start_mjd, duration_s, freq_lo_mhz, freq_hi_mhz, masked_fraction,
             header_json, recorded_utc)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14)",
        params![
            obs.content_sha256,
            obs.data_sha256,
            obs.path,
            h.source,
            h.ra_deg,
            h.dec_deg,
            h.site.name,
            start_mjd,
            h.duration_s(),
            h.freq_lo_mhz(),
            h.freq_hi_mhz(),
            obs.masked_fraction(),
            header_json,
            super::now_utc(),
        ],
    )
    .map_err(sql)?;
    Ok(tx.last_insert_rowid())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn content_hash_of_known_bytes_matches_sha256_test_vector() {
        // FIPS 180-2 appendix B.1: SHA-256("abc").
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("x.fits");
        std::fs::write(&p, b"abc").unwrap();
        assert_eq!(
            content_hash(&p).unwrap(),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn native_hash_covers_the_npy() {
        let dir = tempfile::tempdir().unwrap();
        let j = dir.path().join("o.json");
        std::fs::write(&j, b"{}").unwrap();
        std::fs::write(dir.path().join("o.npy"), b"one").unwrap();
        let h1 = content_hash(&j).unwrap();
        std::fs::write(dir.path().join("o.npy"), b"two").unwrap();
        assert_ne!(h1, content_hash(&j).unwrap());
        // The header may name its samples file.
        std::fs::write(&j, br#"{"data": "samples.npy"}"#).unwrap();
        assert!(content_hash(&j).is_err());
        std::fs::write(dir.path().join("samples.npy"), b"two").unwrap();
        let h2 = content_hash(&j).unwrap();
        std::fs::write(dir.path().join("samples.npy"), b"three").unwrap();
        assert_ne!(h2, content_hash(&j).unwrap());
    }

    /// Writes `header` over the samples 0, 1, 2 … in `container` at `path`.
    fn write(path: &Path, header: &Header, container: Container) {
        let values: Vec<f32> = (0..header.n_samples as usize * header.n_chan())
            .map(|i| (i % 200) as f32)
            .collect();
        let mut sink = crate::obs::create(path, header, container).unwrap();
        sink.write_rows(&values).unwrap();
        sink.finish().unwrap();
    }

    /// Editing a header, or writing a second one for the same samples, changes the
    /// file content but not the samples hash; other samples change both.
    #[test]
    fn the_samples_hash_ignores_the_header() {
        let dir = tempfile::tempdir().unwrap();
        let mut header = crate::catalogue::synthetic::observation("A", 1).header;
        header.n_samples = 96;
        let mut relabelled = header.clone();
        relabelled.source = "B".into();
        let at = |name: &str| dir.path().join(name);
        write(&at("a.fits"), &header, Container::Fits);
        write(&at("b.fits"), &relabelled, Container::Fits);
        let (ca, da) = observation_hashes(&at("a.fits")).unwrap();
        let (cb, db) = observation_hashes(&at("b.fits")).unwrap();
        assert_ne!(ca, cb);
        assert_eq!(da, db);
        assert_eq!(ca, content_hash(&at("a.fits")).unwrap());
        // The samples are the table rows: changing one byte there changes the hash.
        let mut bytes = std::fs::read(at("b.fits")).unwrap();
        let rows = FitsReader::open(&at("b.fits"), true).unwrap().table_bytes();
        bytes[rows.end as usize - 1] ^= 1;
        std::fs::write(at("c.fits"), bytes).unwrap();
        assert_ne!(observation_hashes(&at("c.fits")).unwrap().1, da);

        write(&at("n.json"), &header, Container::Native);
        let mut json = std::fs::read_to_string(at("n.json")).unwrap();
        json = json.replace("\"source\": \"A\"", "\"source\": \"C\"");
        assert!(json.contains("\"C\""), "{json}");
        std::fs::write(at("m.json"), json).unwrap();
        let (cn, dn) = observation_hashes(&at("n.json")).unwrap();
        let (cm, dm) = observation_hashes(&at("m.json")).unwrap();
        assert_ne!(cn, cm);
        assert_eq!(dn, dm);
        assert_eq!(cn, content_hash(&at("n.json")).unwrap());
        let npy = std::fs::read(at("n.npy")).unwrap();
        assert_eq!(dn, hex(&Sha256::digest(&npy)), "the .npy file's SHA-256");
    }

    /// Observations recorded before samples were hashed (schema version 3) get
    /// their samples hash when recorded again; two such observations of one
    /// recording are both kept, and recording either again still works.
    #[test]
    fn observations_recorded_before_samples_were_hashed_are_filled_in() {
        use crate::catalogue::synthetic::{observation, run};
        use crate::catalogue::{Catalogue, RecordOutcome};
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let a = observation("A", 1);
        let mut b = a.clone();
        b.content_sha256 = "another header file".into();
        b.path = "other.json".into();
        cat.record_search(&a, &run(7.0), &[]).unwrap();
        // b is the same recording: merged while a's samples hash is known.
        let merged = cat.record_search(&b, &run(7.0), &[]).unwrap();
        assert!(matches!(merged, RecordOutcome::AlreadyPresent { .. }));
        let count = |cat: &Catalogue, sql: &str| -> i64 {
            cat.conn().query_row(sql, [], |r| r.get(0)).unwrap()
        };
        assert_eq!(count(&cat, "SELECT count(*) FROM observation"), 1);
        // As an older burstbook left them: two observations, no samples hash.
        cat.conn()
            .execute_batch("UPDATE observation SET data_sha256 = NULL")
            .unwrap();
        let mut old_b = b.clone();
        old_b.data_sha256 = "not yet known".into();
        cat.record_search(&old_b, &run(7.0), &[]).unwrap();
        cat.conn()
            .execute_batch("UPDATE observation SET data_sha256 = NULL")
            .unwrap();
        for obs in [&a, &b] {
            let again = cat.record_search(obs, &run(7.0), &[]).unwrap();
            assert!(matches!(again, RecordOutcome::AlreadyPresent { .. }));
        }
        assert_eq!(count(&cat, "SELECT count(*) FROM observation"), 2);
        assert_eq!(
            count(
                &cat,
                "SELECT count(*) FROM observation WHERE data_sha256 IS NOT NULL"
            ),
            1,
            "the first recorded again takes the hash; the other keeps none"
        );
    }
}

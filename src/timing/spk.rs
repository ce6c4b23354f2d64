//! Reader for JPL SPK ephemeris files (NAIF DAF container, type 2 Chebyshev
//! position segments), such as de421.bsp, for the Earth relative to the
//! solar-system barycentre.
//!
//! Layout (NAIF "DAF Required Reading" and "SPK Required Reading"): 1024-byte
//! records; the file record holds ND, NI, the first summary record and the byte
//! order; each summary record chains to the next and lists segments (start/end
//! epoch, target, centre, frame, type, first/last word). A type 2 segment ends with
//! INIT, INTLEN, RSIZE, N; each of its N records is MID, RADIUS and the X, Y, Z
//! Chebyshev coefficients in km over seconds of TDB since J2000.

use std::path::Path;

use super::chebyshev::chebyshev_basis;
use crate::error::{Error, Result};

const RECORD_BYTES: usize = 1024;
const J2000_MJD: f64 = 51_544.5;
const SSB: i32 = 0;
const EARTH: i32 = 399;

/// One type 2 segment: position of `target` relative to `center`.
#[derive(Debug, Clone)]
struct Segment {
    target: i32,
    center: i32,
    init_s: f64,
    interval_s: f64,
    record_len: usize,
    n_records: usize,
    /// `n_records × record_len` doubles.
    data: Vec<f64>,
}

impl Segment {
    /// Position (km) and velocity (km s⁻¹) at `et` seconds of TDB after J2000.
    fn state(&self, et: f64) -> Option<([f64; 3], [f64; 3])> {
        let end = self.init_s + self.interval_s * self.n_records as f64;
        if et < self.init_s || et > end {
            return None;
        }
        let idx = (((et - self.init_s) / self.interval_s) as usize).min(self.n_records - 1);
        let rec = &self.data[idx * self.record_len..(idx + 1) * self.record_len];
        let (mid, radius) = (rec[0], rec[1]);
        let n = (self.record_len - 2) / 3;
        let x = (et - mid) / radius;
        let (t, dt) = chebyshev_basis(x, n);
        let series = |c: &[f64], b: &[f64]| c.iter().zip(b).map(|(a, b)| a * b).sum::<f64>();
        let pos = [0, 1, 2].map(|i| series(&rec[2 + i * n..2 + (i + 1) * n], &t));
        let vel = [0, 1, 2].map(|i| series(&rec[2 + i * n..2 + (i + 1) * n], &dt) / radius);
        Some((pos, vel))
    }
}

/// The Earth from a JPL SPK file: the chain of type 2 segments from the Earth (399)
/// to the solar-system barycentre (0), usually 399 → 3 → 0. Each link keeps every
/// segment for that body (files may split a body's coverage in time).
#[derive(Debug, Clone)]
pub struct SpkEphemeris {
    chain: Vec<Vec<Segment>>,
}

impl SpkEphemeris {
    /// Reads the segments needed for the Earth from `path`.
    ///
    /// # Errors
    /// [`Error::Io`] if unreadable; [`Error::BadInput`] if it is not a DAF/SPK file, has
    /// no chain from the Earth to the barycentre, or uses a segment type other than 2.
    pub fn open(path: &Path) -> Result<Self> {
        let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
        Self::from_bytes(&bytes).map_err(|msg| Error::bad_input(path, msg))
    }

    fn from_bytes(bytes: &[u8]) -> Result<Self, String> {
        let daf = Daf::new(bytes)?;
        let segments = daf.segments()?;
        let mut chain = Vec::new();
        let mut body = EARTH;
        while body != SSB {
            let link: Vec<Segment> = segments
                .iter()
                .filter(|s| s.target == body)
                .cloned()
                .collect();
            let first = link
                .first()
                .ok_or_else(|| format!("no segment for body {body} (need Earth → barycentre)"))?;
            if link.iter().any(|s| s.center != first.center) {
                return Err(format!("segments for body {body} have different centres"));
            }
            body = first.center;
            chain.push(link);
            if chain.len() > 8 {
                return Err("segment chain does not reach the barycentre".into());
            }
        }
        Ok(SpkEphemeris { chain })
    }

    /// Geocentre relative to the barycentre at TDB `mjd_day + day_frac`: position (km)
    /// and velocity (km s⁻¹), or `None` outside the file's coverage.
    pub fn earth_km(&self, mjd_day: i64, day_frac: f64) -> Option<([f64; 3], [f64; 3])> {
        let et = ((mjd_day as f64 - J2000_MJD) + day_frac) * 86_400.0;
        let (mut pos, mut vel) = ([0.0; 3], [0.0; 3]);
        for link in &self.chain {
            let (p, v) = link.iter().find_map(|seg| seg.state(et))?;
            for i in 0..3 {
                pos[i] += p[i];
                vel[i] += v[i];
            }
        }
        Some((pos, vel))
    }
}

/// A DAF file in memory, with its byte order.
struct Daf<'a> {
    bytes: &'a [u8],
    little: bool,
    nd: usize,
    ni: usize,
}

impl<'a> Daf<'a> {
    fn new(bytes: &'a [u8]) -> Result<Self, String> {
        if bytes.len() < RECORD_BYTES || &bytes[..7] != b"DAF/SPK" {
            return Err("not a DAF/SPK ephemeris file".into());
        }
        let little = match &bytes[88..96] {
            b"LTL-IEEE" => true,
            b"BIG-IEEE" => false,
            _ => return Err("unknown byte order in the DAF file record".into()),
        };
        let mut daf = Daf {
            bytes,
            little,
            nd: 0,
            ni: 0,
        };
        daf.nd = daf.int_at(8)? as usize;
        daf.ni = daf.int_at(12)? as usize;
        if daf.nd != 2 || daf.ni != 6 {
            return Err(format!("ND={} NI={} is not an SPK layout", daf.nd, daf.ni));
        }
        Ok(daf)
    }

    /// `N` bytes at `offset`, in little-endian order whatever the file's order.
    fn le_bytes<const N: usize>(&self, offset: usize) -> Result<[u8; N], String> {
        let mut b: [u8; N] = self
            .bytes
            .get(offset..offset + N)
            .ok_or("file is truncated")?
            .try_into()
            .expect("N bytes");
        if !self.little {
            b.reverse();
        }
        Ok(b)
    }

    fn int_at(&self, offset: usize) -> Result<i32, String> {
        self.le_bytes(offset).map(i32::from_le_bytes)
    }

    fn f64_at(&self, offset: usize) -> Result<f64, String> {
        self.le_bytes(offset).map(f64::from_le_bytes)
    }

    /// Doubles at 1-based DAF word addresses `first..=last`.
    fn words(&self, first: usize, last: usize) -> Result<Vec<f64>, String> {
        if first == 0 || last < first {
            return Err(format!("bad segment addresses {first}..{last}"));
        }
        (first..=last).map(|w| self.f64_at((w - 1) * 8)).collect()
    }

    /// Every type 2 segment, following the chain of summary records.
    fn segments(&self) -> Result<Vec<Segment>, String> {
        let summary_doubles = self.nd + self.ni.div_ceil(2);
        let mut record = self.int_at(76)? as usize;
        let mut out = Vec::new();
        let mut visited = 0;
        while record != 0 {
            visited += 1;
            if visited > 10_000 {
                return Err("summary records loop".into());
            }
            let base = (record - 1) * RECORD_BYTES;
            let next = self.f64_at(base)? as usize;
            let n_summaries = self.f64_at(base + 16)? as usize;
            for s in 0..n_summaries {
                let at = base + 24 + s * summary_doubles * 8;
                let int = |k: usize| self.int_at(at + self.nd * 8 + 4 * k);
                let (target, center, kind) = (int(0)?, int(1)?, int(3)?);
                let (first, last) = (int(4)? as usize, int(5)? as usize);
                if kind != 2 {
                    if target == EARTH || center == SSB {
                        return Err(format!(
                            "segment {center} → {target} has type {kind}, not 2"
                        ));
                    }
                    continue;
                }
                out.push(self.type2_segment(target, center, first, last)?);
            }
            record = next;
        }
        Ok(out)
    }

    fn type2_segment(
        &self,
        target: i32,
        center: i32,
        first: usize,
        last: usize,
    ) -> Result<Segment, String> {
        let trailer = self.words(last.saturating_sub(3).max(1), last)?;
        let (init_s, interval_s) = (trailer[0], trailer[1]);
        let (record_len, n_records) = (trailer[2] as usize, trailer[3] as usize);
        let n_words = record_len * n_records;
        if record_len < 5 || (record_len - 2) % 3 != 0 || n_words + 4 != last + 1 - first {
            return Err(format!(
                "segment {center} → {target} has an inconsistent size"
            ));
        }
        if interval_s <= 0.0 {
            return Err(format!("segment {center} → {target} has a bad interval"));
        }
        Ok(Segment {
            target,
            center,
            init_s,
            interval_s,
            record_len,
            n_records,
            data: self.words(first, first + n_words - 1)?,
        })
    }
}

//! Writer for search-mode FITS: one polarisation (total intensity), unsigned
//! samples of 1, 2, 4, 8 or 16 bits, or 32-bit floats, with unit scale and zero
//! offset so stored integers are the sample values themselves.

use std::io::Write;
use std::path::{Path, PathBuf};

use super::bits::Encoding;
use super::cards::{BLOCK, CardWriter};
use crate::atomic_file::AtomicFile;
use crate::error::{Error, Result};
use crate::obs::codec::{check_complete, check_finite, check_room, check_whole_rows, quantise};
use crate::obs::geodesy::{format_ra_hms, format_sexagesimal, geodetic_to_itrf_m};
use crate::obs::{Header, SampleSink};

/// Samples per row the writer aims for (rows of about a million values).
const TARGET_VALUES_PER_ROW: usize = 1 << 20;
const MAX_NSBLK: usize = 4096;

/// Writes a FITS search-mode file, one `SUBINT` row at a time.
///
/// A last row with fewer than `NSBLK` samples is padded with zeros and its
/// `TSUBINT` records the real duration, which the reader uses to recover the
/// exact sample count. The file takes its name only at [`SampleSink::finish`].
pub struct FitsWriter {
    path: PathBuf,
    file: AtomicFile,
    n_chan: usize,
    nsblk: usize,
    nbits: u32,
    encoding: Encoding,
    tbin_s: f64,
    n_samples: u64,
    samples_written: u64,
    /// `DAT_FREQ`, `DAT_WTS`, `DAT_OFFS`, `DAT_SCL`, identical in every row.
    row_constants: Vec<u8>,
    /// Quantised samples of the row being filled.
    pending: Vec<f32>,
    bytes: Vec<u8>,
}

impl FitsWriter {
    /// Creates `path` with a row length chosen from the channel count.
    ///
    /// # Errors
    /// As [`FitsWriter::create_with_nsblk`].
    pub fn create(path: &Path, header: &Header) -> Result<Self> {
        let nsblk = (TARGET_VALUES_PER_ROW / header.n_chan().max(1)).clamp(8, MAX_NSBLK);
        Self::create_with_nsblk(path, header, nsblk.next_power_of_two().min(MAX_NSBLK))
    }

    /// Creates `path` with `nsblk` samples per `SUBINT` row.
    ///
    /// `header.nbits` picks the stored type: 1, 2, 4, 8 or 16 → unsigned integers
    /// (values rounded and clamped to `[0, 2^nbits − 1]`), 32 → float.
    ///
    /// # Errors
    /// [`Error::BadInput`] for an invalid header, another bit depth or `nsblk = 0`;
    /// [`Error::Io`] if the file cannot be created.
    pub fn create_with_nsblk(path: &Path, header: &Header, nsblk: usize) -> Result<Self> {
        header.validate().map_err(|m| Error::bad_input(path, m))?;
        let encoding = match header.nbits {
            1 | 2 | 4 | 8 => Encoding::Packed(header.nbits),
            16 => Encoding::Int16 { zero: 32768.0 },
            32 => Encoding::Float32,
            n => {
                return Err(Error::bad_input(
                    path,
                    format!("FITS search mode stores 1, 2, 4, 8, 16 or 32 bits, not {n}"),
                ));
            }
        };
        if nsblk == 0 {
            return Err(Error::bad_input(path, "NSBLK must be at least 1"));
        }
        let n_chan = header.n_chan();
        let n_rows = header.n_samples.div_ceil(nsblk as u64);
        let mut row_constants = Vec::new();
        header
            .freqs_mhz
            .iter()
            .for_each(|f| row_constants.extend(f.to_be_bytes()));
        for values in [&header.weights, &vec![0.0; n_chan], &vec![1.0; n_chan]] {
            values
                .iter()
                .for_each(|v| row_constants.extend(v.to_be_bytes()));
        }
        let mut w = FitsWriter {
            path: path.to_path_buf(),
            file: AtomicFile::create(path)?,
            n_chan,
            nsblk,
            nbits: header.nbits,
            encoding,
            tbin_s: header.tsamp_s,
            n_samples: header.n_samples,
            samples_written: 0,
            row_constants,
            pending: Vec::with_capacity(nsblk * n_chan),
            bytes: Vec::new(),
        };
        let mut head = primary_header(header);
        head.extend(w.subint_header(header, n_rows));
        w.file.write_all(&head).map_err(|e| Error::io(path, e))?;
        Ok(w)
    }

    fn subint_header(&self, h: &Header, n_rows: u64) -> Vec<u8> {
        let nc = self.n_chan;
        let data_bytes = self.encoding.bytes_for(self.nsblk * nc);
        let data_form = match self.encoding {
            Encoding::Int16 { .. } => format!("{}I", self.nsblk * nc),
            Encoding::Float32 => format!("{}E", self.nsblk * nc),
            _ => format!("{data_bytes}B"),
        };
        let columns = [
            ("TSUBINT", "1D".to_string(), "s"),
            ("OFFS_SUB", "1D".into(), "s"),
            ("DAT_FREQ", format!("{nc}D"), "MHz"),
            ("DAT_WTS", format!("{nc}E"), ""),
            ("DAT_OFFS", format!("{nc}E"), ""),
            ("DAT_SCL", format!("{nc}E"), ""),
            ("DATA", data_form, ""),
        ];
        let mut c = CardWriter::default();
        c.str("XTENSION", "BINTABLE", "binary table");
        c.int("BITPIX", 8, "");
        c.int("NAXIS", 2, "");
        c.int(
            "NAXIS1",
            (16 + 8 * nc + 12 * nc + data_bytes) as i64,
            "bytes per row",
        );
        c.int("NAXIS2", n_rows as i64, "rows");
        c.int("PCOUNT", 0, "");
        c.int("GCOUNT", 1, "");
        c.int("TFIELDS", columns.len() as i64, "");
        for (i, (name, form, unit)) in columns.iter().enumerate() {
            let n = i + 1;
            c.str(&format!("TTYPE{n}"), name, "");
            c.str(&format!("TFORM{n}"), form, "");
            if !unit.is_empty() {
                c.str(&format!("TUNIT{n}"), unit, "");
            }
        }
        if let Encoding::Int16 { zero } = self.encoding {
            c.real("TSCAL7", 1.0, "");
            c.real("TZERO7", zero, "stored as signed 16-bit");
        }
        if self.nbits >= 8 {
            c.str(
                "TDIM7",
                &format!("({nc},1,{})", self.nsblk),
                "(NCHAN,NPOL,NSBLK)",
            );
        }
        c.str("EXTNAME", "SUBINT", "");
        c.real("TBIN", self.tbin_s, "sample time (s)");
        c.int("NCHAN", nc as i64, "");
        c.int("NPOL", 1, "");
        c.str("POL_TYPE", "AA+BB", "total intensity");
        c.int("NSBLK", self.nsblk as i64, "samples per row");
        c.int("NBITS", self.nbits as i64, "");
        c.real("ZERO_OFF", 0.0, "");
        c.real("CHAN_BW", signed_chan_bw(h), "MHz");
        c.int("NCHNOFFS", 0, "");
        c.int("NSUBOFFS", 0, "");
        c.finish()
    }

    /// Encodes and writes the pending row, padding it to `nsblk` samples.
    fn flush_row(&mut self) -> Result<()> {
        let n_time = self.pending.len() / self.n_chan;
        let row_start = self.samples_written - n_time as u64;
        self.pending.resize(self.nsblk * self.n_chan, 0.0);
        self.bytes.clear();
        self.bytes
            .extend((n_time as f64 * self.tbin_s).to_be_bytes());
        let mid = (row_start as f64 + n_time as f64 / 2.0) * self.tbin_s;
        self.bytes.extend(mid.to_be_bytes());
        self.bytes.extend_from_slice(&self.row_constants);
        self.encoding.pack(&self.pending, &mut self.bytes);
        self.pending.clear();
        self.file
            .write_all(&self.bytes)
            .map_err(|e| Error::io(&self.path, e))
    }
}

impl SampleSink for FitsWriter {
    fn write_rows(&mut self, rows: &[f32]) -> Result<()> {
        let nc = self.n_chan;
        check_whole_rows(&self.path, rows, nc)?;
        check_finite(&self.path, rows, nc, self.samples_written)?;
        let adding = (rows.len() / nc) as u64;
        check_room(&self.path, self.samples_written, adding, self.n_samples)?;
        for row in rows.chunks_exact(nc) {
            if self.encoding == Encoding::Float32 {
                self.pending.extend_from_slice(row);
            } else {
                let nbits = self.nbits;
                self.pending.extend(row.iter().map(|&v| quantise(v, nbits)));
            }
            self.samples_written += 1;
            if self.pending.len() == self.nsblk * nc {
                self.flush_row()?;
            }
        }
        Ok(())
    }

    fn finish(mut self: Box<Self>) -> Result<()> {
        check_complete(&self.path, self.samples_written, self.n_samples)?;
        if !self.pending.is_empty() {
            self.flush_row()?;
        }
        let n_rows = self.n_samples.div_ceil(self.nsblk as u64);
        let row_len = 16 + 20 * self.n_chan + self.encoding.bytes_for(self.nsblk * self.n_chan);
        let data = n_rows * row_len as u64;
        let pad = (data.div_ceil(BLOCK as u64) * BLOCK as u64 - data) as usize;
        self.file
            .write_all(&vec![0u8; pad])
            .map_err(|e| Error::io(&self.path, e))?;
        self.file.commit()
    }
}

/// `CHAN_BW` in MHz: negative when channels are stored in descending frequency.
fn signed_chan_bw(h: &Header) -> f64 {
    if h.is_descending() {
        -h.chan_bw_mhz
    } else {
        h.chan_bw_mhz
    }
}

fn primary_header(h: &Header) -> Vec<u8> {
    let [x, y, z] = geodetic_to_itrf_m(h.site.lon_deg, h.site.lat_deg, h.site.height_m);
    let sec_whole = h.start.sec.floor();
    let mut c = CardWriter::default();
    c.logical("SIMPLE", true, "conforms to FITS");
    c.int("BITPIX", 8, "");
    c.int("NAXIS", 0, "no primary data");
    c.logical("EXTEND", true, "");
    c.str("OBS_MODE", "SEARCH", "");
    c.str("TELESCOP", &h.telescope, "");
    c.real("ANT_X", x, "ITRF X (m)");
    c.real("ANT_Y", y, "ITRF Y (m)");
    c.real("ANT_Z", z, "ITRF Z (m)");
    c.str("SRC_NAME", &h.source, "");
    c.str("RA", &format_ra_hms(h.ra_deg, 6), "hh:mm:ss");
    c.str("DEC", &format_sexagesimal(h.dec_deg, 5, true), "dd:mm:ss");
    c.int("STT_IMJD", h.start.mjd, "start day (UTC MJD)");
    c.int("STT_SMJD", sec_whole as i64, "start second of day");
    c.real(
        "STT_OFFS",
        h.start.sec - sec_whole,
        "start fraction of second",
    );
    c.real("OBSFREQ", (h.freq_lo_mhz() + h.freq_hi_mhz()) / 2.0, "MHz");
    c.real("OBSBW", signed_chan_bw(h) * h.n_chan() as f64, "MHz");
    c.int("OBSNCHAN", h.n_chan() as i64, "");
    if let Some(beam) = &h.beam {
        c.str("IBEAM", beam, "beam");
    }
    c.finish()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::SampleSource;
    use crate::obs::fits::FitsReader;
    use crate::obs::header::tests::test_header;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Writes `data` to `path` in pieces of five rows.
    fn write_file(path: &Path, h: &Header, nsblk: usize, data: &[f32]) -> Result<()> {
        let mut w = Box::new(FitsWriter::create_with_nsblk(path, h, nsblk)?);
        for chunk in data.chunks(h.n_chan() * 5) {
            w.write_rows(chunk)?;
        }
        w.finish()
    }

    fn round_trip(h: &Header, nsblk: usize, data: &[f32]) -> (Header, Vec<f32>) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.fits");
        write_file(&path, h, nsblk, data).unwrap();
        assert_eq!(std::fs::metadata(&path).unwrap().len() % BLOCK as u64, 0);
        let mut r = FitsReader::open(&path, false).unwrap();
        // Whole rows at once (decoded in place) ...
        let out = crate::obs::read_all(&mut r, 10 * nsblk).unwrap();
        // ... and a few rows at a time (through the row buffer) agree.
        let mut r3 = FitsReader::open(&path, false).unwrap();
        assert_eq!(crate::obs::read_all(&mut r3, 3).unwrap(), out);
        (r.header().clone(), out)
    }

    #[test]
    fn eight_bit_round_trip_is_bit_exact_with_partial_last_row() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for (n_chan, n_samples, nsblk) in [(7, 100, 16), (16, 64, 16), (3, 1, 8), (5, 9, 1)] {
            let mut h = test_header(n_chan, n_samples);
            h.nbits = 8;
            h.weights[n_chan - 1] = 0.0;
            h.beam = Some("3".into());
            let data: Vec<f32> = (0..n_chan * n_samples as usize)
                .map(|i| {
                    if i % n_chan == n_chan - 1 {
                        0.0
                    } else {
                        rng.random_range(0..=255u8) as f32
                    }
                })
                .collect();
            let (back, samples) = round_trip(&h, nsblk, &data);
            assert_eq!(samples, data, "{n_chan} {n_samples} {nsblk}");
            assert_eq!(back.n_samples, n_samples);
            assert_eq!(back.weights, h.weights);
            assert_eq!(back.freqs_mhz, h.freqs_mhz);
            assert_eq!(back.beam.as_deref(), Some("3"));
            assert_eq!(back.start, h.start);
            assert!((back.ra_deg - h.ra_deg).abs() < 1e-9);
            assert!((back.dec_deg - h.dec_deg).abs() < 1e-9);
            assert!((back.site.lat_deg - h.site.lat_deg).abs() < 1e-9);
            assert!((back.site.lon_deg - h.site.lon_deg).abs() < 1e-9);
            assert!((back.site.height_m - h.site.height_m).abs() < 1e-4);
        }
    }

    #[test]
    fn right_ascension_just_under_a_circle_reads_back() {
        let mut h = test_header(4, 8);
        h.nbits = 8;
        h.ra_deg = 360.0 - 1e-12;
        let (back, _) = round_trip(&h, 8, &[1.0; 32]);
        assert_eq!(back.ra_deg, 0.0);
    }

    #[test]
    fn other_depths_round_trip() {
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        for nbits in [1u32, 2, 4, 16, 32] {
            let mut h = test_header(6, 37);
            h.nbits = nbits;
            h.freqs_mhz.reverse(); // ascending band
            h.start = crate::obs::UtcEpoch::new(60123, 4567.890123);
            let max = if nbits == 32 {
                1000
            } else {
                (1u32 << nbits) - 1
            };
            let data: Vec<f32> = (0..6 * 37)
                .map(|_| rng.random_range(0..=max) as f32 + if nbits == 32 { 0.25 } else { 0.0 })
                .collect();
            let (back, samples) = round_trip(&h, 8, &data);
            assert_eq!(samples, data, "nbits {nbits}");
            assert_eq!(back.nbits, nbits);
            assert!(!back.is_descending());
            assert_eq!(back.start.mjd, 60123);
            assert!((back.start.sec - 4567.890123).abs() < 1e-9);
        }
    }

    #[test]
    fn writer_saturates_and_rejects() {
        let mut h = test_header(2, 2);
        h.nbits = 4;
        let (_, samples) = round_trip(&h, 4, &[-1.0, 7.4, 15.6, 99.0]);
        assert_eq!(samples, [0.0, 7.0, 15.0, 15.0]);
        let dir = tempfile::tempdir().unwrap();
        h.nbits = 12;
        let e = FitsWriter::create(&dir.path().join("x.fits"), &h)
            .err()
            .unwrap();
        assert!(e.to_string().contains("not 12"), "{e}");
    }

    #[test]
    fn a_failed_write_keeps_the_old_file_and_leaves_nothing_else() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.fits");
        let mut h = test_header(2, 2);
        h.nbits = 8;
        write_file(&path, &h, 4, &[1.0, 2.0, 3.0, 4.0]).unwrap();
        let old = std::fs::read(&path).unwrap();
        let mut longer = test_header(2, 64);
        longer.nbits = 8;
        let mut data = vec![7.0; 128];
        data[127] = f32::NAN;
        let e = write_file(&path, &longer, 4, &data).unwrap_err();
        assert!(e.to_string().contains("NaN"), "{e}");
        write_file(&path, &longer, 4, &data[..8]).unwrap_err();
        write_file(&dir.path().join("new.fits"), &longer, 4, &data[..8]).unwrap_err();
        assert_eq!(std::fs::read(&path).unwrap(), old);
        assert_eq!(crate::atomic_file::tests::listing(dir.path()), ["old.fits"]);
    }
}

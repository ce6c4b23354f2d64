//! Native format: a `NAME.json` header beside a `NAME.npy` array of samples
//! (`[time, channel]`, C order, little-endian `uint8`, `uint16`, `int16` or `float32`).
//! The layout is documented for users in `docs/formats.md`.

use std::fs::File;
use std::io::{BufReader, Read, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::codec::{check_complete, check_finite, check_room, check_whole_rows, quantise};
use super::header::even_step_mhz;
use super::npy::{self, Dtype};
use super::{ByteRows, Header, SampleSink, SampleSource, Site, UtcEpoch};
use crate::atomic_file::AtomicFile;
use crate::error::{Error, Result};

const FORMAT_NAME: &str = "burstbook.observation";
const FORMAT_VERSION: u32 = 1;

/// Channel centre frequencies: `first_mhz + i * step_mhz` for `i < count`.
#[derive(Debug, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct Channels {
    first_mhz: f64,
    step_mhz: f64,
    count: usize,
}

/// The JSON header exactly as stored.
#[derive(Debug, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonHeader {
    format: String,
    version: u32,
    source: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    telescope: Option<String>,
    ra_deg: f64,
    dec_deg: f64,
    site: Site,
    start_mjd: i64,
    start_sec: f64,
    sample_time_s: f64,
    channels: Channels,
    data: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    sefd_jy: Option<f64>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    bad_channels: Vec<usize>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    beam: Option<String>,
}

impl JsonHeader {
    /// The library header, given what the .npy says about the samples.
    fn to_header(&self, dtype: Dtype, n_samples: u64) -> Result<Header, String> {
        if self.format != FORMAT_NAME {
            return Err(format!(
                "\"format\" is \"{}\", expected \"{FORMAT_NAME}\"",
                self.format
            ));
        }
        if self.version != FORMAT_VERSION {
            return Err(format!(
                "format version {} is not supported (this build reads version {FORMAT_VERSION})",
                self.version
            ));
        }
        let c = &self.channels;
        if c.step_mhz == 0.0 || !c.step_mhz.is_finite() {
            return Err(format!("channel step must be non-zero, got {}", c.step_mhz));
        }
        let mut weights = vec![1.0; c.count];
        for &b in &self.bad_channels {
            *weights.get_mut(b).ok_or_else(|| {
                format!("bad channel {b} does not exist ({} channels)", c.count)
            })? = 0.0;
        }
        let header = Header {
            source: self.source.clone(),
            telescope: self
                .telescope
                .clone()
                .unwrap_or_else(|| self.site.name.clone()),
            ra_deg: self.ra_deg,
            dec_deg: self.dec_deg,
            site: self.site.clone(),
            start: UtcEpoch::checked_start(
                self.start_mjd,
                self.start_sec,
                ["start_mjd", "start_sec"],
            )?,
            tsamp_s: self.sample_time_s,
            freqs_mhz: (0..c.count)
                .map(|i| c.first_mhz + c.step_mhz * i as f64)
                .collect(),
            chan_bw_mhz: c.step_mhz.abs(),
            weights,
            n_samples,
            nbits: dtype.nbits(),
            sefd_jy: self.sefd_jy,
            beam: self.beam.clone(),
        };
        header.validate()?;
        Ok(header)
    }

    /// The JSON form of `header`, whose samples live in `data`.
    fn from_header(header: &Header, data: String) -> Result<JsonHeader, String> {
        let f = &header.freqs_mhz;
        let tol = 1e-6 * header.chan_bw_mhz;
        let step_mhz = even_step_mhz(f, tol)
            .map_err(|m| format!("the native format needs evenly spaced channels: {m}"))?
            .unwrap_or(header.chan_bw_mhz);
        if (step_mhz.abs() - header.chan_bw_mhz).abs() > tol {
            return Err(format!(
                "channel width {} MHz differs from the channel spacing {} MHz; the native format ties them",
                header.chan_bw_mhz,
                step_mhz.abs()
            ));
        }
        Ok(JsonHeader {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            source: header.source.clone(),
            telescope: (header.telescope != header.site.name).then(|| header.telescope.clone()),
            ra_deg: header.ra_deg,
            dec_deg: header.dec_deg,
            site: header.site.clone(),
            start_mjd: header.start.mjd,
            start_sec: header.start.sec,
            sample_time_s: header.tsamp_s,
            channels: Channels {
                first_mhz: f[0],
                step_mhz,
                count: f.len(),
            },
            data,
            sefd_jy: header.sefd_jy,
            bad_channels: (0..f.len()).filter(|&i| header.weights[i] == 0.0).collect(),
            beam: header.beam.clone(),
        })
    }
}

/// Streams rows from a native observation, a chunk at a time.
pub struct NativeReader {
    header: Header,
    data_path: PathBuf,
    file: BufReader<File>,
    dtype: Dtype,
    rows_read: u64,
    bytes: Vec<u8>,
    allow_non_finite: bool,
}

impl NativeReader {
    /// Opens `path` (the JSON header) and checks its `.npy` against it.
    ///
    /// `allow_non_finite` lets NaN/Inf samples through (for `inspect`, which counts
    /// them); otherwise the first one is an error.
    ///
    /// # Errors
    /// [`Error::Io`] if a file cannot be opened; [`Error::BadInput`] for a malformed
    /// or inconsistent header, an unsupported dtype, or a data file of the wrong size.
    pub fn open(path: &Path, allow_non_finite: bool) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        let json: JsonHeader = serde_json::from_str(&text)
            .map_err(|e| Error::bad_input(path, format!("bad JSON header: {e}")))?;
        let data_path = path.parent().unwrap_or(Path::new("")).join(&json.data);
        let file = File::open(&data_path).map_err(|e| Error::io(&data_path, e))?;
        let meta = file.metadata().map_err(|e| Error::io(&data_path, e))?;
        if meta.is_dir() {
            return Err(Error::bad_input(
                &data_path,
                "is a directory, not a .npy file",
            ));
        }
        let file_len = meta.len();
        let mut file = BufReader::with_capacity(1 << 16, file);
        let npy = npy::read_header(&mut file).map_err(|m| Error::bad_input(&data_path, m))?;
        let [n_samples, n_chan] = npy.shape;
        if n_samples == 0 {
            return Err(Error::bad_input(
                &data_path,
                format!("no samples: the array's shape is (0, {n_chan})"),
            ));
        }
        if n_chan != json.channels.count as u64 {
            return Err(Error::bad_input(
                path,
                format!(
                    "header lists {} channels but {} holds {n_chan}",
                    json.channels.count,
                    data_path.display()
                ),
            ));
        }
        let expected = n_samples
            .checked_mul(n_chan)
            .and_then(|v| v.checked_mul(npy.dtype.size() as u64))
            .and_then(|b| b.checked_add(npy.data_offset))
            .unwrap_or(u64::MAX);
        if file_len != expected {
            return Err(Error::bad_input(
                &data_path,
                format!(
                    "file is {file_len} bytes but its shape ({n_samples}, {n_chan}) needs {expected}{}",
                    if file_len < expected {
                        " (truncated?)"
                    } else {
                        ""
                    }
                ),
            ));
        }
        let header = json
            .to_header(npy.dtype, n_samples)
            .map_err(|m| Error::bad_input(path, m))?;
        Ok(NativeReader {
            header,
            data_path,
            file,
            dtype: npy.dtype,
            rows_read: 0,
            bytes: Vec::new(),
            allow_non_finite,
        })
    }
}

impl NativeReader {
    /// Whole rows the next read into room for `values` samples gets.
    fn rows_that_fit(&self, values: usize) -> usize {
        (values / self.header.n_chan()).min((self.header.n_samples - self.rows_read) as usize)
    }
}

/// Reads exactly `bytes.len()` stored bytes from `file`, whose first row is row
/// `first_row` of the data in `data_path`.
fn read_stored(
    file: &mut BufReader<File>,
    data_path: &Path,
    first_row: u64,
    bytes: &mut [u8],
) -> Result<()> {
    file.read_exact(bytes)
        .map_err(|e| Error::bad_input(data_path, format!("cannot read sample {first_row}: {e}")))
}

/// `uint8` samples are their bytes: a byte read is the stored data as it is.
impl ByteRows for NativeReader {
    fn read_byte_rows(&mut self, out: &mut [u8]) -> Result<usize> {
        let rows = self.rows_that_fit(out.len());
        let n = rows * self.header.n_chan();
        read_stored(
            &mut self.file,
            &self.data_path,
            self.rows_read,
            &mut out[..n],
        )?;
        self.rows_read += rows as u64;
        Ok(rows)
    }
}

impl SampleSource for NativeReader {
    fn header(&self) -> &Header {
        &self.header
    }

    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        let n_chan = self.header.n_chan();
        let rows = self.rows_that_fit(out.len());
        let n = rows * n_chan;
        self.bytes.resize(n * self.dtype.size(), 0);
        read_stored(
            &mut self.file,
            &self.data_path,
            self.rows_read,
            &mut self.bytes,
        )?;
        self.dtype.decode(&self.bytes, &mut out[..n]);
        // Integer samples are always finite.
        if self.dtype == Dtype::F32 && !self.allow_non_finite {
            check_finite(&self.data_path, &out[..n], n_chan, self.rows_read)?;
        }
        self.rows_read += rows as u64;
        Ok(rows)
    }

    fn byte_rows(&mut self) -> Option<&mut dyn ByteRows> {
        (self.dtype == Dtype::U8).then_some(self as &mut dyn ByteRows)
    }

    /// Seeks: rows are fixed-size, so row `k` starts `k` row lengths into the data.
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        let skipped = n.min(self.header.n_samples - self.rows_read);
        // Fits: the file size was checked against the shape when it was opened.
        let bytes = skipped * self.header.n_chan() as u64 * self.dtype.size() as u64;
        self.file
            .seek_relative(bytes as i64)
            .map_err(|e| Error::io(&self.data_path, e))?;
        self.rows_read += skipped;
        Ok(skipped)
    }
}

/// Writes a native observation: the samples as rows arrive, both files under their
/// final names only once every row is written (the header last, so a reader never
/// finds a new header beside old samples).
pub struct NativeWriter {
    header_file: AtomicFile,
    data_path: PathBuf,
    file: AtomicFile,
    dtype: Dtype,
    nbits: u32,
    n_chan: usize,
    n_samples: u64,
    rows_written: u64,
    scratch: Vec<f32>,
    bytes: Vec<u8>,
}

impl NativeWriter {
    /// Starts writing `path` (which must end in `.json`) and `NAME.npy` beside it;
    /// both take their names at [`SampleSink::finish`].
    ///
    /// `header.nbits` picks the stored type: 8 → `uint8`, 16 → `uint16`,
    /// 32 → `float32`. Integer types store values rounded and clamped to their range.
    ///
    /// # Errors
    /// [`Error::BadInput`] for another bit depth, a non-`.json` name or channels the
    /// format cannot describe; [`Error::Io`] if a file cannot be created.
    pub fn create(path: &Path, header: &Header) -> Result<Self> {
        header.validate().map_err(|m| Error::bad_input(path, m))?;
        if path.extension().and_then(|e| e.to_str()) != Some("json") {
            return Err(Error::bad_input(
                path,
                "native observations are named NAME.json (samples go to NAME.npy)",
            ));
        }
        let dtype = Dtype::for_nbits(header.nbits).ok_or_else(|| {
            Error::bad_input(
                path,
                format!(
                    "the native format stores 8, 16 or 32 bits per sample, not {}",
                    header.nbits
                ),
            )
        })?;
        let data_path = path.with_extension("npy");
        let data_name = data_path
            .file_name()
            .and_then(|n| n.to_str())
            .ok_or_else(|| Error::bad_input(path, "file name is not valid UTF-8"))?;
        let json = JsonHeader::from_header(header, data_name.to_string())
            .map_err(|m| Error::bad_input(path, m))?;
        let text = serde_json::to_string_pretty(&json).expect("header serialises") + "\n";
        let mut header_file = AtomicFile::create(path)?;
        header_file
            .write_all(text.as_bytes())
            .map_err(|e| Error::io(path, e))?;
        let mut file = AtomicFile::create(&data_path)?;
        let n_chan = header.n_chan();
        file.write_all(&npy::header_bytes(dtype, header.n_samples, n_chan as u64))
            .map_err(|e| Error::io(&data_path, e))?;
        Ok(NativeWriter {
            header_file,
            data_path,
            file,
            dtype,
            nbits: header.nbits,
            n_chan,
            n_samples: header.n_samples,
            rows_written: 0,
            scratch: Vec::new(),
            bytes: Vec::new(),
        })
    }
}

impl SampleSink for NativeWriter {
    fn write_rows(&mut self, rows: &[f32]) -> Result<()> {
        check_whole_rows(&self.data_path, rows, self.n_chan)?;
        check_finite(&self.data_path, rows, self.n_chan, self.rows_written)?;
        let n_rows = (rows.len() / self.n_chan) as u64;
        check_room(&self.data_path, self.rows_written, n_rows, self.n_samples)?;
        let values = if self.dtype == Dtype::F32 {
            rows
        } else {
            self.scratch.clear();
            let nbits = self.nbits;
            self.scratch
                .extend(rows.iter().map(|&v| quantise(v, nbits)));
            &self.scratch
        };
        self.bytes.clear();
        self.dtype.encode(values, &mut self.bytes);
        self.file
            .write_all(&self.bytes)
            .map_err(|e| Error::io(&self.data_path, e))?;
        self.rows_written += n_rows;
        Ok(())
    }

    fn finish(self: Box<Self>) -> Result<()> {
        check_complete(&self.data_path, self.rows_written, self.n_samples)?;
        self.file.commit()?;
        self.header_file.commit()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::header::tests::test_header;

    fn write(path: &Path, header: &Header, data: &[f32]) -> Result<()> {
        let mut w = Box::new(NativeWriter::create(path, header)?);
        for chunk in data.chunks(header.n_chan() * 7) {
            w.write_rows(chunk)?;
        }
        w.finish()
    }

    fn read_all(path: &Path) -> (Header, Vec<f32>) {
        let mut r = NativeReader::open(path, false).unwrap();
        let all = crate::obs::read_all(&mut r, 5).unwrap();
        (r.header().clone(), all)
    }

    #[test]
    fn skips_match_reading() {
        use crate::obs::{assert_skips_match_reading, awkward_skips};
        let dir = tempfile::tempdir().unwrap();
        let (n_chan, n) = (16, 5000u64);
        for nbits in [8u32, 32] {
            let mut h = test_header(n_chan, n);
            h.nbits = nbits;
            let data: Vec<f32> = (0..n_chan * n as usize).map(|i| (i % 251) as f32).collect();
            let path = dir.path().join(format!("skip{nbits}.json"));
            write(&path, &h, &data).unwrap();
            // Pieces of one 64 KiB read buffer: skips land inside it and beyond it.
            let buffer_rows = (1 << 16) / (n_chan as u64 * nbits as u64 / 8);
            assert_skips_match_reading(
                &|| NativeReader::open(&path, false).unwrap(),
                &awkward_skips(n, buffer_rows),
            );
        }
    }

    #[test]
    fn round_trips_every_writer_depth() {
        let dir = tempfile::tempdir().unwrap();
        for nbits in [8, 16, 32] {
            let mut h = test_header(5, 23);
            h.nbits = nbits;
            h.weights[3] = 0.0;
            h.sefd_jy = Some(25.0);
            let data: Vec<f32> = (0..5 * 23).map(|i| (i * 7 % 251) as f32).collect();
            let path = dir.path().join(format!("obs{nbits}.json"));
            write(&path, &h, &data).unwrap();
            let (back, samples) = read_all(&path);
            assert_eq!(samples, data);
            assert_eq!(back.nbits, nbits);
            assert_eq!(back.weights, h.weights);
            assert_eq!(back.sefd_jy, Some(25.0));
            for (a, b) in back.freqs_mhz.iter().zip(&h.freqs_mhz) {
                assert!((a - b).abs() < 1e-9);
            }
        }
    }

    /// Byte reads of `uint8` data give the decoded values' bytes, from the same
    /// position as f32 reads (here alternating); other types offer no byte reads.
    #[test]
    fn uint8_rows_read_as_bytes_are_the_decoded_values() {
        let dir = tempfile::tempdir().unwrap();
        let (n_chan, n) = (5, 23);
        let data: Vec<f32> = (0..n_chan * n).map(|i| (i * 7 % 251) as f32).collect();
        for nbits in [8, 16, 32] {
            let mut h = test_header(n_chan, n as u64);
            h.nbits = nbits;
            let path = dir.path().join(format!("bytes{nbits}.json"));
            write(&path, &h, &data).unwrap();
            let mut r = NativeReader::open(&path, false).unwrap();
            assert_eq!(r.byte_rows().is_some(), nbits == 8, "{nbits} bits");
            if nbits != 8 {
                continue;
            }
            let mut back = Vec::new();
            let (mut bytes, mut floats) = (vec![0u8; 3 * n_chan], vec![0.0f32; 4 * n_chan]);
            loop {
                let got = r.byte_rows().unwrap().read_byte_rows(&mut bytes).unwrap();
                back.extend(bytes[..got * n_chan].iter().map(|&b| f32::from(b)));
                let more = r.read_rows(&mut floats).unwrap();
                back.extend_from_slice(&floats[..more * n_chan]);
                if got + more == 0 {
                    break;
                }
            }
            assert_eq!(back, data);
        }
    }

    #[test]
    fn integer_writer_saturates() {
        let dir = tempfile::tempdir().unwrap();
        let mut h = test_header(2, 2);
        h.nbits = 8;
        let path = dir.path().join("sat.json");
        write(&path, &h, &[-3.0, 2.6, 255.4, 900.0]).unwrap();
        assert_eq!(read_all(&path).1, [0.0, 3.0, 255.0, 255.0]);
    }

    #[test]
    fn writer_rejects_bad_requests() {
        let dir = tempfile::tempdir().unwrap();
        let mut h = test_header(2, 2);
        h.nbits = 4;
        let e = NativeWriter::create(&dir.path().join("a.json"), &h)
            .err()
            .unwrap();
        assert!(e.to_string().contains("not 4"), "{e}");
        h.nbits = 8;
        let e = NativeWriter::create(&dir.path().join("a.npy"), &h)
            .err()
            .unwrap();
        assert!(e.to_string().contains("NAME.json"), "{e}");
        let e = write(&dir.path().join("short.json"), &h, &[1.0, 2.0]).unwrap_err();
        assert!(e.to_string().contains("1 rows written"), "{e}");
        let e = write(&dir.path().join("nan.json"), &h, &[1.0, f32::NAN, 0.0, 0.0]).unwrap_err();
        assert!(e.to_string().contains("NaN"), "{e}");
    }

    #[test]
    fn a_failed_write_leaves_the_old_pair_whole_and_nothing_else() {
        let dir = tempfile::tempdir().unwrap();
        let mut h = test_header(2, 3);
        h.nbits = 8;
        let path = dir.path().join("obs.json");
        write(&path, &h, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0]).unwrap();
        let before = |ext: &str| std::fs::read(path.with_extension(ext)).unwrap();
        let (json, npy) = (before("json"), before("npy"));
        let listing = || crate::atomic_file::tests::listing(dir.path());
        // A longer recording that fails on its last row, then one stopped short.
        let mut longer = test_header(2, 40);
        longer.nbits = 8;
        let mut rows = vec![9.0; 80];
        rows[79] = f32::NAN;
        write(&path, &longer, &rows).unwrap_err();
        write(&path, &longer, &rows[..10]).unwrap_err();
        assert_eq!(before("json"), json);
        assert_eq!(before("npy"), npy);
        assert_eq!(read_all(&path).1, [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
        assert_eq!(listing(), ["obs.json", "obs.npy"]);
        write(&dir.path().join("new.json"), &longer, &rows[..10]).unwrap_err();
        assert_eq!(listing(), ["obs.json", "obs.npy"]);
    }
}

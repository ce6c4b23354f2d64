//! Streaming reader for search-mode FITS: the primary header gives source, site
//! and start time; the `SUBINT` binary table gives the samples, one row at a time.

use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use super::bits::Encoding;
use super::cards::{BLOCK, Cards};
use super::layout::{Layout, PolMode, data_bytes};
use super::table::Column;
use crate::error::{Error, Result};
use crate::obs::codec::check_finite;
use crate::obs::geodesy::{parse_sexagesimal, site_from_itrf};
use crate::obs::header::even_step_mhz;
use crate::obs::{Header, SampleSource, UtcEpoch};

/// Streams rows from a FITS search-mode file. Memory is one `SUBINT` row.
pub struct FitsReader {
    path: PathBuf,
    header: Header,
    layout: Layout,
    file: BufReader<File>,
    /// File offset of the first `SUBINT` row.
    data_start: u64,
    n_rows: u64,
    rows_loaded: u64,
    allow_non_finite: bool,
    row_bytes: Vec<u8>,
    raw: Vec<f32>,
    /// Decoded samples of the current row, `[time, channel]`.
    samples: Vec<f32>,
    /// Rows of `samples` already handed out.
    pos: usize,
    delivered: u64,
    scratch: Vec<f64>,
    scale: Vec<f32>,
    offset: Vec<f32>,
    weights: Vec<f32>,
}

impl FitsReader {
    /// Opens `path`, reads its headers and first row, and checks the file size.
    ///
    /// `allow_non_finite` lets NaN/Inf samples through (for `inspect`).
    ///
    /// # Errors
    /// [`Error::Io`] if the file cannot be opened; [`Error::BadInput`] for anything
    /// malformed, missing, unsupported or truncated.
    pub fn open(path: &Path, allow_non_finite: bool) -> Result<Self> {
        let bad = |m: String| Error::bad_input(path, m);
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        let file_len = file.metadata().map_err(|e| Error::io(path, e))?.len();
        let mut file = BufReader::with_capacity(1 << 16, file);
        let primary = Cards::read(&mut file)
            .map_err(&bad)?
            .ok_or_else(|| bad("empty file".into()))?;
        if primary.get("SIMPLE").is_none() {
            return Err(bad("not a FITS file (no SIMPLE keyword)".into()));
        }
        if let Some(mode) = primary.str("OBS_MODE")
            && !mode.eq_ignore_ascii_case("SEARCH")
        {
            return Err(bad(format!(
                "OBS_MODE is '{mode}'; only search-mode data can be read"
            )));
        }
        let mut sub = primary.clone();
        let mut skip = data_bytes(&primary).map_err(&bad)?;
        while sub.str("EXTNAME") != Some("SUBINT") {
            let padded = skip.div_ceil(BLOCK as u64) * BLOCK as u64;
            if padded > file_len {
                return Err(bad(format!(
                    "truncated: a header promises {skip} bytes of data, file has {file_len}"
                )));
            }
            file.seek_relative(padded as i64)
                .map_err(|e| Error::io(path, e))?;
            sub = Cards::read(&mut file)
                .map_err(&bad)?
                .ok_or_else(|| bad("no SUBINT table (not a search-mode file)".into()))?;
            skip = data_bytes(&sub).map_err(&bad)?;
        }
        let layout = Layout::from_cards(&sub).map_err(|m| bad(format!("SUBINT: {m}")))?;
        let n_rows = sub.count("NAXIS2").map_err(&bad)? as u64;
        let data_start = file.stream_position().map_err(|e| Error::io(path, e))?;
        let needed = (layout.row_bytes as u64)
            .checked_mul(n_rows)
            .and_then(|b| b.checked_add(data_start))
            .unwrap_or(u64::MAX);
        if file_len < needed {
            return Err(bad(format!(
                "truncated: {n_rows} rows of {} bytes need {needed} bytes, file has {file_len}",
                layout.row_bytes
            )));
        }
        if n_rows == 0 {
            return Err(bad("SUBINT table has no rows (no samples)".into()));
        }
        let mut reader = FitsReader {
            path: path.to_path_buf(),
            header: header_from_primary(&primary).map_err(&bad)?,
            row_bytes: vec![0; layout.row_bytes],
            layout,
            file,
            data_start,
            n_rows,
            rows_loaded: 0,
            allow_non_finite,
            raw: Vec::new(),
            samples: Vec::new(),
            pos: 0,
            delivered: 0,
            scratch: Vec::new(),
            scale: Vec::new(),
            offset: Vec::new(),
            weights: Vec::new(),
        };
        reader.complete_header()?;
        Ok(reader)
    }

    /// Where the `SUBINT` rows lie in the file: the recorded samples with their
    /// per-row columns, without any header card.
    pub fn table_bytes(&self) -> std::ops::Range<u64> {
        self.data_start..self.data_start + self.n_rows * self.layout.row_bytes as u64
    }

    /// Fills in what only the rows tell: frequencies and weights (first row) and
    /// the true length of the last row (its `TSUBINT`). Leaves the file at row 0.
    fn complete_header(&mut self) -> Result<()> {
        let data_start = self.data_start;
        let path = self.path.clone();
        let bad = |m: String| Error::bad_input(&path, m);
        let l = self.layout.clone();
        let last = data_start + (self.n_rows - 1) * l.row_bytes as u64;
        self.file
            .seek(SeekFrom::Start(last))
            .and_then(|_| self.file.read_exact(&mut self.row_bytes))
            .map_err(|e| Error::io(&path, e))?;
        let last_len = match &l.tsubint {
            Some(col) => {
                col.read_f64(&self.row_bytes, 1, &mut self.scratch)
                    .map_err(&bad)?;
                l.samples_in_row(self.scratch[0])
                    .map_err(|m| bad(format!("SUBINT row {0} of {0}: {m}", self.n_rows)))?
            }
            None => l.nsblk,
        };
        self.file
            .seek(SeekFrom::Start(data_start))
            .and_then(|_| self.file.read_exact(&mut self.row_bytes))
            .map_err(|e| Error::io(&path, e))?;
        self.file
            .seek(SeekFrom::Start(data_start))
            .map_err(|e| Error::io(&path, e))?;
        let mut freqs = Vec::new();
        l.freq
            .read_f64(&self.row_bytes, l.n_chan, &mut freqs)
            .map_err(&bad)?;
        let chan_bw = match l.chan_bw_mhz {
            Some(bw) => bw.abs(),
            None if freqs.len() > 1 => (freqs[1] - freqs[0]).abs(),
            None => return Err(bad("keyword CHAN_BW is missing".into())),
        };
        self.load_weights(1)?;
        let h = &mut self.header;
        h.freqs_mhz = freqs;
        h.chan_bw_mhz = chan_bw;
        h.weights = self.weights.clone();
        h.tsamp_s = l.tbin_s;
        h.nbits = l.nbits;
        h.n_samples = (self.n_rows - 1) * l.nsblk as u64 + last_len as u64;
        h.validate().map_err(&bad)?;
        // 1 % of a channel, plus the rounding of DAT_FREQ stored as 32-bit floats.
        let tol = 0.01 * chan_bw + h.freq_hi_mhz() * f64::from(f32::EPSILON);
        let step = even_step_mhz(&h.freqs_mhz, tol)
            .map_err(|m| bad(format!("DAT_FREQ is not evenly spaced: {m}")))?;
        if let Some(step) = step
            && (step.abs() - chan_bw).abs() > tol
        {
            return Err(bad(format!(
                "DAT_FREQ steps by {step} MHz but CHAN_BW is {} MHz",
                l.chan_bw_mhz.unwrap_or(chan_bw)
            )));
        }
        // The sign of CHAN_BW and the order of DAT_FREQ both say which way the band
        // runs; if they disagree, one is wrong, and trusting the wrong one would
        // dedisperse against the sweep and find nothing: refused, not guessed.
        if let (Some(bw), Some(step)) = (l.chan_bw_mhz, step)
            && (bw > 0.0) != (step > 0.0)
        {
            let way = |v: f64| if v > 0.0 { "ascend" } else { "descend" };
            return Err(bad(format!(
                "CHAN_BW = {bw} MHz says the channels {} in frequency but DAT_FREQ {}s \
                 ({} to {} MHz): which order the data are in is unclear",
                way(bw),
                way(step),
                h.freqs_mhz[0],
                h.freqs_mhz[h.freqs_mhz.len() - 1]
            )));
        }
        Ok(())
    }

    /// Reads `DAT_WTS`, `DAT_SCL`, `DAT_OFFS` of the row in `row_bytes` (SUBINT row
    /// `row`, counted from 1) into per-channel weights and per-(pol, channel) scale
    /// and offset, with `ZERO_OFF` folded in: value = raw × scale + offset.
    ///
    /// A weight that is NaN, infinite or negative is refused rather than guessed at:
    /// a corrupt weight column says nothing reliable about the rest of the row.
    fn load_weights(&mut self, row: u64) -> Result<()> {
        let l = &self.layout;
        let n = l.n_chan * l.npol;
        let bad = |m: String| Error::bad_input(&self.path, m);
        let s = &mut self.scratch;
        let row_bytes = &self.row_bytes;
        read_or(l.wts.as_ref(), row_bytes, l.n_chan, 1.0, s).map_err(bad)?;
        if let Some((c, w)) = s
            .iter()
            .enumerate()
            .find(|(_, w)| !(w.is_finite() && **w >= 0.0))
        {
            return Err(bad(format!(
                "SUBINT row {row}: DAT_WTS of channel {c} is {w}, not a weight \
                 (0 masks a channel, a positive value keeps it)"
            )));
        }
        self.weights.clear();
        self.weights.extend(s.iter().map(|&w| w as f32));
        read_or(l.scl.as_ref(), row_bytes, n, 1.0, s).map_err(bad)?;
        self.scale.clear();
        self.scale.extend(s.iter().map(|&v| v as f32));
        read_or(l.offs.as_ref(), row_bytes, n, 0.0, s).map_err(bad)?;
        self.offset.clear();
        let zero = l.zero_off;
        self.offset.extend(
            s.iter()
                .zip(&self.scale)
                .map(|(&o, &k)| (o - zero * k as f64) as f32),
        );
        // A weight of 0 masks the channel: scale and offset 0 make its samples 0.
        for (i, (k, o)) in self.scale.iter_mut().zip(&mut self.offset).enumerate() {
            if self.weights[i % l.n_chan] == 0.0 {
                (*k, *o) = (0.0, 0.0);
            }
        }
        Ok(())
    }

    /// Samples in the next row to be read.
    fn next_row_len(&self) -> usize {
        if self.rows_loaded + 1 == self.n_rows {
            (self.header.n_samples - (self.n_rows - 1) * self.layout.nsblk as u64) as usize
        } else {
            self.layout.nsblk
        }
    }

    /// Reads the next row and decodes it into `dest` (`next_row_len() × n_chan`).
    fn read_row_into(&mut self, dest: &mut [f32]) -> Result<()> {
        self.file.read_exact(&mut self.row_bytes).map_err(|e| {
            Error::bad_input(
                &self.path,
                format!("cannot read SUBINT row {}: {e}", self.rows_loaded + 1),
            )
        })?;
        self.rows_loaded += 1;
        self.load_weights(self.rows_loaded)?;
        let l = &self.layout;
        let (nc, np) = (l.n_chan, l.npol);
        let n_time = dest.len() / nc;
        self.raw.resize(n_time * np * nc, 0.0);
        l.encoding
            .unpack(l.data.bytes(&self.row_bytes), &mut self.raw);
        let (k, o) = (&self.scale, &self.offset);
        for (out, raw) in dest
            .chunks_exact_mut(nc)
            .zip(self.raw.chunks_exact(np * nc))
        {
            scale_into(out, &raw[..nc], &k[..nc], &o[..nc]);
            if l.pol == PolMode::SumFirstTwo {
                add_scaled(out, &raw[nc..2 * nc], &k[nc..2 * nc], &o[nc..2 * nc]);
            }
        }
        // Zero scale and offset already mask integer samples; a float NaN or Inf in a
        // masked channel would survive the multiplication, so clear those explicitly.
        if l.encoding == Encoding::Float32 && self.weights.contains(&0.0) {
            for out in dest.chunks_exact_mut(nc) {
                for (v, &w) in out.iter_mut().zip(&self.weights) {
                    if w == 0.0 {
                        *v = 0.0;
                    }
                }
            }
        }
        if !self.allow_non_finite {
            check_finite(&self.path, dest, nc, self.delivered)?;
        }
        Ok(())
    }
}

/// The first `n` values of the optional column `col` in `row`, or `n` copies of
/// `default` when the file has no such column.
fn read_or(
    col: Option<&Column>,
    row: &[u8],
    n: usize,
    default: f64,
    out: &mut Vec<f64>,
) -> Result<(), String> {
    match col {
        Some(c) => c.read_f64(row, n, out),
        None => {
            out.clear();
            out.resize(n, default);
            Ok(())
        }
    }
}

/// `out = raw × k + o`, element-wise (written as zips so it vectorises).
fn scale_into(out: &mut [f32], raw: &[f32], k: &[f32], o: &[f32]) {
    for (((y, &r), &k), &o) in out.iter_mut().zip(raw).zip(k).zip(o) {
        *y = r * k + o;
    }
}

/// `out += raw × k + o`, element-wise.
fn add_scaled(out: &mut [f32], raw: &[f32], k: &[f32], o: &[f32]) {
    for (((y, &r), &k), &o) in out.iter_mut().zip(raw).zip(k).zip(o) {
        *y += r * k + o;
    }
}

/// The header fields held by the primary header unit.
fn header_from_primary(p: &Cards) -> Result<Header, String> {
    let angle = |key: &str| {
        let s = p.str(key).ok_or(format!("keyword {key} is missing"))?;
        parse_sexagesimal(s).ok_or(format!("{key} '{s}' is not of the form dd:mm:ss.s"))
    };
    let xyz = [p.f64("ANT_X")?, p.f64("ANT_Y")?, p.f64("ANT_Z")?];
    if xyz.iter().all(|&v| v == 0.0) || xyz.iter().any(|v| !v.is_finite()) {
        return Err("ANT_X/ANT_Y/ANT_Z do not give a telescope position".into());
    }
    let telescope = p.str("TELESCOP").unwrap_or("").to_string();
    let start_sec = p.f64("STT_SMJD")? + p.f64("STT_OFFS").unwrap_or(0.0);
    Ok(Header {
        source: p.str("SRC_NAME").unwrap_or("").to_string(),
        site: site_from_itrf(&telescope, xyz),
        telescope,
        ra_deg: angle("RA")? * 15.0,
        dec_deg: angle("DEC")?,
        start: UtcEpoch::checked_start(
            p.int("STT_IMJD")?,
            start_sec,
            ["STT_IMJD", "STT_SMJD + STT_OFFS"],
        )?,
        // Filled from the SUBINT table by `complete_header`.
        tsamp_s: 0.0,
        freqs_mhz: Vec::new(),
        chan_bw_mhz: 0.0,
        weights: Vec::new(),
        n_samples: 0,
        nbits: 0,
        sefd_jy: None,
        beam: match p.get("IBEAM") {
            Some(super::cards::Value::Str(s)) if !s.is_empty() => Some(s.clone()),
            Some(super::cards::Value::Int(i)) => Some(i.to_string()),
            _ => None,
        },
    })
}

/// No byte reads ([`SampleSource::byte_rows`] stays `None`), even for 8-bit data: a
/// sample's value is its stored integer times a scale plus an offset, both per
/// channel and per `SUBINT` row (`DAT_SCL`, `DAT_OFFS`, `ZERO_OFF`; a zero `DAT_WTS`
/// zeroes a channel), and two polarisations may be summed. Our own writer stores
/// those columns in every row, so whether a file's bytes are its values could only
/// be known by reading every row first, and a byte read that carried each row's
/// scales into the transpose would be a second decoder to keep in step with
/// `FitsReader::read_row_into`: such files take the f32 path.
impl SampleSource for FitsReader {
    fn header(&self) -> &Header {
        &self.header
    }

    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        let nc = self.header.n_chan();
        let want = out.len() / nc;
        let mut done = 0;
        while done < want {
            let available = self.samples.len() / nc - self.pos;
            if available > 0 {
                let n = available.min(want - done);
                out[done * nc..(done + n) * nc]
                    .copy_from_slice(&self.samples[self.pos * nc..(self.pos + n) * nc]);
                self.pos += n;
                done += n;
                self.delivered += n as u64;
                continue;
            }
            if self.rows_loaded == self.n_rows {
                break;
            }
            let n_time = self.next_row_len();
            if want - done >= n_time {
                // The whole row fits: decode straight into the caller's buffer.
                self.read_row_into(&mut out[done * nc..(done + n_time) * nc])?;
                done += n_time;
                self.delivered += n_time as u64;
            } else {
                let mut row = std::mem::take(&mut self.samples);
                row.resize(n_time * nc, 0.0);
                let result = self.read_row_into(&mut row);
                self.samples = row;
                self.pos = 0;
                result?;
            }
        }
        Ok(done)
    }

    /// Seeks: every `SUBINT` row but the last holds `NSBLK` samples, so the row
    /// holding the target sample is found by division, and only it is read.
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        let nc = self.header.n_chan();
        let skipped = n.min(self.header.n_samples - self.delivered);
        let buffered = (self.samples.len() / nc - self.pos) as u64;
        if skipped <= buffered {
            self.pos += skipped as usize;
            self.delivered += skipped;
            return Ok(skipped);
        }
        let target = self.delivered + skipped;
        self.samples.clear();
        self.pos = 0;
        if target == self.header.n_samples {
            self.rows_loaded = self.n_rows;
            self.delivered = target;
            return Ok(skipped);
        }
        let nsblk = self.layout.nsblk as u64;
        let row = target / nsblk;
        let row_bytes = self.layout.row_bytes as u64;
        // Relative, so a target still inside the read buffer costs no system call.
        let ahead = (row - self.rows_loaded) * row_bytes;
        self.file
            .seek_relative(ahead as i64)
            .map_err(|e| Error::io(&self.path, e))?;
        self.rows_loaded = row;
        self.delivered = row * nsblk;
        let into_row = (target - self.delivered) as usize;
        if into_row > 0 {
            let mut samples = std::mem::take(&mut self.samples);
            samples.resize(self.next_row_len() * nc, 0.0);
            let result = self.read_row_into(&mut samples);
            self.samples = samples;
            result?;
            self.pos = into_row;
            self.delivered = target;
        }
        Ok(skipped)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::SampleSink;
    use crate::obs::fits::FitsWriter;
    use crate::obs::header::tests::test_header;
    use crate::obs::{assert_skips_match_reading, awkward_skips};

    #[test]
    fn skips_match_reading() {
        let dir = tempfile::tempdir().unwrap();
        // 16-sample subints; 203 samples leave a short last one.
        for (nbits, n, nsblk) in [(8u32, 203u64, 16usize), (4, 96, 16), (32, 203, 16)] {
            let mut h = test_header(6, n);
            h.nbits = nbits;
            h.weights[2] = 0.0;
            let max = if nbits == 32 { 1000 } else { (1 << nbits) - 1 };
            let data: Vec<f32> = (0..6 * n as usize)
                .map(|i| {
                    if i % 6 == 2 {
                        0.0
                    } else {
                        (i * 7 % (max + 1)) as f32
                    }
                })
                .collect();
            let path = dir.path().join(format!("skip{nbits}.fits"));
            let mut w = Box::new(FitsWriter::create_with_nsblk(&path, &h, nsblk).unwrap());
            w.write_rows(&data).unwrap();
            w.finish().unwrap();
            assert_skips_match_reading(
                &|| FitsReader::open(&path, false).unwrap(),
                &awkward_skips(n, nsblk as u64),
            );
        }
    }
}

//! Streaming access to samples: a [`SampleSource`] yields rows in order and a
//! [`BlockReader`] cuts them into overlapping [`Block`]s of bounded size.

use ndarray::ArrayView2;

use super::Header;
use crate::error::{Error, Result};

/// A contiguous run of samples, `[time, channel]` row-major, channels in data order.
#[derive(Debug, Clone, PartialEq)]
pub struct Block {
    /// Index in the file of this block's first row.
    pub start_sample: u64,
    /// Number of leading rows repeated from the end of the previous block.
    pub overlap: usize,
    /// Number of channels (row length).
    pub n_chan: usize,
    /// The samples, `n_time() * n_chan` values.
    pub data: Vec<f32>,
}

impl Block {
    /// Number of time samples in the block.
    pub fn n_time(&self) -> usize {
        self.data.len().checked_div(self.n_chan).unwrap_or(0)
    }

    /// The samples as a `[time, channel]` view.
    pub fn view(&self) -> ArrayView2<'_, f32> {
        ArrayView2::from_shape((self.n_time(), self.n_chan), &self.data)
            .expect("block data length is a multiple of n_chan")
    }

    /// Row `t` (all channels of one time sample).
    pub fn row(&self, t: usize) -> &[f32] {
        &self.data[t * self.n_chan..(t + 1) * self.n_chan]
    }
}

/// A type a read's rows can hold: `u8`, the stored bytes of 8-bit data whose values
/// are the bytes themselves ([`SampleSource::byte_rows`]), or `f32`, decoded values
/// ([`SampleSource::read_rows`]). What reads the rows (the search's cleaning and
/// transpose) is generic over it, so both kinds of read share one implementation.
pub trait Sample: Copy + Default + Send + Sync + Into<f32> + 'static {
    /// Adds each channel's Σx to `s1` and Σx² to `s2` over the rows of `raw`
    /// (`[time, channel]`), in the build's baseline instruction set: the channel
    /// statistics' pass over every read, chosen by type because bytes sum exactly,
    /// and faster, in integers. Call `clean::channel_stats::add_power_sums`, which
    /// runs it in AVX2 where the CPU has it.
    fn add_power_sums(raw: ArrayView2<'_, Self>, s1: &mut [f64], s2: &mut [f64]);
}

impl Sample for u8 {
    #[inline(always)]
    fn add_power_sums(raw: ArrayView2<'_, Self>, s1: &mut [f64], s2: &mut [f64]) {
        crate::clean::channel_stats::byte_power_sums(raw, s1, s2);
    }
}

impl Sample for f32 {
    #[inline(always)]
    fn add_power_sums(raw: ArrayView2<'_, Self>, s1: &mut [f64], s2: &mut [f64]) {
        crate::clean::channel_stats::float_power_sums(raw, s1, s2);
    }
}

/// A source whose samples are stored as single unsigned bytes, read without decoding.
pub trait ByteRows {
    /// Fills the start of `out` with the next whole rows (each `n_chan` bytes, as
    /// stored) and returns how many rows were written; 0 means the end of the data.
    /// It reads from the same position as [`SampleSource::read_rows`].
    ///
    /// `out.len()` must be a multiple of `n_chan`.
    ///
    /// # Errors
    /// Truncated data or an I/O failure, naming the file.
    fn read_byte_rows(&mut self, out: &mut [u8]) -> Result<usize>;
}

/// Something that yields an observation's rows in time order.
pub trait SampleSource: Send {
    /// The observation's header.
    fn header(&self) -> &Header;

    /// Fills the start of `out` with the next whole rows (each `n_chan` values) and
    /// returns how many rows were written; 0 means the end of the data.
    ///
    /// `out.len()` must be a multiple of `n_chan`.
    ///
    /// # Errors
    /// Truncated or corrupt data, or an I/O failure, naming the file.
    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize>;

    /// The rows as their stored bytes, when every sample is one unsigned byte whose
    /// value is the sample; `None` (this default) when samples need decoding or are
    /// changed on the way (scaled, injected into), and rows come only as f32 from
    /// [`read_rows`](Self::read_rows). A byte read holds a quarter of the memory of
    /// an f32 one and skips the decoding pass.
    fn byte_rows(&mut self) -> Option<&mut dyn ByteRows> {
        None
    }

    /// Moves past the next `n` rows without returning them and says how many were
    /// passed: fewer than `n` only when the data ends first (0 once at the end), so
    /// skipping past the end is not an error. The next [`read_rows`](Self::read_rows)
    /// continues from there.
    ///
    /// This default reads and discards, at most [`SKIP_CHUNK_VALUES`] values at a time;
    /// sources that can seek override it. It is also the plain reference the overrides
    /// are tested against.
    ///
    /// # Errors
    /// Whatever reading (or seeking) the source reports.
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        let n_chan = self.header().n_chan().max(1);
        let chunk_rows = (SKIP_CHUNK_VALUES / n_chan).max(1) as u64;
        let mut scratch = vec![0.0; n.min(chunk_rows) as usize * n_chan];
        let mut skipped = 0;
        while skipped < n {
            let want = (n - skipped).min(chunk_rows) as usize;
            let got = self.read_rows(&mut scratch[..want * n_chan])?;
            if got == 0 {
                break;
            }
            skipped += got as u64;
        }
        Ok(skipped)
    }
}

/// Values (rows × channels) the default [`SampleSource::skip_rows`] reads per call,
/// which bounds its memory to 4 MiB.
pub const SKIP_CHUNK_VALUES: usize = 1 << 20;

impl<S: SampleSource + ?Sized> SampleSource for Box<S> {
    fn header(&self) -> &Header {
        (**self).header()
    }
    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        (**self).read_rows(out)
    }
    fn byte_rows(&mut self) -> Option<&mut dyn ByteRows> {
        (**self).byte_rows()
    }
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        (**self).skip_rows(n)
    }
}

/// Reads rows into `out` until it is full or the data ends, and returns the number of
/// whole rows written (`out.len()` must be a multiple of `n_chan`).
///
/// # Errors
/// Whatever the source reports.
pub fn fill_rows<S: SampleSource + ?Sized>(source: &mut S, out: &mut [f32]) -> Result<usize> {
    let n_chan = source.header().n_chan();
    fill_with(|rows| source.read_rows(rows), n_chan, out)
}

/// Calls `read` (which fills the start of its argument with whole rows of `n_chan`
/// values and returns how many, 0 at the end of the data) until `out` is full or the
/// data ends, and returns the number of whole rows written (`out.len()` must be a
/// multiple of `n_chan`).
///
/// # Errors
/// The first error `read` reports.
pub fn fill_with<T>(
    mut read: impl FnMut(&mut [T]) -> Result<usize>,
    n_chan: usize,
    out: &mut [T],
) -> Result<usize> {
    let want = out.len() / n_chan;
    let mut filled = 0;
    while filled < want {
        let got = read(&mut out[filled * n_chan..])?;
        if got == 0 {
            break;
        }
        filled += got;
    }
    Ok(filled)
}

/// Cuts a [`SampleSource`] into blocks of at most `block_len` rows where each block
/// after the first starts with the last `overlap` rows of the one before.
///
/// Memory is `O(block_len * n_chan)` whatever the file length.
pub struct BlockReader<S> {
    source: S,
    block_len: usize,
    overlap: usize,
    next_start: u64,
    carry: Vec<f32>,
    finished: bool,
}

impl<S: SampleSource> BlockReader<S> {
    /// Wraps `source`.
    ///
    /// # Errors
    /// [`Error::Config`] unless `overlap < block_len`.
    pub fn new(source: S, block_len: usize, overlap: usize) -> Result<Self> {
        if block_len == 0 || overlap >= block_len {
            return Err(Error::Config(format!(
                "block length {block_len} must exceed the overlap {overlap}"
            )));
        }
        Ok(BlockReader {
            source,
            block_len,
            overlap,
            next_start: 0,
            carry: Vec::new(),
            finished: false,
        })
    }

    /// The wrapped source's header.
    pub fn header(&self) -> &Header {
        self.source.header()
    }

    /// Reads the next block, or `None` after the last one.
    ///
    /// # Errors
    /// Whatever the source reports.
    pub fn next_block(&mut self) -> Result<Option<Block>> {
        if self.finished {
            return Ok(None);
        }
        let n_chan = self.source.header().n_chan();
        let carried_rows = self.carry.len() / n_chan;
        let mut data = std::mem::take(&mut self.carry);
        data.resize(self.block_len * n_chan, 0.0);
        let filled =
            carried_rows + fill_rows(&mut self.source, &mut data[carried_rows * n_chan..])?;
        self.finished = filled < self.block_len;
        data.truncate(filled * n_chan);
        if filled == carried_rows {
            // Nothing new arrived: the carried rows were already delivered.
            return Ok(None);
        }
        let start_sample = self.next_start;
        let keep = self.overlap.min(filled);
        self.carry = data[(filled - keep) * n_chan..].to_vec();
        self.next_start = start_sample + (filled - keep) as u64;
        Ok(Some(Block {
            start_sample,
            overlap: carried_rows,
            n_chan,
            data,
        }))
    }
}

impl<S: SampleSource> Iterator for BlockReader<S> {
    type Item = Result<Block>;
    fn next(&mut self) -> Option<Self::Item> {
        self.next_block().transpose()
    }
}

/// An in-memory source, for tests and for data produced on the fly.
pub struct MemorySource {
    header: Header,
    data: Vec<f32>,
    pos_rows: usize,
}

impl MemorySource {
    /// Wraps `data` (`[time, channel]`, `header.n_samples * n_chan` values).
    ///
    /// # Panics
    /// If the data length disagrees with the header (a bug in the caller).
    pub fn new(header: Header, data: Vec<f32>) -> Self {
        assert_eq!(data.len() as u64, header.n_samples * header.n_chan() as u64);
        MemorySource {
            header,
            data,
            pos_rows: 0,
        }
    }
}

impl SampleSource for MemorySource {
    fn header(&self) -> &Header {
        &self.header
    }
    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        let n_chan = self.header.n_chan();
        let total_rows = self.data.len() / n_chan;
        let rows = (out.len() / n_chan).min(total_rows - self.pos_rows);
        let src = &self.data[self.pos_rows * n_chan..(self.pos_rows + rows) * n_chan];
        out[..src.len()].copy_from_slice(src);
        self.pos_rows += rows;
        Ok(rows)
    }
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        let remaining = self.header.n_samples - self.pos_rows as u64;
        let skipped = n.min(remaining);
        self.pos_rows += skipped as usize;
        Ok(skipped)
    }
}

/// Something that accepts an observation's rows in time order and writes them out.
pub trait SampleSink {
    /// Appends whole rows (`rows.len()` a multiple of `n_chan`).
    ///
    /// # Errors
    /// I/O failure or a value the format cannot hold (NaN, out of range).
    fn write_rows(&mut self, rows: &[f32]) -> Result<()>;

    /// Flushes and closes the output, fixing up any size fields.
    ///
    /// # Errors
    /// I/O failure, or a row count different from the header's `n_samples`.
    fn finish(self: Box<Self>) -> Result<()>;
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::obs::header::tests::test_header;

    /// Hides a source's own `skip_rows`, so the default (read and discard) is used.
    pub(crate) struct ReadOnly<S>(pub S);

    impl<S: SampleSource> SampleSource for ReadOnly<S> {
        fn header(&self) -> &Header {
            self.0.header()
        }
        fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
            self.0.read_rows(out)
        }
    }

    /// Checks that for every `(read_first, skip)` pair, reading `read_first` rows,
    /// skipping `skip` and reading the rest (a few rows per call) gives exactly the
    /// rows reading everything gives from there, that the skip reports how many rows
    /// it passed, and that a further skip at the end passes none. `open` opens the
    /// same data afresh each time.
    pub(crate) fn assert_skips_match_reading<S: SampleSource>(
        open: &dyn Fn() -> S,
        pairs: &[(u64, u64)],
    ) {
        let mut reference = open();
        let n_chan = reference.header().n_chan();
        let n = reference.header().n_samples;
        let all = crate::obs::read_all(&mut reference, 1000).unwrap();
        assert_eq!(all.len() as u64, n * n_chan as u64);
        for &(read_first, skip) in pairs {
            let mut src = open();
            let mut head = vec![0.0; read_first as usize * n_chan];
            let got = fill_rows(&mut src, &mut head).unwrap() as u64;
            assert_eq!(got, read_first.min(n));
            let skipped = src.skip_rows(skip).unwrap();
            assert_eq!(skipped, skip.min(n - got), "read {read_first}, skip {skip}");
            let at = (got + skipped) as usize;
            let rest = crate::obs::read_all(&mut src, 3).unwrap();
            assert_eq!(rest, all[at * n_chan..], "read {read_first}, skip {skip}");
            assert_eq!(src.skip_rows(1).unwrap(), 0, "nothing left to skip");
        }
    }

    /// Offsets worth checking in data of `n` rows stored in pieces of `piece` rows:
    /// start, inside and at the edges of a piece, the last row, the end and past it.
    pub(crate) fn awkward_skips(n: u64, piece: u64) -> Vec<(u64, u64)> {
        let mut pairs = vec![
            (0, 0),
            (0, 1),
            (0, piece - 1),
            (0, piece),
            (0, piece + piece / 2 + 1),
            (0, n - 1),
            (0, n),
            (0, n + 5),
            (0, u64::MAX),
            (1, piece / 2),
            (piece / 2 + 1, 1),
            (piece / 2 + 1, piece),
            (n - 2, 1),
            (n, 3),
        ];
        pairs.retain(|&(r, s)| r <= n && s <= n + 5 || s == u64::MAX);
        pairs
    }

    #[test]
    fn memory_and_default_skips_match_reading() {
        let (n_chan, n) = (3, 50);
        assert_skips_match_reading(&|| ramp_source(n_chan, n), &awkward_skips(n, 16));
        assert_skips_match_reading(&|| ReadOnly(ramp_source(n_chan, n)), &awkward_skips(n, 16));
    }

    #[test]
    fn default_skip_crosses_several_chunks() {
        // More rows than one chunk holds, so the loop runs several times.
        let n_chan = 1024;
        let n = (3 * SKIP_CHUNK_VALUES / n_chan + 7) as u64;
        let mut src = ReadOnly(ramp_source(n_chan, n));
        assert_eq!(src.skip_rows(n - 2).unwrap(), n - 2);
        let mut row = vec![0.0; n_chan];
        assert_eq!(src.read_rows(&mut row).unwrap(), 1);
        assert_eq!(row[0], ((n - 2) * n_chan as u64) as f32);
    }

    fn ramp_source(n_chan: usize, n_time: u64) -> MemorySource {
        let h = test_header(n_chan, n_time);
        let data = (0..n_time as usize * n_chan).map(|i| i as f32).collect();
        MemorySource::new(h, data)
    }

    #[test]
    fn blocks_cover_every_row_once_plus_overlap() {
        for &(n_time, block, overlap) in &[(100u64, 30, 7), (30, 30, 0), (1, 8, 3), (31, 10, 9)] {
            let mut reader = BlockReader::new(ramp_source(3, n_time), block, overlap).unwrap();
            let mut seen = Vec::new();
            let mut expected_start = 0u64;
            while let Some(b) = reader.next_block().unwrap() {
                assert_eq!(b.start_sample, expected_start);
                assert!(b.n_time() <= block);
                for t in 0..b.n_time() {
                    let abs = b.start_sample as usize + t;
                    assert_eq!(
                        b.row(t)[0],
                        (abs * 3) as f32,
                        "row content matches its index"
                    );
                    if t >= b.overlap {
                        seen.push(abs);
                    }
                }
                expected_start = b.start_sample + (b.n_time() - overlap.min(b.n_time())) as u64;
            }
            assert_eq!(seen, (0..n_time as usize).collect::<Vec<_>>());
        }
    }

    #[test]
    fn rejects_overlap_not_below_block() {
        assert!(BlockReader::new(ramp_source(2, 10), 5, 5).is_err());
        assert!(BlockReader::new(ramp_source(2, 10), 0, 0).is_err());
    }

    #[test]
    fn empty_source_yields_nothing() {
        let mut r = BlockReader::new(ramp_source(4, 0), 16, 4).unwrap();
        assert!(r.next_block().unwrap().is_none());
    }
}

//! Observations: the header model, streaming block access, and one reader/writer
//! file per on-disk format.
//!
//! Add a format by writing a [`SampleSource`] (and optionally a [`SampleSink`]) in its
//! own file and teaching [`open`] / [`create`] to recognise it.

mod average;
mod block;
mod codec;
pub mod fits;
pub mod geodesy;
mod header;
pub mod native;
mod npy;
mod run_on;
pub mod stats;

pub use average::Averaging;
#[cfg(test)]
pub(crate) use block::tests::{assert_skips_match_reading, awkward_skips};
pub use block::{
    Block, BlockReader, ByteRows, MemorySource, SKIP_CHUNK_VALUES, Sample, SampleSink,
    SampleSource, fill_rows, fill_with,
};
pub(crate) use header::RADIO_WINDOW_MHZ;
#[cfg(test)]
pub(crate) use header::tests::{band, test_header};
pub use header::{Header, Site, UtcEpoch, check_sky_position};
pub use run_on::RunOn;

use std::path::Path;

use crate::error::{Error, Result};

/// On-disk container formats burstbook reads and writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Container {
    /// `NAME.json` header plus `NAME.npy` samples.
    Native,
    /// FITS search-mode file with a `SUBINT` binary table.
    Fits,
}

impl Container {
    /// Guesses the container from a file name, then from its first bytes.
    ///
    /// # Errors
    /// The file cannot be read or is neither format.
    pub fn detect(path: &Path) -> Result<Container> {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
        {
            Some(e) if e == "json" => return Ok(Container::Native),
            Some(e) if e == "fits" || e == "sf" || e == "fit" => return Ok(Container::Fits),
            Some(e) if e == "npy" => {
                return Err(Error::bad_input(
                    path,
                    "this holds only the samples: open the .json header beside it",
                ));
            }
            _ => {}
        }
        let mut head = [0u8; 9];
        let n = {
            use std::io::Read;
            let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
            f.read(&mut head).map_err(|e| Error::io(path, e))?
        };
        if head[..n].starts_with(b"SIMPLE  =") {
            Ok(Container::Fits)
        } else if head[..n].first() == Some(&b'{') {
            Ok(Container::Native)
        } else {
            Err(Error::bad_input(
                path,
                "not a recognised observation (expected a burstbook .json header or a FITS file)",
            ))
        }
    }
}

/// How to open an observation.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct OpenOptions {
    /// Pass NaN and infinite samples through instead of failing on the first one
    /// (for `inspect`, which counts them).
    pub allow_non_finite: bool,
}

/// Opens an observation for streaming, whatever its container. A NaN or infinite
/// sample is an error when it is reached.
///
/// # Errors
/// Missing file, unknown format, or a header that fails validation.
pub fn open(path: &Path) -> Result<Box<dyn SampleSource>> {
    open_with(path, OpenOptions::default())
}

/// [`open`] with options.
///
/// # Errors
/// As [`open`].
pub fn open_with(path: &Path, options: OpenOptions) -> Result<Box<dyn SampleSource>> {
    let lenient = options.allow_non_finite;
    match Container::detect(path)? {
        Container::Native => Ok(Box::new(native::NativeReader::open(path, lenient)?)),
        Container::Fits => Ok(Box::new(fits::FitsReader::open(path, lenient)?)),
    }
}

/// Reads every remaining row of `source`, `rows_per_read` rows per call, into one
/// `[time, channel]` vector. For tests and small files only: memory grows with
/// the file (stream with [`BlockReader`] instead).
///
/// # Errors
/// Whatever the source reports.
pub fn read_all<S: SampleSource>(source: &mut S, rows_per_read: usize) -> Result<Vec<f32>> {
    let n_chan = source.header().n_chan();
    let mut buf = vec![f32::NAN; rows_per_read.max(1) * n_chan];
    let mut all = Vec::new();
    loop {
        let n = source.read_rows(&mut buf)?;
        if n == 0 {
            return Ok(all);
        }
        all.extend_from_slice(&buf[..n * n_chan]);
    }
}

/// Creates an observation file that accepts rows in time order.
///
/// `header.nbits` selects the stored sample type (see each format's writer);
/// `header.n_samples` is the number of rows that will be written.
///
/// # Errors
/// An unsupported bit depth for the container, or an I/O failure.
pub fn create(path: &Path, header: &Header, container: Container) -> Result<Box<dyn SampleSink>> {
    header.validate().map_err(|m| Error::bad_input(path, m))?;
    match container {
        Container::Native => Ok(Box::new(native::NativeWriter::create(path, header)?)),
        Container::Fits => Ok(Box::new(fits::FitsWriter::create(path, header)?)),
    }
}

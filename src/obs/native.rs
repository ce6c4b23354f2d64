//! Native format: `NAME.json` header + `NAME.npy` samples. (Being written.)

use std::path::Path;

use super::{Header, SampleSink, SampleSource};
use crate::error::{Error, Result};

/// Streams rows from a native observation.
pub struct NativeReader {
    header: Header,
}

impl NativeReader {
    /// Opens `path` (the JSON header).
    ///
    /// # Errors
    /// Not yet supported.
    pub fn open(path: &Path) -> Result<Self> {
        Err(Error::bad_input(path, "native reader not yet available"))
    }
}

impl SampleSource for NativeReader {
    fn header(&self) -> &Header {
        &self.header
    }
    fn read_rows(&mut self, _out: &mut [f32]) -> Result<usize> {
        Ok(0)
    }
}

/// Writes a native observation.
pub struct NativeWriter;

impl NativeWriter {
    /// Creates `path` and its `.npy` companion.
    ///
    /// # Errors
    /// Not yet supported.
    pub fn create(path: &Path, _header: &Header) -> Result<Self> {
        Err(Error::bad_input(path, "native writer not yet available"))
    }
}

impl SampleSink for NativeWriter {
    fn write_rows(&mut self, _rows: &[f32]) -> Result<()> {
        Ok(())
    }
    fn finish(self: Box<Self>) -> Result<()> {
        Ok(())
    }
}

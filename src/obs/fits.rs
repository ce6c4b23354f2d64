//! FITS search mode. (Being written.)

use std::path::Path;

use super::{Header, SampleSink, SampleSource};
use crate::error::{Error, Result};

/// Streams rows from a FITS search-mode file.
pub struct FitsReader {
    header: Header,
}

impl FitsReader {
    /// Opens `path` .
    ///
    /// # Errors
    /// Not yet supported.
    pub fn open(path: &Path) -> Result<Self> {
        Err(Error::bad_input(path, "FITS reader not yet available"))
    }
}

impl SampleSource for FitsReader {
    fn header(&self) -> &Header {
        &self.header
    }
    fn read_rows(&mut self, _out: &mut [f32]) -> Result<usize> {
        Ok(0)
    }
}

/// Writes a FITS search-mode file.
pub struct FitsWriter;

impl FitsWriter {
    /// Creates `path`.
    ///
    /// # Errors
    /// Not yet supported.
    pub fn create(path: &Path, _header: &Header) -> Result<Self> {
        Err(Error::bad_input(path, "FITS writer not yet available"))
    }
}

impl SampleSink for FitsWriter {
    fn write_rows(&mut self, _rows: &[f32]) -> Result<()> {
        Ok(())
    }
    fn finish(self: Box<Self>) -> Result<()> {
        Ok(())
    }
}

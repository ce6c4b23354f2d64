//! FITS search mode: primary header (source, site, start) plus a `SUBINT` binary
//! table whose rows each hold `NSBLK` samples of every channel and polarisation.
//!
//! Hand-written (no FITS dependency): the parts used are small, and streaming rows
//! straight from a buffered file keeps memory to one row.

mod bits;
mod cards;
mod layout;
mod reader;
mod table;
mod writer;

pub use reader::FitsReader;
pub use writer::FitsWriter;

//! What the `SUBINT` header says about each row: shape, encoding, columns.

use super::bits::Encoding;
use super::cards::Cards;
use super::table::{self, Column};

/// How the stored polarisations become one total-intensity value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PolMode {
    /// One polarisation product, used as is.
    Single,
    /// Sum of the first two products (AA + BB; for four products AA, BB, CR, CI).
    SumFirstTwo,
    /// Stokes I is the first of four products (`POL_TYPE = 'IQUV'`).
    First,
}

/// The layout of a search-mode `SUBINT` row.
#[derive(Debug, Clone)]
pub struct Layout {
    pub n_chan: usize,
    pub npol: usize,
    pub nsblk: usize,
    pub nbits: u32,
    pub encoding: Encoding,
    pub pol: PolMode,
    pub tbin_s: f64,
    /// `ZERO_OFF`, subtracted from stored values before scaling.
    pub zero_off: f64,
    /// Signed channel width in MHz (`CHAN_BW`, negative for a descending band).
    pub chan_bw_mhz: Option<f64>,
    pub row_bytes: usize,
    pub data: Column,
    pub freq: Column,
    pub wts: Option<Column>,
    pub offs: Option<Column>,
    pub scl: Option<Column>,
    pub tsubint: Option<Column>,
}

impl Layout {
    /// Reads the layout from the `SUBINT` header.
    ///
    /// # Errors
    /// A message naming the missing or unsupported keyword or column.
    pub fn from_cards(c: &Cards) -> Result<Layout, String> {
        let n_chan = c.count("NCHAN")?;
        if n_chan == 0 {
            return Err("zero channels (NCHAN = 0)".into());
        }
        let npol = c.count("NPOL")?;
        let pol = match (npol, c.str("POL_TYPE").unwrap_or("")) {
            (1, _) => PolMode::Single,
            (2, _) => PolMode::SumFirstTwo,
            (4, t) if t.to_ascii_uppercase().starts_with("IQUV") => PolMode::First,
            (4, _) => PolMode::SumFirstTwo,
            (n, _) => return Err(format!("NPOL = {n} is not supported (1, 2 or 4)")),
        };
        let nsblk = c.count("NSBLK")?;
        if nsblk == 0 {
            return Err("NSBLK = 0: rows hold no samples".into());
        }
        let nbits = c.count("NBITS")?;
        let cols = table::columns(c)?;
        let col = |name: &str| table::find(&cols, name).cloned();
        let data = col("DATA").ok_or("no DATA column")?;
        let encoding = match (nbits, data.code) {
            (1 | 2 | 4 | 8, 'B') => Encoding::Packed(nbits as u32),
            (16, 'I') => Encoding::Int16 { zero: data.zero },
            (16, 'B') => Encoding::UInt16,
            (32, 'E') => Encoding::Float32,
            (1 | 2 | 4 | 8 | 16 | 32, code) => {
                return Err(format!("NBITS = {nbits} with a DATA column of type {code}"));
            }
            (n, _) => {
                return Err(format!(
                    "NBITS = {n} is not supported (1, 2, 4, 8, 16 or 32)"
                ));
            }
        };
        // u128: corrupt headers must give an error, not an overflow.
        let needed =
            (nsblk as u128 * npol as u128 * n_chan as u128 * encoding.bits() as u128).div_ceil(8);
        if data.width as u128 != needed {
            return Err(format!(
                "DATA holds {} bytes per row but NSBLK × NPOL × NCHAN × NBITS needs {needed}",
                data.width
            ));
        }
        let tbin_s = c.f64("TBIN")?;
        if !(tbin_s.is_finite() && tbin_s > 0.0) {
            return Err(format!("sample time TBIN must be positive, got {tbin_s}"));
        }
        Ok(Layout {
            n_chan,
            npol,
            nsblk,
            nbits: nbits as u32,
            encoding,
            pol,
            tbin_s,
            zero_off: c.f64("ZERO_OFF").unwrap_or(0.0),
            chan_bw_mhz: c.f64("CHAN_BW").ok(),
            row_bytes: c.count("NAXIS1")?,
            freq: col("DAT_FREQ").ok_or("no DAT_FREQ column")?,
            wts: col("DAT_WTS"),
            offs: col("DAT_OFFS"),
            scl: col("DAT_SCL"),
            tsubint: col("TSUBINT"),
            data,
        })
    }

    /// Samples stored in the row whose `TSUBINT` is `tsubint_s`: `round(TSUBINT /
    /// TBIN)` when that is shorter than a whole row (a padded row, as this crate
    /// writes a last, partial one), else `NSBLK`.
    ///
    /// # Errors
    /// A negative or non-finite `TSUBINT`, or one that rounds to no samples: the
    /// padding would otherwise be read as data.
    pub fn samples_in_row(&self, tsubint_s: f64) -> Result<usize, String> {
        if !(tsubint_s.is_finite() && tsubint_s >= 0.0) {
            return Err(format!("TSUBINT = {tsubint_s} is not a duration"));
        }
        let n = (tsubint_s / self.tbin_s).round();
        if n < 1.0 {
            return Err(format!(
                "TSUBINT = {tsubint_s} s is less than half a sample of TBIN = {} s, \
                 so the row would hold no samples",
                self.tbin_s
            ));
        }
        Ok(if n < self.nsblk as f64 {
            n as usize
        } else {
            self.nsblk
        })
    }
}

/// Bytes of data following a header unit, before padding (FITS Standard 4.0, eq. 2).
pub fn data_bytes(c: &Cards) -> Result<u64, String> {
    let naxis = c.count("NAXIS")?;
    if naxis == 0 {
        return Ok(0);
    }
    let bitpix = c.int("BITPIX")?.unsigned_abs();
    let mut n: u64 = 1;
    for i in 1..=naxis {
        n = n.saturating_mul(c.count(&format!("NAXIS{i}"))? as u64);
    }
    let pcount = c.count("PCOUNT").unwrap_or(0) as u64;
    let gcount = c.count("GCOUNT").unwrap_or(1) as u64;
    Ok(bitpix / 8 * gcount * (pcount + n))
}

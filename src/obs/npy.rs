//! The `.npy` container (NumPy format versions 1–3) for 2-D C-order arrays.
//!
//! The header is parsed by hand so that rows can be streamed in chunks: the
//! array itself is never loaded. Layout reference: NumPy Enhancement Proposal 1
//! (NEP 1, "A simple file format for NumPy arrays", Kern 2007).

use std::io::Read;

/// Sample types stored in native observations.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dtype {
    /// `uint8`
    U8,
    /// little-endian `uint16`
    U16,
    /// little-endian `int16`
    I16,
    /// little-endian IEEE `float32`
    F32,
}

impl Dtype {
    /// The dtype for a writer bit depth: 8 → `uint8`, 16 → `uint16`, 32 → `float32`.
    pub fn for_nbits(nbits: u32) -> Option<Dtype> {
        match nbits {
            8 => Some(Dtype::U8),
            16 => Some(Dtype::U16),
            32 => Some(Dtype::F32),
            _ => None,
        }
    }

    /// Bytes per sample.
    pub fn size(self) -> usize {
        match self {
            Dtype::U8 => 1,
            Dtype::U16 | Dtype::I16 => 2,
            Dtype::F32 => 4,
        }
    }

    /// Bits per sample (the header's `nbits`).
    pub fn nbits(self) -> u32 {
        8 * self.size() as u32
    }

    /// The NumPy type string written in headers.
    pub fn descr(self) -> &'static str {
        match self {
            Dtype::U8 => "|u1",
            Dtype::U16 => "<u2",
            Dtype::I16 => "<i2",
            Dtype::F32 => "<f4",
        }
    }

    fn from_descr(descr: &str) -> Result<Dtype, String> {
        match descr {
            "|u1" | "<u1" | "u1" => Ok(Dtype::U8),
            "<u2" => Ok(Dtype::U16),
            "<i2" => Ok(Dtype::I16),
            "<f4" => Ok(Dtype::F32),
            d if d.starts_with('>') => Err(format!(
                "big-endian samples ('{d}') are not supported; convert with numpy .astype('<{}')",
                &d[1..]
            )),
            d => Err(format!(
                "unsupported sample type '{d}'; use uint8, uint16, int16 or float32"
            )),
        }
    }

    /// Decodes little-endian `bytes` into `out` (`bytes.len() == out.len() * size()`).
    pub fn decode(self, bytes: &[u8], out: &mut [f32]) {
        debug_assert_eq!(bytes.len(), out.len() * self.size());
        match self {
            Dtype::U8 => out.iter_mut().zip(bytes).for_each(|(o, &b)| *o = b as f32),
            Dtype::U16 => decode_chunks(bytes, out, |b| u16::from_le_bytes(b) as f32),
            Dtype::I16 => decode_chunks(bytes, out, |b| i16::from_le_bytes(b) as f32),
            Dtype::F32 => decode_chunks(bytes, out, f32::from_le_bytes),
        }
    }

    /// Appends `values` to `out` as little-endian samples. Integer types take the
    /// values already quantised (see [`super::codec::quantise`]).
    pub fn encode(self, values: &[f32], out: &mut Vec<u8>) {
        match self {
            Dtype::U8 => out.extend(values.iter().map(|&v| v as u8)),
            Dtype::U16 => values
                .iter()
                .for_each(|&v| out.extend((v as u16).to_le_bytes())),
            Dtype::I16 => values
                .iter()
                .for_each(|&v| out.extend((v as i16).to_le_bytes())),
            Dtype::F32 => values.iter().for_each(|&v| out.extend(v.to_le_bytes())),
        }
    }
}

fn decode_chunks<const N: usize>(bytes: &[u8], out: &mut [f32], f: impl Fn([u8; N]) -> f32) {
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(N)) {
        *o = f(c.try_into().expect("chunk of N bytes"));
    }
}

/// What a `.npy` header says about its array.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NpyHeader {
    pub dtype: Dtype,
    /// `[rows, columns]` = `[time, channel]`.
    pub shape: [u64; 2],
    /// Byte offset of the first sample.
    pub data_offset: u64,
}

const MAGIC: &[u8] = b"\x93NUMPY";

/// Reads and parses the header at the start of `r`.
///
/// # Errors
/// A message saying what is wrong (not a .npy file, unsupported type, not 2-D,
/// Fortran order ...).
pub fn read_header(r: &mut impl Read) -> Result<NpyHeader, String> {
    let mut pre = [0u8; 8];
    r.read_exact(&mut pre)
        .map_err(|_| "too short to be a .npy file".to_string())?;
    if &pre[..6] != MAGIC {
        return Err("not a .npy file (bad magic bytes)".into());
    }
    let (len_bytes, prefix) = match pre[6] {
        1 => (2, 10),
        2 | 3 => (4, 12),
        v => return Err(format!(".npy format version {v} is not supported")),
    };
    let mut len_buf = [0u8; 4];
    r.read_exact(&mut len_buf[..len_bytes])
        .map_err(|_| "truncated .npy header".to_string())?;
    let dict_len = u32::from_le_bytes(len_buf) as usize;
    let mut dict = vec![0u8; dict_len];
    r.read_exact(&mut dict)
        .map_err(|_| "truncated .npy header".to_string())?;
    let dict = String::from_utf8(dict).map_err(|_| "header is not text".to_string())?;
    let descr = quoted_after(&dict, "'descr'")?;
    let dtype = Dtype::from_descr(&descr)?;
    if word_after(&dict, "'fortran_order'")? != "False" {
        return Err("Fortran-order arrays are not supported; save a C-order array".into());
    }
    let shape = shape_after(&dict)?;
    let [rows, cols] = shape[..] else {
        return Err(format!(
            "array has {} dimensions; expected 2 ([time, channel])",
            shape.len()
        ));
    };
    Ok(NpyHeader {
        dtype,
        shape: [rows, cols],
        data_offset: (prefix + dict_len) as u64,
    })
}

/// The text after `key:` in the header dictionary, leading spaces removed.
fn after_key<'a>(dict: &'a str, key: &str) -> Result<&'a str, String> {
    let at = dict
        .find(key)
        .ok_or_else(|| format!("header has no {key} entry"))?;
    let rest = dict[at + key.len()..].trim_start();
    rest.strip_prefix(':')
        .map(str::trim_start)
        .ok_or_else(|| format!("malformed {key} entry"))
}

fn quoted_after(dict: &str, key: &str) -> Result<String, String> {
    let rest = after_key(dict, key)?;
    let q = rest.chars().next().filter(|c| *c == '\'' || *c == '"');
    let q = q.ok_or_else(|| format!("{key} is not a string"))?;
    let body = &rest[1..];
    let end = body
        .find(q)
        .ok_or_else(|| format!("unterminated {key} string"))?;
    Ok(body[..end].to_string())
}

fn word_after<'a>(dict: &'a str, key: &str) -> Result<&'a str, String> {
    let rest = after_key(dict, key)?;
    let end = rest.find([',', '}']).unwrap_or(rest.len());
    Ok(rest[..end].trim())
}

fn shape_after(dict: &str) -> Result<Vec<u64>, String> {
    let rest = after_key(dict, "'shape'")?;
    let inner = rest
        .strip_prefix('(')
        .and_then(|r| r.split_once(')'))
        .map(|(inner, _)| inner)
        .ok_or_else(|| "malformed 'shape' entry".to_string())?;
    inner
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(|s| s.trim_end_matches('L').parse::<u64>())
        .collect::<Result<_, _>>()
        .map_err(|_| format!("malformed 'shape' entry ({inner})"))
}

/// A version-1.0 header for a C-order `[rows, cols]` array, padded with spaces so the
/// data starts on a 64-byte boundary (as NumPy itself writes).
pub fn header_bytes(dtype: Dtype, rows: u64, cols: u64) -> Vec<u8> {
    let dict = format!(
        "{{'descr': '{}', 'fortran_order': False, 'shape': ({rows}, {cols}), }}",
        dtype.descr()
    );
    let unpadded = MAGIC.len() + 4 + dict.len() + 1;
    let total = unpadded.div_ceil(64) * 64;
    let dict_len = (total - MAGIC.len() - 4) as u16;
    let mut out = Vec::with_capacity(total);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    out.extend_from_slice(&dict_len.to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out.resize(total - 1, b' ');
    out.push(b'\n');
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_round_trips() {
        for dtype in [Dtype::U8, Dtype::U16, Dtype::I16, Dtype::F32] {
            let bytes = header_bytes(dtype, 12345, 7);
            assert_eq!(bytes.len() % 64, 0);
            let h = read_header(&mut bytes.as_slice()).unwrap();
            assert_eq!(h.dtype, dtype);
            assert_eq!(h.shape, [12345, 7]);
            assert_eq!(h.data_offset, bytes.len() as u64);
        }
    }

    /// `bytes` with the first occurrence of `from` overwritten by `to` (same length).
    fn patched(mut bytes: Vec<u8>, from: &[u8], to: &[u8]) -> Vec<u8> {
        let at = bytes.windows(from.len()).position(|w| w == from).unwrap();
        bytes[at..at + to.len()].copy_from_slice(to);
        bytes
    }

    #[test]
    fn rejects_unsupported_headers() {
        let one_d = patched(header_bytes(Dtype::F32, 2, 2), b"(2, 2)", b"(4,)  ");
        assert!(
            read_header(&mut one_d.as_slice())
                .unwrap_err()
                .contains("1 dimensions")
        );
        let f8 = patched(header_bytes(Dtype::F32, 2, 2), b"<f4", b"<f8");
        assert!(
            read_header(&mut f8.as_slice())
                .unwrap_err()
                .contains("'<f8'")
        );
        assert!(read_header(&mut &b"PK\x03\x04zipfile"[..]).is_err());
        let fortran = patched(header_bytes(Dtype::U8, 2, 2), b"False", b"True ");
        assert!(
            read_header(&mut fortran.as_slice())
                .unwrap_err()
                .contains("Fortran")
        );
    }

    #[test]
    fn encode_decode_round_trip() {
        let vals = [0.0f32, 1.0, 255.0, 17.0];
        for dtype in [Dtype::U8, Dtype::U16, Dtype::I16, Dtype::F32] {
            let mut bytes = Vec::new();
            dtype.encode(&vals, &mut bytes);
            let mut back = [f32::NAN; 4];
            dtype.decode(&bytes, &mut back);
            assert_eq!(back, vals);
        }
    }
}

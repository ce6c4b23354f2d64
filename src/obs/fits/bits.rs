//! The `DATA` column's stored samples: unpacking to and packing from `f32`.
//!
//! In search mode, samples of fewer than 8 bits are packed with the earliest
//! sample (lowest channel index in the row) in the most significant bits of each
//! byte; 16-bit samples are big-endian integers (`I`, with `TZERO` = 32768 for
//! unsigned) and 32-bit samples big-endian IEEE floats (`E`).

/// How stored samples are encoded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Encoding {
    /// Unsigned integers of 1, 2, 4 or 8 bits, packed most significant bits first.
    Packed(u32),
    /// Big-endian 16-bit integers plus an offset (`TZERO`; 32768 makes them unsigned).
    Int16 { zero: f64 },
    /// Big-endian unsigned 16-bit integers stored as bytes (`B` column).
    UInt16,
    /// Big-endian IEEE 754 single precision.
    Float32,
}

impl Encoding {
    /// Bits per stored sample.
    pub fn bits(self) -> u32 {
        match self {
            Encoding::Packed(b) => b,
            Encoding::Int16 { .. } | Encoding::UInt16 => 16,
            Encoding::Float32 => 32,
        }
    }

    /// Bytes needed for `n` samples.
    pub fn bytes_for(self, n: usize) -> usize {
        (n * self.bits() as usize).div_ceil(8)
    }

    /// Decodes the first `out.len()` samples of `bytes`.
    pub fn unpack(self, bytes: &[u8], out: &mut [f32]) {
        match self {
            Encoding::Packed(8) => out.iter_mut().zip(bytes).for_each(|(o, &b)| *o = b as f32),
            Encoding::Packed(nbits) => unpack_sub_byte(bytes, nbits, out),
            Encoding::Int16 { zero } => {
                for (o, c) in out.iter_mut().zip(bytes.chunks_exact(2)) {
                    *o = (i16::from_be_bytes([c[0], c[1]]) as f64 + zero) as f32;
                }
            }
            Encoding::UInt16 => {
                for (o, c) in out.iter_mut().zip(bytes.chunks_exact(2)) {
                    *o = u16::from_be_bytes([c[0], c[1]]) as f32;
                }
            }
            Encoding::Float32 => {
                for (o, c) in out.iter_mut().zip(bytes.chunks_exact(4)) {
                    *o = f32::from_be_bytes([c[0], c[1], c[2], c[3]]);
                }
            }
        }
    }

    /// Appends `values` (already quantised for integer encodings) to `out`.
    pub fn pack(self, values: &[f32], out: &mut Vec<u8>) {
        match self {
            Encoding::Packed(8) => out.extend(values.iter().map(|&v| v as u8)),
            Encoding::Packed(nbits) => pack_sub_byte(values, nbits, out),
            Encoding::Int16 { zero } => values
                .iter()
                .for_each(|&v| out.extend(((v as f64 - zero) as i16).to_be_bytes())),
            Encoding::UInt16 => values
                .iter()
                .for_each(|&v| out.extend((v as u16).to_be_bytes())),
            Encoding::Float32 => values.iter().for_each(|&v| out.extend(v.to_be_bytes())),
        }
    }
}

fn unpack_sub_byte(bytes: &[u8], nbits: u32, out: &mut [f32]) {
    let per_byte = (8 / nbits) as usize;
    let mask = (1u8 << nbits) - 1;
    for (i, o) in out.iter_mut().enumerate() {
        let shift = 8 - nbits as usize * (i % per_byte + 1);
        *o = ((bytes[i / per_byte] >> shift) & mask) as f32;
    }
}

fn pack_sub_byte(values: &[f32], nbits: u32, out: &mut Vec<u8>) {
    let per_byte = (8 / nbits) as usize;
    for chunk in values.chunks(per_byte) {
        let mut byte = 0u8;
        for (j, &v) in chunk.iter().enumerate() {
            byte |= (v as u8) << (8 - nbits as usize * (j + 1));
        }
        out.push(byte);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn sub_byte_order_is_most_significant_first() {
        let mut out = [0.0; 8];
        Encoding::Packed(1).unpack(&[0b1000_0001], &mut out);
        assert_eq!(out, [1., 0., 0., 0., 0., 0., 0., 1.]);
        let mut out = [0.0; 4];
        Encoding::Packed(2).unpack(&[0b11_10_01_00], &mut out);
        assert_eq!(out, [3., 2., 1., 0.]);
        let mut out = [0.0; 3];
        Encoding::Packed(4).unpack(&[0xa5, 0xf0], &mut out);
        assert_eq!(out, [10., 5., 15.]);
    }

    #[test]
    fn pack_then_unpack_is_identity() {
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        for enc in [
            Encoding::Packed(1),
            Encoding::Packed(2),
            Encoding::Packed(4),
            Encoding::Packed(8),
            Encoding::Int16 { zero: 32768.0 },
            Encoding::UInt16,
            Encoding::Float32,
        ] {
            for n in [0usize, 1, 7, 13, 64] {
                let max = match enc {
                    Encoding::Packed(b) => (1u32 << b) - 1,
                    _ => 65535,
                };
                let vals: Vec<f32> = (0..n).map(|_| rng.random_range(0..=max) as f32).collect();
                let mut bytes = Vec::new();
                enc.pack(&vals, &mut bytes);
                assert_eq!(bytes.len(), enc.bytes_for(n), "{enc:?} {n}");
                let mut back = vec![f32::NAN; n];
                enc.unpack(&bytes, &mut back);
                assert_eq!(back, vals, "{enc:?} {n}");
            }
        }
    }
}

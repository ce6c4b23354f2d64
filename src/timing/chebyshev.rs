//! Piecewise Chebyshev tables: the layout written by
//! `scripts/timing/make_ephemeris_tables.py` and their evaluation.

/// A table of equal-length granules, each holding `n_comp` Chebyshev series of
/// `n_coef` coefficients in `x = 2 (t − t0) / span − 1`.
#[derive(Debug, Clone)]
pub struct ChebTable {
    /// Start of the first granule (MJD, TDB).
    pub start_mjd: f64,
    /// Granule length in days.
    pub span_days: f64,
    n_coef: usize,
    n_comp: usize,
    n_gran: usize,
    /// Coefficients `[granule][component][coefficient]`.
    coef: Vec<f64>,
}

const MAGIC: &[u8; 8] = b"BBCHEB01";
const HEADER_LEN: usize = 40;

impl ChebTable {
    /// Parses a table from its little-endian bytes.
    ///
    /// # Errors
    /// Returns a message when the magic, sizes or length do not match.
    pub fn from_bytes(bytes: &[u8]) -> Result<Self, String> {
        if bytes.len() < HEADER_LEN || &bytes[..8] != MAGIC {
            return Err("not a Chebyshev table (bad magic)".into());
        }
        let f64_at = |o: usize| f64::from_le_bytes(bytes[o..o + 8].try_into().expect("8 bytes"));
        let u32_at =
            |o: usize| u32::from_le_bytes(bytes[o..o + 4].try_into().expect("4 bytes")) as usize;
        let (n_coef, n_comp, n_gran) = (u32_at(24), u32_at(28), u32_at(32));
        let n = n_coef * n_comp * n_gran;
        if n_coef == 0 || bytes.len() != HEADER_LEN + 8 * n {
            return Err(format!(
                "table length {} does not match its header",
                bytes.len()
            ));
        }
        let coef = (0..n).map(|i| f64_at(HEADER_LEN + 8 * i)).collect();
        Ok(ChebTable {
            start_mjd: f64_at(8),
            span_days: f64_at(16),
            n_coef,
            n_comp,
            n_gran,
            coef,
        })
    }

    /// End of the last granule (MJD, TDB).
    pub fn end_mjd(&self) -> f64 {
        self.start_mjd + self.span_days * self.n_gran as f64
    }

    /// Values and time derivatives (per day) of every component at `mjd_day + day_frac`,
    /// or `None` outside the table. Splitting the date keeps the argument precise.
    pub fn eval(&self, mjd_day: i64, day_frac: f64) -> Option<(Vec<f64>, Vec<f64>)> {
        let since = (mjd_day as f64 - self.start_mjd) + day_frac;
        let g = (since / self.span_days).floor();
        if since < 0.0 || g >= self.n_gran as f64 {
            return None;
        }
        let x = 2.0 * (since - g * self.span_days) / self.span_days - 1.0;
        let (t, dt) = chebyshev_basis(x, self.n_coef);
        let base = g as usize * self.n_comp * self.n_coef;
        let scale = 2.0 / self.span_days;
        let (mut val, mut der) = (Vec::with_capacity(self.n_comp), Vec::new());
        for c in self.coef[base..base + self.n_comp * self.n_coef].chunks_exact(self.n_coef) {
            val.push(c.iter().zip(&t).map(|(a, b)| a * b).sum());
            der.push(scale * c.iter().zip(&dt).map(|(a, b)| a * b).sum::<f64>());
        }
        Some((val, der))
    }
}

/// Chebyshev polynomials T_k(x) and their derivatives for k < n, by the three-term
/// recurrences T_{k+1} = 2x T_k − T_{k−1} and T'_{k+1} = 2 T_k + 2x T'_k − T'_{k−1}.
pub(super) fn chebyshev_basis(x: f64, n: usize) -> (Vec<f64>, Vec<f64>) {
    let (mut t, mut dt) = (vec![0.0; n], vec![0.0; n]);
    t[0] = 1.0;
    if n > 1 {
        t[1] = x;
        dt[1] = 1.0;
    }
    for k in 2..n {
        t[k] = 2.0 * x * t[k - 1] - t[k - 2];
        dt[k] = 2.0 * t[k - 1] + 2.0 * x * dt[k - 1] - dt[k - 2];
    }
    (t, dt)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn basis_matches_closed_forms() {
        // T_k(cos θ) = cos kθ and T'_k(cos θ) = k sin kθ / sin θ (textbook identities).
        let theta: f64 = 0.7;
        let (t, dt) = chebyshev_basis(theta.cos(), 9);
        for k in 0..9 {
            let kf = k as f64;
            assert!((t[k] - (kf * theta).cos()).abs() < 1e-13);
            assert!((dt[k] - kf * (kf * theta).sin() / theta.sin()).abs() < 1e-12);
        }
    }

    #[test]
    fn round_trip_of_a_small_table() {
        // One granule, one component: 3 + 2 T_1 + 0.5 T_2 over MJD 100..110.
        let mut bytes = MAGIC.to_vec();
        bytes.extend(100.0f64.to_le_bytes());
        bytes.extend(10.0f64.to_le_bytes());
        for v in [3u32, 1, 1, 0] {
            bytes.extend(v.to_le_bytes());
        }
        for c in [3.0f64, 2.0, 0.5] {
            bytes.extend(c.to_le_bytes());
        }
        let table = ChebTable::from_bytes(&bytes).unwrap();
        let (v, d) = table.eval(107, 0.5).unwrap(); // x = 0.5
        assert!((v[0] - (3.0 + 1.0 + 0.5 * (2.0 * 0.25 - 1.0))).abs() < 1e-14);
        assert!((d[0] - 0.2 * (2.0 + 0.5 * 4.0 * 0.5)).abs() < 1e-14);
        assert!(table.eval(99, 0.9).is_none());
        assert!(table.eval(110, 0.0).is_none());
        assert!(ChebTable::from_bytes(&bytes[..bytes.len() - 1]).is_err());
    }
}

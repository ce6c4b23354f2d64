//! Physical constants and the cold-plasma dispersion law, each with its source; and
//! how a number given by a user is written back in a message.

/// Dispersion constant k in s MHz² pc⁻¹ cm³: Δt = k · DM · (ν₁⁻² − ν₂⁻²).
///
/// Lorimer & Kramer 2005, *Handbook of Pulsar Astronomy* (CUP), eq. 4.7 convention
/// 4.148808 × 10³. Pinned: mixing conventions shifts delays by more than a sample.
pub const DISPERSION_CONSTANT_S_MHZ2: f64 = 4.148808e3;

/// Seconds in a day.
pub const SECONDS_PER_DAY: f64 = 86_400.0;

/// MJDs a recording or an interval of one may have: 40000 (1968 May 24, before any
/// digitally recorded search of this kind) to 100000 (2132 September 1),
/// `common practice`. A value outside is a garbled date or a unit slip (a JD,
/// seconds, a year: MJD −100 is in 1858), and would swamp exposure and rate limits.
pub const PLAUSIBLE_MJD: std::ops::RangeInclusive<f64> = 40_000.0..=100_000.0;

/// (`mjd` + d, `sec` − d · 86400) for the whole number of days d that leaves the
/// seconds in `[0, 86400)`: for time scales without leap seconds (TT, TDB). The day
/// count saturates for absurd `sec`.
pub fn whole_days(mjd: i64, sec: f64) -> (i64, f64) {
    let days = (sec / SECONDS_PER_DAY).floor();
    (
        mjd.saturating_add(days as i64),
        sec - days * SECONDS_PER_DAY,
    )
}

/// `v` as written, or in exponent form when that would take more than a few digits
/// (1e-300 and 1e300, not 300 digits).
pub fn readable(v: f64) -> String {
    if (1e-4..1e7).contains(&v.abs()) || v == 0.0 {
        v.to_string()
    } else {
        format!("{v:e}")
    }
}

/// Dispersion delay in seconds of `freq_mhz` relative to infinite frequency for `dm`
/// in pc cm⁻³.
pub fn delay_to_infinity_s(dm: f64, freq_mhz: f64) -> f64 {
    DISPERSION_CONSTANT_S_MHZ2 * dm / (freq_mhz * freq_mhz)
}

/// Dispersion delay in seconds of `freq_lo_mhz` relative to `freq_hi_mhz` (positive
/// when `freq_lo_mhz < freq_hi_mhz`: low frequencies arrive later).
pub fn delay_between_s(dm: f64, freq_lo_mhz: f64, freq_hi_mhz: f64) -> f64 {
    delay_to_infinity_s(dm, freq_lo_mhz) - delay_to_infinity_s(dm, freq_hi_mhz)
}

/// First-order intra-channel dispersion smearing in seconds for a channel of width
/// `chan_bw_mhz` centred on `freq_mhz`: 2k · DM · Δν / ν³ (Cordes & McLaughlin 2003,
/// ApJ 596, 1142; Lorimer & Kramer 2005).
pub fn channel_smearing_s(dm: f64, chan_bw_mhz: f64, freq_mhz: f64) -> f64 {
    2.0 * DISPERSION_CONSTANT_S_MHZ2 * dm * chan_bw_mhz.abs() / freq_mhz.powi(3)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Worked values recomputed from the handbook constant
    // (Lorimer & Kramer 2005, Handbook of Pulsar Astronomy).
    #[test]
    fn delay_matches_handbook_worked_values() {
        let d = delay_between_s(500.0, 1200.0, 1500.0);
        assert!((d - 0.518_601_0).abs() < 1e-6, "{d}");
        let d = delay_between_s(500.0, 1200.0, 1600.0);
        assert!((d - 0.630_244_3).abs() < 1e-6, "{d}");
        let d = delay_between_s(1.0, 400.0, 800.0);
        assert!((d - 0.019_447_54).abs() < 1e-8, "{d}");
    }

    #[test]
    fn readable_numbers_are_short() {
        assert_eq!(readable(2000.0), "2000");
        assert_eq!(readable(0.5), "0.5");
        assert_eq!(readable(-3.0), "-3");
        assert_eq!(readable(0.0), "0");
        assert_eq!(readable(1e300), "1e300");
        assert_eq!(readable(1e-300), "1e-300");
        assert_eq!(readable(f64::INFINITY), "inf");
    }

    // Cordes & McLaughlin 2003 (ApJ 596, 1142) quote 8.3 µs · DM · Δν_MHz / ν_GHz³;
    // 8.3 is 2k/10⁹ = 8.2976 rounded, so the rounded form agrees to 0.03 %, and the
    // exact edge-to-edge delay of the 1200.000–1200.391 MHz channel (937.41 µs) to 0.05 %.
    #[test]
    fn channel_smearing_matches_first_order_formula() {
        let s = channel_smearing_s(500.0, 0.390625, 1400.0);
        let rounded = 8.3e-6 * 500.0 * 0.390625 / 1.4f64.powi(3);
        assert!((s / rounded - 1.0).abs() < 4e-4, "{s} vs {rounded}");
        let exact = delay_between_s(500.0, 1200.0, 1200.0 + 0.390625);
        let s = channel_smearing_s(500.0, 0.390625, 1200.0 + 0.390625 / 2.0);
        assert!((s / exact - 1.0).abs() < 5e-4, "{s} vs {exact}");
        assert!((exact - 937.41e-6).abs() < 0.01e-6, "{exact}");
    }
}

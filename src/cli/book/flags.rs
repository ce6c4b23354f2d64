//! Checks of the numeric flags of the catalogue commands, each refusal one line
//! naming the flag: a NaN or an empty range would otherwise select nothing and
//! look like an answer.

use anyhow::{Result, bail};

/// Refuses a NaN or infinite value of `flag`.
pub fn finite(flag: &str, value: f64) -> Result<()> {
    if !value.is_finite() {
        bail!("{flag} {value} is not a finite number");
    }
    Ok(())
}

/// Refuses a value of `flag` that is not finite and at least 0.
pub fn non_negative(flag: &str, value: f64) -> Result<()> {
    finite(flag, value)?;
    if value < 0.0 {
        bail!("{flag} {value} must not be negative");
    }
    Ok(())
}

/// [`finite`] for a flag that may be absent.
pub fn finite_if_given(flag: &str, value: Option<f64>) -> Result<()> {
    value.map_or(Ok(()), |v| finite(flag, v))
}

/// Refuses a range flag pair with a non-finite end, or with its minimum above its
/// maximum (which nothing matches); an absent end is open.
pub fn range(min: (&str, Option<f64>), max: (&str, Option<f64>)) -> Result<()> {
    finite_if_given(min.0, min.1)?;
    finite_if_given(max.0, max.1)?;
    if let ((lo_flag, Some(lo)), (hi_flag, Some(hi))) = (min, max)
        && lo > hi
    {
        bail!("{lo_flag} {lo} is above {hi_flag} {hi}; nothing could match");
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_refuse_nan_and_inverted_ends_only() {
        let ok = |lo, hi| range(("--a-min", lo), ("--a-max", hi)).is_ok();
        assert!(ok(None, None) && ok(Some(1.0), None) && ok(Some(1.0), Some(1.0)));
        assert!(ok(Some(-5.0), Some(3.0)));
        assert!(!ok(Some(f64::NAN), None) && !ok(None, Some(f64::INFINITY)));
        let err = range(("--dm-min", Some(500.0)), ("--dm-max", Some(100.0))).unwrap_err();
        assert_eq!(
            err.to_string(),
            "--dm-min 500 is above --dm-max 100; nothing could match"
        );
        assert!(finite_if_given("--x", None).is_ok() && finite_if_given("--x", Some(2.0)).is_ok());
        assert!(finite_if_given("--x", Some(f64::NAN)).is_err());
        assert!(non_negative("--x", 0.0).is_ok());
        assert!(non_negative("--x", -1.0).is_err() && non_negative("--x", f64::NAN).is_err());
    }
}

//! The checks every frame gets, whatever file it came from: finite values,
//! taxel values that fit a 32-bit float, strictly increasing time. The
//! messages say how to fix the data; callers add the file, row and column.

/// Name of the time column.
pub(crate) const TIME: &str = "time_s";
/// Name of the optional position column.
pub(crate) const POSITION: &str = "position_mm";

/// The recommended name of taxel column `k` (0-based): `taxel_k`.
pub(crate) fn taxel_name(k: usize) -> String {
    format!("taxel_{k}")
}

/// What a value that is not finite is called in messages.
fn describe_non_finite(v: f64) -> &'static str {
    if v.is_nan() {
        "NaN"
    } else if v > 0.0 {
        "an infinite value (+inf)"
    } else {
        "an infinite value (-inf)"
    }
}

/// The message for a value that is NaN or infinite.
pub(crate) fn non_finite_message(v: f64) -> String {
    format!(
        "{} is not allowed: every value must be a finite number; fix the rig's output, drop \
         the row, or fill the value from its neighbours",
        describe_non_finite(v)
    )
}

/// Check a time or position value (kept as f64).
pub(crate) fn check_f64(v: f64) -> Result<f64, String> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(non_finite_message(v))
    }
}

/// Check a taxel value read as f64 and narrow it to f32.
pub(crate) fn taxel_from_f64(v: f64) -> Result<f32, String> {
    if !v.is_finite() {
        return Err(non_finite_message(v));
    }
    let narrow = v as f32;
    if narrow.is_finite() {
        Ok(narrow)
    } else {
        Err(too_large_message(&format!("{v:e}")))
    }
}

/// The message for a taxel value beyond the f32 range.
pub(crate) fn too_large_message(text: &str) -> String {
    format!(
        "{text} is too large for a taxel value (32-bit float, largest about 3.4e38): check the \
         units or scaling of this column"
    )
}

/// Tracks the previous frame time so that time can be checked to increase
/// strictly, across chunk boundaries too.
#[derive(Debug, Clone, Default)]
pub(crate) struct TimeCheck {
    last: Option<f64>,
}

impl TimeCheck {
    /// Check that `t` is finite and later than the previous time.
    pub(crate) fn check(&mut self, t: f64) -> Result<f64, String> {
        let t = check_f64(t)?;
        if let Some(last) = self.last {
            if t <= last {
                return Err(format!(
                    "time_s must increase from row to row: {t:?} s follows {last:?} s on the \
                     previous row; sort the rows by time and remove repeated frames"
                ));
            }
        }
        self.last = Some(t);
        Ok(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finite_values_pass_and_others_fail() {
        assert_eq!(check_f64(1.5), Ok(1.5));
        assert!(check_f64(f64::NAN).unwrap_err().starts_with("NaN"));
        assert!(check_f64(f64::INFINITY).unwrap_err().contains("+inf"));
        assert!(check_f64(f64::NEG_INFINITY).unwrap_err().contains("-inf"));
    }

    #[test]
    fn taxel_values_must_fit_f32() {
        assert_eq!(taxel_from_f64(0.25), Ok(0.25));
        assert_eq!(taxel_from_f64(3.0e38), Ok(3.0e38_f32));
        assert!(taxel_from_f64(1.0e39).unwrap_err().contains("too large"));
        assert!(taxel_from_f64(-1.0e300).unwrap_err().contains("too large"));
    }

    #[test]
    fn time_must_increase_strictly() {
        let mut tc = TimeCheck::default();
        assert!(tc.check(0.0).is_ok());
        assert!(tc.check(0.01).is_ok());
        assert!(tc.check(0.01).unwrap_err().contains("must increase"));
        let mut tc = TimeCheck::default();
        tc.check(1.0).unwrap();
        assert!(tc.check(0.5).is_err());
        assert!(tc.check(f64::NAN).unwrap_err().starts_with("NaN"));
    }
}

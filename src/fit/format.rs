//! Values with their uncertainty in parenthesis notation: 0.76317(42) means 0.76317 ± 0.00042.
//! The error keeps two significant digits when they start with 1 or 2, otherwise one
//! (common practice in physics tables).

/// `value(error)`, e.g. `0.7632(4)`; the value alone if the error is zero or not finite.
pub fn with_error(value: f64, error: f64) -> String {
    if !(error > 0.0 && error.is_finite() && value.is_finite()) {
        return format!("{value}");
    }
    let exp = error.log10().floor() as i32;
    let lead = (error / 10f64.powi(exp)).floor() as i32;
    let digits = if lead <= 2 { 2 } else { 1 };
    let mut decimals = -(exp - (digits - 1));
    let mut err_digits = (error * 10f64.powi(decimals)).round() as i64;
    // Rounding can carry into a new digit (e.g. 0.000295 → 30): drop one decimal.
    if digits == 2 && err_digits >= 100 || digits == 1 && err_digits >= 10 {
        decimals -= 1;
        err_digits = (error * 10f64.powi(decimals)).round() as i64;
    }
    if decimals <= 0 {
        return format!("{:.0}({})", value, (error).round() as i64);
    }
    format!("{value:.prec$}({err_digits})", prec = decimals as usize)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(with_error(0.763166, 0.0004), "0.7632(4)");
        assert_eq!(with_error(0.763166, 0.00042), "0.7632(4)");
        assert_eq!(with_error(0.763166, 0.00014), "0.76317(14)");
        assert_eq!(with_error(0.763166, 0.0025), "0.7632(25)");
        assert_eq!(with_error(-1.27, 0.031), "-1.27(3)");
        assert_eq!(with_error(12.34, 1.5), "12.3(15)");
        assert_eq!(with_error(0.5, 0.0), "0.5");
        assert_eq!(with_error(0.7, 0.000996), "0.700(1)");
    }
}

//! Numbers as the report shows them: significant digits, percentages and fixed
//! decimals, never by locale.

/// `v` to `digits` significant digits: fixed-point for magnitudes from 1e-4 to
/// below 1e6, else scientific such as `1.235e-7`. A negative zero reads `0`.
pub fn significant(v: f64, digits: usize) -> String {
    if v.is_nan() {
        return "not a number".to_string();
    }
    if v.is_infinite() {
        return if v > 0.0 { "∞" } else { "−∞" }.to_string();
    }
    if v == 0.0 {
        return "0".to_string();
    }
    let digits = digits.max(1);
    let sci = format!("{:.*e}", digits - 1, v);
    let (mantissa, exponent) = sci.split_once('e').expect("scientific format");
    let exponent: i32 = exponent.parse().expect("an exponent");
    if (-4..6).contains(&exponent) {
        let decimals = (digits as i32 - 1 - exponent).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{mantissa}e{exponent}")
    }
}

/// A share as a percentage with one decimal, e.g. `41.2 %`.
pub fn percent(share: f64) -> String {
    format!("{} %", fixed(100.0 * share, 1))
}

/// `v` with a fixed number of decimals; never `-0.0`.
pub fn fixed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(magnitude) if magnitude.chars().all(|c| c == '0' || c == '.') => magnitude.to_string(),
        _ => s,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(significant(6.70021, 4), "6.700");
        assert_eq!(significant(9.99996, 4), "10.00");
        assert_eq!(significant(0.0123456, 4), "0.01235");
        assert_eq!(significant(123456.0, 4), "123456");
        assert_eq!(significant(1.23456e-7, 4), "1.235e-7");
        assert_eq!(significant(-2.5e9, 4), "-2.500e9");
        assert_eq!(significant(0.0, 4), "0");
        assert_eq!(significant(-0.0, 4), "0");
    }

    #[test]
    fn percentages_and_fixed() {
        assert_eq!(percent(0.5712), "57.1 %");
        assert_eq!(percent(1.0), "100.0 %");
        assert_eq!(fixed(-0.0001, 3), "0.000");
        assert_eq!(fixed(-0.4126, 3), "-0.413");
    }
}

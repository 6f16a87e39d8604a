//! Every way a number is written as text, in tables and in messages: one place,
//! at the bottom of the crate, so that a stage's message and a results table
//! cannot drift apart and no layer reaches up into the outputs for a format.
//!
//! The formats below really differ (a results file may depend on any of them
//! byte for byte), so they are kept side by side rather than merged: each says
//! what it does with zeros, signs and values that are not finite.

/// A number as the shortest round-trip text; negative zero is written as 0.
pub fn number(v: f64) -> String {
    number_in(&mut ryu::Buffer::new(), v).to_string()
}

/// The text of [`number`], written into a reusable buffer instead of a new string.
/// Inlined: the result tables call it for every value, from another module.
#[inline]
pub fn number_in(buffer: &mut ryu::Buffer, v: f64) -> &str {
    if v == 0.0 {
        return "0";
    }
    let s = buffer.format(v);
    s.strip_suffix(".0").unwrap_or(s)
}

/// `v` with a fixed number of decimals; never `-0.0`.
pub fn fixed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(magnitude) if magnitude.chars().all(|c| c == '0' || c == '.') => magnitude.to_string(),
        _ => s,
    }
}

/// `v` with at most `decimals` decimals: trailing zeros and a bare point cut
/// (`0.25`, `3`).
pub fn trimmed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

// ---------------------------------------------------------------- percentages

/// A share as a percentage with one decimal and no unit: `41.2`.
pub fn percent_figure(share: f64) -> String {
    format!("{:.1}", share * 100.0)
}

/// A share as a percentage with one decimal: `41.2 %`.
pub fn percent(share: f64) -> String {
    format!("{} %", percent_figure(share))
}

/// [`percent`], or "an undefined share" when the share is not a finite number
/// (e.g. for a zero total variance).
pub fn percent_or_undefined(share: f64) -> String {
    if share.is_finite() {
        percent(share)
    } else {
        "an undefined share".into()
    }
}

/// A share as a percentage with one decimal, never `-0.0 %` (a share that
/// rounds to zero reads `0.0 %`).
pub fn percent_unsigned_zero(share: f64) -> String {
    format!("{} %", fixed(100.0 * share, 1))
}

/// A share as a percentage with at most two decimals: `12.5 %`, `5 %`.
pub fn percent_short(share: f64) -> String {
    format!("{} %", trimmed(share * 100.0, 2))
}

// ---------------------------------------------------------------- significant digits

/// `v` to `digits` significant digits: fixed-point for magnitudes from 1e-4 to
/// below 1e6, else scientific such as `1.235e-7`. A negative zero reads `0`;
/// infinities read `∞` and `−∞`.
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

/// `v` with `digits` significant digits in fixed decimals, never an exponent
/// (at most 12 decimals); no minus sign on a value that rounds to zero, and
/// "not a number" for any value that is not finite. For figure captions.
pub fn significant_plain(v: f64, digits: i32) -> String {
    if !v.is_finite() {
        return "not a number".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let mut e = 0;
    let a = v.abs();
    while pow10(e) > a && e > -300 {
        e -= 1;
    }
    while pow10(e + 1) <= a && e < 300 {
        e += 1;
    }
    let decimals = (digits - 1 - e).clamp(0, 12) as usize;
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s.trim_start_matches(['-', '0', '.']).is_empty() {
        s[1..].to_string()
    } else {
        s
    }
}

/// A value with (at least) three significant digits, in plain decimal notation
/// (all the digits of a large integer part); zero and values that are not
/// finite as [`number`] writes them.
pub fn three_significant(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return number(v);
    }
    let scientific = format!("{v:.2e}");
    let exponent: i32 = scientific
        .split('e')
        .nth(1)
        .and_then(|e| e.parse().ok())
        .unwrap_or(0);
    let decimals = (2 - exponent).max(0) as usize;
    format!("{v:.decimals$}")
}

/// 10ᵉ by repeated multiplication or division (IEEE basic operations only).
pub fn pow10(e: i32) -> f64 {
    let mut v = 1.0;
    if e >= 0 {
        for _ in 0..e {
            v *= 10.0;
        }
    } else {
        let mut d = 1.0;
        for _ in 0..(-e) {
            d *= 10.0;
        }
        v /= d;
    }
    v
}

// ---------------------------------------------------------------- for people

/// The standard precision of a number meant for people (summary lines, report
/// prose, `explain`, `diff`): four significant digits. Machine files keep the
/// shortest round-trip form of [`number`]. Zeros that only pad the four
/// digits are cut (`6.7`, not `6.700`; `1e-12`, not `1.000e-12`).
pub fn readable(v: f64) -> String {
    let s = significant(v, 4);
    let (mantissa, exponent) = match s.split_once('e') {
        Some((m, e)) => (m, Some(e)),
        None => (s.as_str(), None),
    };
    let mantissa = if mantissa.contains('.') {
        mantissa.trim_end_matches('0').trim_end_matches('.')
    } else {
        mantissa
    };
    match exponent {
        Some(e) => format!("{mantissa}e{e}"),
        None => mantissa.to_string(),
    }
}

/// A probability for people: below 1e-16 (where a double near 1 can no longer
/// tell 1 − p from 1) it reads "< 1e-16" instead of a misleading 0.
pub fn p_value(p: f64) -> String {
    if p.is_finite() && p < 1e-16 {
        "< 1e-16".to_string()
    } else {
        significant(p, 3)
    }
}

/// A count with its noun in the right number: `1 row`, `0 rows`, `3 rows`.
pub fn count(n: usize, singular: &str, plural: &str) -> String {
    if n == 1 {
        format!("1 {singular}")
    } else {
        format!("{n} {plural}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_round_trip_and_are_short() {
        assert_eq!(number(1.0), "1");
        assert_eq!(number(-0.0), "0");
        assert_eq!(number(0.1), "0.1");
        assert_eq!(number(1e-7), "1e-7");
        let v = 0.1 + 0.2;
        assert_eq!(number(v).parse::<f64>().unwrap(), v);
    }

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
        assert_eq!(significant_plain(1.23456e-7, 3), "0.000000123");
        assert_eq!(significant_plain(-1e-13, 2), "0.000000000000");
        assert_eq!(significant_plain(f64::INFINITY, 3), "not a number");
    }

    #[test]
    fn three_significant_digits() {
        assert_eq!(three_significant(183.44), "183");
        assert_eq!(three_significant(0.043218), "0.0432");
        assert_eq!(three_significant(4312.0), "4312");
        assert_eq!(three_significant(999.7), "1000");
        assert_eq!(three_significant(1.0), "1.00");
    }

    #[test]
    fn percentages_and_fixed() {
        assert_eq!(percent_unsigned_zero(0.5712), "57.1 %");
        assert_eq!(percent_unsigned_zero(1.0), "100.0 %");
        assert_eq!(percent_unsigned_zero(-0.0001), "0.0 %");
        assert_eq!(percent(-0.0001), "-0.0 %");
        assert_eq!(percent_figure(0.4123), "41.2");
        assert_eq!(percent_or_undefined(f64::NAN), "an undefined share");
        assert_eq!(percent_short(0.125), "12.5 %");
        assert_eq!(percent_short(0.05), "5 %");
        assert_eq!(fixed(-0.0001, 3), "0.000");
        assert_eq!(fixed(-0.4126, 3), "-0.413");
        assert_eq!(trimmed(2.50000001, 4), "2.5");
    }

    #[test]
    fn numbers_for_people() {
        assert_eq!(readable(0.123456789), "0.1235");
        assert_eq!(readable(12345.678), "12346");
        assert_eq!(readable(6.70021), "6.7");
        assert_eq!(readable(1e-12), "1e-12");
        assert_eq!(readable(-2.5e9), "-2.5e9");
        assert_eq!(readable(120.0), "120");
        assert_eq!(p_value(0.0), "< 1e-16");
        assert_eq!(p_value(3e-20), "< 1e-16");
        assert_eq!(p_value(0.04567), "0.0457");
        assert_eq!(count(1, "row", "rows"), "1 row");
        assert_eq!(count(0, "row", "rows"), "0 rows");
        assert_eq!(count(2, "component", "components"), "2 components");
    }
}

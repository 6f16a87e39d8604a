//! A fast path for the plain decimal numbers that fill most tables.
//!
//! A cell such as `-61.89574` is read as an integer w = 6189574 and a count of
//! decimals d = 5. When w < 2⁵³ and d ≤ 22 both w and 10ᵈ are exact doubles, so
//! the one IEEE division w / 10ᵈ is correctly rounded: the same double the
//! standard library's (correctly rounded) parser returns (Clinger 1990, "How to
//! read floating point numbers accurately", PLDI '90). Anything else (an
//! exponent, more digits, spaces, text) returns `None` and goes to the standard
//! parser, so this never changes a value, only the time to get it.
//!
//! [`NumberFormat`] is how a table writes its numbers (decimal mark, thousands
//! separator); a cell in another format is rewritten to the standard form and
//! read by the same standard parser, so `3,14` under a decimal comma is the
//! same double as `3.14` under a decimal point.

/// Exact powers of ten up to 10²² (larger ones are not exact doubles).
const POWERS: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// How a table writes its numbers: the decimal mark and, if any, the
/// separator between groups of three digits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NumberFormat {
    pub decimal: u8,
    pub thousands: Option<u8>,
}

impl Default for NumberFormat {
    fn default() -> Self {
        NumberFormat {
            decimal: b'.',
            thousands: None,
        }
    }
}

impl NumberFormat {
    /// The value of a trimmed cell, `None` when it is not a number in this
    /// format (a point in a decimal-comma table, say, is never taken as one).
    pub fn parse(self, cell: &str) -> Option<f64> {
        if self == NumberFormat::default() {
            return cell.parse().ok();
        }
        self.standard_form(cell)?.parse().ok()
    }

    /// The cell rewritten with a decimal point and no group separators:
    /// `[sign] groups [mark digits] [exponent]`, where the integer part is
    /// plain digits or, with a separator, 1 to 3 digits then groups of 3.
    fn standard_form(self, cell: &str) -> Option<String> {
        let (mantissa, exponent) = match cell.find(['e', 'E']) {
            Some(i) => (&cell[..i], &cell[i..]),
            None => (cell, ""),
        };
        let unsigned = mantissa.trim_start_matches(['-', '+']);
        if mantissa.len() - unsigned.len() > 1 {
            return None;
        }
        let sign = &mantissa[..mantissa.len() - unsigned.len()];
        let (int, frac) = match unsigned.bytes().position(|b| b == self.decimal) {
            Some(i) => (&unsigned[..i], &unsigned[i + 1..]),
            None => (unsigned, ""),
        };
        let digits = |s: &str| s.bytes().all(|b| b.is_ascii_digit());
        if !digits(frac) || (int.is_empty() && frac.is_empty()) {
            return None;
        }
        let int = self.ungrouped(int)?;
        let point = if frac.is_empty() { "" } else { "." };
        Some(format!("{sign}{int}{point}{frac}{exponent}"))
    }

    /// The integer part without its group separators, or `None` when it is not
    /// digits in well-formed groups.
    fn ungrouped(self, int: &str) -> Option<String> {
        let digits = |s: &str| s.bytes().all(|b| b.is_ascii_digit());
        let Some(sep) = self.thousands.filter(|&t| int.as_bytes().contains(&t)) else {
            return digits(int).then(|| int.to_string());
        };
        let groups: Vec<&str> = int.split(sep as char).collect();
        let first_ok = (1..=3).contains(&groups[0].len());
        let rest_ok = groups[1..].iter().all(|g| g.len() == 3);
        (first_ok && rest_ok && groups.iter().all(|g| digits(g))).then(|| groups.concat())
    }
}

/// The value of `[+-]digits[.digits]`, when the fast path applies.
pub fn plain_decimal(bytes: &[u8]) -> Option<f64> {
    plain_decimal_with(bytes, b'.')
}

/// [`plain_decimal`] with `decimal` as the decimal mark.
pub fn plain_decimal_with(bytes: &[u8], decimal: u8) -> Option<f64> {
    let (negative, rest) = match bytes.first()? {
        b'-' => (true, &bytes[1..]),
        b'+' => (false, &bytes[1..]),
        _ => (false, bytes),
    };
    let mut w: u64 = 0;
    let mut digits = 0;
    let mut dot = None;
    for (i, &b) in rest.iter().enumerate() {
        let digit = b.wrapping_sub(b'0');
        if digit <= 9 {
            w = w.checked_mul(10)?.checked_add(u64::from(digit))?;
            digits += 1;
        } else if b == decimal && dot.is_none() && digits > 0 {
            dot = Some(i);
        } else {
            return None;
        }
    }
    // Digits on both sides of a point, as in `12.5` (not `12.` or `.5`).
    let decimals = dot.map_or(0, |d| rest.len() - d - 1);
    if digits == 0 || dot.is_some_and(|_| decimals == 0) {
        return None;
    }
    finish(negative, w, decimals)
}

/// The value of a plain decimal read elsewhere: its sign, its `digits` digits
/// as the integer `w`, and the count of digits after the point (`None`: no
/// point). `None` when the fast path does not apply.
pub fn from_parts(negative: bool, w: u64, digits: u32, decimals: Option<usize>) -> Option<f64> {
    if digits == 0 || decimals == Some(0) {
        return None;
    }
    finish(negative, w, decimals.unwrap_or(0))
}

fn finish(negative: bool, w: u64, decimals: usize) -> Option<f64> {
    if w > 1 << 53 || decimals >= POWERS.len() {
        return None;
    }
    let v = w as f64 / POWERS[decimals];
    Some(if negative { -v } else { v })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn same_as_std(text: &str) {
        if let Some(v) = plain_decimal(text.as_bytes()) {
            let expected: f64 = text.parse().unwrap();
            assert_eq!(v.to_bits(), expected.to_bits(), "{text}");
        }
    }

    #[test]
    fn agrees_with_the_standard_parser() {
        for text in [
            "0",
            "-0",
            "+0",
            "0.0",
            "-0.0",
            "1",
            "-1",
            "61.89574",
            "-0.444496",
            "34423.11",
            "0.1",
            "0.2",
            "0.3",
            "9007199254740992",
            "9007199254740993",
            "0.0000000000000000000001",
            "123456789012345678",
            "1.7976931348623157",
            "4.9406564584124654",
            "2.2250738585072014",
            "00012.50",
            "999999999999999.9",
            "0.1000000000000000055511151231257827",
        ] {
            same_as_std(text);
        }
        // A deterministic sweep of short decimals, the cells of typical tables.
        let mut state: u64 = 1;
        for _ in 0..200_000 {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let digits = (state >> 60) as usize + 1;
            let decimals = (state >> 40) as usize % (digits + 1);
            let w = (state >> 8) % 10u64.pow(digits.min(15) as u32);
            let s = format!("{w:0digits$}");
            let text = if decimals == 0 {
                s
            } else {
                format!(
                    "{}.{}",
                    &s[..digits - decimals].to_string().max("0".into()),
                    &s[digits - decimals..]
                )
            };
            let text = if state & 1 == 1 {
                format!("-{text}")
            } else {
                text
            };
            assert!(plain_decimal(text.as_bytes()).is_some(), "{text}");
            same_as_std(&text);
        }
    }

    #[test]
    fn decimal_comma_and_thousands_give_the_point_decimal_double() {
        let comma = NumberFormat {
            decimal: b',',
            thousands: None,
        };
        let grouped = NumberFormat {
            decimal: b',',
            thousands: Some(b'.'),
        };
        let spaced = NumberFormat {
            decimal: b',',
            thousands: Some(b' '),
        };
        let point = NumberFormat {
            decimal: b'.',
            thousands: Some(b','),
        };
        for (format, text, standard) in [
            (comma, "3,14", "3.14"),
            (comma, "-0,5", "-0.5"),
            (comma, "12", "12"),
            (comma, "1,5e3", "1.5e3"),
            (comma, ",25", "0.25"),
            (grouped, "1.234.567,89", "1234567.89"),
            (grouped, "-12.345", "-12345"),
            (spaced, "1 234,5", "1234.5"),
            (point, "1,234.5", "1234.5"),
            (point, "0.1", "0.1"),
        ] {
            let want: f64 = standard.parse().unwrap();
            assert_eq!(
                format.parse(text).map(f64::to_bits),
                Some(want.to_bits()),
                "{text}"
            );
        }
        for (format, text) in [
            (comma, "3.14"),
            (comma, "1,2,3"),
            (comma, ","),
            (comma, "--1"),
            (grouped, "1.23,4"),
            (grouped, "1234.567"),
            (grouped, ".123"),
            (point, "1,23"),
            (comma, "x"),
        ] {
            assert_eq!(format.parse(text), None, "{text}");
        }
        assert_eq!(plain_decimal_with(b"2,75", b','), Some(2.75));
        assert_eq!(plain_decimal_with(b"2.75", b','), None);
    }

    #[test]
    fn leaves_everything_else_to_the_standard_parser() {
        for text in [
            "",
            "-",
            ".5",
            "5.",
            "1e5",
            "1E-3",
            " 1",
            "1 ",
            "NA",
            "nan",
            "inf",
            "1,5",
            "0x10",
            "--1",
            "1.2.3",
            "12345678901234567890",
            "1.00000000000000000000001",
        ] {
            assert!(plain_decimal(text.as_bytes()).is_none(), "{text}");
        }
    }
}

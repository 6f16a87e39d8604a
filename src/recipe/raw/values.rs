//! The checked numbers and texts the recipe sections share: each refuses a
//! wrong value in the recipe's words, with the valid range.

use serde::{Deserialize, Deserializer, Serialize};
use std::num::NonZeroUsize;

/// A confidence level strictly between 0 and 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Confidence(pub f64);

impl<'de> Deserialize<'de> for Confidence {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor(
            "a confidence level between 0 and 1, such as 0.95",
            |v| check_confidence(v).map(Confidence),
        ))
    }
}

pub(super) fn check_confidence(v: f64) -> Result<f64, String> {
    if v > 0.0 && v < 1.0 {
        Ok(v)
    } else {
        Err(format!(
            "{v} is not a confidence level; expected a number between 0 and 1, such as 0.95"
        ))
    }
}

/// A share between 0 and 1 inclusive.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize)]
#[serde(into = "f64")]
pub struct Share(pub f64);

impl From<Share> for f64 {
    fn from(s: Share) -> f64 {
        s.0
    }
}

impl<'de> Deserialize<'de> for Share {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor("a number from 0 to 1", |v| {
            (0.0..=1.0)
                .contains(&v)
                .then_some(Share(v))
                .ok_or_else(|| format!("{v} is not a share; expected a number from 0 to 1"))
        }))
    }
}

/// A whole number (the recipe format).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Whole(pub i64);

impl<'de> Deserialize<'de> for Whole {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a whole number such as 1", |v| {
            i64::try_from(v)
                .map(Whole)
                .map_err(|_| format!("{v} is not a whole number such as 1"))
        }))
    }
}

/// A positive whole number (a count of components).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Count(pub NonZeroUsize);

impl<'de> Deserialize<'de> for Count {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a positive whole number such as 10", |v| {
            usize::try_from(v)
                .ok()
                .and_then(NonZeroUsize::new)
                .map(Count)
                .ok_or_else(|| {
                    format!("{v} is not a positive whole number; expected a count such as 10")
                })
        }))
    }
}

/// Reads a TOML number (integer or float) and checks it, so that a wrong type is
/// reported in the recipe's words ("expected a number from 0 to 1") rather than
/// as a Rust type.
pub(super) struct NumberVisitor<T>(
    pub(super) &'static str,
    pub(super) fn(f64) -> Result<T, String>,
);

impl<'de, T> serde::de::Visitor<'de> for NumberVisitor<T> {
    type Value = T;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(self.0)
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<T, E> {
        (self.1)(v as f64).map_err(E::custom)
    }

    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<T, E> {
        (self.1)(v as f64).map_err(E::custom)
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<T, E> {
        (self.1)(v).map_err(E::custom)
    }
}

/// Reads a TOML integer and checks it. A float is refused even when it is
/// whole (`1e3`, `10.0`): a count is written as an integer, and accepting a
/// float would hide a value that was meant as a share or a typo of one.
pub(super) struct WholeVisitor<T>(
    pub(super) &'static str,
    pub(super) fn(i128) -> Result<T, String>,
);

impl<'de, T> serde::de::Visitor<'de> for WholeVisitor<T> {
    type Value = T;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(self.0)
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<T, E> {
        (self.1)(i128::from(v)).map_err(E::custom)
    }

    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<T, E> {
        (self.1)(i128::from(v)).map_err(E::custom)
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<T, E> {
        let expected = self.0;
        Err(E::custom(if v.fract() == 0.0 && v.abs() < 1e15 {
            format!(
                "{v:?} is written as a decimal number (with a point or an exponent) and is not {expected}: write it as {}",
                v as i64
            )
        } else {
            format!("{v} is not {expected}; write a count without a decimal point or exponent")
        }))
    }
}

/// A field delimiter: a single ASCII character.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct Delimiter(pub u8);

impl TryFrom<String> for Delimiter {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        match v.as_bytes() {
            [b] if b.is_ascii() && *b != b'"' && *b != b'\n' && *b != b'\r' => Ok(Delimiter(*b)),
            _ => Err(format!(
                "delimiter `{v}` is not one ASCII character; expected e.g. \",\", \";\", \"\\t\" or \"|\""
            )),
        }
    }
}

/// The decimal mark of a table's numbers: `.` or `,`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct DecimalMark(pub u8);

impl TryFrom<String> for DecimalMark {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        match v.as_str() {
            "." => Ok(DecimalMark(b'.')),
            "," => Ok(DecimalMark(b',')),
            _ => Err(format!(
                "decimal mark `{v}` is not one of \".\" (3.14) or \",\" (3,14)"
            )),
        }
    }
}

/// The separator a table writes between groups of three digits, as in
/// 1.234.567,8 or 1 234 567.8.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct Thousands(pub u8);

impl TryFrom<String> for Thousands {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        match v.as_str() {
            "." | "," | " " | "'" | "_" => Ok(Thousands(v.as_bytes()[0])),
            _ => Err(format!(
                "thousands separator `{v}` is not one of \".\", \",\", \" \", \"'\" or \"_\""
            )),
        }
    }
}

/// A SHA-256 digest written as 64 hexadecimal digits.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct Sha256Hex(pub String);

impl TryFrom<String> for Sha256Hex {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        if v.len() == 64 && v.bytes().all(|b| b.is_ascii_hexdigit()) {
            Ok(Sha256Hex(v.to_ascii_lowercase()))
        } else {
            Err(format!(
                "`{v}` is not a SHA-256 digest; expected 64 hexadecimal digits"
            ))
        }
    }
}

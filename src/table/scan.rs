//! The field scan of the quick path for unquoted records: where a field ends
//! and, when it is a plain decimal, its value, read in the same sweep a word
//! (eight bytes) at a time.

/// Where the field starting at `start` ends (a delimiter or the record's end).
pub(super) fn field_end(record: &[u8], start: usize, delimiter: u8) -> usize {
    record[start..]
        .iter()
        .position(|&b| b == delimiter)
        .map_or(record.len(), |e| start + e)
}

/// The end of the field starting at `start` and, when it is a plain decimal
/// (see [`super::number`]) with `decimal` as its mark, its value, read in the
/// same sweep.
pub(super) fn scan_number(
    record: &[u8],
    start: usize,
    delimiter: u8,
    decimal: u8,
) -> (usize, Option<f64>) {
    let (negative, mut i) = leading_sign(record, start);
    let (mut w, mut digits);
    (w, digits, i) = digit_run(record, i, 0, 0);
    let mut decimals = None;
    if digits > 0 && record.get(i) == Some(&decimal) {
        let before = digits;
        (w, digits, i) = digit_run(record, i + 1, w, digits);
        decimals = Some((digits - before) as usize);
    }
    match record.get(i) {
        None => {}
        Some(&b) if b == delimiter => {}
        Some(_) => return (field_end(record, i, delimiter), None),
    }
    (i, super::number::from_parts(negative, w, digits, decimals))
}

/// Whether the field at `i` starts with a minus sign, and where its digits start
/// (after a `-` or `+`).
fn leading_sign(record: &[u8], i: usize) -> (bool, usize) {
    match record.get(i) {
        Some(b'-') => (true, i + 1),
        Some(b'+') => (false, i + 1),
        _ => (false, i),
    }
}

/// Most digits a plain decimal may have (more could overflow `u64`).
const MAX_DIGITS: u32 = 19;

/// Reads the run of ASCII digits at `i` onto `w` (which holds `digits` digits
/// so far), stopping at [`MAX_DIGITS`]; returns the new `w`, digit count and
/// position. Eight bytes are looked at together (a SWAR technique: the digits
/// of a word are found with masks and combined with three multiplications), so
/// a short number costs a few word operations rather than a loop per byte.
/// Integer arithmetic only: the value is exact whatever the CPU.
fn digit_run(record: &[u8], mut i: usize, mut w: u64, mut digits: u32) -> (u64, u32, usize) {
    while let Some(bytes) = record.get(i..i + 8) {
        let word = u64::from_le_bytes(bytes.try_into().expect("eight bytes"));
        let n = leading_digits(word).min(MAX_DIGITS - digits);
        if n == 0 {
            return (w, digits, i);
        }
        w = w * POWERS_OF_TEN[n as usize] + eight_digits(word, n);
        digits += n;
        i += n as usize;
        if n < 8 {
            return (w, digits, i);
        }
    }
    // Fewer than eight bytes left: one at a time.
    while let Some(&b) = record.get(i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 || digits >= MAX_DIGITS {
            break;
        }
        w = w * 10 + u64::from(d);
        digits += 1;
        i += 1;
    }
    (w, digits, i)
}

const POWERS_OF_TEN: [u64; 9] = [
    1,
    10,
    100,
    1_000,
    10_000,
    100_000,
    1_000_000,
    10_000_000,
    100_000_000,
];

/// How many of the word's bytes, from the first (lowest), are ASCII digits.
fn leading_digits(word: u64) -> u32 {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const HIGH: u64 = 0x8080_8080_8080_8080;
    // A byte b below 0x80 is a digit exactly when neither b − 0x30 nor b + 0x46
    // sets its high bit; bytes at or above 0x80 are caught by `| word`. Borrows
    // and carries only run upward from a byte that is itself not a digit, so
    // the lowest flagged byte is the first non-digit.
    let below = word.wrapping_sub(0x30 * ONES) | word.wrapping_add(0x46 * ONES) | word;
    let not_digit = below & HIGH;
    not_digit.trailing_zeros() / 8
}

/// The number written by the first `n` (1 ≤ n ≤ 8) bytes of the word, all digits.
fn eight_digits(word: u64, n: u32) -> u64 {
    const ONES: u64 = 0x0101_0101_0101_0101;
    // The digits' values, moved to the top so that the missing ones are
    // leading zeros; then pairs, fours and eights of digits are combined.
    let mut v = word.wrapping_sub(0x30 * ONES) << (8 * (8 - n));
    v = (v.wrapping_mul(10) + (v >> 8)) & 0x00FF_00FF_00FF_00FF;
    v = (v.wrapping_mul(100) + (v >> 16)) & 0x0000_FFFF_0000_FFFF;
    (v.wrapping_mul(10_000) + (v >> 32)) & 0xFFFF_FFFF
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The byte-at-a-time scan that [`scan_number`] replaced: the reference.
    fn scan_number_bytewise(
        record: &[u8],
        start: usize,
        delimiter: u8,
        decimal: u8,
    ) -> (usize, Option<f64>) {
        let (negative, mut i) = leading_sign(record, start);
        let mut w: u64 = 0;
        let mut digits = 0u32;
        let mut decimals: Option<usize> = None;
        while let Some(&b) = record.get(i) {
            let digit = b.wrapping_sub(b'0');
            if digit <= 9 && digits < 19 {
                w = w * 10 + u64::from(digit);
                digits += 1;
                if let Some(d) = decimals.as_mut() {
                    *d += 1;
                }
            } else if b == decimal && decimals.is_none() && digits > 0 {
                decimals = Some(0);
            } else if b == delimiter {
                break;
            } else {
                return (field_end(record, i, delimiter), None);
            }
            i += 1;
        }
        (
            i,
            super::super::number::from_parts(negative, w, digits, decimals),
        )
    }

    fn same(record: &[u8]) {
        same_with(record, b',', b'.');
        same_with(record, b';', b',');
    }

    fn same_with(record: &[u8], delimiter: u8, decimal: u8) {
        for start in 0..=record.len() {
            let got = scan_number(record, start, delimiter, decimal);
            let want = scan_number_bytewise(record, start, delimiter, decimal);
            assert_eq!(
                (got.0, got.1.map(f64::to_bits)),
                (want.0, want.1.map(f64::to_bits)),
                "{:?} from {start}",
                String::from_utf8_lossy(record)
            );
        }
    }

    #[test]
    fn word_at_a_time_scan_agrees_with_the_bytewise_scan() {
        for text in [
            "",
            "0",
            "-0",
            "+7",
            "-",
            ".5",
            "5.",
            "1.2.3",
            "12345678",
            "123456789",
            "1234567.8",
            "12345678.12345678",
            "1234567890123456789",
            "12345678901234567890",
            "1234567890123456789.5",
            "123456789012345678.9",
            "0.000000000000000001",
            "00000000000000000000001",
            "9007199254740993",
            "9007199254740992.5",
            "3.14159,2.71828,-1.5e3,NA,,42",
            "1/2,3:4,9\u{7f}8,7\u{e9}6,5\u{0}4",
            "12,34.56\r",
        ] {
            same(text.as_bytes());
        }
        // Every byte value after every prefix of digits, at every alignment.
        for b in 0..=255u8 {
            for digits in 0..12 {
                let mut record: Vec<u8> = b"-".to_vec();
                record.extend((0..digits).map(|d| b'0' + (d * 7 % 10) as u8));
                record.push(b);
                record.extend_from_slice(b"5.25,0");
                same(&record);
                record.insert(3.min(record.len()), b'.');
                same(&record);
            }
        }
    }

    #[test]
    fn many_generated_decimals_agree_with_the_bytewise_scan() {
        // A fixed linear congruential sequence: reproducible, no seed to keep.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 33) as usize
        };
        let mut record = Vec::new();
        for _ in 0..20_000 {
            record.clear();
            for f in 0..4 {
                if f > 0 {
                    record.push(b',');
                }
                if next() % 3 == 0 {
                    record.push(b'-');
                }
                for _ in 0..next() % 21 {
                    record.push(b'0' + (next() % 10) as u8);
                }
                if next() % 2 == 0 {
                    record.push(b'.');
                    for _ in 0..next() % 12 {
                        record.push(b'0' + (next() % 10) as u8);
                    }
                }
            }
            same(&record);
        }
    }
}

//! The parallel reader gives the same table as the reference reader built on the
//! `csv` crate, however the file is cut and on any number of threads: numbers,
//! texts, missing and bad cells, and errors. Line numbers are compared with the
//! physical lines of hand-made files instead: the `csv` crate's record positions
//! skip blank lines and miscount CRLF endings, while ours are the lines an
//! editor shows.

use proptest::prelude::*;
use sextant::table::parallel::{read_table_by_rows, read_table_in_pieces, read_table_parallel};
use sextant::table::{ColumnData, ReadOptions, Table, read_table};

fn options() -> ReadOptions {
    ReadOptions::new(
        b',',
        vec!["".into(), "NA".into()],
        vec!["id".into(), "note".into()],
    )
}

/// A comparable summary of a table (NaN compared by bits), without line numbers.
fn summary(t: &Table) -> Vec<String> {
    let mut out = vec![format!("rows {}", t.lines.len())];
    for c in &t.columns {
        out.push(match &c.data {
            ColumnData::Text(v) => format!("{} text {:?}", c.name, v),
            ColumnData::Numeric(n) => format!(
                "{} numbers {:?} missing {} bad {} first {:?}",
                c.name,
                n.values.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                n.missing,
                n.bad,
                n.first_bad.as_ref().map(|b| &b.1)
            ),
        });
    }
    out
}

fn outcome(r: Result<Table, sextant::error::InputError>) -> Vec<String> {
    match r {
        Ok(t) => summary(&t),
        Err(e) => vec![error_kind(&e)],
    }
}

/// An error without its line number.
fn error_kind(e: &sextant::error::InputError) -> String {
    use sextant::error::InputError::*;
    match e {
        Ragged {
            expected, found, ..
        } => format!("ragged {expected} {found}"),
        Csv { message, .. } => format!("csv {message}"),
        other => format!("{other}"),
    }
}

fn check(text: &[u8]) {
    let reference = outcome(read_table(text, "t.csv", &options()));
    for pieces in 1..=text.len().clamp(1, 64) {
        let got = outcome(read_table_in_pieces(text, "t.csv", &options(), pieces));
        assert_eq!(
            got,
            reference,
            "{pieces} pieces of {:?}",
            String::from_utf8_lossy(text)
        );
        // The passes engine's row-by-row layout holds the same cells.
        let by_rows = outcome(read_table_by_rows(text, "t.csv", &options(), pieces));
        assert_eq!(
            by_rows,
            reference,
            "{pieces} pieces, by rows, of {:?}",
            String::from_utf8_lossy(text)
        );
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let one = pool.install(|| outcome(read_table_in_pieces(text, "t.csv", &options(), 8)));
    assert_eq!(one, reference);
}

#[test]
fn quoted_fields_with_newlines_delimiters_and_quotes() {
    check(
        b"\xef\xbb\xbfid,a,note,b\r\n\"x,1\",1.5,\"two\nlines\",NA\r\ny,2,\"say \"\"hi\"\"\",\n\nz,3e2,plain,-4\n\"w\",oops,\"a\"\"b,c\",7",
    );
}

#[test]
fn line_numbers_are_physical_lines() {
    let text = b"\xef\xbb\xbfid,a,note,b\r\n\"x,1\",1.5,\"two\nlines\",NA\r\ny,2,n,\n\nz,3e2,plain,-4\n\"w\",oops,\"a\"\"b,c\",7";
    for pieces in [1, 2, 3, 5, 40] {
        let t = read_table_in_pieces(text, "t.csv", &options(), pieces).unwrap();
        assert_eq!(t.lines, vec![2, 4, 6, 7], "{pieces} pieces");
        let ColumnData::Numeric(a) = &t.columns[1].data else {
            panic!()
        };
        assert_eq!(a.first_bad, Some((7, "oops".to_string())));
    }
    let err = read_table_in_pieces(
        b"id,a,note,b\nx,1,\"two\nlines\",2\n\ny,2,n\n",
        "t.csv",
        &options(),
        3,
    )
    .unwrap_err();
    assert_eq!(
        err.to_string(),
        "t.csv:5: the row has 3 fields but the header has 4"
    );
}

#[test]
fn errors_are_the_same() {
    check(b"id,a,note,b\nx,1,\"multi\nline\",2\ny,2,n\n");
    check(b"id,a,note,b\nx,1,n,2\ny,\xff,n,3\n");
    check(b"id,a,note,b\n");
}

/// A cell of a random table: numbers, missing marks, bad text, and text with the
/// characters that need quoting.
fn cell(text: bool) -> impl Strategy<Value = String> {
    if text {
        prop_oneof![
            "[a-z]{0,4}".prop_map(|s| s),
            "[a-z,\"\n ]{0,6}".prop_map(|s| format!("\"{}\"", s.replace('"', "\"\""))),
        ]
        .boxed()
    } else {
        prop_oneof![
            (-1000.0f64..1000.0).prop_map(|v| format!("{v}")),
            Just(String::new()),
            Just("NA".to_string()),
            Just("n/d".to_string()),
            (-5.0f64..5.0).prop_map(|v| format!(" {v:e} ")),
        ]
        .boxed()
    }
}

fn row() -> impl Strategy<Value = String> {
    (cell(true), cell(false), cell(true), cell(false))
        .prop_map(|(a, b, c, d)| format!("{a},{b},{c},{d}"))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn any_table_reads_the_same_however_it_is_cut(rows in prop::collection::vec(row(), 0..12), crlf in any::<bool>(), blank in 0usize..12) {
        let end = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("id,a,note,b{end}");
        for (i, r) in rows.iter().enumerate() {
            if i == blank {
                text.push_str(end);
            }
            text.push_str(r);
            text.push_str(end);
        }
        check(text.as_bytes());
    }
}

/// Runs `f` inside a rayon pool of `threads` threads.
fn on_threads<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

/// Reads `text` with the automatic and with several explicit piece counts, in
/// pools of 1, 2 and 8 threads, and demands the reference's cells bit for bit
/// and `lines` as each row's line.
fn same_on_every_thread_count(text: &[u8], lines: &[u64], pieces: &[usize]) {
    let reference = read_table(text, "t.csv", &options()).unwrap();
    let expected = summary(&reference);
    assert_eq!(reference.lines.len(), lines.len(), "rows of the reference");
    for threads in [1, 2, 8] {
        let auto = on_threads(threads, || read_table_parallel(text, "t.csv", &options()))
            .unwrap_or_else(|e| panic!("{threads} threads: {e}"));
        assert_eq!(
            summary(&auto),
            expected,
            "automatic pieces on {threads} threads"
        );
        assert_eq!(auto.lines, lines, "automatic pieces on {threads} threads");
        for &n in pieces {
            let t = on_threads(threads, || {
                read_table_in_pieces(text, "t.csv", &options(), n)
            })
            .unwrap_or_else(|e| panic!("{n} pieces on {threads} threads: {e}"));
            assert_eq!(summary(&t), expected, "{n} pieces on {threads} threads");
            assert_eq!(t.lines, lines, "{n} pieces on {threads} threads");
            let t = on_threads(threads, || read_table_by_rows(text, "t.csv", &options(), n))
                .unwrap_or_else(|e| panic!("{n} pieces by rows on {threads} threads: {e}"));
            assert_eq!(
                summary(&t),
                expected,
                "{n} pieces by rows on {threads} threads"
            );
            assert_eq!(t.lines, lines, "{n} pieces by rows on {threads} threads");
        }
    }
}

#[test]
fn awkward_small_file_is_the_same_on_1_2_and_8_threads() {
    // Quoted delimiters, doubled quotes, LF and CRLF inside quotes, CRLF and LF
    // line ends, a blank line, missing marks (empty, NA, spaces), a bad cell and
    // a last line without its newline. Lines counted by hand in an editor.
    let text = b"id,a,note,b\r\n\
\"x,1\",1.5,\"two\nlines\",NA\r\n\
y,  2 ,\"say \"\"hi\"\", \"\"twice\"\"\",\r\n\
\r\n\
\"z\r\nz\",-3e2,\"crlf\r\ninside, and \"\"quotes\"\"\",  \r\n\
w,NA,\",\",0.000001\n\
\"\"\"q\"\"\",n/d,\"\",7\r\n\
v, ,plain,\"8.5\"";
    // Rows start on lines 2, 4, 6, 9, 10 and 11 (the blank line 5 is skipped;
    // the row on line 6 holds two line breaks inside quotes).
    let lines = [2, 4, 6, 9, 10, 11];
    let reference = read_table(text, "t.csv", &options()).unwrap();
    let ColumnData::Text(notes) = &reference.columns[2].data else {
        panic!("note is text")
    };
    assert_eq!(
        notes.as_slice(),
        &[
            "two\nlines",
            "say \"hi\", \"twice\"",
            "crlf\r\ninside, and \"quotes\"",
            ",",
            "",
            "plain"
        ]
    );
    let ColumnData::Numeric(a) = &reference.columns[1].data else {
        panic!("a is numeric")
    };
    assert_eq!((a.missing, a.bad), (2, 1));
    same_on_every_thread_count(text, &lines, &[1, 2, 3, 4, 7, 16, 64, text.len()]);
}

/// A table of about `target` bytes made by a fixed rule (no randomness): text
/// cells that need quoting, numbers in several spellings, missing and bad cells,
/// blank lines, newlines inside quotes. Returns the bytes and each row's line.
fn generated(target: usize, end: &str) -> (Vec<u8>, Vec<u64>) {
    let mut text = format!("id,a,note,b{end}");
    let mut lines = Vec::new();
    let mut line = 2u64;
    let mut i = 0u64;
    while text.len() < target {
        // A fixed sequence with no pattern short enough to line up with pieces.
        let h = i.wrapping_mul(0x9e37_79b9_7f4a_7c15).rotate_left(17);
        let v = (h >> 11) as f64 / (1u64 << 53) as f64 * 2000.0 - 1000.0;
        if h.is_multiple_of(97) {
            text.push_str(end);
            line += 1;
        }
        let id = match h % 5 {
            0 => format!("\"r{i},{}\"", h % 13),
            1 => format!("\"r{i} \"\"q\"\"\""),
            _ => format!("r{i}"),
        };
        let a = match (h >> 8) % 9 {
            0 => String::new(),
            1 => "NA".to_string(),
            2 => format!(" {v:e} "),
            3 => format!("\"{v}\""),
            4 if i.is_multiple_of(1001) => "n/d".to_string(),
            _ => format!("{v}"),
        };
        let (note, breaks) = match (h >> 16) % 7 {
            0 => (format!("\"line {i}\nnext, line\""), 1),
            1 => (format!("\"crlf {i}\r\nnext\r\nlast\""), 2),
            2 => ("\"\"".to_string(), 0),
            3 => (format!("\"he said \"\"{}\"\"\"", h % 1000), 0),
            _ => (format!("note {}", h % 100_000), 0),
        };
        let b = match (h >> 24) % 6 {
            0 => "NA".to_string(),
            1 => format!("{}", (h >> 40) as i64 - (1 << 23)),
            _ => format!("{:.6}", v / 7.0),
        };
        lines.push(line);
        text.push_str(&format!("{id},{a},{note},{b}{end}"));
        line += 1 + breaks;
        i += 1;
    }
    (text.into_bytes(), lines)
}

#[test]
fn generated_crlf_file_of_10_mb_is_the_same_on_1_2_and_8_threads() {
    // Over 8 MB so that the automatic choice cuts it into more than one piece.
    let (text, lines) = generated(10 << 20, "\r\n");
    same_on_every_thread_count(&text, &lines, &[2, 3, 8, 61]);
}

#[test]
fn generated_lf_file_of_3_mb_is_the_same_on_1_2_and_8_threads() {
    let (text, lines) = generated(3 << 20, "\n");
    // The rule must have made every kind of cell, or the test proves little.
    let t = read_table(&text, "t.csv", &options()).unwrap();
    let ColumnData::Numeric(a) = &t.columns[1].data else {
        panic!("a is numeric")
    };
    assert!(
        a.missing > 1000 && a.bad > 1,
        "missing {} bad {}",
        a.missing,
        a.bad
    );
    let ColumnData::Text(notes) = &t.columns[2].data else {
        panic!("note is text")
    };
    assert!(notes.iter().any(|n| n.contains("\r\n")) && notes.iter().any(|n| n.contains('"')));
    assert!(
        lines.windows(2).any(|w| w[1] - w[0] == 2),
        "no blank line or break inside quotes"
    );
    same_on_every_thread_count(&text, &lines, &[2, 3, 8, 61]);
}

/// A cell of a table without quotes, where records take the reader's short way:
/// plain decimals of every length and sign, and the near misses that must go
/// the general way (exponents, spaces, a lone point or sign, 20-digit numbers).
fn plain_cell() -> impl Strategy<Value = String> {
    prop_oneof![
        (any::<i64>(), 0u32..25).prop_map(|(w, d)| {
            let digits = w.unsigned_abs().to_string();
            let d = (d as usize).min(digits.len());
            let sign = if w < 0 { "-" } else { "" };
            if d == 0 {
                format!("{sign}{digits}")
            } else {
                let (a, b) = digits.split_at(digits.len() - d);
                format!("{sign}{}.{b}", if a.is_empty() { "0" } else { a })
            }
        }),
        (-1000.0f64..1000.0).prop_map(|v| format!("{v}")),
        prop::sample::select(vec![
            "",
            "NA",
            "n/d",
            "+5",
            "5.",
            ".5",
            "-",
            "+",
            ".",
            "1e3",
            "-2.5E-3",
            " 7",
            "7 ",
            "00012.50",
            "12345678901234567890",
            "0.00000000000000000000001",
            "-0",
            "1.2.3",
            "9007199254740993",
            "x y",
            "é",
        ])
        .prop_map(String::from),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn tables_without_quotes_read_the_same_however_they_are_cut(
        rows in prop::collection::vec((plain_cell(), plain_cell(), "[a-z]{0,3}"), 0..14),
        crlf in any::<bool>(),
        ragged in 0usize..20,
        last_newline in any::<bool>(),
    ) {
        let end = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("id,a,note,b{end}");
        for (i, (a, b, note)) in rows.iter().enumerate() {
            if i == ragged {
                text.push_str(&format!("r{i},{a},{note}"));
            } else {
                text.push_str(&format!("r{i},{a},{note},{b}"));
            }
            if i + 1 < rows.len() || last_newline {
                text.push_str(end);
            }
        }
        check(text.as_bytes());
    }
}

/// Under a decimal comma, a thousands separator and a column's own missing
/// code, the parallel reader (both layouts, any cut) reads the same cells as
/// the reference, quoted cells included, and the values are the point-decimal
/// ones.
#[test]
fn decimal_comma_thousands_and_column_codes_read_the_same_however_cut() {
    use sextant::table::read::MissingCode;
    let mut options = options();
    options.delimiter = b';';
    options.decimal = b',';
    options.thousands = Some(b'.');
    options.missing_per_column = vec![("a".into(), vec![MissingCode::Number(-999.0)])];
    let text = b"id;a;note;b\nx;1,5;\"two\nlines; here\";\"3,25\"\ny;-999;n;-999\nz;\"1.234,5\";p;2\nw;0,125;q;1.2,3\n";
    let reference = read_table(text, "t.csv", &options).unwrap();
    let ColumnData::Numeric(a) = &reference.columns[1].data else {
        panic!()
    };
    let a_bits: Vec<u64> = a.values.iter().map(|v| v.to_bits()).collect();
    let want: Vec<u64> = [1.5, f64::NAN, 1234.5, 0.125]
        .iter()
        .map(|v| v.to_bits())
        .collect();
    assert_eq!(a_bits, want);
    assert_eq!(a.missing, 1);
    let ColumnData::Numeric(b) = &reference.columns[3].data else {
        panic!()
    };
    assert_eq!(b.values[..3], [3.25, -999.0, 2.0], "-999 is a value in b");
    assert_eq!(
        b.first_bad,
        Some((6, "1.2,3".into())),
        "a badly grouped number"
    );
    let want = summary(&reference);
    for pieces in 1..=text.len() {
        let got = read_table_in_pieces(text, "t.csv", &options, pieces).unwrap();
        assert_eq!(summary(&got), want, "{pieces} pieces");
        assert_eq!(got.lines, [2, 4, 5, 6], "{pieces} pieces");
        let by_rows = read_table_by_rows(text, "t.csv", &options, pieces).unwrap();
        assert_eq!(summary(&by_rows), want, "{pieces} pieces by rows");
    }
}

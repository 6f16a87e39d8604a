//! The parallel reader gives the same table as the reference reader built on the
//! `csv` crate, however the file is cut and on any number of threads: numbers,
//! texts, missing and bad cells, and errors. Line numbers are compared with the
//! physical lines of hand-made files instead: the `csv` crate's record positions
//! skip blank lines and miscount CRLF endings, while ours are the lines an
//! editor shows.

use proptest::prelude::*;
use sextant::table::fast::read_table_in_pieces;
use sextant::table::{ColumnData, ReadOptions, Table, read_table};

fn options() -> ReadOptions {
    ReadOptions {
        delimiter: b',',
        missing_tokens: vec!["".into(), "NA".into()],
        text_columns: vec!["id".into(), "note".into()],
    }
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

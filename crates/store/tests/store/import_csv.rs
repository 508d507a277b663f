//! CSV dialects and malformed files: each refusal asserts its exact message.

use wardcast_contract::dataset::ColumnType;
use wardcast_store::{
    DecimalChoice, Delimiter, Encoding, ImportOptions, Limits, import_bytes, import_file, read_number,
};

use crate::common::{decimals, fixture, import, integers, same_frame, texts};

/// Checks that importing `fixture` with `options` is refused with exactly `expected`.
fn check_refused(fixture_name: &str, options: &ImportOptions, expected: &str) {
    match import_file(&fixture(fixture_name), options) {
        Ok(_) => panic!("{fixture_name} was accepted; expected: {expected}"),
        Err(e) => assert_eq!(e.to_string(), expected, "{fixture_name}"),
    }
}

fn with_limits(limits: Limits) -> ImportOptions {
    ImportOptions { limits, ..ImportOptions::default() }
}

#[test]
fn malformed_files_are_refused_with_exact_messages() {
    let plain = ImportOptions::default();
    let cases: Vec<(&str, ImportOptions, &str)> = vec![
        (
            "ragged.csv",
            plain.clone(),
            "row 3 (line 3) has 2 fields but the header has 3; 2 rows in all have a different number of fields",
        ),
        (
            "ragged.csv",
            ImportOptions { delimiter: Some(Delimiter::Comma), ..plain.clone() },
            "row 3 (line 3) has 2 fields but the header has 3; 2 rows in all have a different number of fields",
        ),
        ("empty.csv", plain.clone(), "the file is empty"),
        ("blank_lines_only.csv", plain.clone(), "the file is empty"),
        ("header_only.csv", plain.clone(), "the file has a header row but no data rows"),
        (
            "latin1.csv",
            plain.clone(),
            "the file is not valid UTF-8 (byte 0xF6 on line 2 cannot start or continue a character); if it was saved as Windows-1252 or Latin-1, import it again choosing that encoding (--encoding windows-1252 or --encoding latin1)",
        ),
        (
            "windows1252.csv",
            plain.clone(),
            "the file is not valid UTF-8 (byte 0x80 on line 2 cannot start or continue a character); if it was saved as Windows-1252 or Latin-1, import it again choosing that encoding (--encoding windows-1252 or --encoding latin1)",
        ),
        (
            "mixed_delimiters.csv",
            plain.clone(),
            "could not tell the field delimiter: none of comma, semicolon, tab or pipe gives the same number of fields on every line (with semicolon the header has 3 fields but line 2 has 1); choose the delimiter",
        ),
        ("open_quote.csv", plain.clone(), "a quoted field that starts on line 2 is never closed"),
        (
            "text_after_quote.csv",
            plain.clone(),
            "line 2: text follows a closing quote before the next delimiter",
        ),
        (
            "single_column.csv",
            plain.clone(),
            "no field delimiter found: no line contains a comma, semicolon, tab or pipe outside quotes",
        ),
        ("blank_header.csv", plain.clone(), "column 2 has no name in the header row"),
        ("duplicate_header.csv", plain.clone(), "two columns are both named \"value\" (columns 2 and 3)"),
        (
            "bom.csv",
            with_limits(Limits { max_bytes: Some(10), ..Limits::default() }),
            "the file is 24 bytes, more than the 10 bytes allowed; nothing was stored",
        ),
        (
            "types.csv",
            with_limits(Limits { max_columns: 2, ..Limits::default() }),
            "the table has 7 columns, more than the 2 allowed; nothing was stored",
        ),
        (
            "quoted.csv",
            with_limits(Limits { max_cell_bytes: 5, ..Limits::default() }),
            "row 2, column \"name\" holds 11 bytes, more than the 5 allowed in one cell; nothing was stored",
        ),
        (
            "bom.csv",
            ImportOptions { key: Some("nope".into()), ..plain.clone() },
            "there is no column named \"nope\"",
        ),
        (
            "decimal_comma.csv",
            ImportOptions {
                delimiter: Some(Delimiter::Comma),
                decimal: DecimalChoice::Comma,
                ..plain.clone()
            },
            "a decimal comma cannot be used when the delimiter is a comma",
        ),
        (
            "text_in_numeric.csv",
            ImportOptions {
                drop_rows: vec![wardcast_store::RowDrop { row: 3, reason: "   ".into() }],
                ..plain.clone()
            },
            "dropping row 3 needs a reason",
        ),
        (
            "text_in_numeric.csv",
            ImportOptions {
                drop_rows: vec![wardcast_store::RowDrop { row: 40, reason: "not there".into() }],
                ..plain.clone()
            },
            "row 40 cannot be dropped: it is not a data row (data rows are 2 to 7)",
        ),
    ];
    for (name, options, expected) in &cases {
        check_refused(name, options, expected);
    }
}

#[test]
fn in_memory_refusals_have_exact_messages() {
    let plain = ImportOptions::default();
    // An old binary workbook, recognised by its compound-file signature.
    let mut xls = vec![0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];
    xls.extend([0u8; 504]);
    // A UTF-16 byte-order mark followed by an unpaired surrogate on line 2.
    let mut utf16 = vec![0xFF, 0xFE];
    for unit in "a,b\n1,".encode_utf16() {
        utf16.extend(unit.to_le_bytes());
    }
    utf16.extend(0xD800u16.to_le_bytes());
    let cases: Vec<(Vec<u8>, ImportOptions, &str)> = vec![
        (xls, plain.clone(), "this is an old binary .xls workbook; save it as .xlsx or CSV and import that"),
        (
            utf16,
            plain.clone(),
            "the file starts with a UTF-16 byte-order mark but is not valid UTF-16 (broken character on line 2)",
        ),
        (
            b"a,b\n1,2\n".to_vec(),
            with_limits(Limits { max_bytes: Some(4), ..Limits::default() }),
            "the file is 8 bytes, more than the 4 bytes allowed; nothing was stored",
        ),
        (Vec::new(), plain.clone(), "the file is empty"),
        (
            b"name,value\nA,1.5\nB,2.5\n".to_vec(),
            ImportOptions { types: [("value".to_owned(), ColumnType::Integer)].into(), ..plain.clone() },
            "column \"value\" holds 2 values with a fractional part (row 2: 1.5); choose decimal instead of integer",
        ),
        (
            b"name,value\nA,1.5\nB,2.5\n".to_vec(),
            ImportOptions {
                key: Some("value".into()),
                types: [("value".to_owned(), ColumnType::Decimal)].into(),
                ..plain.clone()
            },
            "the key column \"value\" must be text; it cannot be decimal",
        ),
    ];
    for (bytes, options, expected) in &cases {
        match import_bytes(bytes, "upload.csv", options) {
            Ok(_) => panic!("accepted; expected: {expected}"),
            Err(e) => assert_eq!(e.to_string(), *expected),
        }
    }
}

#[test]
fn encodings_are_read_or_transcoded_on_request() {
    let bom = import("bom.csv", &ImportOptions::default());
    assert_eq!(bom.report().source.encoding, "utf-8 with byte-order mark");
    assert_eq!(bom.report().columns[0].column, "code", "the byte-order mark is not part of the first name");
    assert_eq!(integers(bom.frame(), "value"), vec![Some(1), Some(2)]);

    let latin =
        import("latin1.csv", &ImportOptions { encoding: Encoding::Latin1, ..ImportOptions::default() });
    assert_eq!(latin.report().source.encoding, "latin1");
    assert_eq!(texts(latin.frame(), "name"), vec![Some("Fernhöhe".into()), Some("Mühlbach".into())]);

    let cp = import(
        "windows1252.csv",
        &ImportOptions { encoding: Encoding::Windows1252, ..ImportOptions::default() },
    );
    assert_eq!(cp.report().source.encoding, "windows-1252");
    assert_eq!(texts(cp.frame(), "label")[0].as_deref(), Some("€ budget"));

    let le = import("utf16le.csv", &ImportOptions::default());
    assert_eq!(le.report().source.encoding, "utf-16le");
    assert_eq!(texts(le.frame(), "name"), vec![Some("Ærøby".into()), Some("Zeta".into())]);

    let be = import("utf16be.csv", &ImportOptions::default());
    assert_eq!(be.report().source.encoding, "utf-16be");
    assert_eq!(be.report().source.delimiter.as_deref(), Some("semicolon"));
    assert_eq!(integers(be.frame(), "value"), vec![Some(1), Some(2)]);

    assert_eq!(Encoding::parse("Windows-1252").ok(), Some(Encoding::Windows1252));
    assert_eq!(Encoding::parse("iso-8859-1").ok(), Some(Encoding::Latin1));
    assert_eq!(
        Encoding::parse("ebcdic").err().map(|e| e.to_string()).as_deref(),
        Some("\"ebcdic\" is not an encoding wardcast reads; use utf-8, windows-1252 or latin1")
    );
}

#[test]
fn dialects_and_quoting() {
    let quoted = import("quoted.csv", &ImportOptions::default());
    assert_eq!(
        texts(quoted.frame(), "name"),
        vec![
            Some("Smith, John".into()),
            Some("Line one\nline two".into()),
            Some("He said \"hi\"".into()),
            Some("plain".into()),
        ]
    );
    assert_eq!(integers(quoted.frame(), "value"), vec![Some(1), Some(2), Some(3), Some(4)]);

    let tab = import("tab.tsv", &ImportOptions::default());
    assert_eq!(tab.report().source.delimiter.as_deref(), Some("tab"));
    assert_eq!(decimals(tab.frame(), "share_pct"), vec![Some(1.5), Some(2.5)]);
    let pipe = import("pipe.csv", &ImportOptions::default());
    assert_eq!(pipe.report().source.delimiter.as_deref(), Some("pipe"));
    let crlf = import("crlf.csv", &ImportOptions::default());
    assert_eq!(integers(crlf.frame(), "value"), vec![Some(1), Some(2)]);

    // Semicolon files with decimal commas: detected, shown, and reversible.
    let comma = import("decimal_comma.csv", &ImportOptions::default());
    let src = &comma.report().source;
    assert_eq!(src.delimiter.as_deref(), Some("semicolon"));
    assert_eq!(src.decimal_separator.as_deref(), Some("comma"));
    assert!(
        src.decimal_note
            .as_deref()
            .is_some_and(|n| n.starts_with("decimal comma: the delimiter is a semicolon"))
    );
    assert_eq!(decimals(comma.frame(), "rate"), vec![Some(12.5), Some(7.25), Some(-0.5)]);
    let point = import(
        "decimal_comma.csv",
        &ImportOptions { decimal: DecimalChoice::Point, ..ImportOptions::default() },
    );
    assert_eq!(point.report().source.decimal_separator.as_deref(), Some("point"));
    assert_eq!(point.report().columns[1].column_type, ColumnType::Text);
}

#[test]
fn numbers_are_read_strictly() {
    // (cell, decimal comma, expected value); None means "not a number".
    let cases: &[(&str, bool, Option<f64>)] = &[
        ("12", false, Some(12.0)),
        (" -7 ", false, Some(-7.0)),
        ("+3", false, Some(3.0)),
        ("12.5", false, Some(12.5)),
        (".5", false, Some(0.5)),
        ("1e3", false, Some(1000.0)),
        ("-2.5E-2", false, Some(-0.025)),
        ("12,5", true, Some(12.5)),
        ("0.1", false, Some(0.1)),
        ("0.30000000000000004", false, Some(0.300_000_000_000_000_04)),
        ("", false, None),
        ("12,5", false, None),
        ("12.5", true, None),
        ("1,234.5", false, None),
        ("NaN", false, None),
        ("inf", false, None),
        ("1e999", false, None),
        ("12%", false, None),
        ("-", false, None),
        ("007", false, None),
        ("1234567890123456", false, None),
    ];
    for &(cell, comma, expected) in cases {
        assert_eq!(read_number(cell, comma), expected, "{cell:?}");
    }
    // The fast decimal path agrees with the standard library's correctly rounded parse.
    let mut state = 0x2545_f491_4f6c_dd1d_u64;
    for _ in 0..20_000 {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        let text = format!(
            "{}.{:0w$}",
            state % 1_000_000,
            (state >> 20) % 1_000_000_000,
            w = 1 + (state >> 50) as usize % 9
        );
        assert_eq!(read_number(&text, false), text.parse::<f64>().ok(), "{text}");
    }
}

/// Builds a CSV of about 6 MB with quoted fields holding delimiters and line breaks.
fn big_csv(stray_quote: bool) -> Vec<u8> {
    let mut out = String::from("district_code,name,residents,rate,note\n");
    for i in 0..110_000u32 {
        let note = if i % 7 == 0 { format!("\"multi\nline, {i}\"") } else { format!("n{i}") };
        let name = if stray_quote && i == 100 { "Bob's 5\" pipe".to_owned() } else { format!("Area {i}") };
        out.push_str(&format!("D{i:06},{name},{},{}.{:02},{note}\n", 1000 + i % 977, i % 50, i % 100));
    }
    out.into_bytes()
}

#[test]
fn parallel_reading_matches_sequential_reading() {
    for stray in [false, true] {
        let bytes = big_csv(stray);
        assert!(bytes.len() > 4 * 1024 * 1024);
        let one = import_bytes(&bytes, "big.csv", &ImportOptions { threads: 1, ..ImportOptions::default() })
            .expect("one thread");
        let four = import_bytes(&bytes, "big.csv", &ImportOptions { threads: 4, ..ImportOptions::default() })
            .expect("four threads");
        assert_eq!(one.report(), four.report());
        assert!(same_frame(one.frame(), four.frame()));
        assert_eq!(one.report().rows, 110_000);
        assert_eq!(texts(four.frame(), "note")[7].as_deref(), Some("multi\nline, 7"));
        assert_eq!(decimals(four.frame(), "rate")[109_999], Some(49.99));
    }
}

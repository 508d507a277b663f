//! Workbooks: sheet choice, formulas, dates, and the zip-bomb guard (a ~1 MB workbook that
//! would expand past 1 GB, built here from a hand-made deflate stream).

use std::io::{Cursor, Read, Write};

use rust_xlsxwriter::{ExcelDateTime, Format, Formula, Workbook};
use wardcast_contract::dataset::{ColumnType, ProblemCell, ProblemKind};
use wardcast_store::{ImportOptions, Limits, ZipLimits, import_bytes};

use crate::common::{decimals, integers, texts};

/// A two-sheet workbook: "Districts" with a formula column and a date, "Budgets" plain.
fn workbook() -> Vec<u8> {
    let mut wb = Workbook::new();
    let ws = wb.add_worksheet();
    ws.set_name("Districts").expect("name");
    for (c, h) in ["district_code", "residents", "assaults", "doubled", "surveyed"].iter().enumerate() {
        ws.write_string(0, c as u16, *h).expect("header");
    }
    let date = Format::new().set_num_format("yyyy-mm-dd");
    let rows = [("LK-01", 19730.0, 87.0), ("LK-02", 8870.0, 78.0), ("LK-03", 12080.0, 77.0)];
    for (i, (code, residents, assaults)) in rows.iter().enumerate() {
        let r = i as u32 + 1;
        ws.write_string(r, 0, *code).expect("code");
        ws.write_number(r, 1, *residents).expect("residents");
        ws.write_number(r, 2, *assaults).expect("assaults");
        // The saved result is what the importer reads; the formula is reported.
        let formula = Formula::new(format!("=C{}*2", r + 1)).set_result(format!("{}", assaults * 2.0));
        ws.write_formula(r, 3, formula).expect("formula");
        let day = ExcelDateTime::from_ymd(2025, 3, 10 + i as u8).expect("date");
        ws.write_datetime_with_format(r, 4, &day, &date).expect("date");
    }
    let ws2 = wb.add_worksheet();
    ws2.set_name("Budgets").expect("name");
    ws2.write_string(0, 0, "district_code").expect("h");
    ws2.write_string(0, 1, "programme_budget").expect("h");
    ws2.write_string(1, 0, "LK-01").expect("v");
    ws2.write_number(1, 1, 115_850.0).expect("v");
    ws2.write_string(2, 0, "LK-02").expect("v");
    ws2.write_number(2, 1, 69_150.5).expect("v");
    wb.save_to_buffer().expect("save workbook")
}

#[test]
fn first_sheet_by_default_with_formulas_reported() {
    let bytes = workbook();
    let staged = import_bytes(&bytes, "larkmoor.xlsx", &ImportOptions::default()).expect("import");
    let r = staged.report();
    assert_eq!(r.source.format, "xlsx");
    assert_eq!(r.source.sheet.as_deref(), Some("Districts"));
    assert_eq!(r.source.sheets, vec!["Districts".to_owned(), "Budgets".to_owned()]);
    assert_eq!(
        texts(staged.frame(), "district_code"),
        vec![Some("LK-01".into()), Some("LK-02".into()), Some("LK-03".into())]
    );
    assert_eq!(integers(staged.frame(), "residents"), vec![Some(19730), Some(8870), Some(12080)]);
    assert_eq!(integers(staged.frame(), "doubled"), vec![Some(174), Some(156), Some(154)]);
    let f = r.problems.iter().find(|p| p.kind == ProblemKind::Formula).expect("formula problem");
    assert_eq!(f.column, "doubled");
    assert_eq!(
        f.message,
        "column \"doubled\" has 3 cells holding formulas; the values used are the results the spreadsheet last saved"
    );
    assert_eq!(
        f.examples,
        vec![
            ProblemCell { row: 2, value: "=C2*2".into() },
            ProblemCell { row: 3, value: "=C3*2".into() },
            ProblemCell { row: 4, value: "=C4*2".into() },
        ]
    );
    assert!(!f.blocks_saving && r.can_save);
    // Dates are kept as text, with a note.
    assert_eq!(texts(staged.frame(), "surveyed")[0].as_deref(), Some("2025-03-10"));
    assert!(
        r.notes
            .contains(&"column \"surveyed\" holds dates; they are kept as text (year-month-day)".to_owned())
    );
}

#[test]
fn a_sheet_can_be_chosen() {
    let bytes = workbook();
    let options = ImportOptions { sheet: Some("Budgets".into()), ..ImportOptions::default() };
    let staged = import_bytes(&bytes, "larkmoor.xlsx", &options).expect("import");
    assert_eq!(staged.report().source.sheet.as_deref(), Some("Budgets"));
    assert_eq!(staged.report().columns[1].column_type, ColumnType::Decimal);
    assert_eq!(decimals(staged.frame(), "programme_budget"), vec![Some(115_850.0), Some(69_150.5)]);
    let missing = ImportOptions { sheet: Some("Nope".into()), ..ImportOptions::default() };
    assert_eq!(
        import_bytes(&bytes, "larkmoor.xlsx", &missing).err().map(|e| e.to_string()).as_deref(),
        Some("the workbook has no sheet named \"Nope\"; its sheets are: Districts, Budgets")
    );
}

#[test]
fn damaged_workbooks_are_refused() {
    let mut bytes = workbook();
    // Keep the zip signature but cut the container short: no central directory.
    bytes.truncate(200);
    assert_eq!(
        import_bytes(&bytes, "cut.xlsx", &ImportOptions::default()).err().map(|e| e.to_string()).as_deref(),
        Some("the workbook could not be read: the zip container has no central directory")
    );
}

// ---- The zip bomb ----

/// Writes bits least-significant first, as deflate does (RFC 1951, section 3.1.1).
#[derive(Default)]
struct Bits {
    out: Vec<u8>,
    acc: u64,
    n: u32,
}

impl Bits {
    fn put(&mut self, value: u64, count: u32) {
        self.acc |= value << self.n;
        self.n += count;
        while self.n >= 8 {
            self.out.push(self.acc as u8);
            self.acc >>= 8;
            self.n -= 8;
        }
    }

    /// A Huffman code goes most-significant bit first (RFC 1951, section 3.1.1).
    fn code(&mut self, code: u64, len: u32) {
        let reversed = (0..len).fold(0, |r, i| r | (((code >> i) & 1) << (len - 1 - i)));
        self.put(reversed, len);
    }

    fn finish(mut self) -> Vec<u8> {
        if self.n > 0 {
            self.out.push(self.acc as u8);
        }
        self.out
    }
}

/// One final dynamic-Huffman block inflating to `1 + 258 * repeats` zero bytes: a literal
/// zero, then `repeats` copies of (length 258, distance 1) at two bits each, so the
/// stream is about 1/1032 of its output. Code lengths follow RFC 1951, section 3.2.7.
fn zero_deflate(repeats: u64) -> Vec<u8> {
    let mut b = Bits::default();
    b.put(1, 1); // BFINAL
    b.put(2, 2); // BTYPE = dynamic Huffman
    b.put(29, 5); // HLIT: 286 literal/length codes
    b.put(0, 5); // HDIST: 1 distance code
    b.put(14, 4); // HCLEN: 18 code-length codes
    // Code-length code lengths in the RFC's order 16,17,18,0,8,7,9,6,10,5,11,4,12,3,13,2,14,1:
    // symbol 18 gets 1 bit (code 0), symbols 1 and 2 get 2 bits (codes 10 and 11).
    for len in [0, 0, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2, 0, 2] {
        b.put(len, 3);
    }
    let (sym1, sym2, sym18) = ((0b10, 2), (0b11, 2), (0b0, 1));
    // Literal/length lengths: 0 -> 2, 1..=255 -> 0, 256 -> 2, 257..=284 -> 0, 285 -> 1.
    b.code(sym2.0, sym2.1);
    b.code(sym18.0, sym18.1);
    b.put(138 - 11, 7);
    b.code(sym18.0, sym18.1);
    b.put(117 - 11, 7);
    b.code(sym2.0, sym2.1);
    b.code(sym18.0, sym18.1);
    b.put(28 - 11, 7);
    b.code(sym1.0, sym1.1);
    // Distance lengths: symbol 0 -> 1 (distance 1).
    b.code(sym1.0, sym1.1);
    // Canonical codes: 285 -> 0, literal 0 -> 10, end of block -> 11; distance 0 -> 0.
    b.code(0b10, 2);
    for _ in 0..repeats {
        b.code(0, 1);
        b.code(0, 1);
    }
    b.code(0b11, 2);
    b.finish()
}

/// CRC-32 (IEEE, reflected) of `n` zero bytes. The register update for a zero byte is linear
/// over GF(2), so it is raised to the n-th power by repeated squaring.
fn crc32_of_zeros(n: u64) -> u32 {
    fn step(mut c: u32) -> u32 {
        for _ in 0..8 {
            c = if c & 1 == 1 { (c >> 1) ^ 0xEDB8_8320 } else { c >> 1 };
        }
        c
    }
    fn apply(m: &[u32; 32], v: u32) -> u32 {
        (0..32).filter(|i| v >> i & 1 == 1).fold(0, |acc, i| acc ^ m[i])
    }
    fn mul(a: &[u32; 32], b: &[u32; 32]) -> [u32; 32] {
        std::array::from_fn(|i| apply(a, b[i]))
    }
    let mut base: [u32; 32] = std::array::from_fn(|i| step(1 << i));
    let mut result: [u32; 32] = std::array::from_fn(|i| 1 << i);
    let mut e = n;
    while e > 0 {
        if e & 1 == 1 {
            result = mul(&base, &result);
        }
        base = mul(&base, &base);
        e >>= 1;
    }
    !apply(&result, 0xFFFF_FFFF)
}

/// A one-entry zip file, written by hand, holding a deflated entry of `repeats` blocks of zeros.
fn zip_with_zero_entry(name: &str, repeats: u64) -> Vec<u8> {
    let data = zero_deflate(repeats);
    let size = 1 + 258 * repeats;
    assert!(size < u64::from(u32::MAX), "keeps to the classic (non-zip64) format");
    let crc = crc32_of_zeros(size);
    let mut out = Vec::new();
    let header = |out: &mut Vec<u8>, central: bool| {
        out.extend(if central { [0x50, 0x4b, 0x01, 0x02] } else { [0x50, 0x4b, 0x03, 0x04] });
        if central {
            out.extend(20u16.to_le_bytes()); // made by
        }
        out.extend(20u16.to_le_bytes()); // version needed
        out.extend(0u16.to_le_bytes()); // flags
        out.extend(8u16.to_le_bytes()); // deflate
        out.extend(0u32.to_le_bytes()); // time and date
        out.extend(crc.to_le_bytes());
        out.extend((data.len() as u32).to_le_bytes());
        out.extend((size as u32).to_le_bytes());
        out.extend((name.len() as u16).to_le_bytes());
        out.extend(0u16.to_le_bytes()); // extra length
        if central {
            out.extend([0u8; 8]); // comment length, disk, internal attributes
            out.extend(0u32.to_le_bytes()); // external attributes
            out.extend(0u32.to_le_bytes()); // local header offset
        }
        out.extend(name.as_bytes());
    };
    header(&mut out, false);
    out.extend(&data);
    let cd_start = out.len();
    header(&mut out, true);
    let cd_len = out.len() - cd_start;
    out.extend([0x50, 0x4b, 0x05, 0x06, 0, 0, 0, 0]);
    out.extend(1u16.to_le_bytes());
    out.extend(1u16.to_le_bytes());
    out.extend((cd_len as u32).to_le_bytes());
    out.extend((cd_start as u32).to_le_bytes());
    out.extend(0u16.to_le_bytes());
    out
}

/// A real workbook whose first worksheet is replaced by the zero entry (copied raw with the
/// zip crate, so nothing is decompressed while building it).
fn bomb_workbook(repeats: u64) -> Vec<u8> {
    let real = workbook();
    let mut source = zip::ZipArchive::new(Cursor::new(real)).expect("workbook zip");
    let bomb = zip_with_zero_entry("bomb", repeats);
    let mut bomb_zip = zip::ZipArchive::new(Cursor::new(bomb)).expect("bomb zip");
    let mut writer = zip::ZipWriter::new(Cursor::new(Vec::new()));
    for i in 0..source.len() {
        let file = source.by_index_raw(i).expect("entry");
        if file.name().is_ok_and(|n| n == "xl/worksheets/sheet1.xml") {
            continue;
        }
        writer.raw_copy_file(file).expect("copy");
    }
    writer
        .raw_copy_file_rename(bomb_zip.by_index_raw(0).expect("bomb entry"), "xl/worksheets/sheet1.xml")
        .expect("copy bomb");
    writer.finish().expect("finish").into_inner()
}

#[test]
fn hand_made_deflate_stream_inflates_to_zeros() {
    // A small instance read back in full by the zip crate, which checks the CRC at the end.
    let bytes = zip_with_zero_entry("small", 1000);
    let mut archive = zip::ZipArchive::new(Cursor::new(bytes)).expect("zip");
    let mut out = Vec::new();
    archive.by_index(0).expect("entry").read_to_end(&mut out).expect("inflate and CRC check");
    assert_eq!(out.len(), 1 + 258 * 1000);
    assert!(out.iter().all(|&b| b == 0));
    // Known value: the CRC-32 of one zero byte is 0xD202EF8D (from memory; Python's
    // zlib.crc32(b"\x00") gives the same, and the zip crate verified the longer run above).
    assert_eq!(crc32_of_zeros(1), 0xD202_EF8D);
}

#[test]
fn zip_bomb_is_refused_before_decompressing() {
    let bytes = bomb_workbook(4_400_000);
    assert!(bytes.len() < 1_300_000, "the workbook is about 1 MB: {} bytes", bytes.len());
    let declared: u64 = {
        let mut a = zip::ZipArchive::new(Cursor::new(bytes.clone())).expect("zip");
        (0..a.len()).map(|i| a.by_index_raw(i).map(|f| f.size()).unwrap_or(0)).sum()
    };
    assert!(declared > 1_000_000_000, "it expands past 1 GB: {declared}");
    let start = std::time::Instant::now();
    let err = import_bytes(&bytes, "bomb.xlsx", &ImportOptions::default()).err().map(|e| e.to_string());
    assert_eq!(
        err.as_deref(),
        Some("the workbook would unpack to 1.1 GB, more than the 512.0 MB allowed; it was not opened")
    );
    // Refused from the central directory alone: far quicker than inflating 1 GB.
    assert!(start.elapsed().as_secs() < 5);
}

#[test]
fn zip_ratio_and_entry_limits() {
    // About 100 MB from about 100 KB: under the size limit, over the ratio limit.
    let bytes = bomb_workbook(400_000);
    let (size, packed) = {
        let mut a = zip::ZipArchive::new(Cursor::new(bytes.clone())).expect("zip");
        let f = a.by_name("xl/worksheets/sheet1.xml").expect("sheet");
        (f.size(), f.compressed_size())
    };
    let ratio = size / packed;
    assert!(ratio > 1000, "{ratio}");
    let err = import_bytes(&bytes, "bomb.xlsx", &ImportOptions::default()).err().map(|e| e.to_string());
    assert_eq!(
        err,
        Some(format!(
            "the packed file \"xl/worksheets/sheet1.xml\" in the workbook would expand {ratio} times, more than the 200 times allowed; it was not opened"
        ))
    );
    // Too many entries, with a low limit on an ordinary workbook.
    let ordinary = workbook();
    let entries = zip::ZipArchive::new(Cursor::new(ordinary.clone())).expect("zip").len();
    let limits = Limits { zip: ZipLimits { max_entries: 3, ..ZipLimits::default() }, ..Limits::default() };
    let err = import_bytes(&ordinary, "w.xlsx", &ImportOptions { limits, ..ImportOptions::default() })
        .err()
        .map(|e| e.to_string());
    assert_eq!(
        err,
        Some(format!(
            "the workbook holds {entries} packed files, more than the 3 allowed; it was not opened"
        ))
    );
}

#[test]
fn a_plain_zip_that_is_not_a_workbook_is_refused() {
    let mut w = zip::ZipWriter::new(Cursor::new(Vec::new()));
    w.start_file("notes.txt", zip::write::SimpleFileOptions::default()).expect("start");
    w.write_all(b"hello").expect("write");
    let bytes = w.finish().expect("finish").into_inner();
    let err = import_bytes(&bytes, "notes.zip", &ImportOptions::default()).err().map(|e| e.to_string());
    assert!(err.as_deref().is_some_and(|e| e.starts_with("the workbook could not be read: ")), "{err:?}");
}

//! Damaged input never panics: seeded random mutations of every CSV fixture and of a
//! workbook are imported, and each either imports or is refused with a message.

use wardcast_store::{Encoding, ImportOptions, import_bytes};

use crate::common::fixture;

/// xorshift64, fixed seed: the same mutations on every run.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// One random edit: flip a byte, insert a troublesome byte, delete a byte, or truncate.
fn mutate(bytes: &mut Vec<u8>, rng: &mut Rng) {
    const NASTY: &[u8] = b"\"\",;\t|\r\n\xff\xfe\xef\xbb\xbf\x00-.e";
    match rng.below(4) {
        0 if !bytes.is_empty() => {
            let i = rng.below(bytes.len());
            bytes[i] ^= 1 << rng.below(8);
        }
        1 => {
            let i = rng.below(bytes.len() + 1);
            bytes.insert(i, NASTY[rng.below(NASTY.len())]);
        }
        2 if !bytes.is_empty() => {
            let i = rng.below(bytes.len());
            bytes.remove(i);
        }
        _ => {
            let n = rng.below(bytes.len() + 1);
            bytes.truncate(n);
        }
    }
}

#[test]
fn mutated_csv_files_never_panic() {
    let mut rng = Rng(0x5EED_0000_0000_0001);
    let (mut accepted, mut refused) = (0usize, 0usize);
    let names: Vec<String> = std::fs::read_dir(fixture(""))
        .expect("fixtures")
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".csv") || n.ends_with(".tsv"))
        .collect();
    assert!(names.len() >= 20);
    for name in &names {
        let original = std::fs::read(fixture(name)).expect("fixture");
        for round in 0..40 {
            let mut bytes = original.clone();
            for _ in 0..=rng.below(4) {
                mutate(&mut bytes, &mut rng);
            }
            let encoding = if round % 5 == 0 { Encoding::Latin1 } else { Encoding::Auto };
            match import_bytes(&bytes, name, &ImportOptions { encoding, ..ImportOptions::default() }) {
                Ok(staged) => {
                    accepted += 1;
                    assert_eq!(staged.frame().height(), staged.report().rows);
                    let json = serde_json::to_string(staged.report()).expect("report serialises");
                    assert!(!json.contains("NaN"));
                }
                Err(e) => {
                    refused += 1;
                    assert!(!e.to_string().is_empty());
                }
            }
        }
    }
    assert!(accepted > 100 && refused > 100, "accepted {accepted}, refused {refused}");
}

#[test]
fn mutated_workbooks_never_panic() {
    let mut wb = rust_xlsxwriter::Workbook::new();
    let ws = wb.add_worksheet();
    for r in 0..30u32 {
        ws.write_string(r, 0, if r == 0 { "code".to_owned() } else { format!("A{r}") }).expect("cell");
        if r == 0 {
            ws.write_string(0, 1, "value").expect("cell");
        } else {
            ws.write_number(r, 1, f64::from(r) * 1.5).expect("cell");
        }
    }
    let original = wb.save_to_buffer().expect("workbook");
    let mut rng = Rng(0x5EED_0000_0000_0002);
    let mut refused = 0usize;
    for _ in 0..150 {
        let mut bytes = original.clone();
        // Keep the zip signature so the workbook path is taken.
        for _ in 0..=rng.below(6) {
            let i = 4 + rng.below(bytes.len() - 4);
            bytes[i] ^= 1 << rng.below(8);
        }
        if import_bytes(&bytes, "w.xlsx", &ImportOptions::default()).is_err() {
            refused += 1;
        }
    }
    assert!(refused > 0);
}

//! Cell classification and number parsing, and the inference of column types and roles.
//!
//! A cell is missing when it is empty after trimming spaces. A number is an optional sign,
//! digits with at most one decimal separator (a point, or a comma when the decimal comma
//! was chosen) and an optional exponent. Nothing else is read as a number: no thousands
//! separators, no percent signs, no `NaN` or `inf`; such cells are text and are reported.

use wardcast_contract::dataset::{ColumnRole, ColumnType};

/// The class of one cell.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum CellClass {
    /// Empty after trimming spaces.
    Missing,
    /// A whole number without leading zeros, at most 15 digits (exact in a double).
    Int,
    /// A whole number with leading zeros, like the code `007`.
    IntLeadingZero,
    /// A whole number too long to hold exactly (more than 15 digits).
    LongDigits,
    /// A number with a fractional part or an exponent.
    Decimal,
    /// Anything else.
    Text,
}

/// Trims ASCII spaces and tabs from both ends.
pub(crate) fn trim_blank(s: &str) -> &str {
    s.trim_matches(|c| c == ' ' || c == '\t')
}

const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18,
    1e19, 1e20, 1e21, 1e22,
];

/// Classifies a cell and, for numbers, returns its value.
///
/// The fast path for plain decimals (at most 15 significant digits, at most 22 fractional
/// digits, no exponent) divides the digits, read as an exact integer, by an exact power of
/// ten; IEEE division is correctly rounded, so the result equals the standard parser's.
pub(crate) fn classify(cell: &str, decimal_comma: bool) -> (CellClass, f64) {
    let s = trim_blank(cell);
    let b = s.as_bytes();
    if b.is_empty() {
        return (CellClass::Missing, 0.0);
    }
    let sep = if decimal_comma { b',' } else { b'.' };
    let mut i = 0;
    let negative = match b[0] {
        b'-' => {
            i = 1;
            true
        }
        b'+' => {
            i = 1;
            false
        }
        _ => false,
    };
    let int_start = i;
    let mut mantissa: u64 = 0;
    let mut digits = 0usize; // significant digits accumulated (leading zeros skipped)
    while i < b.len() && b[i].is_ascii_digit() {
        let d = u64::from(b[i] - b'0');
        if digits > 0 || d != 0 {
            digits += 1;
            if digits <= 19 {
                mantissa = mantissa * 10 + d;
            }
        }
        i += 1;
    }
    let int_len = i - int_start;
    if i == b.len() {
        if int_len == 0 {
            return (CellClass::Text, 0.0);
        }
        if int_len > 1 && b[int_start] == b'0' {
            return (CellClass::IntLeadingZero, 0.0);
        }
        if digits > 15 {
            return (CellClass::LongDigits, 0.0);
        }
        let v = mantissa as f64;
        return (CellClass::Int, if negative { -v } else { v });
    }
    let mut frac_len = 0usize;
    if b[i] == sep {
        i += 1;
        let frac_start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            let d = u64::from(b[i] - b'0');
            if digits > 0 || d != 0 {
                digits += 1;
                if digits <= 19 {
                    mantissa = mantissa * 10 + d;
                }
            }
            i += 1;
        }
        frac_len = i - frac_start;
    }
    if int_len + frac_len == 0 {
        return (CellClass::Text, 0.0);
    }
    let mut has_exponent = false;
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        has_exponent = true;
        i += 1;
        if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
            i += 1;
        }
        let exp_start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        if i == exp_start {
            return (CellClass::Text, 0.0);
        }
    }
    if i != b.len() {
        return (CellClass::Text, 0.0);
    }
    if !has_exponent && digits <= 15 && frac_len <= 22 {
        let v = mantissa as f64 / POW10[frac_len];
        return (CellClass::Decimal, if negative { -v } else { v });
    }
    // General path: the standard parser on the (point-separated) text.
    let parsed = if decimal_comma { s.replacen(',', ".", 1).parse::<f64>() } else { s.parse::<f64>() };
    match parsed {
        Ok(v) if v.is_finite() => (CellClass::Decimal, v),
        _ => (CellClass::Text, 0.0),
    }
}

/// Reads a cell as a number the way the importer does: `None` for missing cells and for
/// anything that is not a plain number (see the module notes).
pub fn read_number(cell: &str, decimal_comma: bool) -> Option<f64> {
    match classify(cell, decimal_comma) {
        (CellClass::Int | CellClass::Decimal, v) => Some(v),
        _ => None,
    }
}

/// Counts of cell classes in one column.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct ClassCounts {
    pub missing: usize,
    pub int: usize,
    pub leading_zero: usize,
    pub long_digits: usize,
    pub decimal: usize,
    pub text: usize,
}

impl ClassCounts {
    pub fn add(&mut self, class: CellClass) {
        match class {
            CellClass::Missing => self.missing += 1,
            CellClass::Int => self.int += 1,
            CellClass::IntLeadingZero => self.leading_zero += 1,
            CellClass::LongDigits => self.long_digits += 1,
            CellClass::Decimal => self.decimal += 1,
            CellClass::Text => self.text += 1,
        }
    }

    pub fn merge(&mut self, o: &ClassCounts) {
        self.missing += o.missing;
        self.int += o.int;
        self.leading_zero += o.leading_zero;
        self.long_digits += o.long_digits;
        self.decimal += o.decimal;
        self.text += o.text;
    }

    /// Cells that are numbers usable as such.
    pub fn numbers(&self) -> usize {
        self.int + self.decimal
    }

    /// Cells that are not usable as numbers (text, codes with leading zeros, long digit runs).
    pub fn non_numbers(&self) -> usize {
        self.text + self.leading_zero + self.long_digits
    }
}

/// Infers a column's type from its cell counts, with the reason in words.
pub(crate) fn infer_type(c: &ClassCounts) -> (ColumnType, String) {
    let present = c.numbers() + c.non_numbers();
    if present == 0 {
        return (ColumnType::Text, "no values".into());
    }
    if c.non_numbers() == 0 {
        return if c.decimal > 0 {
            (ColumnType::Decimal, "every value is a number, some with a fractional part".into())
        } else {
            (ColumnType::Integer, "every value is a whole number".into())
        };
    }
    if c.leading_zero > 0 && c.text == 0 && c.decimal == 0 {
        return (ColumnType::Text, "whole numbers with leading zeros, kept as text codes".into());
    }
    if c.long_digits > 0 && c.text == 0 && c.decimal == 0 {
        return (ColumnType::Text, "digit strings too long to hold exactly, kept as text codes".into());
    }
    if c.numbers() > c.non_numbers() {
        let ty = if c.decimal > 0 { ColumnType::Decimal } else { ColumnType::Integer };
        return (
            ty,
            format!(
                "{} of {present} values are numbers; the other {} are listed as problems",
                c.numbers(),
                c.non_numbers()
            ),
        );
    }
    (ColumnType::Text, format!("{} of {present} values are not numbers", c.non_numbers()))
}

/// Whether a name looks like a region key.
pub(crate) fn key_name_score(name: &str) -> u8 {
    let n = normalise(name);
    let words: Vec<&str> = n.split('_').filter(|w| !w.is_empty()).collect();
    let has = |w: &str| words.contains(&w);
    if has("key") || has("code") || has("geoid") || has("fips") {
        3
    } else if has("id") {
        2
    } else if [
        "district",
        "ward",
        "area",
        "region",
        "zone",
        "tract",
        "neighbourhood",
        "neighborhood",
        "precinct",
        "beat",
    ]
    .iter()
    .any(|w| has(w))
        && words.len() == 1
    {
        1
    } else {
        0
    }
}

/// Lower-case with runs of non-alphanumerics turned into `_`.
fn normalise(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for ch in name.chars() {
        if ch.is_alphanumeric() {
            out.extend(ch.to_lowercase());
        } else if !out.ends_with('_') {
            out.push('_');
        }
    }
    out
}

/// Value facts used for role inference.
#[derive(Debug, Clone, Copy)]
pub(crate) struct ValueFacts {
    pub column_type: ColumnType,
    pub min: Option<f64>,
}

/// Infers a column's role from its name and values, with the reason in words.
pub(crate) fn infer_role(name: &str, is_key: bool, facts: ValueFacts) -> (ColumnRole, String) {
    if is_key {
        return (ColumnRole::Key, "the region key".into());
    }
    if facts.column_type == ColumnType::Text {
        return (ColumnRole::Group, "text values: a group or category".into());
    }
    let n = normalise(name);
    let words: Vec<&str> = n.split('_').filter(|w| !w.is_empty()).collect();
    let has = |list: &[&str]| words.iter().any(|w| list.contains(w));
    let whole = facts.column_type == ColumnType::Integer;
    if has(&["rate", "rates"]) {
        return (ColumnRole::Rate, "the name says it is a rate".into());
    }
    if has(&["per"]) {
        return (ColumnRole::Indicator, "the name says it is a per-unit measure: an indicator".into());
    }
    if has(&["population", "pop", "residents", "inhabitants", "households", "persons", "people"]) {
        return (ColumnRole::Population, "the name says it is a population".into());
    }
    if has(&[
        "count",
        "counts",
        "incidents",
        "cases",
        "calls",
        "events",
        "number",
        "num",
        "n",
        "assaults",
        "crimes",
        "offences",
        "offenses",
        "injuries",
        "fires",
        "deaths",
        "arrests",
        "burglaries",
        "thefts",
        "collisions",
        "overdoses",
    ]) {
        return (ColumnRole::Count, "the name says it is a count".into());
    }
    if has(&["pct", "percent", "share", "proportion", "ratio", "index", "median", "mean", "avg", "average"]) {
        return (ColumnRole::Indicator, "the name says it is a measured indicator".into());
    }
    if whole && facts.min.is_some_and(|m| m >= 0.0) {
        return (
            ColumnRole::Indicator,
            "non-negative whole numbers; choose count or population if it is one".into(),
        );
    }
    (ColumnRole::Indicator, "numeric values: an indicator".into())
}

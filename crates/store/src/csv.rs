//! The CSV reader: delimiter sniffing, decimal-comma detection, and a quote-aware record
//! parser that can run on several parts of a file at once.
//!
//! Quoting follows RFC 4180: a field that starts with a double quote runs to the matching
//! closing quote, may hold delimiters and line breaks, and writes a quote as two quotes.
//! A quote inside an unquoted field is kept as an ordinary character. Lines end with LF,
//! CRLF or a lone CR. A line with nothing on it is blank: it holds no data row, but it
//! keeps its place in the row numbering.

use std::borrow::Cow;

use crate::error::{Result, StoreError};
use crate::source::{RecordSource, Row, Span};
use crate::text::line_of;

/// The field delimiter of a CSV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delimiter {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// A tab character.
    Tab,
    /// `|`
    Pipe,
}

impl Delimiter {
    /// All delimiters, in the order ties are broken.
    pub const ALL: [Delimiter; 4] = [Delimiter::Comma, Delimiter::Semicolon, Delimiter::Tab, Delimiter::Pipe];

    /// The byte.
    pub fn byte(self) -> u8 {
        match self {
            Delimiter::Comma => b',',
            Delimiter::Semicolon => b';',
            Delimiter::Tab => b'\t',
            Delimiter::Pipe => b'|',
        }
    }

    /// The word used in reports.
    pub fn name(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Pipe => "pipe",
        }
    }

    /// Parses a word (`comma`, `semicolon`, `tab`, `pipe`) or the character itself.
    pub fn parse(text: &str) -> Result<Self> {
        match text.trim_matches(' ').to_ascii_lowercase().as_str() {
            "comma" | "," => Ok(Delimiter::Comma),
            "semicolon" | ";" => Ok(Delimiter::Semicolon),
            "tab" | "\t" | "\\t" => Ok(Delimiter::Tab),
            "pipe" | "|" => Ok(Delimiter::Pipe),
            other => Err(StoreError::BadChoice {
                reason: format!(
                    "{other:?} is not a delimiter wardcast reads; use comma, semicolon, tab or pipe"
                ),
            }),
        }
    }
}

/// The decimal separator choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DecimalChoice {
    /// A point, unless the delimiter is a semicolon and the numbers use a comma.
    #[default]
    Auto,
    /// Always a point.
    Point,
    /// A comma (only with a semicolon, tab or pipe delimiter).
    Comma,
}

/// How a record ended.
enum RecordEnd {
    /// The position after the record's line break (or the end of the text).
    At(usize),
}

/// A structural error at a byte offset.
enum ParseFault {
    Unclosed { open: usize },
    AfterQuote { at: usize },
}

/// Parses one record starting at `pos`, filling `spans`. `pos` must be below `b.len()`.
fn parse_record(
    b: &[u8],
    mut i: usize,
    delim: u8,
    spans: &mut Vec<Span>,
) -> std::result::Result<RecordEnd, ParseFault> {
    spans.clear();
    let n = b.len();
    loop {
        if i < n && b[i] == b'"' {
            let open = i;
            i += 1;
            let start = i;
            let mut escaped = false;
            loop {
                match b[i..].iter().position(|&c| c == b'"') {
                    None => return Err(ParseFault::Unclosed { open }),
                    Some(k) => i += k,
                }
                if i + 1 < n && b[i + 1] == b'"' {
                    escaped = true;
                    i += 2;
                    continue;
                }
                break;
            }
            spans.push(Span { start, end: i, escaped });
            i += 1;
            while i < n && b[i] == b' ' && delim != b' ' {
                i += 1;
            }
            if i >= n {
                return Ok(RecordEnd::At(n));
            }
            match b[i] {
                c if c == delim => i += 1,
                b'\n' => return Ok(RecordEnd::At(i + 1)),
                b'\r' => {
                    return Ok(RecordEnd::At(if i + 1 < n && b[i + 1] == b'\n' { i + 2 } else { i + 1 }));
                }
                _ => return Err(ParseFault::AfterQuote { at: i }),
            }
        } else {
            let start = i;
            while i < n {
                let c = b[i];
                if c == delim || c == b'\n' || c == b'\r' {
                    break;
                }
                i += 1;
            }
            spans.push(Span { start, end: i, escaped: false });
            if i >= n {
                return Ok(RecordEnd::At(n));
            }
            if b[i] == delim {
                i += 1;
                continue;
            }
            if b[i] == b'\r' && i + 1 < n && b[i + 1] == b'\n' {
                return Ok(RecordEnd::At(i + 2));
            }
            return Ok(RecordEnd::At(i + 1));
        }
    }
}

fn fault_error(text: &str, fault: ParseFault) -> StoreError {
    match fault {
        ParseFault::Unclosed { open } => StoreError::UnclosedQuote { line: line_of(text.as_bytes(), open) },
        ParseFault::AfterQuote { at } => StoreError::TextAfterQuote { line: line_of(text.as_bytes(), at) },
    }
}

/// Whether a record is a blank line.
fn is_blank(spans: &[Span]) -> bool {
    spans.len() == 1 && spans[0].start == spans[0].end && !spans[0].escaped
}

/// The sniffed or chosen layout of a CSV file.
#[derive(Debug, Clone)]
pub(crate) struct Layout {
    pub delimiter: Delimiter,
    pub delimiter_note: String,
    pub decimal_comma: bool,
    pub decimal_note: String,
}

/// The number of bytes sampled for sniffing.
const SAMPLE: usize = 256 * 1024;

/// Field counts per record in the sample for one delimiter (record start, fields), and the
/// quoting fault that stopped the count, if any.
fn sample_counts(text: &str, delim: u8) -> (Vec<(usize, usize)>, Option<ParseFault>) {
    let b = text.as_bytes();
    let limit = SAMPLE.min(b.len());
    let mut spans = Vec::new();
    let mut counts = Vec::new();
    let mut pos = 0;
    while pos < b.len() && pos < limit {
        match parse_record(b, pos, delim, &mut spans) {
            Ok(RecordEnd::At(next)) => {
                if !is_blank(&spans) {
                    counts.push((pos, spans.len()));
                }
                pos = next;
            }
            Err(fault) => return (counts, Some(fault)),
        }
    }
    (counts, None)
}

/// Sniffs the delimiter and the decimal separator.
pub(crate) fn sniff(text: &str, delimiter: Option<Delimiter>, decimal: DecimalChoice) -> Result<Layout> {
    let (delimiter, delimiter_note) = match delimiter {
        Some(d) => (d, "chosen".to_owned()),
        None => {
            let mut best: Option<(Delimiter, usize)> = None;
            // A detail where the header itself splits is more telling than one where it does not.
            let mut detail: Option<String> = None;
            let mut weak_detail: Option<String> = None;
            let mut any_split = false;
            let mut fault = None;
            let mut plausible: Option<(Delimiter, usize, usize, usize)> = None;
            for d in Delimiter::ALL {
                let (counts, f) = sample_counts(text, d.byte());
                if fault.is_none() {
                    fault = f;
                }
                let Some(&(_, first)) = counts.first() else {
                    continue;
                };
                if counts.iter().any(|&(_, c)| c > 1) {
                    any_split = true;
                }
                let consistent = counts.iter().all(|&(_, c)| c == first);
                let matching = counts.iter().filter(|&&(_, c)| c == first).count();
                if consistent && first > 1 {
                    if best.is_none_or(|(_, f)| first > f) {
                        best = Some((d, first));
                    }
                } else if first > 1 && matching * 2 >= counts.len() && best.is_none() {
                    // Most lines agree with the header: the parse will name the rows that do not.
                    if plausible.is_none_or(|(_, _, m, n)| matching * n > m * counts.len()) {
                        plausible = Some((d, first, matching, counts.len()));
                    }
                } else if first > 1 && detail.is_none() {
                    if let Some(&(at, c)) = counts.iter().find(|&&(_, c)| c != first) {
                        detail = Some(format!(
                            "with {} the header has {first} fields but line {} has {c}",
                            d.name(),
                            line_of(text.as_bytes(), at)
                        ));
                    }
                } else if first <= 1
                    && weak_detail.is_none()
                    && let Some(&(at, c)) = counts.iter().find(|&&(_, c)| c > 1)
                {
                    weak_detail = Some(format!(
                        "with {} the header has 1 field but line {} has {c}",
                        d.name(),
                        line_of(text.as_bytes(), at)
                    ));
                }
            }
            if best.is_none()
                && let Some((d, n, m, total)) = plausible
            {
                best = Some((d, n));
                detail = Some(format!(
                    "sniffed: the header and {} of {} other sampled lines have {n} fields with a {}",
                    m - 1,
                    total - 1,
                    d.name()
                ));
            }
            match best {
                Some((d, _)) if plausible.is_some_and(|p| p.0 == d) => {
                    (d, detail.clone().unwrap_or_default())
                }
                Some((d, n)) => {
                    (d, format!("sniffed: every sampled line has {n} fields with a {}", d.name()))
                }
                None if text.trim().is_empty() => return Err(StoreError::EmptyFile),
                None if fault.is_some() && detail.is_none() && weak_detail.is_none() => {
                    return Err(fault.map_or(StoreError::NoDelimiter, |f| fault_error(text, f)));
                }
                None if !any_split => return Err(StoreError::NoDelimiter),
                None => {
                    return Err(StoreError::UnclearDelimiter {
                        detail: detail.or(weak_detail).unwrap_or_else(|| "no consistent split".to_owned()),
                    });
                }
            }
        }
    };
    let (decimal_comma, decimal_note) = match decimal {
        DecimalChoice::Point => (false, "decimal point (chosen)".to_owned()),
        DecimalChoice::Comma => {
            if delimiter == Delimiter::Comma {
                return Err(StoreError::BadChoice {
                    reason: "a decimal comma cannot be used when the delimiter is a comma".into(),
                });
            }
            (true, "decimal comma (chosen)".to_owned())
        }
        DecimalChoice::Auto => {
            if delimiter == Delimiter::Semicolon {
                let (commas, points) = decimal_styles(text, delimiter.byte());
                if commas > 0 && points == 0 {
                    (
                        true,
                        format!(
                            "decimal comma: the delimiter is a semicolon and {commas} sampled numbers are written like 12,5; choose the decimal point if the commas separate thousands"
                        ),
                    )
                } else if commas > 0 {
                    (
                        false,
                        format!(
                            "decimal point: sampled numbers use both styles ({points} like 12.5, {commas} like 12,5); choose the decimal comma if that is wrong"
                        ),
                    )
                } else {
                    (false, "decimal point: no sampled number uses a decimal comma".to_owned())
                }
            } else {
                (false, "decimal point".to_owned())
            }
        }
    };
    Ok(Layout { delimiter, delimiter_note, decimal_comma, decimal_note })
}

/// Counts sampled cells written like `12,5` and like `12.5`.
fn decimal_styles(text: &str, delim: u8) -> (usize, usize) {
    let b = text.as_bytes();
    let limit = SAMPLE.min(b.len());
    let mut spans = Vec::new();
    let (mut commas, mut points) = (0, 0);
    let mut pos = 0;
    let mut first = true;
    while pos < limit {
        let Ok(RecordEnd::At(next)) = parse_record(b, pos, delim, &mut spans) else {
            break;
        };
        if !first {
            for s in &spans {
                let cell = crate::infer::trim_blank(text.get(s.start..s.end).unwrap_or(""));
                let digits_around = |sep: char| {
                    let mut parts = cell.trim_start_matches(['-', '+']).splitn(2, sep);
                    let a = parts.next().unwrap_or("");
                    let c = parts.next();
                    matches!(c, Some(c) if !c.is_empty() && c.bytes().all(|x| x.is_ascii_digit()))
                        && a.bytes().all(|x| x.is_ascii_digit())
                };
                if digits_around(',') {
                    commas += 1;
                } else if digits_around('.') {
                    points += 1;
                }
            }
        }
        first = false;
        pos = next;
    }
    (commas, points)
}

/// A CSV text split into parts at record boundaries.
pub(crate) struct CsvSource<'a> {
    text: &'a str,
    delim: u8,
    header: Vec<String>,
    /// Byte ranges of the parts, covering the data after the header.
    parts: Vec<(usize, usize)>,
}

impl<'a> CsvSource<'a> {
    /// Reads the header and splits the rest into about `parts` parts.
    ///
    /// Split points are line breaks with an even number of quotes before them, which is
    /// where a record ends in a well-formed file; [`CsvSource::verify_parts`] checks the
    /// parse agrees, and callers fall back to one part when it does not.
    pub fn new(
        text: &'a str,
        layout: &Layout,
        parts: usize,
        max_cell: usize,
        max_columns: usize,
    ) -> Result<Self> {
        let b = text.as_bytes();
        let delim = layout.delimiter.byte();
        let mut spans = Vec::new();
        // Skip leading blank lines before the header.
        let mut pos = 0;
        let header_end = loop {
            if pos >= b.len() {
                return Err(StoreError::EmptyFile);
            }
            let RecordEnd::At(next) =
                parse_record(b, pos, delim, &mut spans).map_err(|f| fault_error(text, f))?;
            if !is_blank(&spans) {
                break next;
            }
            pos = next;
        };
        if spans.len() > max_columns {
            return Err(StoreError::TooManyColumns { found: spans.len(), limit: max_columns });
        }
        let mut header = Vec::with_capacity(spans.len());
        for (i, s) in spans.iter().enumerate() {
            if s.end - s.start > max_cell {
                return Err(StoreError::CellTooLong {
                    row: 1,
                    column: format!("column {}", i + 1),
                    bytes: s.end - s.start,
                    limit: max_cell,
                });
            }
            header.push(crate::infer::trim_blank(&span_text(text, s)).to_owned());
        }
        let start = header_end;
        let n = parts.max(1);
        let mut bounds = vec![start];
        if n > 1 && b.len() - start > 4 * 1024 * 1024 {
            let mut quotes = b[..start].iter().filter(|&&c| c == b'"').count();
            let mut scanned = start;
            for k in 1..n {
                let target = start + (b.len() - start) * k / n;
                if target <= scanned {
                    continue;
                }
                quotes += b[scanned..target].iter().filter(|&&c| c == b'"').count();
                let mut at = target;
                while at < b.len() {
                    match b[at] {
                        b'"' => quotes += 1,
                        b'\n' if quotes % 2 == 0 => break,
                        _ => {}
                    }
                    at += 1;
                }
                scanned = (at + 1).min(b.len());
                if scanned < b.len() {
                    bounds.push(scanned);
                }
            }
        }
        bounds.push(b.len());
        let parts = bounds.windows(2).map(|w| (w[0], w[1])).filter(|(a, z)| a < z).collect();
        Ok(Self { text, delim, header, parts })
    }

    /// Collapses the parts into one (used when a split did not fall on a record boundary).
    pub fn single_part(&mut self) {
        if let (Some(first), Some(last)) = (self.parts.first().copied(), self.parts.last().copied()) {
            self.parts = vec![(first.0, last.1)];
        }
    }
}

fn span_text<'t>(text: &'t str, s: &Span) -> Cow<'t, str> {
    let raw = text.get(s.start..s.end).unwrap_or("");
    if s.escaped { Cow::Owned(raw.replace("\"\"", "\"")) } else { Cow::Borrowed(raw) }
}

impl RecordSource for CsvSource<'_> {
    fn header(&self) -> &[String] {
        &self.header
    }

    fn header_row(&self) -> usize {
        1
    }

    fn parts(&self) -> usize {
        self.parts.len()
    }

    fn visit(&self, part: usize, f: &mut dyn FnMut(&Row<'_>) -> Result<()>) -> Result<bool> {
        let Some(&(start, end)) = self.parts.get(part) else {
            return Ok(true);
        };
        let b = self.text.as_bytes();
        let mut spans = Vec::with_capacity(self.header.len());
        let mut pos = start;
        while pos < end {
            let RecordEnd::At(next) = parse_record(b, pos, self.delim, &mut spans)
                .map_err(|fault| fault_error(self.text, fault))?;
            let row = Row::Csv { text: self.text, spans: &spans, offset: pos, blank: is_blank(&spans) };
            f(&row)?;
            pos = next;
        }
        Ok(pos == end)
    }

    fn line_of(&self, offset: usize) -> usize {
        line_of(self.text.as_bytes(), offset)
    }
}

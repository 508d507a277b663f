//! The brief as one self-contained HTML page: inline SVG, embedded CSS, no script, no requests.
//!
//! Every piece of text from the analysis (names, keys, the question, notes) is escaped. The
//! print stylesheet lays the page out for A4 and US Letter alike (the margins fit both) and
//! keeps tables, charts and the sign-off block from splitting across pages.

use std::fmt::Write as _;

use super::{Block, Brief, Cell, SectionKind, Table};
use crate::Result;

const CSS: &str = r#"
:root { --ink: #1d2433; --muted: #5a6475; --rule: #c9cfd8; --band: #eef2f6; --accent: #2a6f6b; --warn: #8a4b12; }
* { box-sizing: border-box; }
body { margin: 0; background: #fafbfc; color: var(--ink); font: 15px/1.55 'Noto Sans', 'DejaVu Sans', sans-serif; }
main { max-width: 60rem; margin: 0 auto; padding: 2rem 2.5rem 4rem; background: #fff; }
header.cover { border-left: 6px solid var(--accent); padding: 0.2rem 0 0.2rem 1rem; margin-bottom: 1.5rem; }
header.cover p { margin: 0.2rem 0; color: var(--muted); }
h1 { font-size: 1.7rem; margin: 0 0 0.4rem; line-height: 1.25; }
h2 { font-size: 1.25rem; margin: 2.2rem 0 0.6rem; padding-bottom: 0.2rem; border-bottom: 2px solid var(--accent); }
h3 { font-size: 1.02rem; margin: 1.3rem 0 0.4rem; color: var(--accent); }
p { margin: 0.5rem 0; }
ul { margin: 0.4rem 0 0.8rem; padding-left: 1.3rem; }
li { margin: 0.25rem 0; }
figure { margin: 1rem 0; }
figure svg { width: 100%; height: auto; display: block; }
figcaption { color: var(--muted); font-size: 0.88rem; margin-top: 0.3rem; }
.table-wrap { overflow-x: auto; margin: 0.8rem 0; }
table { border-collapse: collapse; width: 100%; font-size: 0.84rem; }
caption { text-align: left; font-weight: 600; padding: 0 0 0.3rem; }
th, td { padding: 0.28rem 0.5rem; border-bottom: 1px solid var(--rule); vertical-align: top; text-align: left; }
th { background: var(--band); font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
pre { background: var(--band); padding: 0.8rem; font-size: 0.8rem; overflow-x: auto; white-space: pre-wrap; }
section.limitations { border: 2px solid var(--warn); padding: 0 1rem 0.8rem; margin-top: 2rem; }
section.limitations h2 { border-bottom-color: var(--warn); }
section.limitations h3 { color: var(--warn); }
dl.signoff { display: grid; grid-template-columns: 22rem 1fr; gap: 0.9rem 1rem; border: 1px solid var(--rule); padding: 1rem; }
dl.signoff dt { font-weight: 600; }
dl.signoff dd { margin: 0; border-bottom: 1px solid var(--ink); min-height: 1.6rem; }
footer { margin-top: 2.5rem; color: var(--muted); font-size: 0.8rem; }
@page { size: auto; margin: 18mm 16mm 20mm; }
@media print {
  body { background: #fff; font-size: 10.5pt; }
  main { max-width: none; padding: 0; }
  h2 { break-after: avoid; }
  h3 { break-after: avoid; }
  table, figure, dl.signoff, pre, .table-wrap { break-inside: avoid; }
  .table-wrap { overflow: visible; }
  tr { break-inside: avoid; }
  section.limitations { break-inside: auto; }
}
"#;

/// Escapes text for HTML element content and attribute values.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Where the standalone HTML brief takes its fonts from.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Fonts {
    /// The reader's installed fonts (Noto Sans, DejaVu Sans or any sans-serif); a small file.
    #[default]
    System,
    /// DejaVu Sans and DejaVu Sans Bold embedded as base64 `@font-face` data (about 2 MB), so
    /// the brief looks and prints the same everywhere without fetching anything.
    Embedded,
}

/// Options of the standalone HTML brief.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct HtmlOptions {
    /// Where the fonts come from.
    pub fonts: Fonts,
}

/// The family name of the embedded fonts, first in the body's font stack.
const EMBEDDED_FAMILY: &str = "DejaVu Sans Brief";

/// Standard base64 (RFC 4648, section 4) with padding.
fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [chunk[0], chunk.get(1).copied().unwrap_or(0), chunk.get(2).copied().unwrap_or(0)];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        let sextet = |shift: u32| char::from(ALPHABET[((n >> shift) & 63) as usize]);
        out.push(sextet(18));
        out.push(sextet(12));
        out.push(if chunk.len() > 1 { sextet(6) } else { '=' });
        out.push(if chunk.len() > 2 { sextet(0) } else { '=' });
    }
    out
}

fn font_faces() -> String {
    let mut css = String::with_capacity(2 * 1024 * 1024);
    for (data, weight) in [(super::pdf::REGULAR, 400), (super::pdf::BOLD, 700)] {
        let _ = writeln!(
            css,
            "@font-face {{ font-family: '{EMBEDDED_FAMILY}'; font-weight: {weight}; font-style: normal; src: url(data:font/ttf;base64,{}) format('truetype'); }}",
            base64(data)
        );
    }
    let _ =
        writeln!(css, "body {{ font-family: '{EMBEDDED_FAMILY}', 'Noto Sans', 'DejaVu Sans', sans-serif; }}");
    css
}

/// Renders the brief as a self-contained HTML document using the reader's installed fonts.
///
/// # Errors
/// [`crate::ReportError::Brief`] when the brief lacks its limitations section.
pub fn render(brief: &Brief) -> Result<String> {
    render_with(brief, &HtmlOptions::default())
}

/// Renders the brief as a self-contained HTML document with the given options.
///
/// # Errors
/// [`crate::ReportError::Brief`] when the brief lacks its limitations section.
pub fn render_with(brief: &Brief, options: &HtmlOptions) -> Result<String> {
    brief.verify()?;
    let mut out = String::with_capacity(256 * 1024);
    out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    let _ = writeln!(out, "<title>{}</title>", escape(brief.title()));
    let _ = write!(out, "<style>{CSS}");
    if options.fonts == Fonts::Embedded {
        out.push_str(&font_faces());
    }
    out.push_str("</style>\n</head>\n<body>\n<main>\n");
    sections(&mut out, brief, Markup::STANDALONE);
    let _ = writeln!(out, "<footer>{}</footer>", escape(brief.title()));
    out.push_str("</main>\n</body>\n</html>\n");
    Ok(out)
}

/// Renders the brief's sections as an HTML fragment for a page that brings its own frame and
/// stylesheet (the web app's Brief page): no `<style>`, no document head, and every number in
/// a table carried as `<data value="…">` with its full-precision value so it can be checked
/// against the JSON it came from.
///
/// # Errors
/// [`crate::ReportError::Brief`] when the brief lacks its limitations section.
pub fn render_fragment(brief: &Brief) -> Result<String> {
    brief.verify()?;
    let mut out = String::with_capacity(256 * 1024);
    out.push_str("<article class=\"brief-doc\">\n");
    sections(&mut out, brief, Markup::EMBEDDED);
    out.push_str("</article>\n");
    Ok(out)
}

/// How table numbers are written.
#[derive(Debug, Clone, Copy)]
struct Markup {
    /// Whether a number cell carries its full-precision value in a `<data>` element.
    data_values: bool,
}

impl Markup {
    const STANDALONE: Markup = Markup { data_values: false };
    const EMBEDDED: Markup = Markup { data_values: true };
}

fn sections(out: &mut String, brief: &Brief, markup: Markup) {
    for s in brief.sections() {
        if s.kind() == SectionKind::Title {
            let _ = writeln!(
                out,
                "<header class=\"cover\" id=\"{}\">\n<h1>{}</h1>",
                s.kind().id(),
                escape(brief.title())
            );
            let _ = writeln!(out, "<h2>{}</h2>", escape(s.heading()));
            blocks(out, s.blocks(), markup);
            out.push_str("</header>\n");
            continue;
        }
        let class = if s.kind() == SectionKind::Limitations { " class=\"limitations\"" } else { "" };
        let _ = writeln!(out, "<section id=\"{}\"{class}>\n<h2>{}</h2>", s.kind().id(), escape(s.heading()));
        blocks(out, s.blocks(), markup);
        out.push_str("</section>\n");
    }
}

fn blocks(out: &mut String, blocks: &[Block], markup: Markup) {
    for b in blocks {
        match b {
            Block::Paragraph(t) => {
                let _ = writeln!(out, "<p>{}</p>", escape(t));
            }
            Block::Subheading(t) => {
                let _ = writeln!(out, "<h3>{}</h3>", escape(t));
            }
            Block::List(items) => {
                out.push_str("<ul>\n");
                for i in items {
                    let _ = writeln!(out, "<li>{}</li>", escape(i));
                }
                out.push_str("</ul>\n");
            }
            Block::Table(t) => table(out, t, markup),
            Block::Figure(f) => {
                // The chart module escapes its own text and emits no script or style.
                let _ = writeln!(
                    out,
                    "<figure>\n{}<figcaption>{}</figcaption>\n</figure>",
                    f.svg,
                    escape(&f.caption)
                );
            }
            Block::Code(c) => {
                let _ = writeln!(out, "<pre>{}</pre>", escape(c));
            }
            Block::SignOff(fields) => {
                out.push_str("<dl class=\"signoff\">\n");
                for f in fields {
                    let _ = writeln!(out, "<dt>{}</dt><dd></dd>", escape(f));
                }
                out.push_str("</dl>\n");
            }
        }
    }
}

fn table(out: &mut String, t: &Table, markup: Markup) {
    let _ = writeln!(
        out,
        "<div class=\"table-wrap\"><table>\n<caption>{}</caption>\n<thead><tr>",
        escape(&t.caption)
    );
    for c in &t.columns {
        let _ = write!(out, "<th scope=\"col\">{}</th>", escape(c));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in &t.rows {
        out.push_str("<tr>");
        for cell in row {
            match cell {
                Cell::Number { value, shown } if markup.data_values => {
                    let _ = write!(
                        out,
                        "<td class=\"num\"><data value=\"{value:?}\">{}</data></td>",
                        escape(shown)
                    );
                }
                Cell::Number { shown, .. } => {
                    let _ = write!(out, "<td class=\"num\">{}</td>", escape(shown));
                }
                other => {
                    let _ = write!(out, "<td>{}</td>", escape(other.shown()));
                }
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table></div>\n");
}

//! The brief as PDF, written natively with krilla: a small layout module of our own.
//!
//! Layout runs in two passes. The first flows the brief's blocks onto pages (headings,
//! word-wrapped paragraphs measured with the embedded font's advances, lists, tables whose
//! header repeats after a page break, charts, the spec, the sign-off box) and records drawing
//! operations per page. The second draws them with krilla, adding "page i of n" footers now
//! that the page count is known. Text is real text in the embedded DejaVu Sans, so it can be
//! selected and searched; charts go in as vectors through krilla-svg, their labels as text.

use krilla::Document;
use krilla::color::rgb;
use krilla::geom::{PathBuilder, Point, Rect, Size, Transform};
use krilla::metadata::Metadata;
use krilla::page::PageSettings;
use krilla::paint::{Fill, Stroke};
use krilla::surface::Surface;
use krilla::text::{Font, TextDirection};
use krilla_svg::{SurfaceExt, SvgSettings};

use super::{Block, Brief, Cell, SectionKind, Table};
use crate::{ReportError, Result};

/// DejaVu Sans (assets/fonts, under its own open licence), also embedded in the HTML brief.
pub(crate) const REGULAR: &[u8] =
    include_bytes!(concat!(env!("CARGO_MANIFEST_DIR"), "/../../assets/fonts/DejaVuSans.ttf"));
/// DejaVu Sans Bold.
pub(crate) const BOLD: &[u8] =
    include_bytes!(concat!(env!("CARGO_MANIFEST_DIR"), "/../../assets/fonts/DejaVuSans-Bold.ttf"));

/// The paper size of the PDF.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Paper {
    /// ISO A4, 210 × 297 mm.
    #[default]
    A4,
    /// US Letter, 8.5 × 11 in.
    Letter,
}

impl Paper {
    fn size(self) -> (f32, f32) {
        match self {
            Paper::A4 => (595.28, 841.89),
            Paper::Letter => (612.0, 792.0),
        }
    }
}

/// Options of the PDF output.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct PdfOptions {
    /// The paper size.
    pub paper: Paper,
}

const MARGIN: f32 = 54.0;
const BOTTOM: f32 = 62.0;
const BODY: f32 = 9.0;
const LEADING: f32 = 1.4;
const TABLE_SIZE: f32 = 7.0;
const INK: (u8, u8, u8) = (29, 36, 51);
const MUTED: (u8, u8, u8) = (90, 100, 117);
const ACCENT: (u8, u8, u8) = (42, 111, 107);
const WARN: (u8, u8, u8) = (138, 75, 18);
const RULE: (u8, u8, u8) = (201, 207, 216);
const BAND: (u8, u8, u8) = (238, 242, 246);

/// Glyph advances of one font, for line breaking.
struct Metrics {
    face: ttf_parser::Face<'static>,
    per_em: f32,
}

impl Metrics {
    fn new(data: &'static [u8]) -> Result<Self> {
        let face = ttf_parser::Face::parse(data, 0)
            .map_err(|e| ReportError::brief(format!("the embedded font cannot be read: {e}")))?;
        let per_em = f32::from(face.units_per_em());
        Ok(Self { face, per_em })
    }

    fn width(&self, text: &str, size: f32) -> f32 {
        let units: f32 = text
            .chars()
            .map(|c| {
                let g = self.face.glyph_index(c).or_else(|| self.face.glyph_index('?'));
                g.and_then(|g| self.face.glyph_hor_advance(g)).map_or(0.0, f32::from)
            })
            .sum();
        units * size / self.per_em
    }
}

#[derive(Debug, Clone, Copy)]
enum Weight {
    Regular,
    Bold,
}

enum Op {
    Text { x: f32, y: f32, size: f32, weight: Weight, color: (u8, u8, u8), text: String },
    Line { x1: f32, y1: f32, x2: f32, y2: f32, width: f32, color: (u8, u8, u8) },
    Rect { x: f32, y: f32, w: f32, h: f32, color: (u8, u8, u8) },
    Svg { x: f32, y: f32, w: f32, h: f32, tree: usize },
}

struct Layout {
    regular: Metrics,
    bold: Metrics,
    page_w: f32,
    page_h: f32,
    pages: Vec<Vec<Op>>,
    y: f32,
    trees: Vec<usvg::Tree>,
    svg_options: usvg::Options<'static>,
}

impl Layout {
    fn metrics(&self, w: Weight) -> &Metrics {
        match w {
            Weight::Regular => &self.regular,
            Weight::Bold => &self.bold,
        }
    }

    fn width(&self) -> f32 {
        self.page_w - 2.0 * MARGIN
    }

    fn bottom(&self) -> f32 {
        self.page_h - BOTTOM
    }

    fn new_page(&mut self) {
        self.pages.push(Vec::new());
        self.y = MARGIN;
    }

    fn ensure(&mut self, h: f32) {
        if self.y + h > self.bottom() && self.y > MARGIN + 1.0 {
            self.new_page();
        }
    }

    fn push(&mut self, op: Op) {
        if let Some(p) = self.pages.last_mut() {
            p.push(op);
        }
    }

    /// Breaks text into lines no wider than `width`, breaking inside a word only when the
    /// word alone is wider than the line.
    fn wrap(&self, text: &str, size: f32, weight: Weight, width: f32) -> Vec<String> {
        let m = self.metrics(weight);
        let mut lines = Vec::new();
        for para in text.split('\n') {
            let mut line = String::new();
            for word in para.split(' ').filter(|w| !w.is_empty()) {
                let candidate = if line.is_empty() { word.to_owned() } else { format!("{line} {word}") };
                if m.width(&candidate, size) <= width {
                    line = candidate;
                    continue;
                }
                if !line.is_empty() {
                    lines.push(std::mem::take(&mut line));
                }
                if m.width(word, size) <= width {
                    line = word.to_owned();
                } else {
                    for c in word.chars() {
                        let mut next = line.clone();
                        next.push(c);
                        if m.width(&next, size) > width && !line.is_empty() {
                            lines.push(std::mem::take(&mut line));
                            line.push(c);
                        } else {
                            line = next;
                        }
                    }
                }
            }
            lines.push(line);
        }
        lines
    }

    fn text_block(&mut self, text: &str, x: f32, width: f32, size: f32, weight: Weight, color: (u8, u8, u8)) {
        let lh = size * LEADING;
        for line in self.wrap(text, size, weight, width) {
            self.ensure(lh);
            self.y += lh;
            self.push(Op::Text { x, y: self.y - lh * 0.25, size, weight, color, text: line });
        }
    }

    fn heading(&mut self, text: &str, color: (u8, u8, u8)) {
        self.ensure(90.0);
        if self.y > MARGIN + 1.0 {
            self.y += 14.0;
        }
        self.text_block(text, MARGIN, self.width(), 14.0, Weight::Bold, color);
        self.y += 3.0;
        let y = self.y;
        self.push(Op::Line { x1: MARGIN, y1: y, x2: MARGIN + self.width(), y2: y, width: 1.2, color });
        self.y += 6.0;
    }

    fn subheading(&mut self, text: &str, color: (u8, u8, u8)) {
        self.ensure(40.0);
        self.y += 5.0;
        self.text_block(text, MARGIN, self.width(), 10.5, Weight::Bold, color);
        self.y += 1.0;
    }

    fn paragraph(&mut self, text: &str) {
        self.text_block(text, MARGIN, self.width(), BODY, Weight::Regular, INK);
        self.y += 5.0;
    }

    fn list(&mut self, items: &[String]) {
        let lh = BODY * LEADING;
        for item in items {
            let lines = self.wrap(item, BODY, Weight::Regular, self.width() - 14.0);
            for (i, line) in lines.into_iter().enumerate() {
                self.ensure(lh);
                self.y += lh;
                if i == 0 {
                    self.push(Op::Text {
                        x: MARGIN + 3.0,
                        y: self.y - lh * 0.25,
                        size: BODY,
                        weight: Weight::Regular,
                        color: ACCENT,
                        text: "•".into(),
                    });
                }
                self.push(Op::Text {
                    x: MARGIN + 14.0,
                    y: self.y - lh * 0.25,
                    size: BODY,
                    weight: Weight::Regular,
                    color: INK,
                    text: line,
                });
            }
            self.y += 2.0;
        }
        self.y += 4.0;
    }

    fn column_widths(&self, t: &Table) -> Vec<f32> {
        let pad = 6.0;
        let n = t.columns.len().max(1);
        let natural: Vec<f32> = (0..n)
            .map(|j| {
                let head = t.columns.get(j).map_or(0.0, |c| self.bold.width(c, TABLE_SIZE));
                let body = t
                    .rows
                    .iter()
                    .filter_map(|r| r.get(j))
                    .map(|c| self.regular.width(c.shown(), TABLE_SIZE))
                    .fold(0.0, f32::max);
                head.max(body) + pad
            })
            .collect();
        let total: f32 = natural.iter().sum();
        let avail = self.width();
        if total <= avail {
            return natural.iter().map(|w| w * avail / total).collect();
        }
        // Too wide: give every column its longest word (header words in bold), lowering the
        // largest of these minima to a common cap only if they cannot all fit; then share what
        // is left in proportion to the natural widths.
        let mut minimum: Vec<f32> = (0..n)
            .map(|j| {
                let body = t
                    .rows
                    .iter()
                    .filter_map(|r| r.get(j))
                    .flat_map(|c| c.shown().split(' '))
                    .map(|w| self.regular.width(w, TABLE_SIZE))
                    .fold(0.0, f32::max);
                let head = t.columns.get(j).map_or(0.0, |c| {
                    c.split(' ').map(|w| self.bold.width(w, TABLE_SIZE)).fold(0.0, f32::max)
                });
                body.max(head) + pad
            })
            .collect();
        if minimum.iter().sum::<f32>() > avail {
            let mut sorted = minimum.clone();
            sorted.sort_by(f32::total_cmp);
            let mut cap = avail / n as f32;
            let mut used = 0.0;
            for (i, w) in sorted.iter().enumerate() {
                let rest = (n - i) as f32;
                if used + w * rest >= avail {
                    cap = (avail - used) / rest;
                    break;
                }
                used += w;
            }
            for w in &mut minimum {
                *w = w.min(cap);
            }
        }
        let min_total: f32 = minimum.iter().sum();
        let spare = (avail - min_total).max(0.0);
        let extra: Vec<f32> = natural.iter().zip(&minimum).map(|(a, b)| (a - b).max(0.0)).collect();
        let extra_total: f32 = extra.iter().sum::<f32>().max(1e-3);
        minimum.iter().zip(&extra).map(|(m, e)| m + spare * e / extra_total).collect()
    }

    fn table_row(&mut self, cells: &[(String, bool)], widths: &[f32], weight: Weight, band: bool) {
        let lh = TABLE_SIZE * 1.3;
        let wrapped: Vec<Vec<String>> =
            cells.iter().zip(widths).map(|((s, _), w)| self.wrap(s, TABLE_SIZE, weight, w - 6.0)).collect();
        let lines = wrapped.iter().map(Vec::len).max().unwrap_or(1).max(1);
        let h = lines as f32 * lh + 4.0;
        let top = self.y;
        if band {
            self.push(Op::Rect { x: MARGIN, y: top, w: self.width(), h, color: BAND });
        }
        let mut x = MARGIN;
        for ((cell, w), (_, numeric)) in wrapped.iter().zip(widths).zip(cells) {
            for (i, line) in cell.iter().enumerate() {
                let tx = if *numeric {
                    x + w - 3.0 - self.metrics(weight).width(line, TABLE_SIZE)
                } else {
                    x + 3.0
                };
                self.push(Op::Text {
                    x: tx,
                    y: top + 2.0 + (i as f32 + 1.0) * lh - lh * 0.25,
                    size: TABLE_SIZE,
                    weight,
                    color: INK,
                    text: line.clone(),
                });
            }
            x += w;
        }
        self.y = top + h;
        let y = self.y;
        self.push(Op::Line { x1: MARGIN, y1: y, x2: MARGIN + self.width(), y2: y, width: 0.4, color: RULE });
    }

    fn row_height(&self, cells: &[(String, bool)], widths: &[f32], weight: Weight) -> f32 {
        let lines = cells
            .iter()
            .zip(widths)
            .map(|((s, _), w)| self.wrap(s, TABLE_SIZE, weight, w - 6.0).len())
            .max()
            .unwrap_or(1);
        lines as f32 * TABLE_SIZE * 1.3 + 4.0
    }

    fn table(&mut self, t: &Table) {
        let widths = self.column_widths(t);
        let header: Vec<(String, bool)> = t.columns.iter().map(|c| (c.clone(), false)).collect();
        let rows: Vec<Vec<(String, bool)>> = t
            .rows
            .iter()
            .map(|r| r.iter().map(|c| (c.shown().to_owned(), matches!(c, Cell::Number { .. }))).collect())
            .collect();
        let head_h = self.row_height(&header, &widths, Weight::Bold);
        let first_h = rows.first().map_or(0.0, |r| self.row_height(r, &widths, Weight::Regular));
        self.ensure(14.0 + head_h + first_h);
        self.y += 4.0;
        self.text_block(&t.caption, MARGIN, self.width(), 8.5, Weight::Bold, MUTED);
        self.y += 2.0;
        self.table_row(&header, &widths, Weight::Bold, true);
        for r in &rows {
            let h = self.row_height(r, &widths, Weight::Regular);
            if self.y + h > self.bottom() {
                self.new_page();
                self.table_row(&header, &widths, Weight::Bold, true);
            }
            self.table_row(r, &widths, Weight::Regular, false);
        }
        self.y += 8.0;
    }

    fn figure(&mut self, svg: &str, caption: &str) -> Result<()> {
        let tree = usvg::Tree::from_str(svg, &self.svg_options)
            .map_err(|e| ReportError::brief(format!("a chart cannot be embedded in the PDF: {e}")))?;
        let size = tree.size();
        let w = self.width() * 0.88;
        let h = w * size.height() / size.width();
        let caption_h = self.wrap(caption, 8.0, Weight::Regular, self.width()).len() as f32 * 8.0 * LEADING;
        self.ensure(h + caption_h + 12.0);
        self.y += 6.0;
        self.trees.push(tree);
        let x = MARGIN + (self.width() - w) / 2.0;
        let index = self.trees.len() - 1;
        self.push(Op::Svg { x, y: self.y, w, h, tree: index });
        self.y += h + 2.0;
        self.text_block(caption, MARGIN, self.width(), 8.0, Weight::Regular, MUTED);
        self.y += 8.0;
        Ok(())
    }

    fn code(&mut self, text: &str) {
        let size = 7.2;
        let lh = size * 1.35;
        for raw in text.lines() {
            let indent = raw.len() - raw.trim_start().len();
            let x = MARGIN + 8.0 + self.regular.width(&" ".repeat(indent), size);
            for line in
                self.wrap(raw.trim_start(), size, Weight::Regular, self.width() - 16.0 - (x - MARGIN - 8.0))
            {
                self.ensure(lh);
                self.push(Op::Rect { x: MARGIN, y: self.y, w: self.width(), h: lh, color: BAND });
                self.y += lh;
                self.push(Op::Text {
                    x,
                    y: self.y - lh * 0.25,
                    size,
                    weight: Weight::Regular,
                    color: INK,
                    text: line,
                });
            }
        }
        self.y += 8.0;
    }

    fn sign_off(&mut self, fields: &[String]) {
        let row = 30.0;
        let h = row * fields.len() as f32 + 12.0;
        self.ensure(h + 8.0);
        let top = self.y + 4.0;
        let w = self.width();
        for (x1, y1, x2, y2) in [
            (MARGIN, top, MARGIN + w, top),
            (MARGIN, top + h, MARGIN + w, top + h),
            (MARGIN, top, MARGIN, top + h),
            (MARGIN + w, top, MARGIN + w, top + h),
        ] {
            self.push(Op::Line { x1, y1, x2, y2, width: 0.8, color: MUTED });
        }
        let label_w = fields.iter().map(|f| self.bold.width(f, BODY)).fold(0.0, f32::max) + 16.0;
        for (i, f) in fields.iter().enumerate() {
            let base = top + 10.0 + row * (i as f32 + 1.0) - 8.0;
            self.push(Op::Text {
                x: MARGIN + 10.0,
                y: base,
                size: BODY,
                weight: Weight::Bold,
                color: INK,
                text: f.clone(),
            });
            self.push(Op::Line {
                x1: MARGIN + 10.0 + label_w,
                y1: base + 2.0,
                x2: MARGIN + w - 12.0,
                y2: base + 2.0,
                width: 0.6,
                color: INK,
            });
        }
        self.y = top + h + 10.0;
    }

    fn cover(&mut self, title: &str) {
        let lines = self.wrap(title, 20.0, Weight::Bold, self.width() - 14.0);
        let h = lines.len() as f32 * 20.0 * 1.3 + 6.0;
        self.push(Op::Rect { x: MARGIN, y: self.y, w: 5.0, h, color: ACCENT });
        for line in lines {
            self.y += 20.0 * 1.3;
            self.push(Op::Text {
                x: MARGIN + 14.0,
                y: self.y - 6.0,
                size: 20.0,
                weight: Weight::Bold,
                color: INK,
                text: line,
            });
        }
        self.y += 16.0;
    }
}

fn fill(color: (u8, u8, u8)) -> Fill {
    Fill { paint: rgb::Color::new(color.0, color.1, color.2).into(), ..Fill::default() }
}

fn draw(surface: &mut Surface<'_>, op: &Op, fonts: &(Font, Font), trees: &[usvg::Tree]) {
    match op {
        Op::Text { x, y, size, weight, color, text } => {
            surface.set_stroke(None);
            surface.set_fill(Some(fill(*color)));
            let font = match weight {
                Weight::Regular => fonts.0.clone(),
                Weight::Bold => fonts.1.clone(),
            };
            surface.draw_text(Point::from_xy(*x, *y), font, *size, text, false, TextDirection::Auto);
        }
        Op::Line { x1, y1, x2, y2, width, color } => {
            let mut pb = PathBuilder::new();
            pb.move_to(*x1, *y1);
            pb.line_to(*x2, *y2);
            if let Some(path) = pb.finish() {
                surface.set_fill(None);
                surface.set_stroke(Some(Stroke {
                    paint: rgb::Color::new(color.0, color.1, color.2).into(),
                    width: *width,
                    ..Stroke::default()
                }));
                surface.draw_path(&path);
                surface.set_stroke(None);
            }
        }
        Op::Rect { x, y, w, h, color } => {
            let mut pb = PathBuilder::new();
            if let Some(rect) = Rect::from_xywh(*x, *y, *w, *h) {
                pb.push_rect(rect);
            }
            if let Some(path) = pb.finish() {
                surface.set_stroke(None);
                surface.set_fill(Some(fill(*color)));
                surface.draw_path(&path);
            }
        }
        Op::Svg { x, y, w, h, tree } => {
            if let (Some(t), Some(size)) = (trees.get(*tree), Size::from_wh(*w, *h)) {
                surface.push_transform(&Transform::from_translate(*x, *y));
                surface.draw_svg(t, size, SvgSettings::default());
                surface.pop();
            }
        }
    }
}

/// Renders the brief as PDF bytes.
///
/// # Errors
/// [`ReportError::Brief`] when the brief lacks its limitations section, a chart cannot be
/// embedded or the PDF cannot be written.
pub fn render(brief: &Brief, options: &PdfOptions) -> Result<Vec<u8>> {
    brief.verify()?;
    let (page_w, page_h) = options.paper.size();
    let mut svg_options = usvg::Options { font_family: "DejaVu Sans".to_owned(), ..usvg::Options::default() };
    svg_options.fontdb_mut().load_font_data(REGULAR.to_vec());
    svg_options.fontdb_mut().load_font_data(BOLD.to_vec());
    let mut l = Layout {
        regular: Metrics::new(REGULAR)?,
        bold: Metrics::new(BOLD)?,
        page_w,
        page_h,
        pages: vec![Vec::new()],
        y: MARGIN,
        trees: Vec::new(),
        svg_options,
    };
    l.cover(brief.title());
    for s in brief.sections() {
        let color = if s.kind() == SectionKind::Limitations { WARN } else { ACCENT };
        if matches!(s.kind(), SectionKind::Limitations | SectionKind::Reproducibility) && l.y > MARGIN + 1.0 {
            l.new_page();
        }
        l.heading(s.heading(), color);
        for b in s.blocks() {
            match b {
                Block::Paragraph(t) => l.paragraph(t),
                Block::Subheading(t) => l.subheading(t, color),
                Block::List(items) => l.list(items),
                Block::Table(t) => l.table(t),
                Block::Figure(f) => l.figure(&f.svg, &f.caption)?,
                Block::Code(c) => l.code(c),
                Block::SignOff(fields) => l.sign_off(fields),
            }
        }
    }

    let regular = Font::new(krilla::Data::from(REGULAR), 0)
        .ok_or_else(|| ReportError::brief("the embedded regular font cannot be loaded"))?;
    let bold = Font::new(krilla::Data::from(BOLD), 0)
        .ok_or_else(|| ReportError::brief("the embedded bold font cannot be loaded"))?;
    let fonts = (regular, bold);
    let mut doc = Document::new();
    doc.set_metadata(Metadata::new().title(brief.title().to_owned()).language("en".to_owned()));
    let settings = PageSettings::from_wh(page_w, page_h)
        .ok_or_else(|| ReportError::brief("the page size is not valid"))?;
    let total = l.pages.len();
    for (i, ops) in l.pages.iter().enumerate() {
        let mut page = doc.start_page_with(settings.clone());
        let mut surface = page.surface();
        for op in ops {
            draw(&mut surface, op, &fonts, &l.trees);
        }
        let foot_y = page_h - BOTTOM + 30.0;
        let footer = format!("Page {} of {}", i + 1, total);
        let fw = l.regular.width(&footer, 7.5);
        draw(
            &mut surface,
            &Op::Line {
                x1: MARGIN,
                y1: foot_y - 12.0,
                x2: page_w - MARGIN,
                y2: foot_y - 12.0,
                width: 0.4,
                color: RULE,
            },
            &fonts,
            &l.trees,
        );
        draw(
            &mut surface,
            &Op::Text {
                x: MARGIN,
                y: foot_y,
                size: 7.5,
                weight: Weight::Regular,
                color: MUTED,
                text: brief.title().to_owned(),
            },
            &fonts,
            &l.trees,
        );
        draw(
            &mut surface,
            &Op::Text {
                x: page_w - MARGIN - fw,
                y: foot_y,
                size: 7.5,
                weight: Weight::Regular,
                color: MUTED,
                text: footer,
            },
            &fonts,
            &l.trees,
        );
        surface.finish();
        page.finish();
    }
    doc.finish().map_err(|e| ReportError::brief(format!("the PDF cannot be written: {e:?}")))
}

//! The SVG document writer and the pieces every chart shares: title, axes, legend and notes.

use super::palette;
use super::scale::{LinearScale, Ticks};
use super::text::{coord, escape, estimate_width};
use super::{Axis, CHART_WIDTH};

/// Font size of the visible chart title.
pub(crate) const TITLE_SIZE: f64 = 20.0;
/// Font size of axis captions.
pub(crate) const CAPTION_SIZE: f64 = 16.0;
/// Font size of tick labels and legend entries.
pub(crate) const TICK_SIZE: f64 = 15.0;
/// Font size of point labels, cell values and notes (the smallest text used).
pub(crate) const SMALL_SIZE: f64 = 14.0;

/// Horizontal anchoring of a text element.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Anchor {
    Start,
    Middle,
    End,
}

/// How a line is stroked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Dash {
    Solid,
    Dashed,
    Dotted,
}

/// The look of one text element.
#[derive(Debug, Clone, Copy)]
pub(crate) struct TextStyle {
    pub size: f64,
    pub anchor: Anchor,
    pub bold: bool,
    pub fill: &'static str,
    /// Rotation in degrees about the anchor point (negative turns anticlockwise).
    pub rotate: Option<f64>,
}

impl TextStyle {
    pub(crate) fn new(size: f64) -> Self {
        Self { size, anchor: Anchor::Start, bold: false, fill: palette::INK, rotate: None }
    }
    pub(crate) fn anchor(mut self, anchor: Anchor) -> Self {
        self.anchor = anchor;
        self
    }
    pub(crate) fn bold(mut self) -> Self {
        self.bold = true;
        self
    }
    pub(crate) fn fill(mut self, fill: &'static str) -> Self {
        self.fill = fill;
        self
    }
    pub(crate) fn rotate(mut self, degrees: f64) -> Self {
        self.rotate = Some(degrees);
        self
    }
}

/// An SVG document under construction; every element goes on its own line.
pub(crate) struct Doc {
    out: String,
}

impl Doc {
    /// Opens the document with its viewBox, accessible title and description, and background.
    pub(crate) fn new(width: f64, height: f64, title: &str, desc: &str) -> Self {
        let mut out = String::with_capacity(16 * 1024);
        out.push_str(&format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" role=\"img\" font-family=\"{font}\">\n",
            w = coord(width),
            h = coord(height),
            font = escape(palette::FONT_FAMILY),
        ));
        out.push_str(&format!("<title>{}</title>\n", escape(title)));
        out.push_str(&format!("<desc>{}</desc>\n", escape(desc)));
        out.push_str(&format!(
            "<rect x=\"0\" y=\"0\" width=\"{}\" height=\"{}\" fill=\"{}\"/>\n",
            coord(width),
            coord(height),
            palette::PAPER
        ));
        Self { out }
    }

    /// Opens a group with a class name (a hook for the page's optional script).
    pub(crate) fn open_group(&mut self, class: &str) {
        self.out.push_str(&format!("<g class=\"{}\">\n", escape(class)));
    }

    /// Closes the innermost open group.
    pub(crate) fn close_group(&mut self) {
        self.out.push_str("</g>\n");
    }

    /// A filled rectangle with an optional outline.
    pub(crate) fn rect(
        &mut self,
        (x, y, w, h): (f64, f64, f64, f64),
        fill: &str,
        stroke: Option<(&str, f64)>,
        tip: Option<&str>,
    ) {
        let mut s = format!(
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"",
            coord(x),
            coord(y),
            coord(w.max(0.0)),
            coord(h.max(0.0)),
            escape(fill)
        );
        if let Some((colour, width)) = stroke {
            s.push_str(&format!(" stroke=\"{}\" stroke-width=\"{}\"", escape(colour), coord(width)));
        }
        self.close_shape(s, tip);
    }

    /// A straight line.
    pub(crate) fn line(
        &mut self,
        (x1, y1): (f64, f64),
        (x2, y2): (f64, f64),
        stroke: &str,
        width: f64,
        dash: Dash,
    ) {
        self.out.push_str(&format!(
            "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"{}\"{}/>\n",
            coord(x1),
            coord(y1),
            coord(x2),
            coord(y2),
            escape(stroke),
            coord(width),
            dash_attr(dash)
        ));
    }

    /// A horizontal bar with rounded ends lying exactly between `x1` and `x2` (an interval).
    pub(crate) fn interval_bar(
        &mut self,
        (x1, x2): (f64, f64),
        cy: f64,
        thickness: f64,
        fill: &str,
        tip: Option<&str>,
    ) {
        let (left, right) = (x1.min(x2), x1.max(x2));
        let width = (right - left).max(2.0);
        let radius = (thickness / 2.0).min(width / 2.0);
        let s = format!(
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"{}\" fill=\"{}\"",
            coord((left + right) / 2.0 - width / 2.0),
            coord(cy - thickness / 2.0),
            coord(width),
            coord(thickness),
            coord(radius),
            escape(fill)
        );
        self.close_shape(s, tip);
    }

    /// An open polyline through the given points (nothing is drawn for fewer than two).
    pub(crate) fn polyline(&mut self, points: &[(f64, f64)], stroke: &str, width: f64, dash: Dash) {
        if points.len() < 2 {
            return;
        }
        let pts: Vec<String> = points.iter().map(|(x, y)| format!("{},{}", coord(*x), coord(*y))).collect();
        self.out.push_str(&format!(
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{}\" stroke-linejoin=\"round\"{}/>\n",
            pts.join(" "),
            escape(stroke),
            coord(width),
            dash_attr(dash)
        ));
    }

    /// A circle marker, with an optional hover tooltip.
    pub(crate) fn circle(
        &mut self,
        (cx, cy): (f64, f64),
        r: f64,
        fill: &str,
        stroke: Option<(&str, f64)>,
        tip: Option<&str>,
    ) {
        let mut s = format!(
            "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{}\"",
            coord(cx),
            coord(cy),
            coord(r),
            escape(fill)
        );
        if let Some((colour, width)) = stroke {
            s.push_str(&format!(" stroke=\"{}\" stroke-width=\"{}\"", escape(colour), coord(width)));
        }
        self.close_shape(s, tip);
    }

    /// A diamond marker (used for flagged points), with an optional hover tooltip.
    pub(crate) fn diamond(&mut self, (cx, cy): (f64, f64), r: f64, fill: &str, tip: Option<&str>) {
        let s = format!(
            "<path d=\"M{} {}L{} {}L{} {}L{} {}Z\" fill=\"{}\" stroke=\"{}\" stroke-width=\"1.5\"",
            coord(cx),
            coord(cy - r),
            coord(cx + r),
            coord(cy),
            coord(cx),
            coord(cy + r),
            coord(cx - r),
            coord(cy),
            escape(fill),
            palette::PAPER
        );
        self.close_shape(s, tip);
    }

    /// A text element; the content is escaped here.
    pub(crate) fn text(&mut self, (x, y): (f64, f64), content: &str, style: TextStyle) {
        let mut s = format!(
            "<text x=\"{}\" y=\"{}\" font-size=\"{}\" fill=\"{}\"",
            coord(x),
            coord(y),
            coord(style.size),
            style.fill
        );
        match style.anchor {
            Anchor::Start => {}
            Anchor::Middle => s.push_str(" text-anchor=\"middle\""),
            Anchor::End => s.push_str(" text-anchor=\"end\""),
        }
        if style.bold {
            s.push_str(" font-weight=\"bold\"");
        }
        if let Some(deg) = style.rotate {
            s.push_str(&format!(" transform=\"rotate({} {} {})\"", coord(deg), coord(x), coord(y)));
        }
        s.push('>');
        s.push_str(&escape(content));
        s.push_str("</text>\n");
        self.out.push_str(&s);
    }

    /// Closes the document and returns it.
    pub(crate) fn finish(mut self) -> String {
        self.out.push_str("</svg>\n");
        self.out
    }

    fn close_shape(&mut self, mut open: String, tip: Option<&str>) {
        match tip {
            Some(t) if !t.is_empty() => {
                open.push_str(&format!("><title>{}</title></{}>\n", escape(t), tag_of(&open)));
            }
            _ => open.push_str("/>\n"),
        }
        self.out.push_str(&open);
    }
}

/// The element name at the start of an opening tag such as `<circle cx=...`.
fn tag_of(open: &str) -> &str {
    open.trim_start_matches('<').split(' ').next().unwrap_or("g")
}

fn dash_attr(dash: Dash) -> &'static str {
    match dash {
        Dash::Solid => "",
        Dash::Dashed => " stroke-dasharray=\"8 5\"",
        Dash::Dotted => " stroke-dasharray=\"2 4\"",
    }
}

/// The plotting rectangle of a chart, in pixels.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Area {
    pub left: f64,
    pub top: f64,
    pub right: f64,
    pub bottom: f64,
}

impl Area {
    /// Whether a pixel position lies inside the rectangle (with a small tolerance).
    pub(crate) fn contains(&self, (x, y): (f64, f64)) -> bool {
        x >= self.left - 0.5 && x <= self.right + 0.5 && y >= self.top - 0.5 && y <= self.bottom + 0.5
    }
}

/// One entry of a legend: a swatch and its text.
#[derive(Debug, Clone)]
pub(crate) struct LegendEntry {
    pub swatch: Swatch,
    pub text: String,
}

/// The small picture in front of a legend entry.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Swatch {
    Dot(&'static str),
    Diamond(&'static str),
    Line(&'static str, Dash),
    Block(&'static str),
}

/// The layout of a chart with an x and a y axis.
pub(crate) struct XyLayout {
    pub area: Area,
    pub x: LinearScale,
    pub y: LinearScale,
    pub x_ticks: Ticks,
    pub y_ticks: Ticks,
    pub height: f64,
    pub legend_y: f64,
    pub note_y: f64,
}

/// Vertical position of the title's baseline.
pub(crate) const TITLE_Y: f64 = 32.0;
/// Left edge of the title, legend and notes.
pub(crate) const MARGIN: f64 = 20.0;

/// Lays out a chart with two numeric axes at the standard width.
pub(crate) fn xy_layout(x_ticks: Ticks, y_ticks: Ticks, legend_lines: usize, has_note: bool) -> XyLayout {
    let widest =
        y_ticks.values().iter().map(|v| estimate_width(&y_ticks.label(*v), TICK_SIZE)).fold(0.0, f64::max);
    let left = MARGIN + CAPTION_SIZE + 14.0 + widest + 10.0;
    let legend_y = TITLE_Y + 30.0;
    let top = TITLE_Y + 30.0 + LEGEND_LINE * legend_lines as f64;
    let plot_height = 400.0;
    let bottom = top + plot_height;
    // Leave room for the last x tick label to stay inside the chart.
    let last_label = estimate_width(&x_ticks.label(x_ticks.last()), TICK_SIZE);
    let right = CHART_WIDTH - MARGIN - (last_label / 2.0).max(12.0);
    let note_y = bottom + 84.0;
    let height = if has_note { note_y + 16.0 } else { bottom + 70.0 };
    let area = Area { left, top, right, bottom };
    XyLayout {
        x: LinearScale::from_ticks(&x_ticks, left, right),
        y: LinearScale::from_ticks(&y_ticks, bottom, top),
        area,
        x_ticks,
        y_ticks,
        height,
        legend_y,
        note_y,
    }
}

/// Draws the visible title.
pub(crate) fn draw_title(doc: &mut Doc, title: &str) {
    doc.text((MARGIN, TITLE_Y), &super::text::truncate(title, 70), TextStyle::new(TITLE_SIZE).bold());
}

/// Draws grid lines, the two axis lines, tick labels and axis captions.
pub(crate) fn draw_xy_axes(doc: &mut Doc, layout: &XyLayout, x_axis: &Axis, y_axis: &Axis) {
    let a = layout.area;
    doc.open_group("grid");
    for &v in layout.y_ticks.values() {
        let y = layout.y.map(v);
        doc.line((a.left, y), (a.right, y), palette::GRID, 1.0, Dash::Solid);
    }
    for &v in layout.x_ticks.values() {
        let x = layout.x.map(v);
        doc.line((x, a.top), (x, a.bottom), palette::GRID, 1.0, Dash::Solid);
    }
    doc.close_group();
    doc.open_group("axes");
    doc.line((a.left, a.bottom), (a.right, a.bottom), palette::INK, 1.5, Dash::Solid);
    doc.line((a.left, a.top), (a.left, a.bottom), palette::INK, 1.5, Dash::Solid);
    let tick = TextStyle::new(TICK_SIZE).fill(palette::MUTED);
    for &v in layout.x_ticks.values() {
        let x = layout.x.map(v);
        doc.line((x, a.bottom), (x, a.bottom + 6.0), palette::INK, 1.5, Dash::Solid);
        doc.text((x, a.bottom + 24.0), &layout.x_ticks.label(v), tick.anchor(Anchor::Middle));
    }
    for &v in layout.y_ticks.values() {
        let y = layout.y.map(v);
        doc.line((a.left - 6.0, y), (a.left, y), palette::INK, 1.5, Dash::Solid);
        doc.text((a.left - 10.0, y + 5.0), &layout.y_ticks.label(v), tick.anchor(Anchor::End));
    }
    let caption = TextStyle::new(CAPTION_SIZE).anchor(Anchor::Middle);
    doc.text(
        ((a.left + a.right) / 2.0, a.bottom + 54.0),
        &super::text::truncate(&x_axis.caption(), 80),
        caption,
    );
    doc.text(
        (MARGIN + CAPTION_SIZE - 2.0, (a.top + a.bottom) / 2.0),
        &super::text::truncate(&y_axis.caption(), 50),
        caption.rotate(-90.0),
    );
    doc.close_group();
}

/// Draws a horizontal-only axis (vertical grid lines, the bottom axis line, tick labels and
/// the caption), for charts whose rows are labelled on the left instead of by a y axis.
pub(crate) fn draw_x_axis(doc: &mut Doc, area: Area, x: &LinearScale, ticks: &Ticks, axis: &Axis) {
    doc.open_group("grid");
    for &v in ticks.values() {
        let px = x.map(v);
        doc.line((px, area.top), (px, area.bottom), palette::GRID, 1.0, Dash::Solid);
    }
    doc.close_group();
    doc.open_group("axes");
    doc.line((area.left, area.bottom), (area.right, area.bottom), palette::INK, 1.5, Dash::Solid);
    let tick = TextStyle::new(TICK_SIZE).fill(palette::MUTED).anchor(Anchor::Middle);
    for &v in ticks.values() {
        let px = x.map(v);
        doc.line((px, area.bottom), (px, area.bottom + 6.0), palette::INK, 1.5, Dash::Solid);
        doc.text((px, area.bottom + 24.0), &ticks.label(v), tick);
    }
    doc.text(
        ((area.left + area.right) / 2.0, area.bottom + 54.0),
        &super::text::truncate(&axis.caption(), 80),
        TextStyle::new(CAPTION_SIZE).anchor(Anchor::Middle),
    );
    doc.close_group();
}

/// The distance between legend lines.
pub(crate) const LEGEND_LINE: f64 = 26.0;

/// Where each legend entry goes: its left edge and its line, wrapping at the chart's right margin.
fn legend_positions(entries: &[LegendEntry]) -> Vec<(f64, usize, String)> {
    let mut out = Vec::with_capacity(entries.len());
    let (mut x, mut line) = (MARGIN, 0);
    for entry in entries {
        let text = super::text::truncate(&entry.text, 60);
        let width = 26.0 + estimate_width(&text, TICK_SIZE) * 0.92;
        if x > MARGIN && x + width > CHART_WIDTH - MARGIN {
            x = MARGIN;
            line += 1;
        }
        out.push((x, line, text));
        x += width + 24.0;
    }
    out
}

/// How many lines a legend takes (0 when there are no entries).
pub(crate) fn legend_lines(entries: &[LegendEntry]) -> usize {
    legend_positions(entries).last().map_or(0, |(_, line, _)| line + 1)
}

/// Draws a legend from the left margin, wrapping onto further lines when needed.
pub(crate) fn draw_legend(doc: &mut Doc, y: f64, entries: &[LegendEntry]) {
    if entries.is_empty() {
        return;
    }
    doc.open_group("legend");
    let style = TextStyle::new(TICK_SIZE);
    for (entry, (x, line, text)) in entries.iter().zip(legend_positions(entries)) {
        let y = y + LEGEND_LINE * line as f64;
        match entry.swatch {
            Swatch::Dot(c) => doc.circle((x + 8.0, y - 5.0), 5.5, c, None, None),
            Swatch::Diamond(c) => doc.diamond((x + 8.0, y - 5.0), 7.5, c, None),
            Swatch::Line(c, dash) => doc.line((x, y - 5.0), (x + 18.0, y - 5.0), c, 3.0, dash),
            Swatch::Block(c) => doc.rect((x + 1.0, y - 12.0, 14.0, 14.0), c, None, None),
        }
        doc.text((x + 26.0, y), &text, style);
    }
    doc.close_group();
}

/// Draws a note line (for example about skipped points) in muted text.
pub(crate) fn draw_note(doc: &mut Doc, y: f64, note: &str) {
    doc.text((MARGIN, y), &super::text::truncate(note, 95), TextStyle::new(SMALL_SIZE).fill(palette::MUTED));
}

/// Clips the line y = intercept + slope·x to the data rectangle; returns its two ends.
pub(crate) fn clip_line(
    intercept: f64,
    slope: f64,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> Option<((f64, f64), (f64, f64))> {
    if !(intercept.is_finite() && slope.is_finite()) {
        return None;
    }
    let (ylo, yhi) = (y0.min(y1), y0.max(y1));
    let at = |x: f64| intercept + slope * x;
    let mut xa = x0.min(x1);
    let mut xb = x0.max(x1);
    if slope != 0.0 {
        // The x values where the line crosses the bottom and top of the rectangle.
        let xs = ((ylo - intercept) / slope, (yhi - intercept) / slope);
        let (cross_lo, cross_hi) = (xs.0.min(xs.1), xs.0.max(xs.1));
        xa = xa.max(cross_lo);
        xb = xb.min(cross_hi);
    } else if !(ylo..=yhi).contains(&intercept) {
        return None;
    }
    if xa >= xb || !xa.is_finite() || !xb.is_finite() {
        return None;
    }
    Some(((xa, at(xa)), (xb, at(xb))))
}

//! Scatter plots with optional point labels and reference lines or curves.

use super::doc::{
    self, Anchor, Dash, Doc, LegendEntry, Swatch, TextStyle, clip_line, draw_legend, draw_note, draw_title,
    draw_xy_axes, legend_lines, xy_layout,
};
use super::scale::{Ticks, extent};
use super::text::{count_of, estimate_width, plottable, significant, singular_of, truncate};
use super::{Axis, Chart, Emphasis, PointLabels, items_or_default, palette};
use crate::Result;

/// One point of a scatter plot.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScatterPoint {
    /// Position along the horizontal axis.
    pub x: f64,
    /// Position along the vertical axis.
    pub y: f64,
    /// A name for the point (e.g. "LK-47 Harbour Arena Quarter"), shown on hover and as a label.
    pub label: Option<String>,
    /// Whether the point is set apart.
    pub emphasis: Emphasis,
}

impl ScatterPoint {
    /// An ordinary, unlabelled point.
    pub fn new(x: f64, y: f64) -> Self {
        Self { x, y, ..Self::default() }
    }

    /// The same point with a name.
    pub fn labelled(mut self, label: impl Into<String>) -> Self {
        self.label = Some(label.into());
        self
    }

    /// The same point, flagged.
    pub fn flagged(mut self) -> Self {
        self.emphasis = Emphasis::Flagged;
        self
    }

    /// A point named `key`, flagged when `key` is one of the `flagged` keys.
    pub fn keyed(x: f64, y: f64, key: &str, flagged: &[String]) -> Self {
        let point = Self::new(x, y).labelled(key);
        if flagged.iter().any(|f| f == key) { point.flagged() } else { point }
    }
}

/// A reference drawn beneath the points.
#[derive(Debug, Clone, PartialEq)]
pub enum Reference {
    /// A horizontal line, e.g. a residual of zero.
    Horizontal {
        /// The height of the line in data units.
        y: f64,
        /// What the line means; shown in the legend when not empty.
        label: String,
    },
    /// A straight line y = intercept + slope·x, clipped to the plot.
    Line {
        /// The value of the line at x = 0.
        intercept: f64,
        /// The change in y per unit of x.
        slope: f64,
        /// What the line means; shown in the legend when not empty.
        label: String,
    },
    /// A curve through the given points (e.g. a fitted logarithmic relation), in x order.
    Curve {
        /// The curve's points in data units; non-finite points are skipped.
        points: Vec<(f64, f64)>,
        /// What the curve means; shown in the legend when not empty.
        label: String,
    },
}

impl Reference {
    fn label(&self) -> &str {
        match self {
            Self::Horizontal { label, .. } | Self::Line { label, .. } | Self::Curve { label, .. } => {
                label.trim()
            }
        }
    }
}

/// A scatter plot of one measure against another.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Scatter {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The horizontal axis caption.
    pub x_axis: Axis,
    /// The vertical axis caption.
    pub y_axis: Axis,
    /// The plural noun for the points, e.g. "districts" (default "points").
    pub items: String,
    /// The points, in any order.
    pub points: Vec<ScatterPoint>,
    /// Reference lines and curves, drawn beneath the points.
    pub references: Vec<Reference>,
    /// Which points get a visible text label.
    pub labels: PointLabels,
    /// What a flagged point means, for the legend and description (default "Flagged").
    pub flagged_meaning: String,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

impl Chart for Scatter {
    fn render(&self) -> Result<String> {
        let items = items_or_default(&self.items);
        let intro = format!(
            "Scatter plot of {} against {} for {}.",
            self.y_axis.spoken(),
            self.x_axis.spoken(),
            count_of(self.points.len(), &singular_of(items), items)
        );
        Ok(self.render_with(&intro, &[]))
    }
}

impl Scatter {
    /// Renders with a chart-specific opening sentence and extra description sentences.
    pub(crate) fn render_with(&self, intro: &str, extra: &[String]) -> String {
        let items = items_or_default(&self.items);
        let shown: Vec<&ScatterPoint> =
            self.points.iter().filter(|p| plottable(p.x) && plottable(p.y)).collect();
        let skipped = self.points.len() - shown.len();

        let curve_points = || {
            self.references.iter().flat_map(|r| match r {
                Reference::Curve { points, .. } => points.clone(),
                _ => Vec::new(),
            })
        };
        let x_ext = extent(shown.iter().map(|p| p.x).chain(curve_points().map(|p| p.0)));
        let y_ext = extent(
            shown.iter().map(|p| p.y).chain(curve_points().filter(|p| plottable(p.0)).map(|p| p.1)).chain(
                self.references.iter().filter_map(|r| match r {
                    Reference::Horizontal { y, .. } => Some(*y),
                    _ => None,
                }),
            ),
        );
        let (x_lo, x_hi) = x_ext.unwrap_or((0.0, 1.0));
        let (y_lo, y_hi) = y_ext.unwrap_or((0.0, 1.0));

        let flagged_meaning =
            if self.flagged_meaning.trim().is_empty() { "Flagged" } else { self.flagged_meaning.trim() };
        let any_flagged = shown.iter().any(|p| p.emphasis == Emphasis::Flagged);
        let mut legend = Vec::new();
        if any_flagged || self.references.iter().any(|r| !r.label().is_empty()) {
            legend.push(LegendEntry { swatch: Swatch::Dot(palette::DATA), text: capitalise(items) });
        }
        if any_flagged {
            legend.push(LegendEntry {
                swatch: Swatch::Diamond(palette::ACCENT),
                text: flagged_meaning.to_owned(),
            });
        }
        for r in &self.references {
            if !r.label().is_empty() {
                legend.push(LegendEntry {
                    swatch: Swatch::Line(palette::REFERENCE, reference_dash(r)),
                    text: r.label().to_owned(),
                });
            }
        }
        let note = (skipped > 0).then(|| {
            format!(
                "{} not shown: a value is missing or not finite.",
                count_of(skipped, &singular_of(items), items)
            )
        });
        let layout = xy_layout(
            Ticks::nice(x_lo, x_hi, 6),
            Ticks::nice(y_lo, y_hi, 6),
            legend_lines(&legend),
            note.is_some(),
        );

        let desc = self.describe(intro, extra, &shown, skipped, flagged_meaning);
        let mut svg = Doc::new(super::CHART_WIDTH, layout.height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, layout.legend_y, &legend);
        draw_xy_axes(&mut svg, &layout, &self.x_axis, &self.y_axis);

        let (dx0, dx1) = (layout.x_ticks.first(), layout.x_ticks.last());
        let (dy0, dy1) = (layout.y_ticks.first(), layout.y_ticks.last());
        svg.open_group("references");
        for r in &self.references {
            match r {
                Reference::Horizontal { y, .. } if plottable(*y) => {
                    let py = layout.y.map(*y);
                    svg.line(
                        (layout.area.left, py),
                        (layout.area.right, py),
                        palette::REFERENCE,
                        2.0,
                        Dash::Dashed,
                    );
                }
                Reference::Horizontal { .. } => {}
                Reference::Line { intercept, slope, .. } => {
                    if let Some((a, b)) = clip_line(*intercept, *slope, (dx0, dx1), (dy0, dy1)) {
                        svg.line(
                            (layout.x.map(a.0), layout.y.map(a.1)),
                            (layout.x.map(b.0), layout.y.map(b.1)),
                            palette::REFERENCE,
                            2.5,
                            Dash::Solid,
                        );
                    }
                }
                Reference::Curve { points, .. } => {
                    let pixels: Vec<(f64, f64)> = points
                        .iter()
                        .filter(|(x, y)| plottable(*x) && plottable(*y))
                        .map(|(x, y)| (layout.x.map(*x), layout.y.map(*y)))
                        .filter(|p| layout.area.contains(*p))
                        .collect();
                    svg.polyline(&pixels, palette::REFERENCE, 2.5, Dash::Solid);
                }
            }
        }
        svg.close_group();

        svg.open_group("points");
        let tip = |p: &ScatterPoint| {
            let where_ = format!(
                "{} {}, {} {}",
                short(&self.x_axis),
                significant(p.x, 4),
                short(&self.y_axis),
                significant(p.y, 4)
            );
            match &p.label {
                Some(l) if !l.trim().is_empty() => format!("{}: {where_}", l.trim()),
                _ => where_,
            }
        };
        for p in shown.iter().filter(|p| p.emphasis == Emphasis::Normal) {
            let at = (layout.x.map(p.x), layout.y.map(p.y));
            svg.circle(at, 5.5, palette::DATA, Some((palette::PAPER, 1.0)), Some(&tip(p)));
        }
        for p in shown.iter().filter(|p| p.emphasis == Emphasis::Flagged) {
            let at = (layout.x.map(p.x), layout.y.map(p.y));
            svg.diamond(at, 8.5, palette::ACCENT, Some(&tip(p)));
        }
        svg.close_group();

        svg.open_group("point-labels");
        for p in &shown {
            let wanted = match self.labels {
                PointLabels::None => false,
                PointLabels::Flagged => p.emphasis == Emphasis::Flagged,
                PointLabels::All => true,
            };
            let Some(label) = p.label.as_deref().map(str::trim).filter(|l| !l.is_empty()) else {
                continue;
            };
            if !wanted {
                continue;
            }
            let text = truncate(label, 32);
            let (px, py) = (layout.x.map(p.x), layout.y.map(p.y));
            let width = estimate_width(&text, doc::SMALL_SIZE);
            let style = TextStyle::new(doc::SMALL_SIZE);
            if px + 12.0 + width > super::CHART_WIDTH - 4.0 {
                svg.text((px - 12.0, py + 5.0), &text, style.anchor(Anchor::End));
            } else {
                svg.text((px + 12.0, py + 5.0), &text, style);
            }
        }
        svg.close_group();

        if let Some(note) = note {
            draw_note(&mut svg, layout.note_y, &note);
        }
        svg.finish()
    }

    fn describe(
        &self,
        intro: &str,
        extra: &[String],
        shown: &[&ScatterPoint],
        skipped: usize,
        flagged_meaning: &str,
    ) -> String {
        let items = items_or_default(&self.items);
        let mut parts = vec![intro.to_owned()];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        if let (Some((x0, x1)), Some((y0, y1))) =
            (extent(shown.iter().map(|p| p.x)), extent(shown.iter().map(|p| p.y)))
        {
            parts.push(format!(
                "{} runs from {} to {}; {} from {} to {}.",
                capitalise(&short(&self.x_axis)),
                significant(x0, 4),
                significant(x1, 4),
                short(&self.y_axis),
                significant(y0, 4),
                significant(y1, 4)
            ));
        } else {
            parts.push("There are no points to show.".to_owned());
        }
        for r in &self.references {
            let what = match r {
                Reference::Horizontal { y, .. } => {
                    format!("a horizontal line at {}", significant(*y, 4))
                }
                Reference::Line { intercept, slope, .. } => format!(
                    "a line with intercept {} and slope {}",
                    significant(*intercept, 4),
                    significant(*slope, 4)
                ),
                Reference::Curve { .. } => "a curve".to_owned(),
            };
            let label = r.label();
            if label.is_empty() {
                parts.push(format!("Reference: {what}."));
            } else {
                parts.push(format!("Reference: {what} ({label})."));
            }
        }
        parts.extend(extra.iter().cloned());
        let flagged: Vec<&&ScatterPoint> = shown.iter().filter(|p| p.emphasis == Emphasis::Flagged).collect();
        if !flagged.is_empty() {
            let listed: Vec<String> = flagged
                .iter()
                .take(10)
                .map(|p| {
                    format!(
                        "{} ({} {}, {} {})",
                        p.label.as_deref().map(str::trim).unwrap_or("unnamed"),
                        short(&self.x_axis),
                        significant(p.x, 4),
                        short(&self.y_axis),
                        significant(p.y, 4)
                    )
                })
                .collect();
            let more =
                if flagged.len() > 10 { format!(", and {} more", flagged.len() - 10) } else { String::new() };
            parts.push(format!(
                "{} drawn as diamonds ({}): {}{}.",
                capitalise(&count_of(flagged.len(), &singular_of(items), items)),
                flagged_meaning,
                listed.join("; "),
                more
            ));
        }
        if skipped > 0 {
            parts.push(format!(
                "{} not shown because a value is missing or not finite.",
                count_of(skipped, &singular_of(items), items)
            ));
        }
        parts.join(" ")
    }
}

fn reference_dash(r: &Reference) -> Dash {
    match r {
        Reference::Horizontal { .. } => Dash::Dashed,
        _ => Dash::Solid,
    }
}

/// The axis label without its unit, for compact text.
fn short(axis: &Axis) -> String {
    let label = axis.label.trim();
    if label.is_empty() { axis.caption() } else { label.to_owned() }
}

/// The text with its first letter in upper case.
pub(crate) fn capitalise(text: &str) -> String {
    let mut chars = text.chars();
    match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => String::new(),
    }
}

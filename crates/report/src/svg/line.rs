//! Line plots, e.g. a selection criterion against model size, with optional callouts.

use super::doc::{
    self, Anchor, Dash, Doc, LegendEntry, Swatch, TextStyle, draw_legend, draw_note, draw_title,
    draw_xy_axes, legend_lines, xy_layout,
};
use super::scale::{Ticks, extent};
use super::text::{count_of, estimate_width, plottable, significant, truncate};
use super::{Axis, CHART_WIDTH, Chart, palette};
use crate::Result;

/// One named line of points, drawn in x order as given.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LineSeries {
    /// The series name, shown in the legend and the description.
    pub name: String,
    /// The points (x, y); a non-finite point breaks the line.
    pub points: Vec<(f64, f64)>,
}

/// How the horizontal axis places its ticks.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum XTicks {
    /// Nice ticks, possibly fractional.
    #[default]
    Auto,
    /// Whole numbers only (for sizes and counts).
    Integers,
}

/// A marked point with a short text, e.g. the model size a criterion prefers.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Callout {
    /// Horizontal position in data units.
    pub x: f64,
    /// Vertical position in data units.
    pub y: f64,
    /// The text beside the ring.
    pub label: String,
}

/// A line plot of one or more series.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LinePlot {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The horizontal axis caption.
    pub x_axis: Axis,
    /// The vertical axis caption.
    pub y_axis: Axis,
    /// The series, drawn in order with the palette's series colours.
    pub series: Vec<LineSeries>,
    /// How the horizontal axis places its ticks.
    pub x_ticks: XTicks,
    /// Points to ring and annotate.
    pub callouts: Vec<Callout>,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

impl Chart for LinePlot {
    fn render(&self) -> Result<String> {
        let all = || self.series.iter().flat_map(|s| s.points.iter().copied());
        let callouts: Vec<&Callout> =
            self.callouts.iter().filter(|c| plottable(c.x) && plottable(c.y)).collect();
        let valid = |p: &(f64, f64)| plottable(p.0) && plottable(p.1);
        let x_ext = extent(all().filter(valid).map(|p| p.0).chain(callouts.iter().map(|c| c.x)));
        let y_ext = extent(all().filter(valid).map(|p| p.1).chain(callouts.iter().map(|c| c.y)));
        let (x_lo, x_hi) = x_ext.unwrap_or((0.0, 1.0));
        let (y_lo, y_hi) = y_ext.unwrap_or((0.0, 1.0));
        let x_ticks = match self.x_ticks {
            XTicks::Auto => Ticks::nice(x_lo, x_hi, 6),
            XTicks::Integers => Ticks::integers(x_lo, x_hi, 8),
        };
        let skipped = all().filter(|p| !valid(p)).count() + (self.callouts.len() - callouts.len());
        let legend: Vec<LegendEntry> = if self.series.len() > 1 {
            self.series
                .iter()
                .enumerate()
                .map(|(i, s)| LegendEntry {
                    swatch: Swatch::Line(palette::series(i), Dash::Solid),
                    text: s.name.trim().to_owned(),
                })
                .collect()
        } else {
            Vec::new()
        };
        let note = (skipped > 0).then(|| {
            format!("{} not shown: a value is missing or not finite.", count_of(skipped, "point", "points"))
        });
        let layout = xy_layout(x_ticks, Ticks::nice(y_lo, y_hi, 6), legend_lines(&legend), note.is_some());
        let desc = self.describe(skipped);
        let mut svg = Doc::new(CHART_WIDTH, layout.height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, layout.legend_y, &legend);
        draw_xy_axes(&mut svg, &layout, &self.x_axis, &self.y_axis);

        for (i, series) in self.series.iter().enumerate() {
            let colour = palette::series(i);
            svg.open_group("series");
            // Draw each unbroken run of finite points as its own polyline.
            let mut run: Vec<(f64, f64)> = Vec::new();
            for p in series.points.iter().chain(std::iter::once(&(f64::NAN, f64::NAN))) {
                if valid(p) {
                    run.push((layout.x.map(p.0), layout.y.map(p.1)));
                } else {
                    svg.polyline(&run, colour, 3.0, Dash::Solid);
                    run.clear();
                }
            }
            for p in series.points.iter().filter(|p| valid(p)) {
                let tip = format!(
                    "{}{}{} {}, {} {}",
                    series.name.trim(),
                    if series.name.trim().is_empty() { "" } else { ": " },
                    self.x_axis.label.trim(),
                    significant(p.0, 4),
                    self.y_axis.label.trim(),
                    significant(p.1, 4)
                );
                svg.circle(
                    (layout.x.map(p.0), layout.y.map(p.1)),
                    5.0,
                    colour,
                    Some((palette::PAPER, 1.5)),
                    Some(&tip),
                );
            }
            svg.close_group();
        }

        svg.open_group("callouts");
        for c in &callouts {
            let (px, py) = (layout.x.map(c.x), layout.y.map(c.y));
            svg.circle((px, py), 12.0, "none", Some((palette::ACCENT, 2.5)), None);
            let text = truncate(&c.label, 36);
            let width = estimate_width(&text, doc::SMALL_SIZE);
            // Put the text above the ring, shifted inwards when it would leave the plot.
            let anchor = if px + width / 2.0 > layout.area.right {
                Anchor::End
            } else if px - width / 2.0 < layout.area.left {
                Anchor::Start
            } else {
                Anchor::Middle
            };
            let ty = if py - 20.0 < layout.area.top + 4.0 { py + 32.0 } else { py - 20.0 };
            svg.text(
                (px, ty),
                &text,
                TextStyle::new(doc::SMALL_SIZE).anchor(anchor).bold().fill(palette::ACCENT),
            );
        }
        svg.close_group();
        if let Some(note) = note {
            draw_note(&mut svg, layout.note_y, &note);
        }
        Ok(svg.finish())
    }
}

impl LinePlot {
    fn describe(&self, skipped: usize) -> String {
        let mut parts = vec![format!(
            "Line plot of {} against {}, {}.",
            self.y_axis.spoken(),
            self.x_axis.spoken(),
            count_of(self.series.len(), "series", "series")
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        for (i, s) in self.series.iter().enumerate() {
            let name =
                if s.name.trim().is_empty() { format!("Series {}", i + 1) } else { s.name.trim().to_owned() };
            let pts: Vec<(f64, f64)> =
                s.points.iter().copied().filter(|p| plottable(p.0) && plottable(p.1)).collect();
            let lowest = pts.iter().min_by(|a, b| a.1.total_cmp(&b.1));
            let highest = pts.iter().max_by(|a, b| a.1.total_cmp(&b.1));
            match (lowest, highest) {
                (Some(lo), Some(hi)) => parts.push(format!(
                    "{name}: {}; lowest {} at {} {}, highest {} at {} {}.",
                    count_of(pts.len(), "point", "points"),
                    significant(lo.1, 4),
                    self.x_axis.label.trim(),
                    significant(lo.0, 4),
                    significant(hi.1, 4),
                    self.x_axis.label.trim(),
                    significant(hi.0, 4)
                )),
                _ => parts.push(format!("{name}: no points to show.")),
            }
        }
        for c in self.callouts.iter().filter(|c| plottable(c.x) && plottable(c.y)) {
            parts.push(format!(
                "Marked: {} ({} {}, {} {}).",
                c.label.trim(),
                self.x_axis.label.trim(),
                significant(c.x, 4),
                self.y_axis.label.trim(),
                significant(c.y, 4)
            ));
        }
        if skipped > 0 {
            parts.push(format!(
                "{} not shown because a value is missing or not finite.",
                count_of(skipped, "point", "points")
            ));
        }
        parts.join(" ")
    }
}

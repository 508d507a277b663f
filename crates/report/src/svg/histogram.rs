//! Histograms of one measure, with optional marker lines.

use super::doc::{
    self, Anchor, Dash, Doc, LegendEntry, Swatch, TextStyle, draw_legend, draw_note, draw_title,
    draw_xy_axes, legend_lines, xy_layout,
};
use super::scale::{Ticks, extent};
use super::text::{count_of, estimate_width, fixed, plottable, significant, singular_of, truncate};
use super::{Axis, CHART_WIDTH, Chart, items_or_default, palette};
use crate::{ReportError, Result};

/// How a histogram chooses its bins.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub enum Bins {
    /// About ⌈log₂ n⌉ + 1 bins (Sturges 1926), widened to a nice width.
    #[default]
    Auto,
    /// About this many bins, widened to a nice width.
    Count(usize),
    /// Bins of exactly this width, aligned on multiples of it.
    Width(f64),
}

/// A labelled vertical line on a histogram, e.g. the mean or a threshold.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Marker {
    /// Position in data units.
    pub x: f64,
    /// What the line marks.
    pub label: String,
}

/// A histogram of the values of one measure.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Histogram {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The caption of the measured quantity (horizontal axis).
    pub axis: Axis,
    /// The plural noun for what is counted, e.g. "districts"; the vertical axis reads "Number of districts".
    pub items: String,
    /// The values; non-finite values are skipped and reported.
    pub values: Vec<f64>,
    /// How bins are chosen.
    pub bins: Bins,
    /// Vertical marker lines.
    pub markers: Vec<Marker>,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "histogram";

impl Chart for Histogram {
    fn render(&self) -> Result<String> {
        let items = items_or_default(&self.items);
        let values: Vec<f64> = self.values.iter().copied().filter(|v| plottable(*v)).collect();
        let skipped = self.values.len() - values.len();
        let markers: Vec<&Marker> = self.markers.iter().filter(|m| plottable(m.x)).collect();
        let (lo, hi) = extent(values.iter().copied()).unwrap_or((0.0, 1.0));
        let edges = match self.bins {
            Bins::Auto => {
                let k = (values.len().max(1) as f64).log2().ceil() as usize + 1;
                Ticks::bins(lo, hi, k)
            }
            Bins::Count(0) => {
                return Err(ReportError::chart(CHART, "the number of bins must be at least 1"));
            }
            Bins::Count(k) => Ticks::bins(lo, hi, k.min(200)),
            Bins::Width(w) => Ticks::stepped(lo, hi, w).ok_or_else(|| {
                ReportError::chart(CHART, "the bin width must be a positive number giving at most 200 bins")
            })?,
        };
        let edge_values = edges.values();
        let bins = edge_values.len().saturating_sub(1).max(1);
        let mut counts = vec![0usize; bins];
        let (first, step) = (edges.first(), edges.step());
        for &v in &values {
            let i = (((v - first) / step).floor().max(0.0) as usize).min(bins - 1);
            counts[i] += 1;
        }
        let max_count = counts.iter().copied().max().unwrap_or(0);
        let x_lo = markers.iter().map(|m| m.x).fold(edges.first(), f64::min);
        let x_hi = markers.iter().map(|m| m.x).fold(edges.last(), f64::max);
        let x_ticks = if edge_values.len() <= 11 && x_lo == edges.first() && x_hi == edges.last() {
            edges.clone()
        } else {
            Ticks::nice(x_lo, x_hi, 6)
        };
        // Headroom above the tallest bar leaves space for its count label.
        let y_ticks = Ticks::integers(0.0, (max_count.max(1) as f64 * 1.08).max(max_count as f64 + 0.5), 5);
        let legend: Vec<LegendEntry> = markers
            .iter()
            .enumerate()
            .filter(|(_, m)| !m.label.trim().is_empty())
            .map(|(i, m)| LegendEntry {
                swatch: Swatch::Line(marker_colour(i), Dash::Dashed),
                text: m.label.trim().to_owned(),
            })
            .collect();
        let note = (skipped > 0).then(|| {
            format!(
                "{} not counted: the value is missing or not finite.",
                count_of(skipped, &singular_of(items), items)
            )
        });
        let layout = xy_layout(x_ticks, y_ticks, legend_lines(&legend), note.is_some());
        let y_axis = Axis::new(format!("Number of {items}"), "");
        let desc = self.describe(&values, &counts, &edges, skipped);
        let mut svg = Doc::new(CHART_WIDTH, layout.height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, layout.legend_y, &legend);
        draw_xy_axes(&mut svg, &layout, &self.axis, &y_axis);

        svg.open_group("bins");
        for (i, &count) in counts.iter().enumerate() {
            let (b0, b1) = (first + step * i as f64, first + step * (i + 1) as f64);
            let (px0, px1) = (layout.x.map(b0), layout.x.map(b1));
            let py = layout.y.map(count as f64);
            let tip = format!(
                "{} to {}: {}",
                fixed(b0, edges.decimals()),
                fixed(b1, edges.decimals()),
                count_of(count, &singular_of(items), items)
            );
            if count > 0 {
                svg.rect(
                    (px0, py, px1 - px0, layout.area.bottom - py),
                    palette::DATA,
                    Some((palette::PAPER, 1.5)),
                    Some(&tip),
                );
                let label = count.to_string();
                if px1 - px0 >= estimate_width(&label, doc::SMALL_SIZE) + 4.0 {
                    svg.text(
                        ((px0 + px1) / 2.0, py - 6.0),
                        &label,
                        TextStyle::new(doc::SMALL_SIZE).anchor(Anchor::Middle),
                    );
                }
            }
        }
        svg.close_group();
        svg.open_group("markers");
        for (i, m) in markers.iter().enumerate() {
            let px = layout.x.map(m.x);
            svg.line((px, layout.area.top), (px, layout.area.bottom), marker_colour(i), 2.5, Dash::Dashed);
        }
        svg.close_group();
        if let Some(note) = note {
            draw_note(&mut svg, layout.note_y, &note);
        }
        Ok(svg.finish())
    }
}

fn marker_colour(i: usize) -> &'static str {
    [palette::ACCENT, palette::REFERENCE, palette::INK][i % 3]
}

impl Histogram {
    fn describe(&self, values: &[f64], counts: &[usize], edges: &Ticks, skipped: usize) -> String {
        let items = items_or_default(&self.items);
        let mut parts = vec![format!(
            "Histogram of {} for {}.",
            self.axis.spoken(),
            count_of(values.len(), &singular_of(items), items)
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        if values.is_empty() {
            parts.push("There are no values to show.".to_owned());
        } else {
            let d = edges.decimals();
            parts.push(format!(
                "{} bins of width {} from {} to {}.",
                counts.len(),
                fixed(edges.step(), d),
                fixed(edges.first(), d),
                fixed(edges.last(), d)
            ));
            let listed: Vec<String> = counts
                .iter()
                .enumerate()
                .map(|(i, c)| {
                    let b0 = edges.first() + edges.step() * i as f64;
                    format!("{} to {}: {}", fixed(b0, d), fixed(b0 + edges.step(), d), c)
                })
                .collect();
            parts.push(format!("Counts per bin: {}.", listed.join("; ")));
            let mut sorted = values.to_vec();
            sorted.sort_by(f64::total_cmp);
            let n = sorted.len();
            let median = if n % 2 == 1 { sorted[n / 2] } else { (sorted[n / 2 - 1] + sorted[n / 2]) / 2.0 };
            let mean = sorted.iter().sum::<f64>() / n as f64;
            parts.push(format!(
                "Smallest {}, median {}, mean {}, largest {}.",
                significant(sorted[0], 4),
                significant(median, 4),
                significant(mean, 4),
                significant(sorted[n - 1], 4)
            ));
        }
        for m in self.markers.iter().filter(|m| plottable(m.x)) {
            parts.push(format!(
                "A dashed line marks {} at {}.",
                truncate(m.label.trim(), 60),
                significant(m.x, 4)
            ));
        }
        if skipped > 0 {
            parts.push(format!(
                "{} not counted because the value is missing or not finite.",
                count_of(skipped, &singular_of(items), items)
            ));
        }
        parts.join(" ")
    }
}

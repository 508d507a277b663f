//! Horizontal bar charts, with one or several series per category.

use super::doc::{
    self, Anchor, Area, Dash, Doc, LEGEND_LINE, LegendEntry, MARGIN, Swatch, TITLE_Y, TextStyle, draw_legend,
    draw_note, draw_title, legend_lines,
};
use super::scale::{LinearScale, Ticks, extent};
use super::text::{count_of, count_verb, estimate_width, fixed, plottable, singular_of, truncate};
use super::{Axis, CHART_WIDTH, Chart, items_or_default, palette};
use crate::{ReportError, Result};

/// One category of a bar chart with a value per series.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BarGroup {
    /// The category name, e.g. a district.
    pub label: String,
    /// One value per series, in series order.
    pub values: Vec<f64>,
}

/// A labelled vertical line across the bars, e.g. a VIF threshold.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Threshold {
    /// Position in data units.
    pub value: f64,
    /// What the line marks.
    pub label: String,
}

/// A horizontal bar chart.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BarChart {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The caption of the value axis, with its unit.
    pub axis: Axis,
    /// The plural noun for the categories, e.g. "districts" (default "points").
    pub items: String,
    /// Series names; leave empty for a single unnamed series.
    pub series: Vec<String>,
    /// The categories, drawn top to bottom in this order.
    pub groups: Vec<BarGroup>,
    /// An optional line across the bars.
    pub threshold: Option<Threshold>,
    /// Decimals of the printed values; `None` uses the axis ticks' decimals.
    pub decimals: Option<usize>,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "bar chart";
const BAR: f64 = 24.0;
const GAP: f64 = 16.0;

impl Chart for BarChart {
    fn render(&self) -> Result<String> {
        let per_group = self.series.len().max(1);
        if let Some(g) = self.groups.iter().find(|g| g.values.len() != per_group) {
            return Err(ReportError::chart(
                CHART,
                format!(
                    "\"{}\" has {} values but the chart has {}",
                    g.label.trim(),
                    g.values.len(),
                    count_of(per_group, "series", "series")
                ),
            ));
        }
        let items = items_or_default(&self.items);
        let threshold = self.threshold.as_ref().filter(|t| plottable(t.value));
        let (lo, hi) = extent(
            self.groups
                .iter()
                .flat_map(|g| g.values.iter().copied())
                .chain([0.0])
                .chain(threshold.map(|t| t.value)),
        )
        .unwrap_or((0.0, 1.0));
        let ticks = Ticks::nice(lo, hi, 6);
        let decimals = self.decimals.unwrap_or(ticks.decimals()).min(8);
        let labels: Vec<String> = self.groups.iter().map(|g| truncate(&g.label, 30)).collect();
        let label_width = labels.iter().map(|l| estimate_width(l, doc::TICK_SIZE)).fold(60.0, f64::max);
        let value_width = self
            .groups
            .iter()
            .flat_map(|g| g.values.iter())
            .map(|v| estimate_width(&fixed(*v, decimals), doc::SMALL_SIZE))
            .fold(0.0, f64::max);
        let mut legend: Vec<LegendEntry> = if self.series.len() > 1 {
            self.series
                .iter()
                .enumerate()
                .map(|(i, s)| LegendEntry {
                    swatch: Swatch::Block(palette::series(i)),
                    text: s.trim().to_owned(),
                })
                .collect()
        } else {
            Vec::new()
        };
        if let Some(t) = threshold.filter(|t| !t.label.trim().is_empty()) {
            legend.push(LegendEntry {
                swatch: Swatch::Line(palette::ACCENT, Dash::Dashed),
                text: t.label.trim().to_owned(),
            });
        }
        let legend_y = TITLE_Y + 30.0;
        let top = TITLE_Y + 26.0 + LEGEND_LINE * legend_lines(&legend) as f64;
        let group_height = BAR * per_group as f64 + GAP;
        let bottom = top + group_height * self.groups.len().max(1) as f64;
        let left = MARGIN + label_width + 14.0;
        // Room on both sides for value labels printed beyond the bar ends.
        let right = CHART_WIDTH - MARGIN - value_width - 10.0;
        let neg_room = if lo < 0.0 { value_width + 10.0 } else { 0.0 };
        let area = Area { left: left + neg_room, top, right: right.max(left + neg_room + 120.0), bottom };
        let x = LinearScale::from_ticks(&ticks, area.left, area.right);
        let missing = self.groups.iter().flat_map(|g| g.values.iter()).filter(|v| !plottable(**v)).count();
        let note = (missing > 0).then(|| {
            format!("{} not drawn: the value is missing or not finite.", count_of(missing, "bar", "bars"))
        });
        let note_y = bottom + 84.0;
        let height = if note.is_some() { note_y + 16.0 } else { bottom + 70.0 };

        let desc = self.describe(items, decimals, missing);
        let mut svg = Doc::new(CHART_WIDTH, height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, legend_y, &legend);
        doc::draw_x_axis(&mut svg, area, &x, &ticks, &self.axis);

        svg.open_group("bars");
        let zero = x.map(0.0);
        for (gi, (group, label)) in self.groups.iter().zip(&labels).enumerate() {
            let gy = area.top + group_height * gi as f64 + GAP / 2.0;
            svg.text(
                (left - 14.0, gy + BAR * per_group as f64 / 2.0 + 5.0),
                label,
                TextStyle::new(doc::TICK_SIZE).anchor(Anchor::End),
            );
            for (si, &v) in group.values.iter().enumerate() {
                let by = gy + BAR * si as f64;
                let text = if plottable(v) { fixed(v, decimals) } else { "no value".to_owned() };
                if !plottable(v) {
                    svg.text(
                        (zero + 6.0, by + BAR / 2.0 + 5.0),
                        &text,
                        TextStyle::new(doc::SMALL_SIZE).fill(palette::MUTED),
                    );
                    continue;
                }
                let px = x.map(v);
                let series_name = self.series.get(si).map(|s| s.trim()).unwrap_or("");
                let tip = if series_name.is_empty() {
                    format!("{}: {}", group.label.trim(), text)
                } else {
                    format!("{}, {}: {}", group.label.trim(), series_name, text)
                };
                svg.rect(
                    (px.min(zero), by + 2.0, (px - zero).abs(), BAR - 4.0),
                    palette::series(si),
                    None,
                    Some(&tip),
                );
                let style = TextStyle::new(doc::SMALL_SIZE);
                if v < 0.0 {
                    svg.text((px - 6.0, by + BAR / 2.0 + 5.0), &text, style.anchor(Anchor::End));
                } else {
                    svg.text((px + 6.0, by + BAR / 2.0 + 5.0), &text, style);
                }
            }
        }
        svg.close_group();
        if lo < 0.0 {
            svg.line((zero, area.top), (zero, area.bottom), palette::INK, 1.5, Dash::Solid);
        }
        if let Some(t) = threshold {
            let px = x.map(t.value);
            svg.line((px, area.top), (px, area.bottom), palette::ACCENT, 2.5, Dash::Dashed);
        }
        if let Some(note) = note {
            draw_note(&mut svg, note_y, &note);
        }
        Ok(svg.finish())
    }
}

impl BarChart {
    fn describe(&self, items: &str, decimals: usize, missing: usize) -> String {
        let series_text = if self.series.len() > 1 {
            let names: Vec<&str> = self.series.iter().map(|s| s.trim()).collect();
            format!(" in {} series ({})", self.series.len(), names.join(", "))
        } else {
            String::new()
        };
        let mut parts = vec![format!(
            "Bar chart of {} for {}{}.",
            self.axis.spoken(),
            count_of(self.groups.len(), &singular_of(items), items),
            series_text
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        const LISTED: usize = 24;
        let listed: Vec<String> = self
            .groups
            .iter()
            .take(LISTED)
            .map(|g| {
                let values: Vec<String> = g
                    .values
                    .iter()
                    .enumerate()
                    .map(|(i, v)| {
                        let value = if plottable(*v) { fixed(*v, decimals) } else { "no value".to_owned() };
                        match self.series.get(i).filter(|_| self.series.len() > 1) {
                            Some(name) => format!("{} {}", name.trim(), value),
                            None => value,
                        }
                    })
                    .collect();
                format!("{} {}", g.label.trim(), values.join(", "))
            })
            .collect();
        if listed.is_empty() {
            parts.push("There are no values to show.".to_owned());
        } else {
            let more = if self.groups.len() > LISTED {
                format!("; and {} more", self.groups.len() - LISTED)
            } else {
                String::new()
            };
            parts.push(format!("Values: {}{}.", listed.join("; "), more));
        }
        if let Some(t) = self.threshold.as_ref().filter(|t| plottable(t.value)) {
            let above =
                self.groups.iter().filter(|g| g.values.iter().any(|v| plottable(*v) && *v > t.value)).count();
            parts.push(format!(
                "A dashed line marks {} at {}; {} it.",
                t.label.trim(),
                fixed(t.value, decimals),
                count_verb(above, &singular_of(items), items, "exceeds", "exceed")
            ));
        }
        if missing > 0 {
            parts.push(format!(
                "{} no value because it is missing or not finite.",
                count_verb(missing, "bar", "bars", "has", "have")
            ));
        }
        parts.join(" ")
    }
}

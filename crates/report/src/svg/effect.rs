//! Effect plots: one row per coefficient, its estimate and interval on a shared axis.

use super::doc::{
    self, Anchor, Area, Dash, Doc, LEGEND_LINE, LegendEntry, MARGIN, Swatch, TITLE_Y, TextStyle, draw_legend,
    draw_note, draw_title, legend_lines,
};
use super::scale::{LinearScale, Ticks, extent};
use super::text::{count_of, count_verb, estimate_width, fixed, plottable, truncate};
use super::{Axis, CHART_WIDTH, Chart, check_interval, palette};
use crate::Result;

/// One row of an effect plot.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EffectRow {
    /// What the row is, e.g. "Unemployment (per percentage point)".
    pub label: String,
    /// The point estimate.
    pub estimate: f64,
    /// The lower end of the interval.
    pub low: f64,
    /// The upper end of the interval.
    pub high: f64,
}

/// A horizontal interval plot of estimates with their intervals.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EffectPlot {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The caption of the shared value axis, with its unit.
    pub axis: Axis,
    /// The rows, drawn top to bottom in this order.
    pub rows: Vec<EffectRow>,
    /// What the interval is, e.g. "95% confidence interval".
    pub interval_name: String,
    /// A value to mark with a vertical line, usually 0 (no association).
    pub reference: Option<f64>,
    /// What the reference line means, e.g. "No association".
    pub reference_label: String,
    /// Decimals of the printed values; `None` chooses one more than the axis ticks use.
    pub decimals: Option<usize>,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "effect plot";
const ROW_HEIGHT: f64 = 44.0;

impl Chart for EffectPlot {
    fn render(&self) -> Result<String> {
        for row in &self.rows {
            check_interval(CHART, &row.label, row.low, row.high)?;
        }
        let interval_name =
            if self.interval_name.trim().is_empty() { "Interval" } else { self.interval_name.trim() };
        let reference = self.reference.filter(|v| plottable(*v));
        let (lo, hi) = extent(
            self.rows
                .iter()
                .filter(|r| plottable(r.estimate))
                .flat_map(|r| [r.estimate, r.low, r.high])
                .chain(reference),
        )
        .unwrap_or((0.0, 1.0));
        let ticks = Ticks::nice(lo, hi, 6);
        let decimals = self.decimals.unwrap_or(ticks.decimals() + 1).min(8);

        let value_text = |r: &EffectRow| -> String {
            if !plottable(r.estimate) {
                "not estimable".to_owned()
            } else if plottable(r.low) && plottable(r.high) {
                format!(
                    "{} ({} to {})",
                    fixed(r.estimate, decimals),
                    fixed(r.low, decimals),
                    fixed(r.high, decimals)
                )
            } else {
                format!("{} (no interval)", fixed(r.estimate, decimals))
            }
        };
        let labels: Vec<String> = self.rows.iter().map(|r| truncate(&r.label, 30)).collect();
        let label_width = labels.iter().map(|l| estimate_width(l, doc::TICK_SIZE)).fold(80.0, f64::max);
        let values_width = self
            .rows
            .iter()
            .map(|r| estimate_width(&value_text(r), doc::SMALL_SIZE))
            .fold(estimate_width("Estimate (interval)", doc::SMALL_SIZE), f64::max);
        let left = MARGIN + label_width + 16.0;
        let right = CHART_WIDTH - MARGIN - values_width - 16.0;
        let mut legend = vec![
            LegendEntry { swatch: Swatch::Dot(palette::DATA), text: "Estimate".to_owned() },
            LegendEntry {
                swatch: Swatch::Line(palette::INTERVAL, Dash::Solid),
                text: interval_name.to_owned(),
            },
        ];
        if reference.is_some() && !self.reference_label.trim().is_empty() {
            legend.push(LegendEntry {
                swatch: Swatch::Line(palette::REFERENCE, Dash::Dashed),
                text: self.reference_label.trim().to_owned(),
            });
        }
        let legend_y = TITLE_Y + 30.0;
        let header_y = legend_y + LEGEND_LINE * legend_lines(&legend) as f64 + 4.0;
        let top = header_y + 12.0;
        let bottom = top + ROW_HEIGHT * self.rows.len().max(1) as f64;
        let missing = self
            .rows
            .iter()
            .filter(|r| !plottable(r.estimate) || !plottable(r.low) || !plottable(r.high))
            .count();
        let note = (missing > 0).then(|| {
            format!(
                "{} without a full interval: a value is missing or not finite.",
                count_of(missing, "row", "rows")
            )
        });
        let note_y = bottom + 84.0;
        let height = if note.is_some() { note_y + 16.0 } else { bottom + 70.0 };
        let area = Area { left, top, right: right.max(left + 120.0), bottom };
        let x = LinearScale::from_ticks(&ticks, area.left, area.right);

        let desc = self.describe(interval_name, decimals, &value_text);
        let mut svg = Doc::new(CHART_WIDTH, height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, legend_y, &legend);
        svg.text(
            (CHART_WIDTH - MARGIN, header_y),
            "Estimate (interval)",
            TextStyle::new(doc::SMALL_SIZE).anchor(Anchor::End).fill(palette::MUTED),
        );

        doc::draw_x_axis(&mut svg, area, &x, &ticks, &self.axis);
        if let Some(v) = reference {
            let px = x.map(v);
            svg.line((px, area.top), (px, area.bottom), palette::REFERENCE, 2.0, Dash::Dashed);
        }

        svg.open_group("effects");
        for (i, (row, label)) in self.rows.iter().zip(&labels).enumerate() {
            let cy = area.top + ROW_HEIGHT * (i as f64 + 0.5);
            if i > 0 {
                let sep = area.top + ROW_HEIGHT * i as f64;
                svg.line((MARGIN, sep), (CHART_WIDTH - MARGIN, sep), palette::GRID, 1.0, Dash::Dotted);
            }
            svg.text((left - 16.0, cy + 5.0), label, TextStyle::new(doc::TICK_SIZE).anchor(Anchor::End));
            let text = value_text(row);
            svg.text(
                (CHART_WIDTH - MARGIN, cy + 5.0),
                &text,
                TextStyle::new(doc::SMALL_SIZE).anchor(Anchor::End),
            );
            if !plottable(row.estimate) {
                continue;
            }
            let tip = format!("{}: {}", row.label.trim(), text);
            if plottable(row.low) && plottable(row.high) {
                svg.interval_bar((x.map(row.low), x.map(row.high)), cy, 12.0, palette::INTERVAL, Some(&tip));
            }
            svg.circle(
                (x.map(row.estimate), cy),
                7.0,
                palette::DATA,
                Some((palette::PAPER, 2.0)),
                Some(&tip),
            );
        }
        svg.close_group();
        if let Some(note) = note {
            draw_note(&mut svg, note_y, &note);
        }
        Ok(svg.finish())
    }
}

impl EffectPlot {
    fn describe(
        &self,
        interval_name: &str,
        decimals: usize,
        value_text: &dyn Fn(&EffectRow) -> String,
    ) -> String {
        let mut parts = vec![format!(
            "Effect plot of {} with the {} for {}, measured in {}.",
            count_of(self.rows.len(), "estimate", "estimates"),
            interval_name.to_lowercase(),
            if self.rows.len() == 1 { "it" } else { "each" },
            self.axis.spoken()
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        if self.rows.is_empty() {
            parts.push("There are no estimates to show.".to_owned());
        }
        for row in &self.rows {
            parts.push(format!("{}: {}.", row.label.trim(), value_text(row)));
        }
        if let Some(v) = self.reference.filter(|v| plottable(*v)) {
            let crossing = self
                .rows
                .iter()
                .filter(|r| plottable(r.low) && plottable(r.high) && r.low <= v && v <= r.high)
                .count();
            let meaning = if self.reference_label.trim().is_empty() {
                String::new()
            } else {
                format!(" ({})", self.reference_label.trim())
            };
            parts.push(format!(
                "A dashed line marks {}{}; {} it.",
                fixed(v, decimals.min(2)),
                meaning,
                count_verb(crossing, "interval", "intervals", "includes", "include")
            ));
        }
        let missing = self.rows.iter().filter(|r| !plottable(r.estimate)).count();
        if missing > 0 {
            parts.push(format!(
                "{} could not be drawn because the estimate is missing or not finite.",
                count_of(missing, "row", "rows")
            ));
        }
        parts.join(" ")
    }
}

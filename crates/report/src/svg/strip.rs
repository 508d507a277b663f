//! Interval strips: one line per item, its observed value against an interval of what a model
//! expects, ordered as the caller gives them (for example by predicted value).
//!
//! Each line carries a tinted bar for the interval, a short upright tick for the model's
//! prediction and a dot for the observed value; an observed value the caller flags is drawn as
//! a diamond in the accent colour. Values are read on a shared axis printed above and below.

use super::doc::{
    self, Anchor, Area, Dash, Doc, LEGEND_LINE, LegendEntry, MARGIN, Swatch, TITLE_Y, TextStyle, draw_legend,
    draw_note, draw_title, legend_lines,
};
use super::scale::{LinearScale, Ticks, extent};
use super::text::{count_of, estimate_width, plottable, significant, singular_of, truncate};
use super::{Axis, CHART_WIDTH, Chart, Emphasis, check_interval, items_or_default, palette};
use crate::Result;

/// One line of an interval strip.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct StripRow {
    /// The item's name, e.g. a district code.
    pub label: String,
    /// The observed value.
    pub observed: f64,
    /// The model's prediction.
    pub predicted: f64,
    /// The interval's lower end.
    pub low: f64,
    /// The interval's upper end.
    pub high: f64,
    /// Whether the observed value is set apart (e.g. outside its interval).
    pub emphasis: Emphasis,
}

/// Observed values against model intervals, one line per item.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct IntervalStrip {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The caption of the shared value axis, with its unit.
    pub axis: Axis,
    /// The plural noun for the items, e.g. "districts".
    pub items: String,
    /// The lines, drawn top to bottom in this order.
    pub rows: Vec<StripRow>,
    /// What the interval is, e.g. "95% interval from a model fitted without the district".
    pub interval_name: String,
    /// What a flagged observed value means, for the legend and description.
    pub flagged_meaning: String,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "interval strip";
const ROW_HEIGHT: f64 = 20.0;

impl Chart for IntervalStrip {
    fn render(&self) -> Result<String> {
        for row in &self.rows {
            check_interval(CHART, &row.label, row.low, row.high)?;
        }
        let items = items_or_default(&self.items);
        let interval_name =
            if self.interval_name.trim().is_empty() { "Interval" } else { self.interval_name.trim() };
        let flagged_meaning =
            if self.flagged_meaning.trim().is_empty() { "Flagged" } else { self.flagged_meaning.trim() };
        let (lo, hi) = extent(self.rows.iter().flat_map(|r| [r.observed, r.predicted, r.low, r.high]))
            .unwrap_or((0.0, 1.0));
        let ticks = Ticks::nice(lo, hi, 6);
        let labels: Vec<String> = self.rows.iter().map(|r| truncate(r.label.trim(), 18)).collect();
        let label_width = labels.iter().map(|l| estimate_width(l, doc::SMALL_SIZE)).fold(40.0, f64::max);
        let mut legend = vec![
            LegendEntry { swatch: Swatch::Block(palette::INTERVAL), text: interval_name.to_owned() },
            LegendEntry { swatch: Swatch::Line(palette::INK, Dash::Solid), text: "Predicted".to_owned() },
            LegendEntry { swatch: Swatch::Dot(palette::DATA), text: "Observed".to_owned() },
        ];
        if self.rows.iter().any(|r| r.emphasis == Emphasis::Flagged) {
            legend.push(LegendEntry {
                swatch: Swatch::Diamond(palette::ACCENT),
                text: flagged_meaning.to_owned(),
            });
        }
        let legend_y = TITLE_Y + 30.0;
        let top = legend_y + LEGEND_LINE * legend_lines(&legend) as f64 + 34.0;
        let bottom = top + ROW_HEIGHT * self.rows.len().max(1) as f64;
        let skipped = self.rows.iter().filter(|r| !plottable(r.observed)).count();
        let no_interval = self
            .rows
            .iter()
            .filter(|r| plottable(r.observed) && !(plottable(r.low) && plottable(r.high)))
            .count();
        let note = match (skipped, no_interval) {
            (0, 0) => None,
            (s, 0) => Some(format!(
                "{} not drawn: the value is missing or not finite.",
                count_of(s, &singular_of(items), items)
            )),
            (_, m) => Some(format!(
                "{} drawn without an interval: it is undefined for them.",
                count_of(m, &singular_of(items), items)
            )),
        };
        let note_y = bottom + 84.0;
        let height = if note.is_some() { note_y + 16.0 } else { bottom + 70.0 };
        let last_label = estimate_width(&ticks.label(ticks.last()), doc::TICK_SIZE);
        let area = Area {
            left: MARGIN + label_width + 14.0,
            top,
            right: CHART_WIDTH - MARGIN - (last_label / 2.0).max(12.0),
            bottom,
        };
        let x = LinearScale::from_ticks(&ticks, area.left, area.right);

        let desc = self.describe(items, interval_name, flagged_meaning);
        let mut svg = Doc::new(CHART_WIDTH, height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        draw_legend(&mut svg, legend_y, &legend);
        doc::draw_x_axis(&mut svg, area, &x, &ticks, &self.axis);
        // The same tick labels above the first line, so a long strip reads without scrolling back.
        svg.open_group("top-axis");
        let tick = TextStyle::new(doc::TICK_SIZE).fill(palette::MUTED).anchor(Anchor::Middle);
        for &v in ticks.values() {
            svg.text((x.map(v), area.top - 10.0), &ticks.label(v), tick);
        }
        svg.close_group();

        svg.open_group("strip");
        for (i, (row, label)) in self.rows.iter().zip(&labels).enumerate() {
            let cy = area.top + ROW_HEIGHT * (i as f64 + 0.5);
            if i % 2 == 1 {
                svg.line((area.left, cy), (area.right, cy), palette::GRID, 1.0, Dash::Dotted);
            }
            svg.text(
                (area.left - 10.0, cy + 5.0),
                label,
                TextStyle::new(doc::SMALL_SIZE).anchor(Anchor::End),
            );
            let tip = format!(
                "{}: observed {}, predicted {}, {} {} to {}",
                row.label.trim(),
                significant(row.observed, 4),
                significant(row.predicted, 4),
                interval_name.to_lowercase(),
                significant(row.low, 4),
                significant(row.high, 4)
            );
            if plottable(row.low) && plottable(row.high) {
                svg.interval_bar((x.map(row.low), x.map(row.high)), cy, 10.0, palette::INTERVAL, Some(&tip));
            }
            if plottable(row.predicted) {
                let px = x.map(row.predicted);
                svg.line((px, cy - 8.0), (px, cy + 8.0), palette::INK, 2.0, Dash::Solid);
            }
            if plottable(row.observed) {
                let at = (x.map(row.observed), cy);
                match row.emphasis {
                    Emphasis::Flagged => svg.diamond(at, 7.0, palette::ACCENT, Some(&tip)),
                    Emphasis::Normal => {
                        svg.circle(at, 4.5, palette::DATA, Some((palette::PAPER, 1.0)), Some(&tip))
                    }
                }
            }
        }
        svg.close_group();
        if let Some(note) = note {
            draw_note(&mut svg, note_y, &note);
        }
        Ok(svg.finish())
    }
}

impl IntervalStrip {
    fn describe(&self, items: &str, interval_name: &str, flagged_meaning: &str) -> String {
        let n = self.rows.len();
        let mut parts = vec![format!(
            "Interval strip of {}: for each, the observed value of {} as a dot, the model's prediction as a \
             tick, and the {} as a bar.",
            count_of(n, &singular_of(items), items),
            self.axis.spoken(),
            interval_name.to_lowercase()
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        if let Some((lo, hi)) = extent(self.rows.iter().map(|r| r.observed)) {
            parts.push(format!("Observed values run from {} to {}.", significant(lo, 4), significant(hi, 4)));
        }
        let flagged: Vec<&StripRow> = self.rows.iter().filter(|r| r.emphasis == Emphasis::Flagged).collect();
        if flagged.is_empty() {
            parts.push(format!("No {} are drawn as diamonds ({}).", items, flagged_meaning.to_lowercase()));
        } else {
            let listed: Vec<String> = flagged
                .iter()
                .take(12)
                .map(|r| {
                    format!(
                        "{} (observed {}, interval {} to {})",
                        r.label.trim(),
                        significant(r.observed, 4),
                        significant(r.low, 4),
                        significant(r.high, 4)
                    )
                })
                .collect();
            let more =
                if flagged.len() > 12 { format!(", and {} more", flagged.len() - 12) } else { String::new() };
            parts.push(format!(
                "{} drawn as diamonds ({}): {}{}.",
                count_of(flagged.len(), &singular_of(items), items),
                flagged_meaning.to_lowercase(),
                listed.join("; "),
                more
            ));
        }
        parts.join(" ")
    }
}

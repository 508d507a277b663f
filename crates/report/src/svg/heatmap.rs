//! Correlation heat maps with the value printed in every cell.
//!
//! Columns are numbered rather than named: row labels read "1  Unemployment",
//! and the column heads carry the same numbers, so every label stays
//! horizontal and readable on a projector.

use super::doc::{self, Anchor, Doc, MARGIN, TITLE_Y, TextStyle, draw_note, draw_title};
use super::text::{count_of, count_verb, estimate_width, fixed, truncate};
use super::{CHART_WIDTH, Chart, palette};
use crate::{ReportError, Result};

/// A square matrix of correlations between named columns.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CorrelationHeatMap {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The column names, in matrix order.
    pub labels: Vec<String>,
    /// The correlations, row by row (`values[i][j]` pairs column i with column j).
    pub values: Vec<Vec<f64>>,
    /// What kind of correlation the values are, e.g. "Pearson correlation" (default "Correlation").
    pub measure: String,
    /// Decimals printed in each cell (default 2 when `None`).
    pub decimals: Option<usize>,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "correlation heat map";

impl Chart for CorrelationHeatMap {
    fn render(&self) -> Result<String> {
        let n = self.labels.len();
        if self.values.len() != n {
            return Err(ReportError::chart(
                CHART,
                format!("there are {} labels but {} rows of values", n, self.values.len()),
            ));
        }
        if let Some((i, row)) = self.values.iter().enumerate().find(|(_, r)| r.len() != n) {
            return Err(ReportError::chart(
                CHART,
                format!("row {} has {} values; a square matrix needs {}", i + 1, row.len(), n),
            ));
        }
        let decimals = self.decimals.unwrap_or(2).min(4);
        let measure = if self.measure.trim().is_empty() { "Correlation" } else { self.measure.trim() };
        let row_labels: Vec<String> =
            self.labels.iter().enumerate().map(|(i, l)| format!("{}  {}", i + 1, truncate(l, 28))).collect();
        let label_width = row_labels.iter().map(|l| estimate_width(l, doc::TICK_SIZE)).fold(60.0, f64::max);
        let left = MARGIN + label_width + 14.0;
        let cell = ((CHART_WIDTH - left - MARGIN) / n.max(1) as f64).clamp(50.0, 88.0);
        let width = (left + cell * n as f64 + MARGIN).max(CHART_WIDTH);
        let head_y = TITLE_Y + 40.0;
        let top = head_y + 12.0;
        let grid_bottom = top + cell * n as f64;
        let bar_y = grid_bottom + 36.0;
        let missing = self.values.iter().flatten().filter(|v| !v.is_finite()).count();
        let note = (missing > 0).then(|| {
            format!(
                "{} without a value (shown as a dash): too few complete rows or a constant column.",
                count_of(missing, "cell", "cells")
            )
        });
        let note_y = bar_y + 64.0;
        let height = if note.is_some() { note_y + 16.0 } else { bar_y + 52.0 };

        let desc = self.describe(measure, decimals, missing);
        let mut svg = Doc::new(width, height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        let head = TextStyle::new(doc::TICK_SIZE).anchor(Anchor::Middle).fill(palette::MUTED).bold();
        for j in 0..n {
            svg.text((left + cell * (j as f64 + 0.5), head_y), &(j + 1).to_string(), head);
        }
        let value_size = if cell >= 60.0 { doc::TICK_SIZE } else { doc::SMALL_SIZE };
        svg.open_group("cells");
        for (i, row) in self.values.iter().enumerate() {
            let y = top + cell * i as f64;
            svg.text(
                (left - 14.0, y + cell / 2.0 + 5.0),
                &row_labels[i],
                TextStyle::new(doc::TICK_SIZE).anchor(Anchor::End),
            );
            for (j, &v) in row.iter().enumerate() {
                let x = left + cell * j as f64;
                let tip = format!(
                    "{} and {}: {}",
                    self.labels[i].trim(),
                    self.labels[j].trim(),
                    fixed(v, decimals)
                );
                // The diagonal pairs a column with itself; a neutral fill keeps it from dominating.
                let background = if i == j { palette::DIAGONAL.to_owned() } else { palette::diverging(v) };
                svg.rect((x, y, cell, cell), &background, Some((palette::PAPER, 2.0)), Some(&tip));
                let fill = if i != j && palette::diverging_needs_light_text(v) {
                    palette::PAPER
                } else {
                    palette::INK
                };
                svg.text(
                    (x + cell / 2.0, y + cell / 2.0 + 5.0),
                    &fixed(v, decimals),
                    TextStyle::new(value_size).anchor(Anchor::Middle).fill(fill),
                );
            }
        }
        svg.close_group();

        // A stepped colour key from -1 to 1.
        svg.open_group("colour-key");
        let key_left = left;
        let key_width = (cell * n as f64).clamp(240.0, 420.0);
        let steps = 20;
        for k in 0..steps {
            let t0 = -1.0 + 2.0 * k as f64 / steps as f64;
            let mid = t0 + 1.0 / steps as f64;
            svg.rect(
                (key_left + key_width * k as f64 / steps as f64, bar_y, key_width / steps as f64 + 0.5, 14.0),
                &palette::diverging(mid),
                None,
                None,
            );
        }
        let tick = TextStyle::new(doc::SMALL_SIZE).anchor(Anchor::Middle).fill(palette::MUTED);
        for (t, label) in [(-1.0, "\u{2212}1"), (-0.5, "\u{2212}0.5"), (0.0, "0"), (0.5, "0.5"), (1.0, "1")] {
            svg.text((key_left + key_width * (t + 1.0) / 2.0, bar_y + 34.0), label, tick);
        }
        svg.text(
            (key_left - 14.0, bar_y + 12.0),
            measure,
            TextStyle::new(doc::TICK_SIZE).anchor(Anchor::End),
        );
        svg.close_group();
        if let Some(note) = note {
            draw_note(&mut svg, note_y, &note);
        }
        Ok(svg.finish())
    }
}

impl CorrelationHeatMap {
    fn describe(&self, measure: &str, decimals: usize, missing: usize) -> String {
        let n = self.labels.len();
        let names: Vec<String> =
            self.labels.iter().enumerate().map(|(i, l)| format!("{} {}", i + 1, l.trim())).collect();
        let mut parts = vec![if n == 0 {
            format!("Heat map of the {}: there are no columns to show.", measure.to_lowercase())
        } else {
            format!(
                "Heat map of the {} between {}: {}.",
                measure.to_lowercase(),
                count_of(n, "column", "columns"),
                names.join(", ")
            )
        }];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        parts.push(
            "Warm colours mark positive values, cool colours negative ones, and the diagonal (each column with itself) is neutral; each cell prints its value."
                .to_owned(),
        );
        let mut pairs: Vec<(usize, usize, f64)> = Vec::new();
        for i in 0..n {
            for j in (i + 1)..n {
                let v = self.values[i][j];
                if v.is_finite() {
                    pairs.push((i, j, v));
                }
            }
        }
        // The text alternative lists every pair for small matrices, else the strongest ones.
        let limit = if pairs.len() <= 15 { pairs.len() } else { 8 };
        pairs.sort_by(|a, b| b.2.abs().total_cmp(&a.2.abs()).then(a.0.cmp(&b.0)).then(a.1.cmp(&b.1)));
        if !pairs.is_empty() {
            let listed: Vec<String> = pairs
                .iter()
                .take(limit)
                .map(|(i, j, v)| {
                    format!(
                        "{} and {}, {}",
                        self.labels[*i].trim(),
                        self.labels[*j].trim(),
                        fixed(*v, decimals)
                    )
                })
                .collect();
            let lead =
                if limit == pairs.len() { "Pairs from strongest to weakest" } else { "The strongest pairs" };
            parts.push(format!("{lead}: {}.", listed.join("; ")));
        }
        if missing > 0 {
            parts.push(format!("{} no value.", count_verb(missing, "cell", "cells", "has", "have")));
        }
        parts.join(" ")
    }
}

//! Scatter-plot matrices: every pair of a few measures in one drawing, below the diagonal.
//!
//! Panel (row r, column c) with r > c plots measure r (up) against measure c (across). The
//! diagonal cells name their measure by number and give its range; the triangle above the
//! diagonal stays empty, so each pair is drawn once. Measures are numbered, and a key under
//! the grid gives each number's full caption with its unit, so all text stays horizontal and
//! readable on a projector.

use super::doc::{self, Anchor, Dash, Doc, MARGIN, TITLE_Y, TextStyle, draw_title};
use super::scale::{LinearScale, extent};
use super::text::{count_of, plottable, significant, singular_of, truncate};
use super::{Axis, CHART_WIDTH, Chart, items_or_default, palette};
use crate::{ReportError, Result};

/// The most measures one matrix shows; more would make panels too small to read.
pub const MATRIX_MAX_MEASURES: usize = 8;

/// One measure of a scatter-plot matrix.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MatrixMeasure {
    /// Its caption and unit.
    pub axis: Axis,
    /// One value per item, in the same item order for every measure; a missing value is NaN.
    pub values: Vec<f64>,
}

/// A scatter-plot matrix of two to [`MATRIX_MAX_MEASURES`] measures.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScatterMatrix {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The measures, in matrix order.
    pub measures: Vec<MatrixMeasure>,
    /// The plural noun for the points, e.g. "districts".
    pub items: String,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

const CHART: &str = "scatter-plot matrix";
/// The left edge of the grid, leaving room for the range labels of each row.
const GRID_LEFT: f64 = 96.0;
/// The gap between panels.
const GAP: f64 = 6.0;
/// The height of one line of the key.
const KEY_LINE: f64 = 22.0;

impl Chart for ScatterMatrix {
    fn render(&self) -> Result<String> {
        let k = self.measures.len();
        if !(2..=MATRIX_MAX_MEASURES).contains(&k) {
            return Err(ReportError::chart(
                CHART,
                format!("it shows 2 to {MATRIX_MAX_MEASURES} measures, not {k}"),
            ));
        }
        let n = self.measures[0].values.len();
        if let Some(m) = self.measures.iter().find(|m| m.values.len() != n) {
            return Err(ReportError::chart(
                CHART,
                format!(
                    "\"{}\" has {} values where the first measure has {n}",
                    m.axis.spoken(),
                    m.values.len()
                ),
            ));
        }
        let items = items_or_default(&self.items);
        // Each measure's range, padded by 6% so points do not sit on the panel edges.
        let ranges: Vec<Option<(f64, f64)>> =
            self.measures.iter().map(|m| extent(m.values.iter().copied())).collect();
        let scales_range = |r: Option<(f64, f64)>| {
            let (lo, hi) = r.unwrap_or((0.0, 1.0));
            let pad = if hi > lo { (hi - lo) * 0.06 } else { 0.5 };
            (lo - pad, hi + pad)
        };

        let grid_right = CHART_WIDTH - MARGIN;
        let panel = (grid_right - GRID_LEFT - GAP * (k - 1) as f64) / k as f64;
        let top = TITLE_Y + 30.0;
        let grid_bottom = top + panel * k as f64 + GAP * (k - 1) as f64;
        let key_top = grid_bottom + 56.0;
        let height = key_top + KEY_LINE * k as f64 + 12.0;
        let cell = |i: usize| -> (f64, f64) {
            let start = i as f64 * (panel + GAP);
            (start, start + panel)
        };

        let desc = self.describe(items, &ranges, n);
        let mut svg = Doc::new(CHART_WIDTH, height, &self.title, &desc);
        draw_title(&mut svg, &self.title);
        let small = TextStyle::new(doc::SMALL_SIZE);
        let muted = small.fill(palette::MUTED);

        svg.open_group("panels");
        for r in 0..k {
            let (y0, y1) = cell(r);
            let (py_top, py_bottom) = (top + y0, top + y1);
            for c in 0..=r {
                let (x0, x1) = cell(c);
                let (px_left, px_right) = (GRID_LEFT + x0, GRID_LEFT + x1);
                if r == c {
                    svg.rect((px_left, py_top, panel, panel), palette::DIAGONAL, None, None);
                    let centre = (px_left + px_right) / 2.0;
                    svg.text(
                        (centre, py_top + panel * 0.45),
                        &(r + 1).to_string(),
                        TextStyle::new(doc::TITLE_SIZE + 8.0).bold().anchor(Anchor::Middle),
                    );
                    let chars = ((panel - 8.0) / (doc::SMALL_SIZE * 0.6)).floor().max(4.0) as usize;
                    svg.text(
                        (centre, py_top + panel * 0.45 + 24.0),
                        &truncate(self.measures[r].axis.label.trim(), chars),
                        small.anchor(Anchor::Middle),
                    );
                    continue;
                }
                svg.rect((px_left, py_top, panel, panel), palette::PAPER, Some((palette::GRID, 1.5)), None);
                let (xl, xh) = scales_range(ranges[c]);
                let (yl, yh) = scales_range(ranges[r]);
                let xs = LinearScale::new(xl, xh, px_left, px_right);
                let ys = LinearScale::new(yl, yh, py_bottom, py_top);
                for (x, y) in self.measures[c].values.iter().zip(&self.measures[r].values) {
                    if plottable(*x) && plottable(*y) {
                        svg.circle((xs.map(*x), ys.map(*y)), 3.0, palette::DATA, None, None);
                    }
                }
            }
            // The row's range on the left of its first scatter panel (row 0 has none).
            if r > 0
                && let Some((lo, hi)) = ranges[r]
            {
                let (yl, yh) = scales_range(ranges[r]);
                let ys = LinearScale::new(yl, yh, py_bottom, py_top);
                let right = GRID_LEFT - 8.0;
                svg.line((right + 2.0, ys.map(hi)), (GRID_LEFT, ys.map(hi)), palette::INK, 1.0, Dash::Solid);
                svg.line((right + 2.0, ys.map(lo)), (GRID_LEFT, ys.map(lo)), palette::INK, 1.0, Dash::Solid);
                svg.text((right - 2.0, ys.map(hi) + 5.0), &significant(hi, 3), muted.anchor(Anchor::End));
                svg.text((right - 2.0, ys.map(lo) + 5.0), &significant(lo, 3), muted.anchor(Anchor::End));
                svg.text((MARGIN, (py_top + py_bottom) / 2.0 + 8.0), &(r + 1).to_string(), small.bold());
            }
        }
        // Each column's range under the bottom row (the last column has no scatter panel).
        for (c, range) in ranges.iter().enumerate().take(k - 1) {
            let Some((lo, hi)) = *range else { continue };
            let (x0, x1) = cell(c);
            let (xl, xh) = scales_range(*range);
            let xs = LinearScale::new(xl, xh, GRID_LEFT + x0, GRID_LEFT + x1);
            for v in [lo, hi] {
                svg.line(
                    (xs.map(v), grid_bottom),
                    (xs.map(v), grid_bottom + 5.0),
                    palette::INK,
                    1.0,
                    Dash::Solid,
                );
            }
            svg.text((xs.map(lo), grid_bottom + 22.0), &significant(lo, 3), muted.anchor(Anchor::Start));
            svg.text((xs.map(hi), grid_bottom + 40.0), &significant(hi, 3), muted.anchor(Anchor::End));
        }
        svg.close_group();

        svg.open_group("key");
        for (i, m) in self.measures.iter().enumerate() {
            let y = key_top + KEY_LINE * i as f64;
            svg.text((MARGIN, y), &(i + 1).to_string(), small.bold());
            svg.text((MARGIN + 28.0, y), &truncate(&m.axis.spoken(), 88), small);
        }
        svg.close_group();
        Ok(svg.finish())
    }
}

impl ScatterMatrix {
    fn describe(&self, items: &str, ranges: &[Option<(f64, f64)>], n: usize) -> String {
        let k = self.measures.len();
        let mut parts = vec![format!(
            "Scatter-plot matrix of {k} measures for {}: each panel below the diagonal plots the measure of \
             its row (up) against the measure of its column (across).",
            count_of(n, &singular_of(items), items)
        )];
        if !self.summary.trim().is_empty() {
            parts.push(self.summary.trim().to_owned());
        }
        for (i, (m, range)) in self.measures.iter().zip(ranges).enumerate() {
            let shown = m.values.iter().filter(|v| plottable(**v)).count();
            let range_text = match range {
                Some((lo, hi)) => format!("from {} to {}", significant(*lo, 4), significant(*hi, 4)),
                None => "no values".to_owned(),
            };
            let missing = if shown < n { format!(", {} missing", n - shown) } else { String::new() };
            parts.push(format!("Measure {}: {}, {range_text}{missing}.", i + 1, m.axis.spoken()));
        }
        parts.join(" ")
    }
}

//! Quantile-quantile plots: sample quantiles against theoretical ones, with a reference line.

use super::scatter::{Reference, Scatter, ScatterPoint};
use super::text::{count_of, plottable, significant, singular_of};
use super::{Axis, Chart, Emphasis, PointLabels, items_or_default};
use crate::Result;

/// One point of a QQ plot.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct QqPoint {
    /// The theoretical quantile (horizontal axis), e.g. a standard normal quantile.
    pub theoretical: f64,
    /// The observed value at that rank (vertical axis), e.g. a studentized residual.
    pub sample: f64,
    /// A name for the point, shown on hover and, when flagged, as a label.
    pub label: Option<String>,
    /// Whether the point is set apart.
    pub emphasis: Emphasis,
}

impl QqPoint {
    /// A point named `key`, flagged when `key` is one of the `flagged` keys.
    pub fn keyed(theoretical: f64, sample: f64, key: &str, flagged: &[String]) -> Self {
        let emphasis = if flagged.iter().any(|f| f == key) { Emphasis::Flagged } else { Emphasis::Normal };
        QqPoint { theoretical, sample, label: Some(key.to_owned()), emphasis }
    }
}

/// Which reference line a QQ plot draws.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub enum QqLine {
    /// The line through the first and third quartiles of both sets of quantiles
    /// (common practice, no published source: robust to the tails being examined).
    #[default]
    Quartiles,
    /// The line y = x, for samples already on the theoretical scale.
    Identity,
    /// A line given by the caller.
    Given {
        /// The line's value at a theoretical quantile of zero.
        intercept: f64,
        /// The line's slope.
        slope: f64,
    },
}

/// A quantile-quantile plot.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct QqPlot {
    /// The visible title, also the accessible name.
    pub title: String,
    /// The horizontal axis caption, e.g. "Standard normal quantile".
    pub x_axis: Axis,
    /// The vertical axis caption, e.g. "Studentized deleted residual".
    pub y_axis: Axis,
    /// The plural noun for the points, e.g. "districts".
    pub items: String,
    /// The points, in any order.
    pub points: Vec<QqPoint>,
    /// The reference line.
    pub line: QqLine,
    /// Which points get a visible text label.
    pub labels: PointLabels,
    /// What a flagged point means (default "Flagged").
    pub flagged_meaning: String,
    /// An optional sentence from the caller, placed first in the text alternative.
    pub summary: String,
}

impl Chart for QqPlot {
    fn render(&self) -> Result<String> {
        let items = items_or_default(&self.items);
        let valid: Vec<&QqPoint> =
            self.points.iter().filter(|p| plottable(p.theoretical) && plottable(p.sample)).collect();
        let (intercept, slope, line_name) = match self.line {
            QqLine::Quartiles => {
                let (i, s) = quartile_line(&valid);
                (i, s, "the line through the quartiles")
            }
            QqLine::Identity => (0.0, 1.0, "the line of equality"),
            QqLine::Given { intercept, slope } => (intercept, slope, "the reference line"),
        };
        let intro = format!(
            "Quantile-quantile plot of {} (vertical) against {} (horizontal) for {}.",
            self.y_axis.spoken(),
            self.x_axis.spoken(),
            count_of(self.points.len(), &singular_of(items), items)
        );
        let mut extra = vec![format!(
            "Points close to {line_name} agree with the reference distribution; points bending away at the ends show heavier or lighter tails."
        )];
        if let Some(worst) = valid.iter().max_by(|a, b| {
            let da = (a.sample - (intercept + slope * a.theoretical)).abs();
            let db = (b.sample - (intercept + slope * b.theoretical)).abs();
            da.total_cmp(&db)
        }) {
            let name = worst
                .label
                .as_deref()
                .map(str::trim)
                .filter(|l| !l.is_empty())
                .map(|l| format!("{l}, "))
                .unwrap_or_default();
            extra.push(format!(
                "The point furthest from the line is {}observed {} against a theoretical {}.",
                name,
                significant(worst.sample, 4),
                significant(worst.theoretical, 4)
            ));
        }
        let scatter = Scatter {
            title: self.title.clone(),
            x_axis: self.x_axis.clone(),
            y_axis: self.y_axis.clone(),
            items: self.items.clone(),
            points: self
                .points
                .iter()
                .map(|p| ScatterPoint {
                    x: p.theoretical,
                    y: p.sample,
                    label: p.label.clone(),
                    emphasis: p.emphasis,
                })
                .collect(),
            references: vec![Reference::Line { intercept, slope, label: String::new() }],
            labels: self.labels,
            flagged_meaning: self.flagged_meaning.clone(),
            summary: self.summary.clone(),
        };
        Ok(scatter.render_with(&intro, &extra))
    }
}

/// The line through the first and third quartiles of the theoretical and sample values.
fn quartile_line(points: &[&QqPoint]) -> (f64, f64) {
    let mut t: Vec<f64> = points.iter().map(|p| p.theoretical).collect();
    let mut s: Vec<f64> = points.iter().map(|p| p.sample).collect();
    t.sort_by(f64::total_cmp);
    s.sort_by(f64::total_cmp);
    let (t1, t3) = (quantile(&t, 0.25), quantile(&t, 0.75));
    let (s1, s3) = (quantile(&s, 0.25), quantile(&s, 0.75));
    match (t1, t3, s1, s3) {
        (Some(t1), Some(t3), Some(s1), Some(s3)) if t3 > t1 => {
            let slope = (s3 - s1) / (t3 - t1);
            (s1 - slope * t1, slope)
        }
        _ => (0.0, 1.0),
    }
}

/// The `p` quantile of sorted values by linear interpolation between order statistics.
fn quantile(sorted: &[f64], p: f64) -> Option<f64> {
    match sorted.len() {
        0 => None,
        1 => Some(sorted[0]),
        n => {
            let h = (n - 1) as f64 * p;
            let lo = h.floor() as usize;
            let hi = (lo + 1).min(n - 1);
            Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
        }
    }
}

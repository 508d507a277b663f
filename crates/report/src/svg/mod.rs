//! A small SVG chart module of our own: scales, a document writer and the chart kinds.
//!
//! Every chart takes a plain data struct (no engine types) and renders to a
//! self-contained SVG string through the [`Chart`] trait. The output:
//!
//! - has a `viewBox`, a `<title>` and a `<desc>`; the description is a text
//!   alternative that summarises what the chart shows, written from the data;
//! - is readable at projector size: at the nominal 800 px width no text is
//!   smaller than 14 px;
//! - escapes every piece of caller-supplied text for XML;
//! - never contains NaN or infinite numbers: points that are missing or not
//!   finite are skipped and the description says how many;
//! - is deterministic: numbers are written with a fixed number of decimals;
//! - uses presentation attributes only (no `style` attributes or elements, no
//!   script, no ids), so it can be inlined into a page under a strict
//!   Content-Security-Policy and several charts can share one page.

mod bar;
mod doc;
mod effect;
mod heatmap;
mod histogram;
mod line;
mod matrix;
pub mod palette;
mod qq;
pub mod scale;
mod scatter;
mod strip;
pub mod text;

pub use bar::{BarChart, BarGroup, Threshold};
pub use effect::{EffectPlot, EffectRow};
pub use heatmap::CorrelationHeatMap;
pub use histogram::{Bins, Histogram, Marker};
pub use line::{Callout, LinePlot, LineSeries, XTicks};
pub use matrix::{MATRIX_MAX_MEASURES, MatrixMeasure, ScatterMatrix};
pub use qq::{QqLine, QqPlot, QqPoint};
pub use scatter::{Reference, Scatter, ScatterPoint};
pub use strip::{IntervalStrip, StripRow};

use crate::Result;

/// The nominal width of every chart in SVG user units (pixels at 100 %).
pub const CHART_WIDTH: f64 = 800.0;

/// A chart that renders itself to an SVG document.
pub trait Chart {
    /// Renders the chart as a complete `<svg>` element.
    ///
    /// # Errors
    /// Returns [`crate::ReportError::Chart`] when the data cannot be drawn as
    /// given (for example mismatched lengths or an interval whose lower bound
    /// lies above its upper bound). Missing or non-finite values are not
    /// errors: they are skipped and reported in the text alternative.
    fn render(&self) -> Result<String>;
}

/// An axis caption: what is measured and in which unit.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Axis {
    /// What the axis measures, e.g. "Unemployment".
    pub label: String,
    /// The unit, e.g. "% of labour force"; empty when the quantity has none.
    pub unit: String,
}

impl Axis {
    /// Builds an axis caption from a label and a unit.
    pub fn new(label: impl Into<String>, unit: impl Into<String>) -> Self {
        Self { label: label.into(), unit: unit.into() }
    }

    /// The caption for a text alternative: the drawn caption, or "unnamed values" when empty.
    pub fn spoken(&self) -> String {
        let caption = self.caption();
        if caption.is_empty() { "unnamed values".to_owned() } else { caption }
    }

    /// The caption as drawn: "label (unit)", or the label alone without a unit.
    pub fn caption(&self) -> String {
        let label = self.label.trim();
        let unit = self.unit.trim();
        match (label.is_empty(), unit.is_empty()) {
            (_, true) => label.to_owned(),
            (true, false) => format!("({unit})"),
            (false, false) => format!("{label} ({unit})"),
        }
    }
}

/// How a point is drawn: as one of the crowd, or set apart for attention.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Emphasis {
    /// An ordinary point.
    #[default]
    Normal,
    /// A point flagged by a check (drawn as a larger diamond in the accent colour).
    Flagged,
}

/// Which points carry a visible text label (every labelled point has a hover tooltip).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum PointLabels {
    /// No visible labels.
    None,
    /// Labels on flagged points only.
    #[default]
    Flagged,
    /// Labels on every point that has one.
    All,
}

/// Refuses an interval whose lower end lies above its upper end; `label` names its row in the
/// error of the chart `chart`. Intervals with an end that cannot be plotted are left alone.
pub(crate) fn check_interval(chart: &'static str, label: &str, low: f64, high: f64) -> Result<()> {
    if text::plottable(low) && text::plottable(high) && low > high {
        return Err(crate::ReportError::chart(
            chart,
            format!("the interval of \"{}\" has its lower end above its upper end", label.trim()),
        ));
    }
    Ok(())
}

/// The plural noun for the things a chart counts, e.g. "districts".
pub(crate) fn items_or_default(items: &str) -> &str {
    let items = items.trim();
    if items.is_empty() { "points" } else { items }
}

//! The Soundness page's charts, drawn server-side from the checks document as inline SVG.
//!
//! A chart that cannot be drawn is left out and logged; the verdicts and tables beside it
//! still carry every number.

use wardcast_contract::checks::{
    AddedVariableDoc, ChecksDocument, ComponentResidualDoc, InfluenceDoc, Outcome, PointDoc, PowerProfileDoc,
};
use wardcast_engine::dist;
use wardcast_report::svg::{
    Axis, Callout, Chart, LinePlot, LineSeries, PointLabels, QqLine, QqPlot, QqPoint, Reference, Scatter,
    ScatterPoint,
};

use super::ChartView;
use crate::web::state::ColumnInfo;
use crate::web::words::{fmt_num, fmt_p, fmt_prose};

/// What every chart of the page needs.
pub(super) struct Charts<'a> {
    /// The plural noun for the areas.
    pub areas: &'a str,
    /// The response column's label and unit.
    pub response: &'a ColumnInfo,
    /// The checks document.
    pub doc: &'a ChecksDocument,
}

/// Draws a chart, logging a failure.
fn draw(chart: &impl Chart, caption: String) -> Option<ChartView> {
    match chart.render() {
        Ok(svg) => Some(ChartView { svg, caption }),
        Err(e) => {
            tracing::warn!(error = %e, "a soundness chart could not be drawn");
            None
        }
    }
}

/// Points of the document as scatter points, labelled by key and flagged when in `flagged`.
fn scatter_points(points: &[PointDoc], flagged: &[String]) -> Vec<ScatterPoint> {
    points.iter().map(|p| ScatterPoint::keyed(p.x, p.y, &p.key, flagged)).collect()
}

impl Charts<'_> {
    fn unit(&self) -> String {
        match self.response.unit.as_deref().map(str::trim) {
            Some(u) if u.starts_with('%') => "percentage points".to_owned(),
            Some(u) => u.to_owned(),
            None => String::new(),
        }
    }

    /// Residuals against fitted values, with the zero line; flagged areas set apart.
    pub fn residuals(&self, flagged: &[String]) -> Option<ChartView> {
        let Outcome::Ok { result } = &self.doc.linearity.residuals_vs_fitted else {
            return None;
        };
        let weighted = if self.doc.weighted { " (scaled by the square root of the weight)" } else { "" };
        let chart = Scatter {
            title: "Residuals against fitted values".into(),
            x_axis: Axis::new("Fitted value", self.unit()),
            y_axis: Axis::new(format!("Residual{weighted}"), self.unit()),
            items: self.areas.to_owned(),
            points: scatter_points(&result.points, flagged),
            references: vec![Reference::Horizontal { y: 0.0, label: "Residual of zero".into() }],
            labels: PointLabels::Flagged,
            flagged_meaning: "Flagged by an influence measure".into(),
            summary: format!(
                "Each point is one of the {areas}: how far its observed value lies above (positive) or below \
                 (negative) the model, against the model's value. A curve suggests a missed bend; a funnel \
                 suggests the spread changes with the level.",
                areas = self.areas
            ),
        };
        draw(
            &chart,
            "A band of even width around zero, without a curve, is what the assumptions expect.".into(),
        )
    }

    /// The normal quantile plot of the standardized residuals, with the Shapiro-Wilk result.
    pub fn qq(&self, flagged: &[String]) -> Option<ChartView> {
        let Outcome::Ok { result } = &self.doc.normality.qq_plot else {
            return None;
        };
        let sw = match &self.doc.normality.shapiro_wilk {
            Outcome::Ok { result } => {
                format!("Shapiro-Wilk W = {}, {}.", fmt_num(result.w), fmt_p(Some(result.p_value)))
            }
            Outcome::Unavailable { reason } => format!("The Shapiro-Wilk test is not available: {reason}."),
        };
        let chart = QqPlot {
            title: "Standardized residuals against normal quantiles".into(),
            x_axis: Axis::new("Standard normal quantile", ""),
            y_axis: Axis::new("Standardized residual", "standard deviations"),
            items: self.areas.to_owned(),
            points: result.points.iter().map(|p| QqPoint::keyed(p.x, p.y, &p.key, flagged)).collect(),
            line: QqLine::Identity,
            labels: PointLabels::Flagged,
            flagged_meaning: "Flagged by an influence measure".into(),
            summary: sw.clone(),
        };
        draw(&chart, format!("{} Plotting positions: {}.", sw, result.positions.trim_end_matches('.')))
    }

    /// The added-variable plot of one design column: its slope equals the coefficient.
    pub fn added_variable(&self, name: &str, av: &AddedVariableDoc, flagged: &[String]) -> Option<ChartView> {
        let chart = Scatter {
            title: format!("{name}, with the other terms taken out"),
            x_axis: Axis::new(format!("{name}, others taken out"), ""),
            y_axis: Axis::new("Outcome, others taken out", ""),
            items: self.areas.to_owned(),
            points: scatter_points(&av.points, flagged),
            references: vec![Reference::Line {
                intercept: 0.0,
                slope: av.coefficient,
                label: format!("Slope {} (the coefficient)", fmt_num(av.coefficient)),
            }],
            labels: PointLabels::Flagged,
            flagged_meaning: "Flagged by an influence measure".into(),
            summary: format!(
                "The line's slope, {}, is the coefficient of {name} in the model; points far from the line \
                 at either end pull on it most.",
                fmt_num(av.slope)
            ),
        };
        draw(&chart, format!("Slope through the origin: {}.", fmt_num(av.slope)))
    }

    /// The component-plus-residual plot of one design column.
    pub fn component(&self, name: &str, cr: &ComponentResidualDoc, flagged: &[String]) -> Option<ChartView> {
        let chart = Scatter {
            title: format!("Component plus residual: {name}"),
            x_axis: Axis::new(name, ""),
            y_axis: Axis::new("Coefficient × value + residual", self.unit()),
            items: self.areas.to_owned(),
            points: scatter_points(&cr.points, flagged),
            references: vec![Reference::Line {
                intercept: 0.0,
                slope: cr.coefficient,
                label: "The model's straight line".into(),
            }],
            labels: PointLabels::Flagged,
            flagged_meaning: "Flagged by an influence measure".into(),
            summary: format!(
                "Points that bend away from the straight line suggest {name} relates to the outcome along a curve."
            ),
        };
        draw(&chart, format!("A bend away from the line suggests a transformation of {name}."))
    }

    /// The influence map: leverage against the studentized deleted residual, with the 2p/n
    /// leverage cut-off and the Bonferroni outlier cut-offs ±t(1 − α/(2n), n − p − 1).
    pub fn influence(&self, inf: &InfluenceDoc) -> Option<ChartView> {
        let n = inf.rows.len();
        let (nf, p) = (n as f64, self.doc.coefficients as f64);
        let df = nf - p - 1.0;
        let alpha = inf.thresholds.bonferroni_alpha;
        let t_crit = if df >= 1.0 { dist::t_isf(alpha / (2.0 * nf), df) } else { f64::NAN };
        let points: Vec<ScatterPoint> = inf
            .rows
            .iter()
            .map(|r| {
                let point = ScatterPoint::new(r.hat, r.studentized_deleted.as_f64().unwrap_or(f64::NAN))
                    .labelled(r.key.clone());
                if r.flagged { point.flagged() } else { point }
            })
            .collect();
        let ys = points.iter().map(|p| p.y).filter(|y| y.is_finite());
        let (lo, hi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| (a.min(y), b.max(y)));
        let (lo, hi) = if t_crit.is_finite() { (lo.min(-t_crit), hi.max(t_crit)) } else { (lo, hi) };
        let mut references = Vec::new();
        if t_crit.is_finite() {
            let label = format!("Outlier cut-offs ±{} (Bonferroni, α = {alpha})", fmt_num(t_crit));
            references.push(Reference::Horizontal { y: t_crit, label });
            references.push(Reference::Horizontal { y: -t_crit, label: String::new() });
        }
        if lo.is_finite() && hi.is_finite() {
            references.push(Reference::Curve {
                points: vec![(inf.thresholds.hat, lo), (inf.thresholds.hat, hi)],
                label: format!("Leverage cut-off 2p/n = {}", fmt_num(inf.thresholds.hat)),
            });
        }
        let chart = Scatter {
            title: "Where each area sits: leverage and distance from the model".into(),
            x_axis: Axis::new("Leverage (hat value)", ""),
            y_axis: Axis::new("Studentized deleted residual", "standard deviations"),
            items: self.areas.to_owned(),
            points,
            references,
            labels: PointLabels::Flagged,
            flagged_meaning: "Flagged by an influence measure".into(),
            summary: format!(
                "{} to the right of the vertical line have unusual indicator values; {} beyond the horizontal \
                 lines lie further from the model than chance explains. An area far out on both pulls the \
                 model hardest.",
                crate::web::words::capitalise(self.areas),
                self.areas
            ),
        };
        draw(
            &chart,
            format!(
                "Leverage cut-off 2p/n = {}; outlier cut-offs ±{} ({} on {} degrees of freedom at a Bonferroni-adjusted α of {}).",
                fmt_num(inf.thresholds.hat),
                fmt_num(t_crit),
                "t",
                fmt_prose(df),
                alpha
            ),
        )
    }

    /// The profile log-likelihood of the response power, with λ̂ marked.
    pub fn power(&self, p: &PowerProfileDoc) -> Option<ChartView> {
        let chart = LinePlot {
            title: "How well each power of the outcome fits".into(),
            x_axis: Axis::new("Power λ of the outcome", ""),
            y_axis: Axis::new("Profile log-likelihood", ""),
            series: vec![LineSeries {
                name: "Profile log-likelihood".into(),
                points: p.lambdas.iter().copied().zip(p.log_likelihood.iter().copied()).collect(),
            }],
            callouts: vec![Callout {
                x: p.lambda_hat,
                y: p.log_likelihood_max,
                label: format!("λ̂ = {}", fmt_num(p.lambda_hat)),
            }],
            summary: format!(
                "The highest point, at λ̂ = {}, is the best-fitting power; powers whose log-likelihood lies \
                 within about 1.92 of the top form the 95% interval.",
                fmt_num(p.lambda_hat)
            ),
            ..LinePlot::default()
        };
        draw(&chart, "λ = 1 leaves the outcome as it is; λ = 0 stands for the logarithm.".into())
    }
}

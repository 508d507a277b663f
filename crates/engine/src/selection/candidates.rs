//! The validated input of model selection: a response, candidate terms and their columns, and
//! the pivoted-QR refit that every reported model goes through.

use std::ops::Range;

use crate::design::Design;
use crate::error::{EngineError, Result};
use crate::linalg::{PivotedQr, QrOptions};

use super::qrfit::Factored;
use crate::matrix::Matrix;

/// One candidate term: a label and the design columns it spans.
///
/// A numeric predictor spans one column; a categorical predictor spans its dummy columns, which
/// enter and leave a model together.
#[derive(Debug, Clone, PartialEq)]
pub struct CandidateTerm {
    /// The term's label, e.g. `unemployment_pct` or `district_type`.
    pub label: String,
    /// The columns of the candidate matrix that belong to the term.
    pub columns: Range<usize>,
}

/// The data a selection works on: the response, optional case weights, the candidate columns
/// (without the intercept, which is added by the `intercept` flag) grouped into terms, and one
/// key per row.
#[derive(Debug, Clone)]
pub struct Candidates {
    x: Matrix,
    y: Vec<f64>,
    weights: Option<Vec<f64>>,
    intercept: bool,
    terms: Vec<CandidateTerm>,
    column_names: Vec<String>,
    keys: Vec<String>,
    response: String,
}

/// The result of refitting one model by pivoted QR.
#[derive(Debug, Clone)]
pub(crate) struct Refit {
    /// Weighted residual sum of squares `Σ wᵢ eᵢ²`.
    pub sse: f64,
    /// Number of regression coefficients (intercept included).
    pub params: usize,
    /// Residuals on the weighted scale, `√wᵢ · eᵢ`.
    pub weighted_residuals: Vec<f64>,
    /// Leverages of `W^½X`, when asked for.
    pub leverages: Option<Vec<f64>>,
}

/// Why a refit could not give a full-rank model.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct AliasedRefit {
    /// Label of the first aliased design column.
    pub column: String,
    /// Labels of the columns it is a combination of.
    pub combination: Vec<String>,
}

impl Candidates {
    /// Validates and stores the selection input.
    ///
    /// `x` holds the candidate columns only (no intercept column); `terms` must cover its
    /// columns without overlap; `column_names` names every column of `x`; `keys` names every row.
    ///
    /// # Errors
    /// [`EngineError::EmptyInput`] without rows, [`EngineError::DimensionMismatch`] when lengths
    /// disagree or terms do not tile the columns, [`EngineError::NonFinite`] for a NaN or
    /// infinite value, [`EngineError::BadWeight`] for a weight that is not positive and finite,
    /// [`EngineError::EmptyModel`] when there is neither an intercept nor a term.
    pub fn new(
        x: Matrix,
        y: Vec<f64>,
        weights: Option<Vec<f64>>,
        intercept: bool,
        terms: Vec<CandidateTerm>,
        column_names: Vec<String>,
        keys: Vec<String>,
    ) -> Result<Candidates> {
        let n = y.len();
        if n == 0 {
            return Err(EngineError::EmptyInput);
        }
        let mismatch = |what: &str, expected: usize, found: usize| EngineError::DimensionMismatch {
            what: what.to_owned(),
            expected,
            found,
        };
        if x.nrows() != n && x.ncols() > 0 {
            return Err(mismatch("rows of the candidate columns", n, x.nrows()));
        }
        if keys.len() != n {
            return Err(mismatch("row keys", n, keys.len()));
        }
        if column_names.len() != x.ncols() {
            return Err(mismatch("names of the candidate columns", x.ncols(), column_names.len()));
        }
        if let Some(w) = &weights {
            if w.len() != n {
                return Err(mismatch("case weights", n, w.len()));
            }
            for (k, &v) in keys.iter().zip(w) {
                if !(v.is_finite() && v > 0.0) {
                    return Err(EngineError::BadWeight { row_key: k.clone(), value: v });
                }
            }
        }
        let mut next = 0;
        for t in &terms {
            if t.columns.start != next || t.columns.end <= t.columns.start {
                return Err(mismatch("first column of the next candidate term", next, t.columns.start));
            }
            next = t.columns.end;
        }
        if next != x.ncols() {
            return Err(mismatch("columns covered by the candidate terms", x.ncols(), next));
        }
        if !intercept && terms.is_empty() {
            return Err(EngineError::EmptyModel);
        }
        for (k, &v) in keys.iter().zip(&y) {
            if !v.is_finite() {
                return Err(EngineError::NonFinite { column: "the response".to_owned(), row_key: k.clone() });
            }
        }
        for (j, name) in column_names.iter().enumerate() {
            for (k, &v) in keys.iter().zip(x.column(j)) {
                if !v.is_finite() {
                    return Err(EngineError::NonFinite { column: name.clone(), row_key: k.clone() });
                }
            }
        }
        Ok(Candidates {
            x,
            y,
            weights,
            intercept,
            terms,
            column_names,
            keys,
            response: "the response".to_owned(),
        })
    }

    /// The selection input of a validated design: its terms become the candidates (a
    /// categorical term's dummies stay together), its intercept, weights and rows are kept.
    ///
    /// # Errors
    /// As [`Candidates::new`].
    pub fn from_design(design: &Design) -> Result<Candidates> {
        let first = usize::from(design.has_intercept());
        let x = design.x();
        let cols: Vec<usize> = (first..x.ncols()).collect();
        let terms = design
            .terms()
            .iter()
            .map(|t| CandidateTerm {
                label: t.label.clone(),
                columns: t.columns.start - first..t.columns.end - first,
            })
            .collect();
        let c = Candidates::new(
            x.select_columns(&cols),
            design.y().to_vec(),
            design.weights().map(<[f64]>::to_vec),
            design.has_intercept(),
            terms,
            design.column_names()[first..].to_vec(),
            design.keys().to_vec(),
        )?;
        Ok(c.with_response_label(design.response_label()))
    }

    /// Names the response in messages (default "the response").
    #[must_use]
    pub fn with_response_label(mut self, label: impl Into<String>) -> Candidates {
        self.response = label.into();
        self
    }

    /// The response label used in messages.
    pub fn response_label(&self) -> &str {
        &self.response
    }

    /// The candidate columns (no intercept column).
    pub fn x(&self) -> &Matrix {
        &self.x
    }

    /// The response.
    pub fn y(&self) -> &[f64] {
        &self.y
    }

    /// The case weights, if the fit is weighted.
    pub fn weights(&self) -> Option<&[f64]> {
        self.weights.as_deref()
    }

    /// Whether every model has an intercept.
    pub fn has_intercept(&self) -> bool {
        self.intercept
    }

    /// The candidate terms.
    pub fn terms(&self) -> &[CandidateTerm] {
        &self.terms
    }

    /// The names of the candidate columns.
    pub fn column_names(&self) -> &[String] {
        &self.column_names
    }

    /// The row keys.
    pub fn keys(&self) -> &[String] {
        &self.keys
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.y.len()
    }

    /// The labels of the given terms.
    pub fn labels(&self, terms: &[usize]) -> Vec<String> {
        terms.iter().map(|&t| self.terms[t].label.clone()).collect()
    }

    /// Number of regression coefficients of the model made of `terms` (intercept included).
    pub fn params_of(&self, terms: &[usize]) -> usize {
        usize::from(self.intercept) + terms.iter().map(|&t| self.terms[t].columns.len()).sum::<usize>()
    }

    /// Sum of `ln wᵢ` over the rows (0 without weights).
    pub(crate) fn log_weight_sum(&self) -> f64 {
        self.weights.as_ref().map_or(0.0, |w| w.iter().map(|v| v.ln()).sum())
    }

    /// The total sum of squares: about the weighted mean with an intercept, about zero without.
    pub(crate) fn ssto(&self) -> f64 {
        let w = |i: usize| self.weights.as_ref().map_or(1.0, |w| w[i]);
        let n = self.y.len();
        if self.intercept {
            let sw: f64 = (0..n).map(w).sum();
            let mean = (0..n).map(|i| w(i) * self.y[i]).sum::<f64>() / sw;
            let corr = (0..n).map(|i| w(i) * (self.y[i] - mean)).sum::<f64>() / sw;
            let m = mean + corr;
            (0..n).map(|i| w(i) * (self.y[i] - m).powi(2)).sum()
        } else {
            (0..n).map(|i| w(i) * self.y[i] * self.y[i]).sum()
        }
    }

    /// Labels of the model-matrix columns of `terms`: the intercept first when present.
    pub(crate) fn model_column_names(&self, terms: &[usize]) -> Vec<String> {
        let mut names = Vec::new();
        if self.intercept {
            names.push(crate::INTERCEPT_LABEL.to_owned());
        }
        for &t in terms {
            names.extend(self.terms[t].columns.clone().map(|j| self.column_names[j].clone()));
        }
        names
    }

    /// The model matrix of `terms` on the given rows (all rows when `rows` is `None`), with the
    /// intercept column first when present. Rows are not weighted.
    pub(crate) fn model_matrix(&self, terms: &[usize], rows: Option<&[usize]>) -> Matrix {
        let n = rows.map_or(self.y.len(), <[usize]>::len);
        let mut cols: Vec<Vec<f64>> = Vec::new();
        if self.intercept {
            cols.push(vec![1.0; n]);
        }
        for &t in terms {
            for j in self.terms[t].columns.clone() {
                let c = self.x.column(j);
                cols.push(match rows {
                    Some(r) => r.iter().map(|&i| c[i]).collect(),
                    None => c.to_vec(),
                });
            }
        }
        if cols.is_empty() {
            return Matrix::zeros(n, 0);
        }
        Matrix::from_columns(&cols)
    }

    /// Refits the model made of `terms` on `rows` (all rows when `None`) by pivoted QR (see
    /// [`super::qrfit`]), returning the weighted SSE, coefficients, weighted residuals and, when
    /// asked, the leverages; or the aliased column when the model is not of full rank.
    pub(crate) fn refit(
        &self,
        terms: &[usize],
        rows: Option<&[usize]>,
        qr: &QrOptions,
        leverages: bool,
    ) -> std::result::Result<Refit, AliasedRefit> {
        Factored::new(self, terms, rows).refit(self, terms, qr, leverages)
    }

    /// Names the aliased column of the model `terms` on `rows`, with the columns it is a
    /// combination of, by the core's pivoted QR on the model's own (weighted) columns. When that
    /// QR finds the model of full rank (a case at the rank tolerance itself), the column at
    /// model position `fallback` is named with the columns before it.
    pub(crate) fn alias_explanation(&self, terms: &[usize], rows: &[usize], fallback: usize) -> AliasedRefit {
        let mut x = self.model_matrix(terms, Some(rows));
        if let Some(w) = &self.weights {
            let sw: Vec<f64> = rows.iter().map(|&i| w[i].sqrt()).collect();
            for j in 0..x.ncols() {
                for (v, s) in x.column_mut(j).iter_mut().zip(&sw) {
                    *v *= s;
                }
            }
        }
        let names = self.model_column_names(terms);
        let f = PivotedQr::factor(&x, &QrOptions::default());
        if f.rank() < x.ncols() {
            let col = f.aliased_columns()[0];
            let combination = f.alias_combination(col).into_iter().map(|(j, _)| names[j].clone()).collect();
            return AliasedRefit { column: names[col].clone(), combination };
        }
        let j = fallback.min(names.len().saturating_sub(1));
        AliasedRefit { column: names[j].clone(), combination: names[..j].to_vec() }
    }
}

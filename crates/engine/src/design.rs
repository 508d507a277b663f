//! The design: a model spec checked against a table, with listwise deletion, transforms and
//! treatment coding applied, ready to fit.
//!
//! Categorical predictors (text columns) enter by treatment coding: one 0/1 column per level
//! other than the reference level, named `column=level`. The reference level is the one the spec
//! names, or else the first level in sorted (byte-wise) order among the rows used. Rows with a
//! missing value in any column the model uses are dropped (listwise deletion), and so are rows
//! the spec excludes; every dropped row is recorded with its key and the reason.

use std::collections::{BTreeSet, HashMap, HashSet};
use std::ops::Range;
use std::sync::Arc;

use crate::INTERCEPT_LABEL;
use crate::data::{ColumnData, Table};
use crate::error::{EngineError, Result, join_names};
use crate::matrix::Matrix;
use crate::spec::{ModelSpec, Predictor, Transform};

/// Row key used in messages about a row supplied for prediction.
const NEW_ROW: &str = "(new)";

/// A row left out of the fit, with the reason.
#[derive(Debug, Clone, PartialEq)]
pub struct DroppedRow {
    /// The row key.
    pub key: String,
    /// Why: "missing value in vacancy_pct", "excluded: <reason>" or "left out".
    pub reason: String,
}

/// A model term: one predictor of the spec, spanning one design column (numeric) or one column
/// per non-reference level (categorical).
#[derive(Debug, Clone, PartialEq)]
pub struct Term {
    /// The term's label, e.g. `log(vacancy_pct)` or `district_type`.
    pub label: String,
    /// The design columns the term occupies.
    pub columns: Range<usize>,
}

/// How a term turns raw values into design columns.
#[derive(Debug, Clone, PartialEq)]
pub enum TermKind {
    /// A numeric column, possibly transformed.
    Numeric {
        /// The raw column.
        column: String,
        /// The transform applied.
        transform: Option<Transform>,
    },
    /// A text column by treatment coding.
    Categorical {
        /// The raw column.
        column: String,
        /// The reference level (no column of its own).
        reference: String,
        /// The other levels, one design column each, in design order.
        levels: Vec<String>,
    },
}

/// A value supplied for a predictor when making a prediction.
#[derive(Debug, Clone, PartialEq)]
pub enum PredictorValue {
    /// A number for a numeric predictor (on the raw scale; the transform is applied).
    Number(f64),
    /// A level of a categorical predictor.
    Level(String),
}

/// A validated design matrix with its response, weights and bookkeeping.
#[derive(Debug, Clone, PartialEq)]
pub struct Design {
    // The bulky parts are shared, so cloning a design (as every fit does) is cheap.
    x: Arc<Matrix>,
    y: Arc<Vec<f64>>,
    weights: Option<Arc<Vec<f64>>>,
    column_names: Vec<String>,
    terms: Vec<Term>,
    kinds: Vec<TermKind>,
    keys: Arc<Vec<String>>,
    dropped: Vec<DroppedRow>,
    intercept: bool,
    spec: ModelSpec,
}

impl Design {
    /// Checks `spec` against `table` and builds the design.
    pub fn build(table: &Table, spec: &ModelSpec) -> Result<Design> {
        check_spec(table, spec)?;
        let tkeys = table.keys();
        let key_set: HashSet<&str> = tkeys.iter().map(String::as_str).collect();
        let mut excluded: HashMap<&str, &str> = HashMap::new();
        for e in &spec.exclusions {
            if !key_set.contains(e.key.as_str()) {
                return Err(EngineError::UnknownKey { key: e.key.clone() });
            }
            excluded.insert(e.key.as_str(), e.reason.as_str());
        }

        // Columns the model uses, each once, in spec order.
        let mut used: Vec<&str> = vec![spec.response.as_str()];
        used.extend(spec.predictors.iter().map(|p| p.column.as_str()));
        used.extend(spec.weights.as_deref());
        let mut seen = HashSet::new();
        used.retain(|c| seen.insert(*c));
        let used_cols: Vec<&ColumnData> =
            used.iter().map(|c| &table.column(c).expect("checked by check_spec").data).collect();

        let mut keep = Vec::new();
        let mut dropped = Vec::new();
        for (i, key) in tkeys.iter().enumerate() {
            if let Some(reason) = excluded.get(key.as_str()) {
                dropped.push(DroppedRow { key: key.clone(), reason: format!("excluded: {reason}") });
                continue;
            }
            let missing: Vec<String> = used
                .iter()
                .zip(&used_cols)
                .filter(|(_, d)| d.is_missing(i))
                .map(|(c, _)| (*c).to_owned())
                .collect();
            if !missing.is_empty() {
                let reason = if missing.len() == 1 {
                    format!("missing value in {}", missing[0])
                } else {
                    format!("missing values in {}", join_names(&missing))
                };
                dropped.push(DroppedRow { key: key.clone(), reason });
                continue;
            }
            keep.push(i);
        }
        if keep.is_empty() {
            return Err(EngineError::EmptyInput);
        }
        let keys: Vec<String> = keep.iter().map(|&i| tkeys[i].clone()).collect();

        // Response.
        let raw_y = numeric_values(table, &spec.response, &keep, &keys)?;
        let y = transform_values(&raw_y, &spec.response, spec.response_transform.as_ref(), &keys)?;

        // Weights.
        let weights = match &spec.weights {
            None => None,
            Some(w) => {
                let data = match &table.column(w).expect("checked").data {
                    ColumnData::Numeric(v) => v,
                    ColumnData::Text(_) => unreachable!("checked by check_spec"),
                };
                let vals: Vec<f64> = keep.iter().map(|&i| data[i].expect("missing dropped")).collect();
                check_weights(&vals, &keys)?;
                Some(vals)
            }
        };

        // Predictors.
        let mut cols: Vec<Vec<f64>> = Vec::new();
        let mut names: Vec<String> = Vec::new();
        if spec.intercept {
            cols.push(vec![1.0; keep.len()]);
            names.push(INTERCEPT_LABEL.to_owned());
        }
        let mut terms = Vec::new();
        let mut kinds = Vec::new();
        for p in &spec.predictors {
            let start = cols.len();
            let col = table.column(&p.column).expect("checked");
            match &col.data {
                ColumnData::Numeric(_) => {
                    let raw = numeric_values(table, &p.column, &keep, &keys)?;
                    cols.push(transform_values(&raw, &p.column, p.transform.as_ref(), &keys)?);
                    names.push(p.label());
                    kinds.push(TermKind::Numeric { column: p.column.clone(), transform: p.transform });
                }
                ColumnData::Text(v) => {
                    let vals: Vec<&str> =
                        keep.iter().map(|&i| v[i].as_deref().expect("missing dropped")).collect();
                    let levels: BTreeSet<&str> = vals.iter().copied().collect();
                    let reference = match &p.reference_level {
                        Some(r) => {
                            if !levels.contains(r.as_str()) {
                                return Err(EngineError::UnknownLevel {
                                    column: p.column.clone(),
                                    level: r.clone(),
                                });
                            }
                            r.clone()
                        }
                        None => (*levels.iter().next().expect("at least one row")).to_owned(),
                    };
                    if levels.len() < 2 {
                        return Err(EngineError::SingleLevel { column: p.column.clone(), level: reference });
                    }
                    let others: Vec<String> =
                        levels.iter().filter(|l| **l != reference).map(|l| (*l).to_owned()).collect();
                    for l in &others {
                        cols.push(vals.iter().map(|v| if v == l { 1.0 } else { 0.0 }).collect());
                        names.push(format!("{}={}", p.column, l));
                    }
                    kinds.push(TermKind::Categorical { column: p.column.clone(), reference, levels: others });
                }
            }
            terms.push(Term { label: p.label(), columns: start..cols.len() });
        }
        let x = if cols.is_empty() { Matrix::zeros(keep.len(), 0) } else { Matrix::from_columns(&cols) };
        Ok(Design {
            x: Arc::new(x),
            y: Arc::new(y),
            weights: weights.map(Arc::new),
            column_names: names,
            terms,
            kinds,
            keys: Arc::new(keys),
            dropped,
            intercept: spec.intercept,
            spec: spec.clone(),
        })
    }

    /// Builds a design directly from a matrix of predictor columns (tests, reference data,
    /// auxiliary regressions). Each column becomes its own numeric term named by
    /// `column_names`. With `intercept`, a column of ones named `(intercept)` is put first,
    /// unless `x` already starts with such a column (named `(intercept)` and all ones). The
    /// response is named `y` and the weights, if any, `weights`.
    pub fn from_matrix(
        x: Matrix,
        y: Vec<f64>,
        weights: Option<Vec<f64>>,
        column_names: Vec<String>,
        keys: Vec<String>,
        intercept: bool,
    ) -> Result<Design> {
        let n = x.nrows();
        if column_names.len() != x.ncols() {
            return Err(EngineError::DimensionMismatch {
                what: "number of column names".to_owned(),
                expected: x.ncols(),
                found: column_names.len(),
            });
        }
        if y.len() != n && x.ncols() > 0 {
            return Err(EngineError::DimensionMismatch {
                what: "length of the response".to_owned(),
                expected: n,
                found: y.len(),
            });
        }
        let n = if x.ncols() == 0 { y.len() } else { n };
        if keys.len() != n {
            return Err(EngineError::DimensionMismatch {
                what: "number of row keys".to_owned(),
                expected: n,
                found: keys.len(),
            });
        }
        if n == 0 {
            return Err(EngineError::EmptyInput);
        }
        let has_const = intercept
            && column_names.first().is_some_and(|c| c == INTERCEPT_LABEL)
            && x.column(0).iter().all(|&v| v == 1.0);
        let mut seen = HashSet::new();
        for name in &column_names {
            if !seen.insert(name.as_str()) {
                return Err(EngineError::DuplicatePredictor { name: name.clone() });
            }
        }
        if !has_const && seen.contains(INTERCEPT_LABEL) {
            return Err(EngineError::DuplicatePredictor { name: INTERCEPT_LABEL.to_owned() });
        }
        for (j, name) in column_names.iter().enumerate() {
            check_finite(x.column(j), name, &keys)?;
        }
        check_finite(&y, "y", &keys)?;
        if let Some(w) = &weights {
            if w.len() != n {
                return Err(EngineError::DimensionMismatch {
                    what: "number of weights".to_owned(),
                    expected: n,
                    found: w.len(),
                });
            }
            check_weights(w, &keys)?;
        }
        let (x, names) = if intercept && !has_const {
            let mut cols = vec![vec![1.0; n]];
            cols.extend((0..x.ncols()).map(|j| x.column(j).to_vec()));
            let mut names = vec![INTERCEPT_LABEL.to_owned()];
            names.extend(column_names);
            (Matrix::from_columns(&cols), names)
        } else if x.ncols() == 0 {
            (Matrix::zeros(n, 0), column_names)
        } else {
            (x, column_names)
        };
        let first = usize::from(intercept);
        let predictor_names = &names[first..];
        let terms = predictor_names
            .iter()
            .enumerate()
            .map(|(k, l)| Term { label: l.clone(), columns: first + k..first + k + 1 })
            .collect();
        let kinds = predictor_names
            .iter()
            .map(|l| TermKind::Numeric { column: l.clone(), transform: None })
            .collect();
        let spec = ModelSpec {
            response: "y".to_owned(),
            response_transform: None,
            predictors: predictor_names.iter().map(Predictor::new).collect(),
            intercept,
            weights: weights.as_ref().map(|_| "weights".to_owned()),
            exclusions: Vec::new(),
        };
        Ok(Design {
            x: Arc::new(x),
            y: Arc::new(y),
            weights: weights.map(Arc::new),
            column_names: names,
            terms,
            kinds,
            keys: Arc::new(keys),
            dropped: Vec::new(),
            intercept,
            spec,
        })
    }

    /// The design matrix (intercept column first when present).
    pub fn x(&self) -> &Matrix {
        &self.x
    }

    /// The (transformed) response.
    pub fn y(&self) -> &[f64] {
        &self.y
    }

    /// The case weights, if any.
    pub fn weights(&self) -> Option<&[f64]> {
        self.weights.as_deref().map(Vec::as_slice)
    }

    /// Names of the design columns: `(intercept)`, `unemployment_pct`, `log(vacancy_pct)`,
    /// `district_type=mixed`, …
    pub fn column_names(&self) -> &[String] {
        &self.column_names
    }

    /// The model terms (the intercept is not a term).
    pub fn terms(&self) -> &[Term] {
        &self.terms
    }

    /// How each term is coded, parallel to [`Design::terms`].
    pub fn term_kinds(&self) -> &[TermKind] {
        &self.kinds
    }

    /// Keys of the rows used, in design order.
    pub fn keys(&self) -> &[String] {
        &self.keys
    }

    /// Rows left out, with reasons.
    pub fn dropped(&self) -> &[DroppedRow] {
        &self.dropped
    }

    /// Whether the first design column is the intercept.
    pub fn has_intercept(&self) -> bool {
        self.intercept
    }

    /// The spec the design was built from (for [`Design::from_matrix`], a synthesised one).
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// The label of the (possibly transformed) response.
    pub fn response_label(&self) -> String {
        self.spec.response_label()
    }

    /// Number of rows used.
    pub fn nrows(&self) -> usize {
        self.y.len()
    }

    /// Number of design columns (regression coefficients).
    pub fn ncols(&self) -> usize {
        self.x.ncols()
    }

    /// A design with only the given terms (by index into [`Design::terms`], in the order
    /// given), keeping the intercept if present and the same rows.
    ///
    /// # Panics
    /// Panics if a term index is out of range (a programming error).
    pub fn select_terms(&self, term_idx: &[usize]) -> Design {
        let mut cols: Vec<usize> = Vec::new();
        let mut names = Vec::new();
        if self.intercept {
            cols.push(0);
            names.push(self.column_names[0].clone());
        }
        let mut terms = Vec::new();
        for &t in term_idx {
            let term = &self.terms[t];
            let start = cols.len();
            for j in term.columns.clone() {
                cols.push(j);
                names.push(self.column_names[j].clone());
            }
            terms.push(Term { label: term.label.clone(), columns: start..cols.len() });
        }
        let mut spec = self.spec.clone();
        spec.predictors = term_idx.iter().map(|&t| self.spec.predictors[t].clone()).collect();
        Design {
            x: Arc::new(self.x.select_columns(&cols)),
            y: self.y.clone(),
            weights: self.weights.clone(),
            column_names: names,
            terms,
            kinds: term_idx.iter().map(|&t| self.kinds[t].clone()).collect(),
            keys: self.keys.clone(),
            dropped: self.dropped.clone(),
            intercept: self.intercept,
            spec,
        }
    }

    /// A design without the rows with these keys; they are recorded as dropped ("left out").
    pub fn without_rows(&self, keys: &[String]) -> Result<Design> {
        let pos: HashMap<&str, usize> = self.keys.iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
        let mut out = HashSet::new();
        for k in keys {
            match pos.get(k.as_str()) {
                Some(&i) => {
                    out.insert(i);
                }
                None => return Err(EngineError::UnknownKey { key: k.clone() }),
            }
        }
        let rows: Vec<usize> = (0..self.nrows()).filter(|i| !out.contains(i)).collect();
        if rows.is_empty() {
            return Err(EngineError::EmptyInput);
        }
        let mut d = self.select_rows(&rows);
        let mut left: Vec<usize> = out.into_iter().collect();
        left.sort_unstable();
        d.dropped.extend(
            left.into_iter().map(|i| DroppedRow { key: self.keys[i].clone(), reason: "left out".to_owned() }),
        );
        Ok(d)
    }

    /// A design made of the given rows (by position, in the order given); the dropped list is
    /// kept as it is.
    ///
    /// # Panics
    /// Panics if a row index is out of range (a programming error).
    pub fn select_rows(&self, rows: &[usize]) -> Design {
        Design {
            x: Arc::new(self.x.select_rows(rows)),
            y: Arc::new(rows.iter().map(|&i| self.y[i]).collect()),
            weights: self.weights.as_ref().map(|w| Arc::new(rows.iter().map(|&i| w[i]).collect())),
            column_names: self.column_names.clone(),
            terms: self.terms.clone(),
            kinds: self.kinds.clone(),
            keys: Arc::new(rows.iter().map(|&i| self.keys[i].clone()).collect()),
            dropped: self.dropped.clone(),
            intercept: self.intercept,
            spec: self.spec.clone(),
        }
    }

    /// Builds one design row from raw predictor values (transforms and dummies applied), for
    /// prediction. Every predictor must be given; values for other columns are an error.
    pub fn row_for_prediction(&self, values: &[(String, PredictorValue)]) -> Result<Vec<f64>> {
        let lookup: HashMap<&str, &PredictorValue> = values.iter().map(|(k, v)| (k.as_str(), v)).collect();
        let mut used = HashSet::new();
        let mut row = Vec::with_capacity(self.ncols());
        if self.intercept {
            row.push(1.0);
        }
        for kind in &self.kinds {
            match kind {
                TermKind::Numeric { column, transform } => {
                    used.insert(column.as_str());
                    let v = match lookup.get(column.as_str()) {
                        None => {
                            return Err(EngineError::MissingValue { column: column.clone() });
                        }
                        Some(PredictorValue::Number(v)) => *v,
                        Some(PredictorValue::Level(_)) => {
                            return Err(EngineError::NotNumeric {
                                column: column.clone(),
                                role: "predictor".to_owned(),
                            });
                        }
                    };
                    let keys = [NEW_ROW.to_owned()];
                    check_finite(&[v], column, &keys)?;
                    row.extend(transform_values(&[v], column, transform.as_ref(), &keys)?);
                }
                TermKind::Categorical { column, reference, levels } => {
                    used.insert(column.as_str());
                    let level = match lookup.get(column.as_str()) {
                        None => {
                            return Err(EngineError::MissingValue { column: column.clone() });
                        }
                        Some(PredictorValue::Level(l)) => l.clone(),
                        Some(PredictorValue::Number(v)) => v.to_string(),
                    };
                    if &level != reference && !levels.contains(&level) {
                        return Err(EngineError::UnknownLevel { column: column.clone(), level });
                    }
                    row.extend(levels.iter().map(|l| if *l == level { 1.0 } else { 0.0 }));
                }
            }
        }
        for (k, _) in values {
            if !used.contains(k.as_str()) {
                return Err(EngineError::NotInModel { name: k.clone() });
            }
        }
        Ok(row)
    }
}

/// Checks the spec's names and kinds against the table before any row is looked at.
fn check_spec(table: &Table, spec: &ModelSpec) -> Result<()> {
    let col =
        |name: &str| table.column(name).ok_or_else(|| EngineError::UnknownColumn { name: name.to_owned() });
    if !col(&spec.response)?.data.is_numeric() {
        return Err(EngineError::NotNumeric { column: spec.response.clone(), role: "response".to_owned() });
    }
    if let Some(t) = &spec.response_transform {
        t.validate(&spec.response)?;
    }
    if let Some(w) = &spec.weights
        && !col(w)?.data.is_numeric()
    {
        return Err(EngineError::NotNumeric { column: w.clone(), role: "weights".to_owned() });
    }
    if !spec.intercept && spec.predictors.is_empty() {
        return Err(EngineError::EmptyModel);
    }
    let mut labels = HashSet::new();
    for p in &spec.predictors {
        if p.column == spec.response {
            return Err(EngineError::ResponseAsPredictor { name: p.column.clone() });
        }
        let c = col(&p.column)?;
        if !labels.insert(p.label()) {
            return Err(EngineError::DuplicatePredictor { name: p.label() });
        }
        if let Some(t) = &p.transform {
            if !c.data.is_numeric() {
                return Err(EngineError::NotNumeric {
                    column: p.column.clone(),
                    role: "transformed predictor".to_owned(),
                });
            }
            t.validate(&p.column)?;
        }
        if p.reference_level.is_some() && c.data.is_numeric() {
            return Err(EngineError::ReferenceOnNumeric { column: p.column.clone() });
        }
    }
    Ok(())
}

/// The values of a numeric column at the kept rows, checked to be finite.
fn numeric_values(table: &Table, name: &str, keep: &[usize], keys: &[String]) -> Result<Vec<f64>> {
    let data = match &table.column(name).expect("checked").data {
        ColumnData::Numeric(v) => v,
        ColumnData::Text(_) => {
            return Err(EngineError::NotNumeric { column: name.to_owned(), role: "response".to_owned() });
        }
    };
    let vals: Vec<f64> = keep.iter().map(|&i| data[i].expect("missing rows were dropped")).collect();
    check_finite(&vals, name, keys)?;
    Ok(vals)
}

/// Errors on the first NaN or infinite value.
fn check_finite(vals: &[f64], column: &str, keys: &[String]) -> Result<()> {
    match vals.iter().position(|v| !v.is_finite()) {
        Some(i) => Err(EngineError::NonFinite { column: column.to_owned(), row_key: keys[i].clone() }),
        None => Ok(()),
    }
}

/// Errors on the first weight that is not a positive finite number.
fn check_weights(w: &[f64], keys: &[String]) -> Result<()> {
    match w.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
        Some(i) => Err(EngineError::BadWeight { row_key: keys[i].clone(), value: w[i] }),
        None => Ok(()),
    }
}

/// Applies a transform, naming the first row outside its domain.
fn transform_values(vals: &[f64], column: &str, t: Option<&Transform>, keys: &[String]) -> Result<Vec<f64>> {
    let Some(t) = t else {
        return Ok(vals.to_vec());
    };
    vals.iter()
        .zip(keys)
        .map(|(&v, k)| {
            t.apply(v).ok_or_else(|| EngineError::TransformDomain {
                label: t.label(column),
                column: column.to_owned(),
                row_key: k.clone(),
                value: v,
            })
        })
        .collect()
}

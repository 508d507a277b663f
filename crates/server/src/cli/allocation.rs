//! The allocation flags of `wardcast brief` and the run of a formula allocation for an
//! analysis: districts and their residents and incidents from the analysis table, this year's
//! budgets from a budget table, expected incidents from the fitted model, through the engine's
//! [`allocate`].

use std::path::PathBuf;

use wardcast_contract::allocation::AllocationDocument;
use wardcast_contract::dataset::{ColumnMeta, ColumnRole};
use wardcast_engine::allocation::{
    AllocationOptions, Basis, BlendWeights, BudgetRow, DEFAULT_DRAWS, DEFAULT_SEED, DistrictInput,
    ExpectedModel, SimulationOptions, allocate,
};
use wardcast_engine::design::PredictorValue;
use wardcast_engine::{ColumnData, Table};

use crate::web::Analysis;

/// The allocation flags of `wardcast brief`.
#[derive(Debug, Clone, clap::Args)]
pub struct AllocationArgs {
    /// Allocate this budget (whole currency units) across the districts and add the
    /// allocation section to the brief.
    #[arg(long, value_name = "TOTAL")]
    pub budget: Option<u64>,
    /// What the allocation is proportional to: population, observed (incidents), expected
    /// (model-expected incidents) or blend (with --blend).
    #[arg(long)]
    pub basis: Option<String>,
    /// Blend weights on population, observed and expected shares, e.g. 0.5,0.25,0.25 (sum 1).
    #[arg(long, value_delimiter = ',', value_name = "W1,W2,W3")]
    pub blend: Vec<f64>,
    /// The least amount any district receives.
    #[arg(long)]
    pub floor: Option<u64>,
    /// The most any district receives.
    #[arg(long)]
    pub cap: Option<u64>,
    /// The currency or unit of the amounts (default: the budget column's unit).
    #[arg(long)]
    pub currency: Option<String>,
    /// Coefficient draws behind the share ranges.
    #[arg(long)]
    pub draws: Option<usize>,
    /// Seed of the coefficient simulation.
    #[arg(long = "alloc-seed")]
    pub alloc_seed: Option<u64>,
    /// This year's budgets: a CSV or XLSX table keyed like the data, with one amount column
    /// (the first numeric column whose name mentions "budget", else the first numeric column).
    #[arg(long, value_name = "FILE")]
    pub budgets: Option<PathBuf>,
    /// The residents column (default: the column whose role is population, or `residents`).
    #[arg(long)]
    pub residents: Option<String>,
    /// The observed-incidents column (default: the column whose role is count).
    #[arg(long)]
    pub incidents: Option<String>,
    /// Residents per rate unit of the response, e.g. 10000 for a rate per 10,000 residents
    /// (default: read from the response's unit or name).
    #[arg(long)]
    pub rate_unit: Option<f64>,
}

/// Allocation settings as a saved analysis stores them (the settings of an allocation
/// document): `total`, `basis`, `blend_weights`, `floor`, `cap`, `seed`, `draws`, and
/// optionally `currency`. Flags given on the command line take precedence.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SavedAllocation {
    /// The amount allocated.
    pub total: Option<u64>,
    /// The basis name.
    pub basis: Option<String>,
    /// Blend weights (population, observed, expected).
    pub blend: Option<[f64; 3]>,
    /// The floor.
    pub floor: Option<u64>,
    /// The cap.
    pub cap: Option<u64>,
    /// The simulation seed.
    pub seed: Option<u64>,
    /// The number of draws.
    pub draws: Option<usize>,
    /// The currency.
    pub currency: Option<String>,
}

impl SavedAllocation {
    /// Reads the settings from a saved analysis' `allocation` value; null or an empty object
    /// means none were saved.
    pub fn from_value(v: &serde_json::Value) -> Result<Self, String> {
        if v.is_null() || v.as_object().is_some_and(|o| o.is_empty()) {
            return Ok(Self::default());
        }
        let obj = v.as_object().ok_or("the saved allocation settings are not a JSON object")?;
        let int = |k: &str| -> Result<Option<u64>, String> {
            match obj.get(k) {
                None | Some(serde_json::Value::Null) => Ok(None),
                Some(x) => x
                    .as_u64()
                    .map(Some)
                    .ok_or_else(|| format!("the saved allocation's {k} is not a whole number")),
            }
        };
        let text = |k: &str| obj.get(k).and_then(|x| x.as_str()).map(str::to_owned);
        let blend = match obj.get("blend_weights") {
            None | Some(serde_json::Value::Null) => None,
            Some(w) => {
                let f = |k: &str| {
                    w.get(k)
                        .and_then(serde_json::Value::as_f64)
                        .ok_or_else(|| format!("the saved allocation's blend weights lack a number for {k}"))
                };
                Some([f("population")?, f("observed")?, f("expected")?])
            }
        };
        Ok(SavedAllocation {
            total: int("total")?,
            basis: text("basis"),
            blend,
            floor: int("floor")?,
            cap: int("cap")?,
            seed: int("seed")?,
            draws: int("draws")?.map(|d| usize::try_from(d).unwrap_or(usize::MAX)),
            currency: text("currency"),
        })
    }
}

/// A resolved allocation request: the engine options and the columns that feed it.
#[derive(Debug, Clone)]
pub struct AllocationRequest {
    /// The engine options.
    pub options: AllocationOptions,
    /// The currency of the amounts, when given.
    pub currency: Option<String>,
}

/// Combines the flags with the saved settings (flags win); `None` when no budget was given
/// either way.
pub fn request(args: &AllocationArgs, saved: &SavedAllocation) -> Result<Option<AllocationRequest>, String> {
    let Some(total) = args.budget.or(saved.total) else {
        let given = args.basis.is_some()
            || !args.blend.is_empty()
            || args.floor.is_some()
            || args.cap.is_some()
            || args.draws.is_some()
            || args.alloc_seed.is_some()
            || args.budgets.is_some();
        if given {
            return Err(
                "the allocation flags need the amount to allocate: give it with --budget TOTAL".into()
            );
        }
        return Ok(None);
    };
    let blend = if args.blend.is_empty() {
        saved.blend
    } else {
        match args.blend.as_slice() {
            [p, o, e] => Some([*p, *o, *e]),
            _ => return Err("--blend takes three weights: population,observed,expected".into()),
        }
    };
    let basis_name = args
        .basis
        .clone()
        .or_else(|| if args.blend.is_empty() { saved.basis.clone() } else { None })
        .unwrap_or_else(|| if blend.is_some() { "blend".into() } else { "expected".into() });
    let basis = match basis_name.trim().to_ascii_lowercase().as_str() {
        "population" => Basis::Population,
        "observed" => Basis::Observed,
        "expected" => Basis::Expected,
        "blend" => {
            let [population, observed, expected] =
                blend.ok_or("--basis blend needs the weights with --blend W1,W2,W3")?;
            Basis::Blend(BlendWeights { population, observed, expected })
        }
        other => {
            return Err(format!(
                "--basis {other:?} is not a basis; use population, observed, expected or blend"
            ));
        }
    };
    if blend.is_some() && !matches!(basis, Basis::Blend(_)) {
        return Err("--blend goes with --basis blend".into());
    }
    Ok(Some(AllocationRequest {
        options: AllocationOptions {
            total,
            basis,
            floor: args.floor.or(saved.floor),
            cap: args.cap.or(saved.cap),
            simulation: SimulationOptions {
                draws: args.draws.or(saved.draws).unwrap_or(DEFAULT_DRAWS),
                seed: args.alloc_seed.or(saved.seed).unwrap_or(DEFAULT_SEED),
            },
        },
        currency: args.currency.clone().or_else(|| saved.currency.clone()),
    }))
}

/// Which columns feed the allocation.
#[derive(Debug, Clone, PartialEq)]
pub struct AllocationColumns {
    /// Residents per district.
    pub residents: String,
    /// Observed incidents per district.
    pub incidents: String,
    /// Residents per rate unit of the response.
    pub rate_unit: f64,
}

/// Reads "per 10,000" (or "per 1000", "per_10k") from a unit, label or column name.
pub fn rate_unit_in(text: &str) -> Option<f64> {
    let lower = text.to_ascii_lowercase();
    for marker in ["per ", "per_"] {
        if let Some(at) = lower.find(marker) {
            let rest = &lower[at + marker.len()..];
            let digits: String = rest.chars().take_while(|c| c.is_ascii_digit() || *c == ',').collect();
            let tail = &rest[digits.len()..];
            let mut value: f64 = digits.replace(',', "").parse().ok()?;
            if tail.starts_with('k') {
                value *= 1000.0;
            }
            if value > 0.0 {
                return Some(value);
            }
        }
    }
    None
}

impl AllocationColumns {
    /// The columns from the flags, else from the column roles and the response's unit.
    pub fn resolve(
        args: &AllocationArgs,
        metas: &[ColumnMeta],
        table: &Table,
        response: &str,
    ) -> Result<Self, String> {
        let by_role = |role: ColumnRole| metas.iter().find(|m| m.role == role).map(|m| m.column.clone());
        let residents = args
            .residents
            .clone()
            .or_else(|| by_role(ColumnRole::Population))
            .or_else(|| table.column("residents").map(|_| "residents".to_owned()))
            .ok_or("name the residents column with --residents")?;
        let incidents = args
            .incidents
            .clone()
            .or_else(|| by_role(ColumnRole::Count))
            .ok_or("name the observed-incidents column with --incidents")?;
        let meta = metas.iter().find(|m| m.column == response);
        let rate_unit = args
            .rate_unit
            .or_else(|| meta.and_then(|m| m.unit.as_deref()).and_then(rate_unit_in))
            .or_else(|| meta.and_then(|m| m.label.as_deref()).and_then(rate_unit_in))
            .or_else(|| rate_unit_in(response))
            .ok_or_else(|| format!("give the rate unit of {response} with --rate-unit (e.g. 10000)"))?;
        if !(rate_unit.is_finite() && rate_unit > 0.0) {
            return Err("--rate-unit must be a positive number".into());
        }
        Ok(AllocationColumns { residents, incidents, rate_unit })
    }
}

fn numbers<'a>(table: &'a Table, name: &str) -> Result<&'a [Option<f64>], String> {
    match table.column(name).map(|c| &c.data) {
        Some(ColumnData::Numeric(v)) => Ok(v),
        Some(ColumnData::Text(_)) => Err(format!("the column {name} holds text, not numbers")),
        None => Err(format!("the table has no column {name}")),
    }
}

/// This year's budgets from a table: the first numeric column (other than the key) whose name
/// mentions "budget", else its first numeric column. Missing amounts mean "no current budget";
/// amounts are rounded to whole units.
pub fn budgets_from_table(table: &Table) -> Result<Vec<BudgetRow>, String> {
    let numeric: Vec<&wardcast_engine::Column> =
        table.columns().iter().filter(|c| matches!(c.data, ColumnData::Numeric(_))).collect();
    let column = numeric
        .iter()
        .find(|c| c.name.to_ascii_lowercase().contains("budget"))
        .or_else(|| numeric.first())
        .ok_or("the budget table has no numeric column")?;
    let ColumnData::Numeric(values) = &column.data else {
        return Err("the budget table has no numeric column".into());
    };
    let mut rows = Vec::new();
    for (key, v) in table.keys().iter().zip(values) {
        let Some(v) = v else { continue };
        if !(v.is_finite() && *v >= 0.0) {
            return Err(format!("the budget of {key} is not a non-negative amount"));
        }
        rows.push(BudgetRow { key: key.clone(), amount: v.round() as u64 });
    }
    Ok(rows)
}

/// A table's budget column, when it has one (a numeric column whose name mentions "budget").
pub fn budgets_in_table(table: &Table) -> Option<Vec<BudgetRow>> {
    table
        .columns()
        .iter()
        .any(|c| matches!(c.data, ColumnData::Numeric(_)) && c.name.to_ascii_lowercase().contains("budget"))
        .then(|| budgets_from_table(table).ok())
        .flatten()
}

/// Runs the allocation for an analysis. Districts without residents or incidents, or whose
/// expected value the model cannot give (a missing indicator), are left out and named in the
/// document's notes.
pub fn run(
    analysis: &Analysis,
    budgets: &[BudgetRow],
    columns: &AllocationColumns,
    options: &AllocationOptions,
) -> Result<AllocationDocument, String> {
    let table = analysis.table();
    let residents = numbers(table, &columns.residents)?;
    let incidents = numbers(table, &columns.incidents)?;
    let fit = analysis.fitted().fit();
    let design = fit.design();
    let fitted: std::collections::HashSet<&str> = design.keys().iter().map(String::as_str).collect();
    let predictors = &analysis.spec().predictors;
    let mut districts = Vec::new();
    let mut extra_rows = Vec::new();
    let mut left_out = Vec::new();
    for (i, key) in table.keys().iter().enumerate() {
        let (Some(r), Some(o)) = (residents.get(i).copied().flatten(), incidents.get(i).copied().flatten())
        else {
            left_out.push(format!("{key} (no residents or incident count)"));
            continue;
        };
        if !fitted.contains(key.as_str()) {
            let mut values = Vec::new();
            let mut missing = None;
            for p in predictors {
                let v = table.column(&p.column).and_then(|c| match &c.data {
                    ColumnData::Numeric(v) => v.get(i).copied().flatten().map(PredictorValue::Number),
                    ColumnData::Text(v) => v.get(i).cloned().flatten().map(PredictorValue::Level),
                });
                match v {
                    Some(v) => values.push((p.column.clone(), v)),
                    None => missing = Some(p.column.clone()),
                }
            }
            let row = match missing {
                Some(col) => Err(format!("missing value in {col}")),
                None => design.row_for_prediction(&values).map_err(|e| e.to_string()),
            };
            match row {
                Ok(row) => extra_rows.push((key.clone(), row)),
                Err(reason) => {
                    left_out.push(format!("{key} ({reason}, so the model gives no expected value)"));
                    continue;
                }
            }
        }
        districts.push(DistrictInput { key: key.clone(), residents: r, observed: o });
    }
    let model = ExpectedModel { fit, rate_unit: columns.rate_unit, extra_rows };
    let allocation = allocate(&districts, budgets, &model, options).map_err(|e| e.to_string())?;
    let mut doc = AllocationDocument::from_allocation(&allocation);
    if !left_out.is_empty() {
        doc.notes.push(format!(
            "Left out of the allocation, because the formula needs every basis for every district: {}. Their funding needs a separate decision.",
            left_out.join("; ")
        ));
    }
    Ok(doc)
}

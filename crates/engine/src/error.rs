//! The engine's error type: one enum with plain-language messages, and the crate `Result` alias.

/// Everything that can go wrong when validating a model or fitting it.
///
/// Messages are written for an analyst, not a programmer: they name the column, the row key and
/// what to change.
#[non_exhaustive]
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum EngineError {
    /// No rows are available to fit.
    #[error("there are no rows to fit: the table is empty or every row was dropped")]
    EmptyInput,

    /// The model has as many or more parameters than rows, so no residual degrees of freedom remain.
    #[error(
        "{rows} rows are not enough to estimate {params} parameters: at least {} rows are needed",
        params + 1
    )]
    NoResidualDf {
        /// Rows used in the fit.
        rows: usize,
        /// Regression coefficients in the model.
        params: usize,
    },

    /// A predictor takes one value in every row, which duplicates the intercept.
    #[error(
        "{column} has the same value in every row used, so its effect cannot be separated from the intercept"
    )]
    ConstantPredictor {
        /// The column's label.
        column: String,
    },

    /// A value is NaN or infinite.
    #[error("{column} is not a finite number in row {row_key}")]
    NonFinite {
        /// The column's label.
        column: String,
        /// The key of the row.
        row_key: String,
    },

    /// A case weight is zero, negative or not finite.
    #[error("the weight in row {row_key} is {value}; weights must be positive finite numbers")]
    BadWeight {
        /// The key of the row.
        row_key: String,
        /// The offending weight.
        value: f64,
    },

    /// The same predictor is listed twice.
    #[error("{name} is listed more than once as a predictor")]
    DuplicatePredictor {
        /// The repeated name.
        name: String,
    },

    /// A column named in the model spec is not in the table.
    #[error("the table has no column named {name}")]
    UnknownColumn {
        /// The missing name.
        name: String,
    },

    /// A design column is an exact linear combination of earlier columns.
    #[error("{}", aliased_message(column, combination))]
    Aliased {
        /// The aliased column's label.
        column: String,
        /// The labels of the columns it is a combination of (may be empty for a zero column).
        combination: Vec<String>,
    },

    /// A transform is not valid as specified (for example a power that is not a finite number).
    #[error("the transform of {column} is not valid: {reason}")]
    BadTransform {
        /// The column the transform applies to.
        column: String,
        /// What is wrong with it.
        reason: String,
    },

    /// A value lies outside the domain of the transform applied to it (for example the log of 0).
    #[error("{label} is undefined in row {row_key}, where {column} is {value}")]
    TransformDomain {
        /// The transformed label, e.g. `log(vacancy_pct)`.
        label: String,
        /// The raw column.
        column: String,
        /// The key of the row.
        row_key: String,
        /// The raw value.
        value: f64,
    },

    /// A level named for a categorical predictor does not occur in the data used.
    #[error("{column} has no level \"{level}\" among the rows used")]
    UnknownLevel {
        /// The categorical column.
        column: String,
        /// The unknown level.
        level: String,
    },

    /// A categorical predictor has a single level among the rows used.
    #[error("{column} has only one level (\"{level}\") among the rows used, so it cannot be a predictor")]
    SingleLevel {
        /// The categorical column.
        column: String,
        /// Its only level.
        level: String,
    },

    /// A confidence level outside (0, 1).
    #[error("the confidence level must lie strictly between 0 and 1; {0} was given")]
    BadLevel(f64),

    /// A column has the wrong kind of data for its role (for example a text response).
    #[error("{column} must be numeric to be used as the {role}")]
    NotNumeric {
        /// The column.
        column: String,
        /// Its role: "response", "weights" or "predictor".
        role: String,
    },

    /// The response is also listed among the predictors.
    #[error("{name} is the response, so it cannot also be a predictor")]
    ResponseAsPredictor {
        /// The column.
        name: String,
    },

    /// A model without an intercept needs at least one predictor.
    #[error("the model has neither an intercept nor any predictor")]
    EmptyModel,

    /// Two columns of a table share a name.
    #[error("the table has two columns named {name}")]
    DuplicateColumn {
        /// The repeated name.
        name: String,
    },

    /// Two rows of a table share a key.
    #[error("the key {key} appears in more than one row")]
    DuplicateKey {
        /// The repeated key.
        key: String,
    },

    /// A key given for a row operation is not among the rows of the model.
    #[error("there is no row with key {key}")]
    UnknownKey {
        /// The key.
        key: String,
    },

    /// Lengths that must agree do not.
    #[error("{what}: expected {expected}, found {found}")]
    DimensionMismatch {
        /// What was being checked, in words.
        what: String,
        /// The expected length.
        expected: usize,
        /// The length found.
        found: usize,
    },

    /// A value needed for a prediction was not supplied.
    #[error("a value for {column} is needed to make a prediction")]
    MissingValue {
        /// The column.
        column: String,
    },

    /// A value was supplied for a column the model does not use.
    #[error("{name} is not a predictor in the model")]
    NotInModel {
        /// The column.
        name: String,
    },

    /// A reference level was given for a numeric column.
    #[error("{column} is numeric, so it takes no reference level")]
    ReferenceOnNumeric {
        /// The column.
        column: String,
    },

    /// The response takes one value in every row used.
    #[error("the response {column} has the same value in every row used, so there is nothing to explain")]
    ConstantResponse {
        /// The response label.
        column: String,
    },

    /// An option of the model checks is out of range.
    #[error("the check option {option} {reason}")]
    BadCheckOption {
        /// The option's name.
        option: String,
        /// What is wrong with the value.
        reason: String,
    },

    /// An option of model selection or cross-validation is not usable.
    #[error("the selection option {option} is not usable: {reason}")]
    BadSearchOption {
        /// The option's name.
        option: String,
        /// What is wrong with the value.
        reason: String,
    },

    /// More candidate terms than the subset search handles.
    #[error("{count} candidate terms were given; the subset search handles at most {max}")]
    TooManyCandidates {
        /// Candidate terms given (forced ones not counted).
        count: usize,
        /// The most the search accepts.
        max: usize,
    },

    /// A long computation was stopped by its cancel flag.
    #[error("the computation was cancelled before it finished")]
    Cancelled,

    /// Two models given to a partial F-test are not nested.
    #[error("{}", not_nested_message(smaller, larger, missing))]
    NotNested {
        /// The model with fewer coefficients.
        smaller: String,
        /// The model with more coefficients.
        larger: String,
        /// Terms of the smaller model that the larger one lacks (empty when the two are equal).
        missing: Vec<String>,
    },

    /// Grouped cross-validation has fewer groups than folds.
    #[error(
        "grouped cross-validation needs at least {folds} groups for {folds} folds, but {column} has only {groups}"
    )]
    TooFewGroups {
        /// The grouping column.
        column: String,
        /// Distinct groups among the rows used.
        groups: usize,
        /// Folds asked for.
        folds: usize,
    },

    /// Blend weights of an allocation basis are out of range or do not sum to 1.
    #[error(
        "the blend weights are not usable: {reason}; give each basis a weight between 0 and 1 so that they sum to 1"
    )]
    BadBlendWeights {
        /// What is wrong.
        reason: String,
    },

    /// The allocation floor is above the cap.
    #[error("the floor of {floor} is above the cap of {cap}, so no district can meet both")]
    FloorAboveCap {
        /// The floor per district.
        floor: u64,
        /// The cap per district.
        cap: u64,
    },

    /// The floors add up to more than the total.
    #[error(
        "a floor of {floor} for each of {districts} districts needs {needed}, which is more than the total of {total}; \
         lower the floor or raise the total"
    )]
    FloorsExceedTotal {
        /// The floor per district.
        floor: u64,
        /// Districts sharing the total.
        districts: usize,
        /// `districts × floor`.
        needed: u128,
        /// The total.
        total: u64,
    },

    /// The caps add up to less than the total.
    #[error(
        "a cap of {cap} for each of {districts} districts allows at most {allowed}, which is less than the total of \
         {total}; raise the cap or lower the total"
    )]
    CapsBelowTotal {
        /// The cap per district.
        cap: u64,
        /// Districts sharing the total.
        districts: usize,
        /// `districts × cap`.
        allowed: u128,
        /// The total.
        total: u64,
    },

    /// Every district has zero weight under an allocation basis.
    #[error("the {basis} basis is zero in every district, so it cannot divide the total")]
    ZeroBasis {
        /// The basis.
        basis: String,
    },

    /// A district's allocation input is not usable.
    #[error("district {key}: {reason}")]
    BadAllocationInput {
        /// The district key.
        key: String,
        /// What is wrong.
        reason: String,
    },

    /// A district has no model prediction for the expected-incidents basis.
    #[error(
        "district {key} has no model-expected incidents because {why}; supply its indicator values or leave it out of the allocation"
    )]
    NoExpected {
        /// The district key.
        key: String,
        /// Why there is no prediction.
        why: String,
    },

    /// The model's response transform cannot be turned back into a rate for allocation.
    #[error(
        "expected incidents need a response that is the rate or its log; {label} cannot be turned back into a rate here"
    )]
    UnsupportedResponseTransform {
        /// The transformed response's label.
        label: String,
    },

    /// An option of the allocation or its simulation is out of range.
    #[error("the allocation option {option} is not usable: {reason}")]
    BadSimulationOption {
        /// The option's name.
        option: String,
        /// What is wrong with the value.
        reason: String,
    },

    /// A covariance matrix has a clearly negative eigenvalue.
    #[error(
        "the coefficient covariance has a negative eigenvalue ({eigenvalue:e}), so coefficients cannot be simulated from it"
    )]
    NotPositiveSemidefinite {
        /// The most negative eigenvalue found.
        eigenvalue: f64,
    },
}

/// The engine's result type.
pub type Result<T> = std::result::Result<T, EngineError>;

/// Joins names as "a", "a and b", "a, b and c".
pub(crate) fn join_names(names: &[String]) -> String {
    match names.len() {
        0 => String::new(),
        1 => names[0].clone(),
        n => format!("{} and {}", names[..n - 1].join(", "), names[n - 1]),
    }
}

/// Builds the message of [`EngineError::NotNested`].
fn not_nested_message(smaller: &str, larger: &str, missing: &[String]) -> String {
    if missing.is_empty() {
        return format!(
            "the models {smaller} and {larger} have the same terms; a partial F-test needs a larger model that adds \
             at least one term"
        );
    }
    format!(
        "the models are not nested: {smaller} has {}, which {larger} lacks; a partial F-test compares a model with \
         one that contains all of its terms and more",
        join_names(missing)
    )
}

/// Builds the message of [`EngineError::Aliased`]; the intercept is named in words.
fn aliased_message(column: &str, combination: &[String]) -> String {
    if combination.is_empty() {
        return format!("{column} is zero in every row used, so its effect cannot be estimated");
    }
    // Named columns first, in design order, and the intercept last, in words.
    let mut names: Vec<String> =
        combination.iter().filter(|c| *c != crate::INTERCEPT_LABEL).cloned().collect();
    if combination.iter().any(|c| c == crate::INTERCEPT_LABEL) {
        names.push("the intercept".to_owned());
    }
    format!("{column} is an exact linear combination of {}", join_names(&names))
}

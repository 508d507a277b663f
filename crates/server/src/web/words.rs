//! Numbers and sentences for people: rounding for display, p-values, and each coefficient
//! written as a comparison between areas.
//!
//! A coefficient is never shown as a bare number first. It becomes a sentence such as
//! "Districts where unemployment is one percentage point higher, with the other indicators
//! equal, have on average 3.2 more assault incidents per 10,000 residents (95% interval 1.1 to
//! 5.3 more)." The wording is associational on purpose: it compares areas that differ, and
//! never says what would happen if an indicator were changed.

use wardcast_contract::spec::{ModelSpec, TransformSpec};

use super::state::{ColumnInfo, Glossary};

/// Formats a number to `sig` significant digits, with thousands separators and a plain minus.
/// Very large or very small magnitudes use the `1.23e-5` form. Non-finite values are written
/// as words, so no page ever shows `NaN`.
pub fn fmt_sig(x: f64, sig: usize) -> String {
    let sig = sig.max(1);
    if x.is_nan() {
        return "undefined".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "infinite".into() } else { "minus infinite".into() };
    }
    if x == 0.0 {
        return "0".into();
    }
    // Round to the significant digits first, so 9.996 becomes 10.0 rather than 9.996 → "10.00".
    let rounded: f64 = format!("{:.*e}", sig - 1, x).parse().unwrap_or(x);
    let magnitude = rounded.abs().log10().floor() as i32;
    if !(-4..12).contains(&magnitude) {
        return format!("{:.*e}", sig - 1, rounded);
    }
    let decimals = (sig as i32 - 1 - magnitude).max(0) as usize;
    group_thousands(&format!("{:.*}", decimals, rounded))
}

/// Three significant digits: the default for figures in sentences and tables.
pub fn fmt_num(x: f64) -> String {
    fmt_sig(x, 3)
}

/// Three significant digits without trailing zeros, for figures inside sentences.
pub fn fmt_prose(x: f64) -> String {
    trim_zeros(fmt_sig(x, 3))
}

fn trim_zeros(text: String) -> String {
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        text
    }
}

/// A number with trailing zeros removed (`1`, `0.5`, `1,000`), for steps and levels.
pub fn fmt_plain(x: f64) -> String {
    trim_zeros(fmt_sig(x, 6))
}

/// A p-value as "p < 0.0001" or "p = 0.032"; an undefined p-value says so.
pub fn fmt_p(p: Option<f64>) -> String {
    match p {
        None => "p undefined".into(),
        Some(p) if !p.is_finite() => "p undefined".into(),
        Some(p) if p < 0.0001 => "p < 0.0001".into(),
        Some(p) => format!("p = {}", fmt_sig(p, 2)),
    }
}

/// A confidence level as a percentage, e.g. `95` or `99.5`.
pub fn fmt_level(level: f64) -> String {
    fmt_plain(level * 100.0)
}

fn group_thousands(text: &str) -> String {
    let (sign, rest) = match text.strip_prefix('-') {
        Some(r) => ("-", r),
        None => ("", text),
    };
    let (int, frac) = match rest.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (rest, None),
    };
    let grouped = wardcast_report::svg::text::group_digits(int);
    match frac {
        Some(f) => format!("{sign}{grouped}.{f}"),
        None => format!("{sign}{grouped}"),
    }
}

/// What a coefficient's term stands for.
#[derive(Debug, Clone, PartialEq)]
pub enum TermKind {
    /// A numeric predictor, possibly transformed inside the model.
    Numeric {
        /// The column.
        column: String,
        /// Its transform, if any.
        transform: Option<TransformSpec>,
    },
    /// One level of a categorical predictor, compared with the reference level.
    Level {
        /// The column.
        column: String,
        /// The level this coefficient belongs to.
        level: String,
        /// The reference level when the spec names it.
        reference: Option<String>,
    },
    /// A term that could not be matched to the spec; described by its label only.
    Other(String),
}

/// Matches coefficient terms (the intercept left out) to the spec's predictors, in order.
///
/// The fit document lists terms in spec order, a categorical predictor spanning one term per
/// non-reference level, each written `column=level`. Terms that do not line up are returned as
/// [`TermKind::Other`], so a mismatch degrades the wording but never the numbers.
pub fn classify_terms(spec: &ModelSpec, terms: &[String]) -> Vec<TermKind> {
    let mut kinds = Vec::with_capacity(terms.len());
    let mut i = 0;
    for p in &spec.predictors {
        if i >= terms.len() {
            break;
        }
        let prefix = format!("{}=", p.column);
        let levels = terms[i..].iter().take_while(|t| t.starts_with(&prefix)).count();
        if levels > 0 {
            for term in &terms[i..i + levels] {
                kinds.push(TermKind::Level {
                    column: p.column.clone(),
                    level: term[prefix.len()..].to_owned(),
                    reference: p.reference_level.clone(),
                });
            }
            i += levels;
            continue;
        }
        let term = &terms[i];
        let matches = match p.transform {
            None => *term == p.column,
            Some(_) => *term != p.column && term.contains(p.column.as_str()),
        };
        kinds.push(if matches {
            TermKind::Numeric { column: p.column.clone(), transform: p.transform }
        } else {
            TermKind::Other(term.clone())
        });
        i += 1;
    }
    kinds.extend(terms[i..].iter().cloned().map(TermKind::Other));
    kinds
}

/// Everything a sentence needs besides the coefficient: who the areas are, what the response
/// is and measured in, and the interval level.
#[derive(Debug, Clone)]
pub struct Wording<'a> {
    /// Labels and units.
    pub glossary: &'a Glossary,
    /// The response column.
    pub response: &'a str,
    /// The response's transform, if the model uses one.
    pub response_transform: Option<TransformSpec>,
    /// The confidence level of the interval, e.g. 0.95.
    pub level: f64,
}

/// One coefficient with its interval, as produced by the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// The coefficient.
    pub value: f64,
    /// The interval's lower end.
    pub low: f64,
    /// The interval's upper end.
    pub high: f64,
}

pub(crate) fn capitalise(text: &str) -> String {
    let mut chars = text.chars();
    match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => String::new(),
    }
}

/// A label as it reads inside a sentence: "Vacant dwellings" becomes "vacant dwellings", but
/// an acronym such as "HIV rate" keeps its capitals.
pub(crate) fn in_sentence(label: &str) -> String {
    let mut chars = label.chars();
    match (chars.next(), chars.next()) {
        (Some(first), Some(second)) if first.is_uppercase() && !second.is_uppercase() => {
            first.to_lowercase().chain(label.chars().skip(1)).collect()
        }
        _ => label.to_owned(),
    }
}

fn transform_scale(t: TransformSpec) -> String {
    match t {
        TransformSpec::Log => "logarithm".into(),
        TransformSpec::Reciprocal => "reciprocal".into(),
        TransformSpec::Sqrt => "square root".into(),
        TransformSpec::Square => "square".into(),
        TransformSpec::Power { lambda: 0.0 } => "logarithm".into(),
        TransformSpec::Power { lambda } => format!("power {}", fmt_plain(lambda)),
    }
}

fn is_log(t: Option<TransformSpec>) -> bool {
    matches!(t, Some(TransformSpec::Log))
        || matches!(t, Some(TransformSpec::Power { lambda }) if lambda == 0.0)
}

/// How a unit reads in sentences.
#[derive(Debug, Clone, PartialEq)]
enum UnitKind {
    /// A percentage ("%", "% of dwellings"): differences are percentage points.
    Percent,
    /// Money written with a leading `$`.
    Dollars,
    /// Anything else, read as a counted quantity: "incidents per 10,000 residents".
    Counted(String),
    /// No unit recorded.
    Unknown,
}

impl UnitKind {
    fn of(info: &ColumnInfo) -> Self {
        match info.unit.as_deref().map(str::trim) {
            None | Some("") => UnitKind::Unknown,
            Some(u) if u.starts_with('%') => UnitKind::Percent,
            Some(u) if u.starts_with('$') => UnitKind::Dollars,
            Some(u) => UnitKind::Counted(u.to_owned()),
        }
    }
}

/// "outlets per 1,000 residents" → "outlet per 1,000 residents": the first word made singular
/// by dropping a plain plural "s" (common practice for English unit words).
fn singular_unit(unit: &str) -> String {
    let (first, rest) = unit.split_once(' ').unwrap_or((unit, ""));
    let first = match first.strip_suffix('s') {
        Some(stem) if !stem.is_empty() && !stem.ends_with('s') => stem,
        _ => first,
    };
    if rest.is_empty() { first.to_owned() } else { format!("{first} {rest}") }
}

/// The comparison step in words: "one percentage point", "$1,000", "one outlet per 1,000
/// residents", "1,000 marks per household".
fn step_phrase(info: &ColumnInfo) -> String {
    let step = fmt_plain(info.step);
    let one = info.step == 1.0;
    match UnitKind::of(info) {
        UnitKind::Percent if one => "one percentage point".into(),
        UnitKind::Percent => format!("{step} percentage points"),
        UnitKind::Dollars => format!("${step}"),
        UnitKind::Counted(u) if one => format!("one {}", singular_unit(&u)),
        UnitKind::Counted(u) => format!("{step} {u}"),
        UnitKind::Unknown if one => "one unit".into(),
        UnitKind::Unknown => format!("{step} units"),
    }
}

/// How the response side of a sentence reads for a difference `d` in the response.
struct ResponseSide {
    unit: UnitKind,
    label: String,
}

impl ResponseSide {
    fn new(info: &ColumnInfo) -> Self {
        ResponseSide { unit: UnitKind::of(info), label: in_sentence(&info.label) }
    }

    fn words(&self) -> (&'static str, &'static str) {
        match self.unit {
            UnitKind::Counted(_) => ("more", "fewer"),
            _ => ("higher", "lower"),
        }
    }

    /// The size of a difference without its direction: "3.2", or "$40" for money.
    fn bare(&self, d: f64) -> String {
        let size = fmt_prose(d.abs());
        if self.unit == UnitKind::Dollars { format!("${size}") } else { size }
    }

    /// "3.2 more" / "2 percentage points higher" / "$40 lower" for one end or the estimate.
    fn amount(&self, d: f64) -> String {
        let (up, down) = self.words();
        if d == 0.0 {
            return "no difference".into();
        }
        let word = if d > 0.0 { up } else { down };
        let size = self.bare(d);
        match self.unit {
            UnitKind::Percent => format!("{size} percentage points {word}"),
            _ => format!("{size} {word}"),
        }
    }

    /// The main clause: "3.2 more incidents per 10,000 residents" or "a median income $40
    /// lower".
    fn clause(&self, d: f64) -> String {
        match &self.unit {
            UnitKind::Counted(unit) if d != 0.0 => format!("{} {unit}", self.amount(d)),
            UnitKind::Counted(unit) => format!("the same number of {unit}"),
            _ if d == 0.0 => format!("the same {}", self.label),
            _ => format!("a {} {}", self.label, self.amount(d)),
        }
    }

    /// "1.1 to 5.3 more", "0.4 to 3.8 fewer" or "from 0.5 fewer to 2.9 more".
    fn interval(&self, low: f64, high: f64) -> String {
        if low > 0.0 {
            format!("{} to {}", self.bare(low), self.amount(high))
        } else if high < 0.0 {
            format!("{} to {}", self.bare(high), self.amount(low))
        } else {
            format!("from {} to {}", self.amount(low), self.amount(high))
        }
    }
}

/// The size of the comparison a sentence makes, in units of the model's term: the column's
/// step for a plain predictor, ln 2 (a doubling) for a logged one, 1 otherwise.
pub fn comparison_scale(kind: &TermKind, glossary: &Glossary) -> f64 {
    match kind {
        TermKind::Numeric { column, transform: None } => glossary.column(column).step,
        TermKind::Numeric { transform, .. } if is_log(*transform) => std::f64::consts::LN_2,
        _ => 1.0,
    }
}

/// A short label for a chart row, naming the comparison: "Unemployment (+1 pt)",
/// "Median household income (+$1,000)", "Vacant dwellings (doubled)", "District type: centre".
pub fn comparison_label(kind: &TermKind, glossary: &Glossary) -> String {
    match kind {
        TermKind::Numeric { column, transform: None } => {
            let info = glossary.column(column);
            let step = fmt_plain(info.step);
            let plural = if info.step == 1.0 { "" } else { "s" };
            let change = match UnitKind::of(&info) {
                UnitKind::Percent => format!("+{step} pt{plural}"),
                UnitKind::Dollars => format!("+${step}"),
                _ => format!("+{step}"),
            };
            format!("{} ({change})", capitalise(&info.label))
        }
        TermKind::Numeric { column, transform } if is_log(*transform) => {
            format!("{} (doubled)", capitalise(&glossary.column(column).label))
        }
        TermKind::Numeric { column, transform } => {
            let scale = transform.map(transform_scale).unwrap_or_default();
            format!("{} ({scale}, +1)", capitalise(&glossary.column(column).label))
        }
        TermKind::Level { column, level, .. } => {
            format!("{}: {level}", capitalise(&glossary.column(column).label))
        }
        TermKind::Other(term) => term.clone(),
    }
}

/// Writes one coefficient as a comparison between areas, in the form "Districts one percentage
/// point higher in unemployment, with the other indicators equal, have on average 3.2 more
/// incidents per 10,000 residents (95% interval 1.1 to 5.3 more)."
pub fn comparison_sentence(kind: &TermKind, estimate: Estimate, w: &Wording<'_>) -> String {
    let areas = capitalise(w.glossary.areas());
    let equal = "with the other indicators equal";
    let subject = match kind {
        TermKind::Numeric { column, transform: None } => {
            let info = w.glossary.column(column);
            format!("{areas} {} higher in {}, {equal},", step_phrase(&info), in_sentence(&info.label))
        }
        TermKind::Numeric { column, transform } if is_log(*transform) => {
            let info = w.glossary.column(column);
            format!("{areas} with twice the level of {}, {equal},", in_sentence(&info.label))
        }
        TermKind::Numeric { column, transform } => {
            let label = in_sentence(&w.glossary.column(column).label);
            let scale_name = transform.map(transform_scale).unwrap_or_default();
            format!(
                "{areas} one unit higher in the {scale_name} of {label} (how large a difference in \
                 {label} that is depends on where it starts), {equal},"
            )
        }
        TermKind::Level { column, level, reference } => {
            let label = in_sentence(&w.glossary.column(column).label);
            let against = match reference {
                Some(r) => format!("those in the \u{201c}{r}\u{201d} group"),
                None => "those in the reference group".into(),
            };
            format!(
                "{areas} in the \u{201c}{level}\u{201d} group of {label}, compared with {against} \
                 and {equal},"
            )
        }
        TermKind::Other(term) => format!("{areas} one unit higher in {term}, {equal},"),
    };
    let scale = comparison_scale(kind, w.glossary);
    let d = estimate.value * scale;
    let (lo, hi) = (estimate.low * scale, estimate.high * scale);
    let response = w.glossary.column(w.response);
    let level = fmt_level(w.level);
    let crosses = lo <= 0.0 && hi >= 0.0 && lo < hi;
    let caveat = if crosses { " The data are also consistent with no difference at all." } else { "" };
    match w.response_transform {
        None => {
            let side = ResponseSide::new(&response);
            format!(
                "{subject} have on average {} ({level}% interval {}).{caveat}",
                side.clause(d),
                side.interval(lo, hi)
            )
        }
        Some(t) if is_log(Some(t)) => {
            // On the log scale a difference d multiplies the typical (geometric-mean) value by e^d.
            let pct = |x: f64| {
                let p = (x.exp() - 1.0) * 100.0;
                if p == 0.0 {
                    "no difference".to_owned()
                } else if p > 0.0 {
                    format!("{}% higher", fmt_prose(p))
                } else {
                    format!("{}% lower", fmt_prose(-p))
                }
            };
            let interval = if lo > 0.0 || hi < 0.0 {
                let (a, b) = if lo > 0.0 { (lo, hi) } else { (hi, lo) };
                format!("{}% to {}", fmt_prose(((a.exp() - 1.0) * 100.0).abs()), pct(b))
            } else {
                format!("from {} to {}", pct(lo), pct(hi))
            };
            format!(
                "{subject} have a typical {} about {} ({level}% interval {interval}).{caveat}",
                in_sentence(&response.label),
                pct(d)
            )
        }
        Some(t) => {
            let side = ResponseSide {
                unit: UnitKind::Unknown,
                label: format!("{} of {}", transform_scale(t), in_sentence(&response.label)),
            };
            format!(
                "{subject} have on average {} ({level}% interval {}).{caveat}",
                side.clause(d),
                side.interval(lo, hi)
            )
        }
    }
}

/// A transform in words, as in "the difference in the natural logarithm of …".
pub fn transform_phrase(t: TransformSpec) -> String {
    match t {
        TransformSpec::Log | TransformSpec::Power { lambda: 0.0 } => "the natural logarithm".into(),
        TransformSpec::Reciprocal => "the reciprocal".into(),
        TransformSpec::Sqrt => "the square root".into(),
        TransformSpec::Square => "the square".into(),
        TransformSpec::Power { lambda } => format!("the power {lambda}"),
    }
}

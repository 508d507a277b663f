//! Plain-language text of the brief: number formatting and the sentences built from results.
//!
//! Every number printed in the brief goes through one of the formatters here, so the tests
//! can format a value from the JSON documents the same way and find it in the PDF text.

/// Formats a number with `sig` significant digits, without exponent notation.
///
/// Small magnitudes keep enough decimals to show `sig` significant digits (at most 10
/// decimals); large magnitudes are rounded to whole numbers. Negative zero prints as `0`.
pub fn fmt_sig(x: f64, sig: usize) -> String {
    if !x.is_finite() {
        return "not defined".to_owned();
    }
    if x == 0.0 {
        return "0".to_owned();
    }
    let magnitude = x.abs().log10().floor();
    // The number of decimals that leaves `sig` significant digits; whole numbers need none.
    let wanted = (sig as f64 - 1.0 - magnitude).clamp(0.0, 10.0);
    let decimals = wanted as usize;
    let text = format!("{x:.decimals$}");
    clean_zero(text)
}

/// Formats a number with a fixed number of decimals.
pub fn fmt_fixed(x: f64, decimals: usize) -> String {
    if !x.is_finite() {
        return "not defined".to_owned();
    }
    clean_zero(format!("{x:.decimals$}"))
}

/// Formats a coefficient-table number: four significant digits.
pub fn fmt_coef(x: f64) -> String {
    fmt_sig(x, 4)
}

/// Formats a p-value: three decimals, or "< 0.001".
pub fn fmt_p(p: Option<f64>) -> String {
    match p {
        Some(p) if p.is_finite() && p < 0.001 => "< 0.001".to_owned(),
        Some(p) if p.is_finite() => format!("{p:.3}"),
        _ => "not defined".to_owned(),
    }
}

/// Formats a whole amount with thin grouping by commas, e.g. `1,250,000`.
pub fn fmt_amount(x: f64) -> String {
    if !x.is_finite() {
        return "not defined".to_owned();
    }
    let rounded = x.round();
    let negative = rounded < 0.0;
    let out = crate::svg::text::group_digits(&format!("{:.0}", rounded.abs()));
    if negative && out != "0" { format!("-{out}") } else { out }
}

/// Formats a share (a fraction) as a percentage with one decimal.
pub fn fmt_share(x: f64) -> String {
    if !x.is_finite() {
        return "not defined".to_owned();
    }
    format!("{}%", fmt_fixed(100.0 * x, 1))
}

fn clean_zero(text: String) -> String {
    // A value that rounds to zero from below prints as "-0.00"; show it without the sign.
    if text.starts_with('-') && text[1..].chars().all(|c| c == '0' || c == '.') {
        text[1..].to_owned()
    } else {
        text
    }
}

/// The step used when describing a coefficient: a power of ten of the predictor's unit chosen
/// so that the described difference is not vanishingly small (common practice, no published
/// source: an association per one mark of income is unreadable, per 1,000 marks is not).
pub fn readable_step(estimate: f64) -> f64 {
    let mut step = 1.0;
    let b = estimate.abs();
    if b == 0.0 || !b.is_finite() {
        return step;
    }
    while b * step < 0.1 && step < 1e9 {
        step *= 10.0;
    }
    step
}

/// How one step of a predictor is spoken, given its unit, e.g. "1 percentage point" for a
/// unit that is a percentage, or "1,000 marks per household per year".
pub fn step_words(step: f64, unit: &str) -> String {
    let unit = unit.trim();
    let amount = fmt_amount(step);
    if unit.starts_with('%') {
        let plural = if step == 1.0 { "percentage point" } else { "percentage points" };
        format!("{amount} {plural}")
    } else if unit.is_empty() {
        format!("{amount} unit{}", if step == 1.0 { "" } else { "s" })
    } else if step == 1.0 {
        format!("{amount} {}", singular(unit))
    } else {
        format!("{amount} {unit}")
    }
}

/// Makes the first word of a unit singular ("outlets per 1,000" becomes "outlet per 1,000").
fn singular(unit: &str) -> String {
    let (first, rest) = unit.split_once(' ').map_or((unit, ""), |(a, b)| (a, b));
    let first = match first.strip_suffix('s') {
        Some(stem) if !stem.ends_with('s') && stem.len() > 1 => stem,
        _ => first,
    };
    if rest.is_empty() { first.to_owned() } else { format!("{first} {rest}") }
}

/// The direction word for a difference.
pub fn direction(x: f64) -> &'static str {
    if x >= 0.0 { "higher" } else { "lower" }
}

/// Lower-cases the first character of a label for use inside a sentence, unless the label
/// starts with an acronym (two capitals).
pub fn in_sentence(label: &str) -> String {
    let mut chars = label.chars();
    match (chars.next(), chars.next()) {
        (Some(a), Some(b)) if a.is_uppercase() && !b.is_uppercase() => {
            let mut out: String = a.to_lowercase().collect();
            out.push_str(&label[a.len_utf8()..]);
            out
        }
        _ => label.to_owned(),
    }
}

/// Joins words as "a, b and c".
pub fn join_and(items: &[String]) -> String {
    match items.len() {
        0 => String::new(),
        1 => items[0].clone(),
        n => format!("{} and {}", items[..n - 1].join(", "), items[n - 1]),
    }
}

/// The sentence that states what an interval means, used once in the results section.
pub const INTERVAL_MEANING: &str = "An interval gives the range of values consistent with the data under the model's \
assumptions; a wide interval means the data pin the association down poorly.";

/// The sentence on p-values after a search, which the model section always carries.
pub const OPTIMISTIC_P: &str = "The predictors were chosen after looking at the data, so the p-values and intervals \
shown for the chosen model are optimistic: they do not account for the search, and the true uncertainty is larger.";

/// The sentence shown wherever a predicted rate or an interval end is below zero. The numbers
/// themselves are never clipped or altered.
pub const NEGATIVE_PREDICTION: &str = "Some predicted values or interval ends here are below zero, which a rate \
cannot be: the model is linear in the indicators and does not know that rates cannot go below zero, so read such a \
prediction as near zero, or as a sign that the model does not fit there (setting a logged response on the set-up \
form of the Data page is one remedy).";

/// Whether any of `values` is below zero, so that [`NEGATIVE_PREDICTION`] applies.
pub fn any_negative(values: impl IntoIterator<Item = f64>) -> bool {
    values.into_iter().any(|x| x < 0.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats_significant_digits() {
        assert_eq!(fmt_sig(1.234_56, 4), "1.235");
        assert_eq!(fmt_sig(-0.000_123_456, 4), "-0.0001235");
        assert_eq!(fmt_sig(12_345.6, 4), "12346");
        assert_eq!(fmt_sig(0.0, 4), "0");
        assert_eq!(fmt_fixed(-0.0001, 2), "0.00");
        assert_eq!(fmt_amount(1_250_000.4), "1,250,000");
        assert_eq!(fmt_amount(-950.0), "-950");
        assert_eq!(fmt_p(Some(0.0004)), "< 0.001");
    }

    #[test]
    fn chooses_a_readable_step() {
        assert_eq!(readable_step(0.0004), 1000.0);
        assert_eq!(readable_step(2.5), 1.0);
        assert_eq!(step_words(1.0, "% of labour force"), "1 percentage point");
        assert_eq!(step_words(1000.0, "marks per household per year"), "1,000 marks per household per year");
        assert_eq!(step_words(1.0, "outlets per 1,000 residents"), "1 outlet per 1,000 residents");
    }
}

//! Text helpers for charts: XML escaping, fixed number formatting and width estimates.

/// Escapes text for use in XML character data and attribute values.
///
/// The five markup characters become entities, and characters that XML 1.0
/// forbids (most C0 controls) are dropped, so any user-supplied name yields a
/// well-formed document.
pub fn escape(raw: &str) -> String {
    let mut out = String::with_capacity(raw.len());
    for ch in raw.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            '\t' | '\n' | '\r' => out.push(' '),
            c if (c as u32) < 0x20 || c == '\u{FFFE}' || c == '\u{FFFF}' => {}
            c => out.push(c),
        }
    }
    out
}

/// Formats a finite number with exactly `decimals` decimals for display.
///
/// Negative numbers use the typographic minus sign (U+2212), a negative zero
/// is written as zero, and integer parts of 10,000 or more are grouped with
/// commas. A non-finite value is written as an en dash, so no "NaN" or "inf"
/// can reach the output.
pub fn fixed(value: f64, decimals: usize) -> String {
    if !value.is_finite() {
        return "\u{2013}".to_owned();
    }
    let decimals = decimals.min(12);
    let raw = format!("{:.*}", decimals, value.abs());
    let is_zero = raw.chars().all(|c| c == '0' || c == '.');
    let (int_part, frac_part) = match raw.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (raw.as_str(), None),
    };
    let mut out = String::new();
    if value < 0.0 && !is_zero {
        out.push('\u{2212}');
    }
    out.push_str(&group_thousands(int_part));
    if let Some(f) = frac_part {
        out.push('.');
        out.push_str(f);
    }
    out
}

/// Inserts commas every three digits when the integer part has five or more digits.
fn group_thousands(digits: &str) -> String {
    if digits.len() < 5 { digits.to_owned() } else { group_digits(digits) }
}

/// Inserts a comma before every group of three digits counted from the right, e.g.
/// `1250000` → `1,250,000`; `digits` is a run of ASCII digits without sign or decimals.
pub fn group_digits(digits: &str) -> String {
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// Formats a number with about `significant` significant digits, for text alternatives.
///
/// Large numbers keep all their integer digits; small ones get enough decimals
/// to show `significant` digits, up to 8 decimals.
pub fn significant(value: f64, significant: u32) -> String {
    if !value.is_finite() {
        return "\u{2013}".to_owned();
    }
    if value == 0.0 {
        return "0".to_owned();
    }
    let magnitude = value.abs().log10().floor() as i64;
    let decimals = (i64::from(significant) - 1 - magnitude).clamp(0, 8) as usize;
    fixed(value, decimals)
}

/// Formats an SVG coordinate with one decimal (never negative zero, never non-finite).
pub(crate) fn coord(value: f64) -> String {
    let v = if value.is_finite() { value } else { 0.0 };
    let s = format!("{v:.1}");
    if s == "-0.0" { "0.0".to_owned() } else { s }
}

/// Estimates the rendered width of `text` at `font_size` pixels in a sans-serif face.
///
/// The estimate is deliberately generous (0.6 em per character) so that
/// layout leaves room for wide faces.
pub fn estimate_width(text: &str, font_size: f64) -> f64 {
    text.chars().count() as f64 * 0.6 * font_size
}

/// Shortens `text` to at most `max_chars` characters, ending with an ellipsis when cut.
pub fn truncate(text: &str, max_chars: usize) -> String {
    let text = text.trim();
    if text.chars().count() <= max_chars || max_chars == 0 {
        return text.to_owned();
    }
    let mut out: String = text.chars().take(max_chars.saturating_sub(1)).collect();
    out.push('\u{2026}');
    out
}

/// Whether a value can be plotted: finite and of a magnitude the scales handle.
pub(crate) fn plottable(value: f64) -> bool {
    value.is_finite() && value.abs() <= 1e15
}

/// "1 point" or "3 points": a count with the noun in the right number.
pub(crate) fn count_of(n: usize, singular: &str, plural: &str) -> String {
    if n == 1 { format!("1 {singular}") } else { format!("{n} {plural}") }
}

/// "1 point has" or "3 points have": a count, its noun and a verb that agree.
pub(crate) fn count_verb(n: usize, singular: &str, plural: &str, verb_one: &str, verb_many: &str) -> String {
    if n == 1 { format!("1 {singular} {verb_one}") } else { format!("{n} {plural} {verb_many}") }
}

/// The singular of a plural noun, good enough for the nouns charts use.
pub(crate) fn singular_of(plural: &str) -> String {
    if let Some(stem) = plural.strip_suffix("ies") {
        format!("{stem}y")
    } else if let Some(stem) = plural.strip_suffix('s') {
        stem.to_owned()
    } else {
        plural.to_owned()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_formats_signs_zero_and_grouping() {
        assert_eq!(fixed(-0.0001, 2), "0.00");
        assert_eq!(fixed(-1.5, 1), "\u{2212}1.5");
        assert_eq!(fixed(12345.678, 0), "12,346");
        assert_eq!(fixed(2025.0, 0), "2025");
        assert_eq!(fixed(f64::NAN, 2), "\u{2013}");
    }

    #[test]
    fn significant_keeps_digits() {
        assert_eq!(significant(0.012345, 3), "0.0123");
        assert_eq!(significant(524.39, 4), "524.4");
        assert_eq!(significant(123456.0, 3), "123,456");
    }
}

//! Shared helpers: the structural checks every chart must pass, and the snapshot check.

use wardcast_report::svg::Chart;

/// Renders `chart`, asserts the structural invariants, and compares it with its snapshot.
pub fn check(name: &str, chart: &dyn Chart) -> String {
    let svg = chart.render().unwrap_or_else(|e| panic!("{name}: render failed: {e}"));
    assert_invariants(name, &svg);
    if let Some(dir) = std::env::var_os("WARDCAST_CHART_DIR") {
        let path = std::path::Path::new(&dir).join(format!("{name}.svg"));
        std::fs::write(&path, &svg).unwrap_or_else(|e| panic!("{name}: cannot write chart: {e}"));
    }
    insta::with_settings!({ prepend_module_to_snapshot => false, omit_expression => true }, {
        insta::assert_snapshot!(name, svg);
    });
    svg
}

/// Asserts what every chart must satisfy, whatever its data.
pub fn assert_invariants(name: &str, svg: &str) {
    assert!(
        svg.starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 "),
        "{name}: no viewBox"
    );
    assert_well_formed(name, svg);
    let title = element_text(svg, "title").unwrap_or_else(|| panic!("{name}: no <title>"));
    assert!(!title.trim().is_empty(), "{name}: empty <title>");
    let desc = element_text(svg, "desc").unwrap_or_else(|| panic!("{name}: no <desc>"));
    assert!(desc.len() > 40, "{name}: the text alternative is too short: {desc}");
    assert!(svg.find("<title>") < svg.find("<desc>"), "{name}: <title> must come first");
    for size in attribute_values(svg, "font-size") {
        let px: f64 = size.parse().unwrap_or_else(|_| panic!("{name}: bad font-size {size}"));
        assert!(px >= 14.0, "{name}: text of {px} px is too small for a projector");
    }
    for token in svg.split(|c: char| !c.is_ascii_alphanumeric()) {
        assert!(
            !matches!(token, "NaN" | "nan" | "inf" | "Infinity" | "infinity"),
            "{name}: a non-finite number reached the output"
        );
    }
    assert!(!svg.contains("style="), "{name}: style attributes break a strict CSP");
    assert!(!svg.contains("<style"), "{name}: style elements break a strict CSP");
    assert!(!svg.contains("<script"), "{name}: scripts are not allowed");
    assert!(!svg.contains(" id=\""), "{name}: ids would clash when charts share a page");
}

/// The text of the first element with this name, entities left as written.
pub fn element_text(svg: &str, tag: &str) -> Option<String> {
    let open = format!("<{tag}>");
    let close = format!("</{tag}>");
    let start = svg.find(&open)? + open.len();
    let end = start + svg[start..].find(&close)?;
    Some(svg[start..end].to_owned())
}

/// Every value of the named attribute, in document order.
pub fn attribute_values<'a>(svg: &'a str, attr: &str) -> Vec<&'a str> {
    let needle = format!(" {attr}=\"");
    svg.match_indices(&needle)
        .filter_map(|(i, m)| {
            let rest = &svg[i + m.len()..];
            rest.find('"').map(|end| &rest[..end])
        })
        .collect()
}

/// A small well-formedness check: balanced tags, quoted attributes, no raw `<` or stray `&`.
pub fn assert_well_formed(name: &str, svg: &str) {
    let mut stack: Vec<&str> = Vec::new();
    let mut rest = svg;
    while let Some(open) = rest.find('<') {
        assert_text_is_escaped(name, &rest[..open]);
        let after = &rest[open + 1..];
        let close = after.find('>').unwrap_or_else(|| panic!("{name}: unterminated tag"));
        let tag = &after[..close];
        assert!(!tag.contains('<'), "{name}: raw '<' inside a tag: {tag}");
        assert_eq!(tag.matches('"').count() % 2, 0, "{name}: unbalanced quotes in {tag}");
        if let Some(end) = tag.strip_prefix('/') {
            let top = stack.pop().unwrap_or_else(|| panic!("{name}: stray </{end}>"));
            assert_eq!(top, end, "{name}: </{end}> closes <{top}>");
        } else if !tag.ends_with('/') {
            let element = tag.split_whitespace().next().unwrap_or("");
            stack.push(element);
        } else {
            let quoted_parts: Vec<&str> = tag.split('"').collect();
            for (i, part) in quoted_parts.iter().enumerate() {
                if i % 2 == 1 {
                    assert_text_is_escaped(name, part);
                }
            }
        }
        rest = &after[close + 1..];
    }
    assert!(stack.is_empty(), "{name}: unclosed elements {stack:?}");
    assert_text_is_escaped(name, rest);
}

/// Asserts that every `&` in text starts one of the five XML entities.
fn assert_text_is_escaped(name: &str, text: &str) {
    for (i, _) in text.match_indices('&') {
        let tail = &text[i..];
        assert!(
            ["&amp;", "&lt;", "&gt;", "&quot;", "&apos;"].iter().any(|e| tail.starts_with(e)),
            "{name}: unescaped '&' in {text}"
        );
    }
}

/// The standard normal quantile by Abramowitz and Stegun 26.2.23 (absolute error below 4.5e-4),
/// good enough to place points on a QQ plot in a test.
pub fn normal_quantile(p: f64) -> f64 {
    let upper = p > 0.5;
    let q = if upper { 1.0 - p } else { p };
    let t = (-2.0 * q.ln()).sqrt();
    let z = t
        - (2.515517 + 0.802853 * t + 0.010328 * t * t)
            / (1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    if upper { z } else { -z }
}

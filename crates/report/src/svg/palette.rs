//! The colours and type of wardcast's charts, kept in one place.
//!
//! The palette is our own: warm paper, slate ink, a petrol blue for data and a
//! terracotta accent for flagged points. Flagged points also change shape, so
//! colour is never the only cue.

/// The font stack written on every chart.
pub const FONT_FAMILY: &str = "'Noto Sans', 'DejaVu Sans', sans-serif";

/// The chart background.
pub const PAPER: &str = "#fbf9f4";
/// Text and axis lines.
pub const INK: &str = "#22303a";
/// Secondary text such as tick labels and notes.
pub const MUTED: &str = "#56636b";
/// Grid lines.
pub const GRID: &str = "#e4e0d6";
/// The main data colour (petrol blue).
pub const DATA: &str = "#17607a";
/// The accent for flagged points (terracotta).
pub const ACCENT: &str = "#b9502c";
/// The light tint of the data colour used for interval bars.
pub const INTERVAL: &str = "#a9c8d2";
/// Reference lines and curves (deep ochre).
pub const REFERENCE: &str = "#8c6a1c";
/// Fill of the heat map's diagonal (each column with itself), kept quiet on purpose.
pub const DIAGONAL: &str = "#ebe6da";
/// Fill for cells or bars whose value is missing.
pub const MISSING: &str = "#d9d6cf";

/// Colours for several series, in order of use.
pub const SERIES: [&str; 5] = ["#17607a", "#c98a1b", "#6b4a7e", "#4d7a36", "#a8395a"];

/// Returns the colour of series `i`, cycling when there are more series than colours.
pub fn series(i: usize) -> &'static str {
    SERIES[i % SERIES.len()]
}

/// The negative end of the diverging heat-map scale (petrol).
const COLD: (f64, f64, f64) = (23.0, 96.0, 122.0);
/// The middle of the diverging heat-map scale (paper).
const MID: (f64, f64, f64) = (247.0, 243.0, 234.0);
/// The positive end of the diverging heat-map scale (terracotta).
const WARM: (f64, f64, f64) = (177.0, 72.0, 38.0);

/// Maps a value in [-1, 1] to a colour on the diverging scale, as `#rrggbb`.
///
/// Values outside the range are clamped; a non-finite value gets [`MISSING`].
pub fn diverging(t: f64) -> String {
    if !t.is_finite() {
        return MISSING.to_owned();
    }
    let t = t.clamp(-1.0, 1.0);
    let (end, w) = if t < 0.0 { (COLD, -t) } else { (WARM, t) };
    let mix = |a: f64, b: f64| (a + (b - a) * w).round().clamp(0.0, 255.0) as u8;
    format!("#{:02x}{:02x}{:02x}", mix(MID.0, end.0), mix(MID.1, end.1), mix(MID.2, end.2))
}

/// Whether text on the diverging colour for `t` should be light for contrast.
pub fn diverging_needs_light_text(t: f64) -> bool {
    t.is_finite() && t.abs() >= 0.55
}

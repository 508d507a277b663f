//! Linear scales and "nice" tick marks for chart axes.
//!
//! Tick steps are 1, 2 or 5 times a power of ten, and the axis range is
//! widened to whole steps so every axis starts and ends on a labelled tick
//! (the "nice numbers" idea of Heckbert, Graphics Gems, 1990).

use super::text;

/// Tick positions along an axis and how many decimals their labels need.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    values: Vec<f64>,
    step: f64,
    decimals: usize,
}

impl Ticks {
    /// Chooses about `target` nice ticks covering `[lo, hi]`.
    ///
    /// Non-finite or reversed bounds are repaired: a reversed range is
    /// swapped, an empty or non-finite range becomes a small range around the
    /// finite bound (or `[0, 1]` when there is none).
    pub fn nice(lo: f64, hi: f64, target: usize) -> Self {
        let (lo, hi) = repair_range(lo, hi);
        let target = target.clamp(2, 12) as f64;
        let step = nice_step((hi - lo) / target);
        Self::with_step(lo, hi, step)
    }

    /// Ticks on whole numbers only (for counts and model sizes), about `target` of them.
    pub fn integers(lo: f64, hi: f64, target: usize) -> Self {
        let (lo, hi) = repair_range(lo, hi);
        let target = target.clamp(2, 12) as f64;
        let step = nice_step((hi - lo) / target).max(1.0).round();
        Self::with_step(lo, hi, step)
    }

    /// Histogram bin edges: the nice step (1, 2 or 5 times a power of ten) whose
    /// number of bins over `[lo, hi]` comes closest to `target`.
    pub fn bins(lo: f64, hi: f64, target: usize) -> Self {
        let (lo, hi) = repair_range(lo, hi);
        let target = target.clamp(1, 200) as f64;
        let base = nice_step((hi - lo) / target);
        let count = |step: f64| (hi / step).ceil() - (lo / step).floor();
        let step = [base / 5.0, base / 2.0, base / 2.5, base, base * 2.0]
            .into_iter()
            .map(nice_step)
            .filter(|s| count(*s) <= 200.0)
            .min_by(|a, b| {
                let da = (count(*a) - target).abs();
                let db = (count(*b) - target).abs();
                // On a tie, prefer the wider bins.
                da.total_cmp(&db).then(b.total_cmp(a))
            })
            .unwrap_or(base);
        Self::with_step(lo, hi, step)
    }

    /// Ticks every `step` covering `[lo, hi]`, starting and ending on multiples of `step`.
    ///
    /// Returns `None` when the step is not a positive finite number or would
    /// need more than 200 ticks.
    pub fn stepped(lo: f64, hi: f64, step: f64) -> Option<Self> {
        if !(step.is_finite() && step > 0.0) {
            return None;
        }
        let (lo, hi) = repair_range(lo, hi);
        let count = (hi / step).ceil() - (lo / step).floor();
        if !(count.is_finite() && count <= 200.0) {
            return None;
        }
        Some(Self::with_step(lo, hi, step))
    }

    fn with_step(lo: f64, hi: f64, step: f64) -> Self {
        let first = (lo / step).floor();
        let last = (hi / step).ceil();
        let count = ((last - first) as usize).min(200);
        let decimals = decimals_for(step);
        let factor = 10f64.powi(decimals as i32);
        let values = (0..=count)
            .map(|k| {
                let v = (first + k as f64) * step;
                // Rounding to the label's precision removes float noise such as 0.30000000000000004.
                (v * factor).round() / factor
            })
            .collect();
        Self { values, step, decimals }
    }

    /// The tick values, ascending.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The distance between neighbouring ticks.
    pub fn step(&self) -> f64 {
        self.step
    }

    /// The number of decimals the tick labels need.
    pub fn decimals(&self) -> usize {
        self.decimals
    }

    /// The lowest tick (the start of the axis).
    pub fn first(&self) -> f64 {
        self.values.first().copied().unwrap_or(0.0)
    }

    /// The highest tick (the end of the axis).
    pub fn last(&self) -> f64 {
        self.values.last().copied().unwrap_or(1.0)
    }

    /// The label of a tick value, with this axis' fixed number of decimals.
    pub fn label(&self, value: f64) -> String {
        text::fixed(value, self.decimals)
    }
}

/// Makes a usable, non-empty, finite range out of arbitrary bounds.
fn repair_range(lo: f64, hi: f64) -> (f64, f64) {
    let (mut lo, mut hi) = match (lo.is_finite(), hi.is_finite()) {
        (true, true) => (lo.min(hi), lo.max(hi)),
        (true, false) => (lo, lo),
        (false, true) => (hi, hi),
        (false, false) => (0.0, 1.0),
    };
    if hi - lo <= f64::EPSILON * lo.abs().max(hi.abs()).max(1.0) {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        lo -= pad;
        hi += pad;
    }
    (lo, hi)
}

/// Rounds a raw step up to 1, 2 or 5 times a power of ten.
fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let magnitude = 10f64.powf(raw.log10().floor());
    let fraction = raw / magnitude;
    let nice = if fraction <= 1.0 {
        1.0
    } else if fraction <= 2.0 {
        2.0
    } else if fraction <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * magnitude
}

/// The fewest decimals (at most 12) that write every multiple of `step` exactly.
fn decimals_for(step: f64) -> usize {
    (0..=12)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() <= 1e-9 * scaled.abs().max(1.0)
        })
        .unwrap_or(12)
}

/// Maps data values linearly onto pixel positions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LinearScale {
    d0: f64,
    d1: f64,
    r0: f64,
    r1: f64,
}

impl LinearScale {
    /// A scale from the data interval `[d0, d1]` to the pixel interval `[r0, r1]`.
    ///
    /// An empty data interval is widened so the scale never divides by zero.
    pub fn new(d0: f64, d1: f64, r0: f64, r1: f64) -> Self {
        let (d0, d1) =
            if (d1 - d0).abs() > 0.0 && (d1 - d0).is_finite() { (d0, d1) } else { (d0 - 1.0, d0 + 1.0) };
        Self { d0, d1, r0, r1 }
    }

    /// A scale whose data interval runs from the first to the last tick.
    pub fn from_ticks(ticks: &Ticks, r0: f64, r1: f64) -> Self {
        Self::new(ticks.first(), ticks.last(), r0, r1)
    }

    /// The pixel position of a data value.
    pub fn map(&self, v: f64) -> f64 {
        self.r0 + (v - self.d0) / (self.d1 - self.d0) * (self.r1 - self.r0)
    }

    /// The data interval (low end, high end).
    pub fn domain(&self) -> (f64, f64) {
        (self.d0, self.d1)
    }
}

/// The smallest and largest of the given values, ignoring non-finite ones.
pub fn extent(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values.into_iter().filter(|v| text::plottable(*v)).fold(None, |acc, v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_ticks_cover_the_range() {
        let t = Ticks::nice(0.13, 0.97, 5);
        assert_eq!(t.values(), &[0.0, 0.2, 0.4, 0.6, 0.8, 1.0]);
        assert_eq!(t.decimals(), 1);
        let t = Ticks::nice(3230.0, 22990.0, 5);
        assert_eq!(t.first(), 0.0);
        assert_eq!(t.last(), 25000.0);
    }

    #[test]
    fn degenerate_ranges_are_repaired() {
        let t = Ticks::nice(5.0, 5.0, 5);
        assert!(t.first() < 5.0 && t.last() > 5.0);
        let t = Ticks::nice(f64::NAN, f64::INFINITY, 5);
        assert_eq!((t.first(), t.last()), (0.0, 1.0));
    }

    #[test]
    fn integer_ticks_are_whole() {
        let t = Ticks::integers(1.0, 7.0, 8);
        assert!(t.values().iter().all(|v| v.fract() == 0.0));
        assert_eq!(t.decimals(), 0);
    }
}

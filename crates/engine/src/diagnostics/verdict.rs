//! Plain-language verdicts: every check ends in one, with its test, numbers and threshold.

/// How a check came out, in three plain levels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VerdictLevel {
    /// Nothing in the data speaks against the assumption or the model.
    Clear,
    /// Worth a look before anyone acts on the model, but not by itself a reason to change it.
    Watch,
    /// The data speak against the assumption at the chosen threshold.
    Problem,
}

impl VerdictLevel {
    /// A stable lower-case name for documents: `clear`, `watch` or `problem`.
    pub fn as_str(self) -> &'static str {
        match self {
            VerdictLevel::Clear => "clear",
            VerdictLevel::Watch => "watch",
            VerdictLevel::Problem => "problem",
        }
    }
}

/// The verdict of one check: its level, the test behind it, the numbers and one sentence for
/// the brief.
#[derive(Debug, Clone, PartialEq)]
pub struct Verdict {
    label: VerdictLevel,
    test: String,
    statistic: f64,
    p_value: Option<f64>,
    threshold: String,
    meaning: String,
}

impl Verdict {
    /// Builds a verdict; the statistic must be finite or infinite, never NaN (NaN becomes 0 and
    /// a level of `Watch` would be misleading, so callers check before building).
    pub(crate) fn new(
        label: VerdictLevel,
        test: impl Into<String>,
        statistic: f64,
        p_value: Option<f64>,
        threshold: impl Into<String>,
        meaning: impl Into<String>,
    ) -> Verdict {
        debug_assert!(!statistic.is_nan(), "verdict statistic is NaN");
        Verdict {
            label,
            test: test.into(),
            statistic: if statistic.is_nan() { 0.0 } else { statistic },
            p_value: p_value.filter(|p| p.is_finite()),
            threshold: threshold.into(),
            meaning: meaning.into(),
        }
    }

    /// A verdict from a significance test: `Problem` when `p < alpha`, `Clear` otherwise.
    pub(crate) fn from_test(
        test: impl Into<String>,
        statistic: f64,
        p_value: f64,
        alpha: f64,
        clear_meaning: &str,
        problem_meaning: &str,
    ) -> Verdict {
        let problem = p_value < alpha;
        Verdict::new(
            if problem { VerdictLevel::Problem } else { VerdictLevel::Clear },
            test,
            statistic,
            Some(p_value),
            format!("p below {alpha} counts as evidence"),
            if problem { problem_meaning } else { clear_meaning },
        )
    }

    /// The level.
    pub fn label(&self) -> VerdictLevel {
        self.label
    }

    /// The test or measure behind the verdict, e.g. "Shapiro-Wilk W (Royston 1995)".
    pub fn test(&self) -> &str {
        &self.test
    }

    /// The statistic the verdict rests on (may be infinite, never NaN).
    pub fn statistic(&self) -> f64 {
        self.statistic
    }

    /// The p-value, when the verdict comes from a test.
    pub fn p_value(&self) -> Option<f64> {
        self.p_value
    }

    /// The threshold used, in words.
    pub fn threshold(&self) -> &str {
        &self.threshold
    }

    /// One sentence on what the result means for the brief.
    pub fn meaning(&self) -> &str {
        &self.meaning
    }
}

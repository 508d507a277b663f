//! Influence per row: leverage, Cook's distance, DFFITS, DFBETAS, the Bonferroni outlier test,
//! and the refit without the flagged rows.
//!
//! - Leverage hᵢ flagged when hᵢ > 2p/n (Hoaglin & Welsch 1978, "The hat matrix in regression
//!   and ANOVA", The American Statistician 32, 17–22).
//! - Cook's distance Dᵢ = rᵢ²·hᵢ / (p·(1 − hᵢ)) (Cook 1977, "Detection of influential observation
//!   in linear regression", Technometrics 19, 15–18), read as a percentile of F(p, n − p) as Cook
//!   suggested: below the 20th percentile "little influence", at or above the 50th "major
//!   influence"; the band in between is labelled "some influence" (our wording; common practice,
//!   no published source).
//! - DFFITSᵢ = tᵢ·√(hᵢ/(1 − hᵢ)) and DFBETASᵢⱼ = (bⱼ − bⱼ₍ᵢ₎)/(s₍ᵢ₎·√((XᵀX)⁻¹ⱼⱼ)) (Belsley, Kuh &
//!   Welsch 1980, §2.1), with bⱼ − bⱼ₍ᵢ₎ = ((XᵀX)⁻¹xᵢ)ⱼ·eᵢ/(1 − hᵢ). Cut-offs per Kutner et al.
//!   (2004), §10.4: 1 and 1 for small and medium data, 2·√(p/n) and 2/√n for large data; the
//!   size boundary is set by [`super::SizeRule`] (default: n ≤ 100 is small or medium).
//! - Outliers: two-sided t p-values of the studentized deleted residuals on n − p − 1 degrees
//!   of freedom, multiplied by n (Bonferroni), capped at 1 (Weisberg 2005, §9.4.3).
//!
//! A row is flagged when its Cook's distance is at or above the 50th percentile, or when any
//! other measure flags it.

use super::residuals::{HAT_ONE_TOL, studentized};
use super::{CheckOptions, CheckOutcome, SizeRule, Verdict, VerdictLevel, Working, fmt4};
use crate::dist;
use crate::fit::Fit;

/// Cook's distance percentile below which a row has little influence.
pub const COOK_LITTLE: f64 = 0.2;
/// Cook's distance percentile at or above which a row has major influence.
pub const COOK_MAJOR: f64 = 0.5;

/// How much a row moves the fit, from its Cook's distance percentile.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InfluenceBand {
    /// Below the 20th percentile of F(p, n − p).
    Little,
    /// Between the 20th and the 50th percentile.
    Some,
    /// At or above the 50th percentile.
    Major,
}

impl InfluenceBand {
    /// A stable lower-case name: `little`, `some` or `major`.
    pub fn as_str(self) -> &'static str {
        match self {
            InfluenceBand::Little => "little",
            InfluenceBand::Some => "some",
            InfluenceBand::Major => "major",
        }
    }
}

/// The cut-offs in force, with the size rule in words.
#[derive(Debug, Clone, PartialEq)]
pub struct InfluenceThresholds {
    hat: f64,
    dffits: f64,
    dfbetas: f64,
    cook_little: f64,
    cook_major: f64,
    bonferroni_alpha: f64,
    size_rule: String,
}

impl InfluenceThresholds {
    /// Leverage cut-off 2p/n.
    pub fn hat(&self) -> f64 {
        self.hat
    }
    /// |DFFITS| cut-off.
    pub fn dffits(&self) -> f64 {
        self.dffits
    }
    /// |DFBETAS| cut-off.
    pub fn dfbetas(&self) -> f64 {
        self.dfbetas
    }
    /// Cook's distance percentile (as a fraction) below which influence is little.
    pub fn cook_little(&self) -> f64 {
        self.cook_little
    }
    /// Cook's distance percentile (as a fraction) from which influence is major.
    pub fn cook_major(&self) -> f64 {
        self.cook_major
    }
    /// Bonferroni-adjusted p-value below which a row is an outlier.
    pub fn bonferroni_alpha(&self) -> f64 {
        self.bonferroni_alpha
    }
    /// The size rule used for the DFFITS/DFBETAS cut-offs, in words.
    pub fn size_rule(&self) -> &str {
        &self.size_rule
    }
}

/// Influence measures of one row.
#[derive(Debug, Clone, PartialEq)]
pub struct InfluenceRow {
    key: String,
    hat: f64,
    hat_flag: bool,
    cooks_d: Option<f64>,
    cooks_percentile: Option<f64>,
    cooks_band: Option<InfluenceBand>,
    dffits: Option<f64>,
    dffits_flag: bool,
    dfbetas: Option<Vec<f64>>,
    dfbetas_flag: bool,
    student_external: Option<f64>,
    unadjusted_p: Option<f64>,
    bonferroni_p: Option<f64>,
    outlier_flag: bool,
    flagged: bool,
}

impl InfluenceRow {
    /// Region key.
    pub fn key(&self) -> &str {
        &self.key
    }
    /// Leverage.
    pub fn hat(&self) -> f64 {
        self.hat
    }
    /// Whether the leverage exceeds 2p/n (a leverage of 1 is always flagged).
    pub fn hat_flag(&self) -> bool {
        self.hat_flag
    }
    /// Cook's distance (`None` when the leverage is 1).
    pub fn cooks_d(&self) -> Option<f64> {
        self.cooks_d
    }
    /// Cook's distance as a fraction of F(p, n − p) below it: 0.5 is the 50th percentile.
    pub fn cooks_percentile(&self) -> Option<f64> {
        self.cooks_percentile
    }
    /// The band of the Cook's distance percentile.
    pub fn cooks_band(&self) -> Option<InfluenceBand> {
        self.cooks_band
    }
    /// DFFITS.
    pub fn dffits(&self) -> Option<f64> {
        self.dffits
    }
    /// Whether |DFFITS| exceeds its cut-off.
    pub fn dffits_flag(&self) -> bool {
        self.dffits_flag
    }
    /// DFBETAS, one per coefficient in design order.
    pub fn dfbetas(&self) -> Option<&[f64]> {
        self.dfbetas.as_deref()
    }
    /// Whether any |DFBETAS| exceeds its cut-off.
    pub fn dfbetas_flag(&self) -> bool {
        self.dfbetas_flag
    }
    /// Studentized deleted residual.
    pub fn student_external(&self) -> Option<f64> {
        self.student_external
    }
    /// Its unadjusted two-sided p-value.
    pub fn unadjusted_p(&self) -> Option<f64> {
        self.unadjusted_p
    }
    /// Its Bonferroni-adjusted p-value.
    pub fn bonferroni_p(&self) -> Option<f64> {
        self.bonferroni_p
    }
    /// Whether the Bonferroni p-value is below the threshold.
    pub fn outlier_flag(&self) -> bool {
        self.outlier_flag
    }
    /// Whether the row is flagged by any measure (Cook's distance at or above the 50th percentile
    /// or any other flag).
    pub fn flagged(&self) -> bool {
        self.flagged
    }
}

/// Influence measures of every row.
#[derive(Debug, Clone, PartialEq)]
pub struct Influence {
    names: Vec<String>,
    thresholds: InfluenceThresholds,
    rows: Vec<InfluenceRow>,
    verdict: Verdict,
}

impl Influence {
    /// Design column labels (the order of DFBETAS).
    pub fn names(&self) -> &[String] {
        &self.names
    }
    /// The cut-offs in force.
    pub fn thresholds(&self) -> &InfluenceThresholds {
        &self.thresholds
    }
    /// One entry per row, in row order.
    pub fn rows(&self) -> &[InfluenceRow] {
        &self.rows
    }
    /// Keys of the flagged rows, in row order.
    pub fn flagged_keys(&self) -> Vec<String> {
        self.rows.iter().filter(|r| r.flagged).map(|r| r.key.clone()).collect()
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// The cut-offs for `n` rows and `p` coefficients under a size rule.
fn thresholds(n: usize, p: usize, rule: SizeRule, alpha: f64) -> InfluenceThresholds {
    let (nf, pf) = (n as f64, p as f64);
    let (large, words) = match rule {
        SizeRule::ByRows { small_max_rows } => (
            n > small_max_rows,
            format!(
                "{} data ({n} rows; more than {small_max_rows} rows counts as large): cut-offs per Kutner et al. (2004), section 10.4",
                if n > small_max_rows { "large" } else { "small or medium" }
            ),
        ),
        SizeRule::SmallOrMedium => (
            false,
            "small or medium data (set by the analyst): cut-offs per Kutner et al. (2004), section 10.4"
                .to_owned(),
        ),
        SizeRule::Large => (
            true,
            "large data (set by the analyst): cut-offs per Kutner et al. (2004), section 10.4".to_owned(),
        ),
    };
    InfluenceThresholds {
        hat: 2.0 * pf / nf,
        dffits: if large { 2.0 * (pf / nf).sqrt() } else { 1.0 },
        dfbetas: if large { 2.0 / nf.sqrt() } else { 1.0 },
        cook_little: COOK_LITTLE,
        cook_major: COOK_MAJOR,
        bonferroni_alpha: alpha,
        size_rule: words,
    }
}

/// Influence measures of the working model.
pub(crate) fn influence_check(w: &Working, opts: &CheckOptions) -> CheckOutcome<Influence> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    let (n, p) = (w.n, w.p);
    let df = w.df_resid();
    if df < 2 {
        return CheckOutcome::Unavailable(format!(
            "influence measures need at least two residual degrees of freedom; this model has {df}"
        ));
    }
    let th = thresholds(n, p, opts.size_rule(), opts.alpha());
    let (internal, external) = studentized(w);
    let c = w.qr.unscaled_covariance();
    let cdiag: Vec<f64> = (0..p).map(|j| c.get(j, j)).collect();
    let mut rows = Vec::with_capacity(n);
    for i in 0..n {
        let h = w.hat[i];
        let omh = 1.0 - h;
        let e = w.resid[i];
        let hat_flag = h > th.hat || omh <= HAT_ONE_TOL;
        let (mut cooks_d, mut pct, mut band, mut dffits, mut dfbetas) = (None, None, None, None, None);
        let (mut unadj, mut bonf) = (None, None);
        if let Some(r) = internal[i] {
            let d = r * r * h / (p as f64 * omh);
            let q = dist::f_cdf(d, p as f64, df as f64);
            cooks_d = Some(d);
            pct = Some(q);
            band = Some(if q >= COOK_MAJOR {
                InfluenceBand::Major
            } else if q < COOK_LITTLE {
                InfluenceBand::Little
            } else {
                InfluenceBand::Some
            });
        }
        if let Some(t) = external[i] {
            dffits = Some(t * (h / omh).sqrt());
            let s_i = ((w.sse - e * e / omh) / (df - 1) as f64).sqrt();
            let xi = w.x.row(i);
            let dfb: Vec<f64> = (0..p)
                .map(|j| {
                    let cxj: f64 = (0..p).map(|k| c.get(j, k) * xi[k]).sum();
                    cxj * e / omh / (s_i * cdiag[j].sqrt())
                })
                .collect();
            dfbetas = Some(dfb);
            let up = dist::t_two_sided_p(t, (df - 1) as f64);
            unadj = Some(up);
            bonf = Some((up * n as f64).min(1.0));
        }
        let dffits_flag = dffits.is_some_and(|v: f64| v.abs() > th.dffits);
        let dfbetas_flag =
            dfbetas.as_ref().is_some_and(|v: &Vec<f64>| v.iter().any(|b| b.abs() > th.dfbetas));
        let outlier_flag = bonf.is_some_and(|b| b < th.bonferroni_alpha);
        let flagged =
            band == Some(InfluenceBand::Major) || hat_flag || dffits_flag || dfbetas_flag || outlier_flag;
        rows.push(InfluenceRow {
            key: w.keys[i].clone(),
            hat: h,
            hat_flag,
            cooks_d,
            cooks_percentile: pct,
            cooks_band: band,
            dffits,
            dffits_flag,
            dfbetas,
            dfbetas_flag,
            student_external: external[i],
            unadjusted_p: unadj,
            bonferroni_p: bonf,
            outlier_flag,
            flagged,
        });
    }
    let verdict = influence_verdict(&rows, &th);
    CheckOutcome::Ok(Influence { names: w.names.clone(), thresholds: th, rows, verdict })
}

fn influence_verdict(rows: &[InfluenceRow], th: &InfluenceThresholds) -> Verdict {
    let flagged: Vec<&InfluenceRow> = rows.iter().filter(|r| r.flagged).collect();
    let outliers: Vec<&str> = rows.iter().filter(|r| r.outlier_flag).map(|r| r.key.as_str()).collect();
    let major: Vec<&str> =
        rows.iter().filter(|r| r.cooks_band == Some(InfluenceBand::Major)).map(|r| r.key.as_str()).collect();
    let max_cook = rows.iter().filter_map(|r| r.cooks_d).fold(0.0_f64, f64::max);
    let min_bonf = rows.iter().filter_map(|r| r.bonferroni_p).fold(1.0_f64, f64::min);
    let threshold = format!(
        "Cook's distance at or above the 50th percentile of F(p, n-p); leverage above {}; |DFFITS| above {}; |DFBETAS| above {}; Bonferroni p below {}",
        fmt4(th.hat),
        fmt4(th.dffits),
        fmt4(th.dfbetas),
        th.bonferroni_alpha
    );
    let test =
        "Influence measures (Cook's distance, leverage, DFFITS, DFBETAS) and the Bonferroni outlier test";
    let list = |v: &[&str]| -> String {
        let names: Vec<String> = v.iter().take(5).map(|s| (*s).to_owned()).collect();
        let more = if v.len() > 5 { format!(" and {} more", v.len() - 5) } else { String::new() };
        format!("{}{more}", crate::error::join_names(&names))
    };
    if !outliers.is_empty() || !major.is_empty() {
        let mut parts = Vec::new();
        if !major.is_empty() {
            parts.push(format!("{} moves the whole fit (major influence by Cook's distance)", list(&major)));
        }
        if !outliers.is_empty() {
            parts.push(format!("{} lies far from the model (Bonferroni outlier)", list(&outliers)));
        }
        return Verdict::new(
            VerdictLevel::Problem,
            test,
            max_cook,
            Some(min_bonf),
            threshold,
            format!(
                "{}; compare the refit without the flagged rows before relying on the model.",
                parts.join("; ")
            ),
        );
    }
    if !flagged.is_empty() {
        let keys: Vec<&str> = flagged.iter().map(|r| r.key.as_str()).collect();
        return Verdict::new(
            VerdictLevel::Watch,
            test,
            max_cook,
            Some(min_bonf),
            threshold,
            format!(
                "{} stand out on at least one measure but none moves the whole fit; check the data for these rows.",
                list(&keys)
            ),
        );
    }
    Verdict::new(
        VerdictLevel::Clear,
        test,
        max_cook,
        Some(min_bonf),
        threshold,
        "No single row drives the model or lies far from it.",
    )
}

/// One side of the refit comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct RefitSide {
    nobs: usize,
    coefficients: Vec<f64>,
    std_errors: Vec<f64>,
    r_squared: f64,
    verdicts: Vec<(String, Verdict)>,
}

impl RefitSide {
    /// Rows used.
    pub fn nobs(&self) -> usize {
        self.nobs
    }
    /// Coefficients in design order.
    pub fn coefficients(&self) -> &[f64] {
        &self.coefficients
    }
    /// Classical standard errors.
    pub fn std_errors(&self) -> &[f64] {
        &self.std_errors
    }
    /// R².
    pub fn r_squared(&self) -> f64 {
        self.r_squared
    }
    /// Verdicts of the assumption checks (normality, constant variance, RESET) that were
    /// available, by check name.
    pub fn verdicts(&self) -> &[(String, Verdict)] {
        &self.verdicts
    }
}

/// The model refitted without the flagged rows, beside the original; the original is untouched.
#[derive(Debug, Clone, PartialEq)]
pub struct Refit {
    removed: Vec<String>,
    names: Vec<String>,
    original: RefitSide,
    refit: RefitSide,
}

impl Refit {
    /// Keys of the rows left out.
    pub fn removed(&self) -> &[String] {
        &self.removed
    }
    /// Design column labels.
    pub fn names(&self) -> &[String] {
        &self.names
    }
    /// The model as fitted.
    pub fn original(&self) -> &RefitSide {
        &self.original
    }
    /// The model without the flagged rows.
    pub fn refit(&self) -> &RefitSide {
        &self.refit
    }
}

fn side(fit: &Fit, w: &Working, alpha: f64) -> RefitSide {
    let mut verdicts = Vec::new();
    if let CheckOutcome::Ok(s) = super::normality::shapiro_check(w, alpha) {
        verdicts.push(("shapiro_wilk".to_owned(), s.verdict().clone()));
    }
    if let CheckOutcome::Ok(b) = super::variance::brown_forsythe_check(w, alpha) {
        verdicts.push(("brown_forsythe".to_owned(), b.verdict().clone()));
    }
    if let CheckOutcome::Ok(b) = super::variance::breusch_pagan_predictors(w, alpha) {
        verdicts.push(("breusch_pagan_predictors".to_owned(), b.verdict().clone()));
    }
    if let CheckOutcome::Ok(r) = super::linearity::reset_check(w, alpha) {
        verdicts.push(("reset".to_owned(), r.verdict().clone()));
    }
    RefitSide {
        nobs: fit.nobs(),
        coefficients: fit.coefficients().to_vec(),
        std_errors: fit.std_errors().to_vec(),
        r_squared: fit.r_squared(),
        verdicts,
    }
}

/// Refits the model without the flagged rows.
pub(crate) fn refit_without_flagged(
    fit: &Fit,
    w: &Working,
    influence: &CheckOutcome<Influence>,
    opts: &CheckOptions,
) -> CheckOutcome<Refit> {
    let inf = match influence {
        CheckOutcome::Ok(v) => v,
        CheckOutcome::Unavailable(r) => {
            return CheckOutcome::Unavailable(format!("no influence measures: {r}"));
        }
    };
    let removed = inf.flagged_keys();
    if removed.is_empty() {
        return CheckOutcome::Unavailable("no rows are flagged, so there is nothing to leave out".to_owned());
    }
    let design = match fit.design().without_rows(&removed) {
        Ok(d) => d,
        Err(e) => {
            return CheckOutcome::Unavailable(format!(
                "the model cannot be refitted without the flagged rows: {e}"
            ));
        }
    };
    let refit = match Fit::new(&design, &opts.fit) {
        Ok(f) => f,
        Err(e) => {
            return CheckOutcome::Unavailable(format!(
                "the model cannot be refitted without the flagged rows: {e}"
            ));
        }
    };
    let wr = Working::from_fit(&refit);
    CheckOutcome::Ok(Refit {
        removed,
        names: fit.design().column_names().to_vec(),
        original: side(fit, w, opts.alpha()),
        refit: side(&refit, &wr, opts.alpha()),
    })
}

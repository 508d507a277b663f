//! Transformations without trial and error: the response power profile (Box-Cox or
//! Yeo-Johnson), Box-Tidwell powers for positive predictors, and a ranked transformation search.
//!
//! - Box-Cox (Box & Cox 1964, JRSS B 26, 211–252): z(λ) = (y^λ − 1)/λ, ln y at λ = 0. The
//!   profile log-likelihood of the regression is ℓ(λ) = −(n/2)·ln(SSE(λ)/n) + (λ − 1)·Σ ln yᵢ,
//!   with SSE(λ) the (weighted) residual sum of squares of z(λ) on X. The 95% likelihood interval
//!   is {λ : ℓ(λ) ≥ ℓ(λ̂) − ½·χ²₁(0.95)}.
//! - Yeo-Johnson (Yeo & Johnson 2000, Biometrika 87, 954–959), used when some y ≤ 0:
//!   ψ(λ, y) = ((y + 1)^λ − 1)/λ for y ≥ 0 (ln(y + 1) at λ = 0) and −((1 − y)^(2−λ) − 1)/(2 − λ) for
//!   y < 0 (−ln(1 − y) at λ = 2), with Jacobian term (λ − 1)·Σ sign(yᵢ)·ln(|yᵢ| + 1).
//! - The suggested power is the member of {−1, −½, 0, ½, 1} inside the interval nearest λ̂.
//! - Box-Tidwell (Box & Tidwell 1962, Technometrics 4, 531–550), one positive predictor column
//!   at a time with the others linear: with current power α, fit y on x^α (coefficient β) and on
//!   x^α plus x^α·ln x (coefficient γ); the next power is α + γ/β, repeated to convergence. At
//!   α = 1 the t test of the added x·ln x term is the score test of "no power needed".
//! - The transformation search tries Tukey's ladder of powers {−1, −½, log, ½, 1, 2} for each
//!   untransformed positive predictor column, alone and combined, with the response as is and at
//!   its suggested Box-Cox power, and ranks the candidates by k-fold cross-validated RMSE on the
//!   response scale of the model (seeded folds, the same for every candidate). Predictions of a
//!   transformed response are back-transformed with Duan's smearing estimate (Duan 1983, JASA 78,
//!   605–610): ŷ = (1/m)·Σᵢ g⁻¹(ẑ + eᵢ) over the m training residuals. The search reports; it
//!   never changes the model.

use std::sync::atomic::Ordering;

use super::{
    CheckOptions, CheckOutcome, Named, SearchControl, Verdict, VerdictLevel, Working, fmt4, least_squares,
    positive,
};
use crate::dist;
use crate::linalg::{PivotedQr, QrOptions};
use crate::matrix::Matrix;

/// The interpretable powers the profile suggests from.
pub const INTERPRETABLE_POWERS: [f64; 5] = [-1.0, -0.5, 0.0, 0.5, 1.0];
/// Tukey's ladder of powers tried for predictors (0 stands for the log).
pub const LADDER: [f64; 6] = [-1.0, -0.5, 0.0, 0.5, 1.0, 2.0];
/// Grid step of the response profile.
pub const PROFILE_STEP: f64 = 0.05;

/// The family of the response power profile.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PowerFamily {
    /// Box-Cox (all responses positive).
    BoxCox,
    /// Yeo-Johnson (some responses zero or negative).
    YeoJohnson,
}

impl PowerFamily {
    /// A stable name: `box_cox` or `yeo_johnson`.
    pub fn as_str(self) -> &'static str {
        match self {
            PowerFamily::BoxCox => "box_cox",
            PowerFamily::YeoJohnson => "yeo_johnson",
        }
    }
}

/// The Box-Cox transform of a positive value.
pub fn box_cox(y: f64, lambda: f64) -> f64 {
    if lambda == 0.0 { y.ln() } else { (lambda * y.ln()).exp_m1() / lambda }
}

/// The Yeo-Johnson transform of any real value.
pub fn yeo_johnson(y: f64, lambda: f64) -> f64 {
    if y >= 0.0 {
        if lambda == 0.0 { y.ln_1p() } else { (lambda * y.ln_1p()).exp_m1() / lambda }
    } else if lambda == 2.0 {
        -(-y).ln_1p()
    } else {
        -((2.0 - lambda) * (-y).ln_1p()).exp_m1() / (2.0 - lambda)
    }
}

/// Evaluates the profile log-likelihood of one response for many λ, reusing one factorisation.
struct Profiler {
    family: PowerFamily,
    qr: PivotedQr,
    y: Vec<f64>,
    sw: Vec<f64>,
    jacobian: f64,
    /// Whether the design holds a constant column: then the Box-Cox `− 1` is absorbed by the
    /// intercept and `y^λ/λ` is regressed instead of `(y^λ − 1)/λ`, which keeps the variation of
    /// `y^λ` when it is tiny next to 1 (same SSE, no cancellation).
    constant: bool,
}

impl Profiler {
    fn new(x: &Matrix, y: &[f64], weights: Option<&[f64]>) -> std::result::Result<Profiler, String> {
        let n = y.len();
        if x.nrows() != n {
            return Err("the design and the response differ in length".to_owned());
        }
        if n <= x.ncols() {
            return Err(format!("{n} rows are not enough for a profile with {} coefficients", x.ncols()));
        }
        if y.iter().any(|v| !v.is_finite()) {
            return Err("the response contains a value that is not a finite number".to_owned());
        }
        let family = if y.iter().all(|&v| v > 0.0) { PowerFamily::BoxCox } else { PowerFamily::YeoJohnson };
        let sw: Vec<f64> = match weights {
            Some(w) => w.iter().map(|v| v.sqrt()).collect(),
            None => vec![1.0; n],
        };
        let (xs, _) = super::scale_by_weights(x, y, weights);
        let qr = PivotedQr::factor(&xs, &QrOptions::default());
        if qr.rank() < x.ncols() {
            return Err("the design has linearly dependent columns".to_owned());
        }
        let jacobian = match family {
            PowerFamily::BoxCox => crate::linalg::sum_dd(y.iter().map(|v| v.ln())),
            PowerFamily::YeoJohnson => crate::linalg::sum_dd(y.iter().map(|v| v.signum() * v.abs().ln_1p())),
        };
        let constant = (0..x.ncols()).any(|j| {
            let c = x.column(j);
            c[0] != 0.0 && c.iter().all(|&v| v == c[0])
        });
        Ok(Profiler { family, qr, y: y.to_vec(), sw, jacobian, constant })
    }

    fn llf(&self, lambda: f64) -> Option<f64> {
        let z: Vec<f64> = self
            .y
            .iter()
            .zip(&self.sw)
            .map(|(&v, s)| {
                s * match self.family {
                    PowerFamily::BoxCox if self.constant && lambda != 0.0 => (lambda * v.ln()).exp() / lambda,
                    PowerFamily::BoxCox => box_cox(v, lambda),
                    PowerFamily::YeoJohnson => yeo_johnson(v, lambda),
                }
            })
            .collect();
        if z.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let sse = super::sum_sq(&self.qr.least_squares(&z).residuals);
        let n = self.y.len() as f64;
        let v = -0.5 * n * (sse / n).ln() + (lambda - 1.0) * self.jacobian;
        (sse > 0.0 && v.is_finite()).then_some(v)
    }
}

/// The profile log-likelihood of the response power at `lambda` for the regression of the
/// transformed response on `x` (Box-Cox when every response is positive, Yeo-Johnson otherwise).
/// `None` when it is undefined (overflow or an exact fit).
pub fn power_profile_llf(x: &Matrix, y: &[f64], weights: Option<&[f64]>, lambda: f64) -> Option<f64> {
    Profiler::new(x, y, weights).ok()?.llf(lambda)
}

/// The response power profile with its maximum, 95% likelihood interval and suggestion.
#[derive(Debug, Clone, PartialEq)]
pub struct PowerProfile {
    family: PowerFamily,
    lambdas: Vec<f64>,
    llf: Vec<f64>,
    lambda_hat: f64,
    llf_max: f64,
    interval: (Option<f64>, Option<f64>),
    at_edge: bool,
    suggested: Option<f64>,
    verdict: Verdict,
}

impl PowerProfile {
    /// Box-Cox or Yeo-Johnson.
    pub fn family(&self) -> PowerFamily {
        self.family
    }
    /// The grid of λ where the profile was evaluated.
    pub fn lambdas(&self) -> &[f64] {
        &self.lambdas
    }
    /// The profile log-likelihood at each grid λ.
    pub fn llf(&self) -> &[f64] {
        &self.llf
    }
    /// The maximising λ.
    pub fn lambda_hat(&self) -> f64 {
        self.lambda_hat
    }
    /// The maximum profile log-likelihood.
    pub fn llf_max(&self) -> f64 {
        self.llf_max
    }
    /// The 95% likelihood interval; an end is `None` when it lies beyond the searched range.
    pub fn interval(&self) -> (Option<f64>, Option<f64>) {
        self.interval
    }
    /// Whether λ̂ sits at the edge of the searched range.
    pub fn at_edge(&self) -> bool {
        self.at_edge
    }
    /// The interpretable power inside the interval nearest λ̂ (1 means "leave as is").
    pub fn suggested(&self) -> Option<f64> {
        self.suggested
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// Golden-section search for the maximum of `f` on `[a, b]`.
fn golden_max(f: &dyn Fn(f64) -> Option<f64>, mut a: f64, mut b: f64) -> f64 {
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let val = |x: f64| f(x).unwrap_or(f64::NEG_INFINITY);
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (val(c), val(d));
    while (b - a).abs() > 1e-9 {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = val(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = val(d);
        }
    }
    0.5 * (a + b)
}

/// Bisection for the crossing of `f` with `level` between `inside` (f ≥ level) and `outside`.
fn crossing(f: &dyn Fn(f64) -> Option<f64>, level: f64, mut inside: f64, mut outside: f64) -> f64 {
    for _ in 0..200 {
        if (inside - outside).abs() < 1e-10 {
            break;
        }
        let mid = 0.5 * (inside + outside);
        if f(mid).is_some_and(|v| v >= level) {
            inside = mid;
        } else {
            outside = mid;
        }
    }
    0.5 * (inside + outside)
}

/// The response power profile of `y` regressed on `x` over `range` (see the module notes).
pub fn power_profile(
    x: &Matrix,
    y: &[f64],
    weights: Option<&[f64]>,
    range: (f64, f64),
) -> CheckOutcome<PowerProfile> {
    let prof = match Profiler::new(x, y, weights) {
        Ok(p) => p,
        Err(e) => return CheckOutcome::Unavailable(e),
    };
    let f = |l: f64| prof.llf(l);
    let steps = ((range.1 - range.0) / PROFILE_STEP).round() as usize;
    let mut lambdas = Vec::with_capacity(steps + 1);
    let mut llf = Vec::with_capacity(steps + 1);
    for i in 0..=steps {
        let l = range.0 + i as f64 * PROFILE_STEP;
        // Snap to the grid to keep values such as 0 and 0.5 exact.
        let l = (l / PROFILE_STEP).round() * PROFILE_STEP;
        if let Some(v) = f(l) {
            lambdas.push(l);
            llf.push(v);
        }
    }
    if lambdas.len() < 3 {
        return CheckOutcome::Unavailable(
            "the profile is undefined over most of the range (the response is fitted exactly or overflows)"
                .to_owned(),
        );
    }
    let kmax = (0..llf.len()).max_by(|&a, &b| llf[a].total_cmp(&llf[b])).unwrap_or(0);
    let at_edge = kmax == 0 || kmax == llf.len() - 1;
    let lambda_hat =
        if at_edge { lambdas[kmax] } else { golden_max(&f, lambdas[kmax - 1], lambdas[kmax + 1]) };
    let llf_max = f(lambda_hat).unwrap_or(llf[kmax]).max(llf[kmax]);
    let lambda_hat =
        if f(lambda_hat).unwrap_or(f64::NEG_INFINITY) >= llf[kmax] { lambda_hat } else { lambdas[kmax] };
    let level = llf_max - 0.5 * dist::chi2_quantile(0.95, 1.0);
    // Walk out from the maximum on the grid to the first point below the level on each side.
    let lower = (0..kmax)
        .rev()
        .find(|&k| llf[k] < level)
        .map(|k| crossing(&f, level, lambdas[k + 1].min(lambda_hat), lambdas[k]));
    let upper = (kmax + 1..llf.len())
        .find(|&k| llf[k] < level)
        .map(|k| crossing(&f, level, lambdas[k - 1].max(lambda_hat), lambdas[k]));
    let (lo, hi) = (lower.unwrap_or(range.0), upper.unwrap_or(range.1));
    let suggested = INTERPRETABLE_POWERS
        .iter()
        .copied()
        .filter(|&p| p >= lo && p <= hi)
        .min_by(|a, b| (a - lambda_hat).abs().total_cmp(&(b - lambda_hat).abs()));
    let verdict = profile_verdict(prof.family, lambda_hat, (lower, upper), suggested, range);
    CheckOutcome::Ok(PowerProfile {
        family: prof.family,
        lambdas,
        llf,
        lambda_hat,
        llf_max,
        interval: (lower, upper),
        at_edge,
        suggested,
        verdict,
    })
}

/// A readable name of a power of the response.
fn power_words(p: f64) -> String {
    match p {
        -1.0 => "the reciprocal (power -1)".to_owned(),
        -0.5 => "the reciprocal square root (power -1/2)".to_owned(),
        0.0 => "the logarithm".to_owned(),
        0.5 => "the square root".to_owned(),
        1.0 => "no transformation".to_owned(),
        v => format!("the power {}", fmt4(v)),
    }
}

fn profile_verdict(
    family: PowerFamily,
    lambda_hat: f64,
    interval: (Option<f64>, Option<f64>),
    suggested: Option<f64>,
    range: (f64, f64),
) -> Verdict {
    let lo = interval.0.map_or(format!("below {}", fmt4(range.0)), fmt4);
    let hi = interval.1.map_or(format!("above {}", fmt4(range.1)), fmt4);
    let test = match family {
        PowerFamily::BoxCox => "Box-Cox profile likelihood of the response power (Box & Cox 1964)",
        PowerFamily::YeoJohnson => {
            "Yeo-Johnson profile likelihood of the response power (Yeo & Johnson 2000)"
        }
    };
    let threshold = "1 (no transformation) inside the 95% likelihood interval";
    let lo_v = interval.0.unwrap_or(f64::NEG_INFINITY);
    let hi_v = interval.1.unwrap_or(f64::INFINITY);
    if (lo_v..=hi_v).contains(&1.0) {
        return Verdict::new(
            VerdictLevel::Clear,
            test,
            lambda_hat,
            None,
            threshold,
            format!(
                "The response needs no power transformation: the best power is {} and the 95% interval ({lo} to {hi}) includes 1.",
                fmt4(lambda_hat)
            ),
        );
    }
    let suggestion = match (family, suggested) {
        (PowerFamily::BoxCox, Some(p)) => {
            format!("; {} of the response is the simple choice inside the interval", power_words(p))
        }
        (PowerFamily::YeoJohnson, Some(p)) => {
            format!(
                "; the Yeo-Johnson transform with power {} is the simple choice inside the interval",
                fmt4(p)
            )
        }
        (_, None) => "; no simple power lies inside the interval".to_owned(),
    };
    Verdict::new(
        VerdictLevel::Watch,
        test,
        lambda_hat,
        None,
        threshold,
        format!(
            "The response would be better modelled on another scale: the best power is {} (95% interval {lo} to {hi}){suggestion}.",
            fmt4(lambda_hat)
        ),
    )
}

/// The response power profile of the working model.
pub(crate) fn response_power_check(w: &Working, opts: &CheckOptions) -> CheckOutcome<PowerProfile> {
    power_profile(&w.x_raw, &w.y_raw, w.weights.as_deref(), opts.lambda_range())
}

/// Box-Tidwell estimate of a power for one positive predictor column.
#[derive(Debug, Clone, PartialEq)]
pub struct BoxTidwell {
    one_step: f64,
    estimate: f64,
    iterations: usize,
    converged: bool,
    score_t: f64,
    score_df: usize,
    score_p: f64,
    verdict: Verdict,
}

impl BoxTidwell {
    /// The first-step estimate 1 + γ/β.
    pub fn one_step(&self) -> f64 {
        self.one_step
    }
    /// The estimate of the power: iterated to convergence, or the first step when the iteration
    /// did not settle.
    pub fn estimate(&self) -> f64 {
        self.estimate
    }
    /// Iterations taken.
    pub fn iterations(&self) -> usize {
        self.iterations
    }
    /// Whether the iteration converged (to 1e-6).
    pub fn converged(&self) -> bool {
        self.converged
    }
    /// The score test: t statistic of the added x·ln x term.
    pub fn score_t(&self) -> f64 {
        self.score_t
    }
    /// Its degrees of freedom `n − p − 1`.
    pub fn score_df(&self) -> usize {
        self.score_df
    }
    /// Its two-sided p-value.
    pub fn score_p(&self) -> f64 {
        self.score_p
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// Design `x` with column `j` replaced by `x_j^alpha` (ln at 0), optionally with `x_j^alpha·ln x_j`
/// appended, all multiplied by `sw`.
fn box_tidwell_design(x: &Matrix, sw: &[f64], j: usize, alpha: f64, extra: bool) -> Matrix {
    let mut m = Matrix::zeros(0, 0);
    let xj = x.column(j);
    let pow = |v: f64| if alpha == 0.0 { v.ln() } else { v.powf(alpha) };
    for k in 0..x.ncols() {
        let col: Vec<f64> = if k == j {
            xj.iter().zip(sw).map(|(&v, s)| s * pow(v)).collect()
        } else {
            x.column(k).iter().zip(sw).map(|(&v, s)| s * v).collect()
        };
        m.push_column(&col);
    }
    if extra {
        let col: Vec<f64> = xj.iter().zip(sw).map(|(&v, s)| s * pow(v) * v.ln()).collect();
        m.push_column(&col);
    }
    m
}

/// Box-Tidwell for column `j` of design `x` (see the module notes).
pub fn box_tidwell(
    x: &Matrix,
    y: &[f64],
    weights: Option<&[f64]>,
    j: usize,
    name: &str,
    alpha_level: f64,
) -> CheckOutcome<BoxTidwell> {
    let (n, p) = (x.nrows(), x.ncols());
    let xj = x.column(j);
    if xj.iter().any(|&v| !positive(v)) {
        return CheckOutcome::Unavailable(format!(
            "{name} has values that are zero or negative, so powers of it are undefined"
        ));
    }
    let mut distinct = xj.to_vec();
    distinct.sort_by(f64::total_cmp);
    distinct.dedup();
    if distinct.len() < 3 {
        return CheckOutcome::Unavailable(format!(
            "{name} takes fewer than three distinct values, so its curvature cannot be estimated"
        ));
    }
    if n < p + 2 {
        return CheckOutcome::Unavailable(format!(
            "Box-Tidwell needs at least {} rows; there are {n}",
            p + 2
        ));
    }
    let sw: Vec<f64> = match weights {
        Some(w) => w.iter().map(|v| v.sqrt()).collect(),
        None => vec![1.0; n],
    };
    let ys: Vec<f64> = y.iter().zip(&sw).map(|(a, s)| a * s).collect();
    // One step from a given power: returns (beta, gamma, t of gamma).
    let step = |alpha: f64| -> std::result::Result<(f64, f64, f64), String> {
        let (_, base) = least_squares(&box_tidwell_design(x, &sw, j, alpha, false), &ys)?;
        let (qr, aug) = least_squares(&box_tidwell_design(x, &sw, j, alpha, true), &ys)?;
        let beta = base.coefficients[j];
        let gamma = aug.coefficients[p];
        let sse = super::sum_sq(&aug.residuals);
        let df = (n - p - 1) as f64;
        let se = (sse / df * qr.unscaled_covariance().get(p, p)).sqrt();
        let t = if se > 0.0 { gamma / se } else { f64::INFINITY * gamma.signum() };
        Ok((beta, gamma, t))
    };
    let (beta0, gamma0, t0) = match step(1.0) {
        Ok(v) => v,
        Err(e) => return CheckOutcome::Unavailable(e),
    };
    if !positive(beta0.abs()) || !t0.is_finite() {
        return CheckOutcome::Unavailable(format!(
            "{name} has no linear effect to build a power on, or the added term fits exactly"
        ));
    }
    let score_df = n - p - 1;
    let score_p = dist::t_two_sided_p(t0, score_df as f64);
    let one_step = 1.0 + gamma0 / beta0;
    let mut alpha = one_step;
    let mut converged = false;
    let mut iterations = 1;
    while iterations < 50 && alpha.is_finite() && alpha.abs() <= 10.0 {
        let Ok((b, g, _)) = step(alpha) else { break };
        if !positive(b.abs()) {
            break;
        }
        let next = alpha + g / b;
        iterations += 1;
        let done = (next - alpha).abs() <= 1e-6 * alpha.abs().max(1.0);
        alpha = next;
        if done {
            converged = true;
            break;
        }
    }
    // Box & Tidwell's estimate is the first step; the iteration refines it when it settles, and
    // otherwise the first step is reported with `converged` false.
    let estimate = if converged { alpha } else { one_step };
    let verdict = if score_p < alpha_level {
        Verdict::new(
            VerdictLevel::Watch,
            "Box-Tidwell score test (t test of the added x·ln x term)",
            t0,
            Some(score_p),
            format!("p below {alpha_level} counts as evidence of curvature"),
            format!(
                "{name} acts on the response along a curve (t = {}, p = {}); a power near {}{} may fit better, and {} is the nearest simple choice.",
                fmt4(t0),
                fmt4(score_p),
                fmt4(estimate),
                if converged { "" } else { " (the iteration did not settle, so treat it as rough)" },
                power_label(name, nearest_ladder(estimate))
            ),
        )
    } else {
        Verdict::new(
            VerdictLevel::Clear,
            "Box-Tidwell score test (t test of the added x·ln x term)",
            t0,
            Some(score_p),
            format!("p below {alpha_level} counts as evidence of curvature"),
            format!(
                "No evidence that {name} needs a power transformation (t = {}, p = {}).",
                fmt4(t0),
                fmt4(score_p)
            ),
        )
    };
    CheckOutcome::Ok(BoxTidwell {
        one_step,
        estimate,
        iterations,
        converged,
        score_t: t0,
        score_df,
        score_p,
        verdict,
    })
}

/// The member of [`LADDER`] nearest a power.
fn nearest_ladder(power: f64) -> f64 {
    LADDER.iter().copied().min_by(|a, b| (a - power).abs().total_cmp(&(b - power).abs())).unwrap_or(1.0)
}

/// Box-Tidwell for every positive predictor column of the working model.
pub(crate) fn box_tidwell_checks(w: &Working, alpha: f64) -> Vec<Named<BoxTidwell>> {
    w.predictor_columns()
        .into_iter()
        .filter(|&j| w.x_raw.column(j).iter().all(|&v| v > 0.0))
        .map(|j| {
            Named::new(
                w.names[j].clone(),
                box_tidwell(&w.x_raw, &w.y_raw, w.weights.as_deref(), j, &w.names[j], alpha),
            )
        })
        .collect()
}

/// Duan's smearing estimate of the mean response at a prediction `z` on the scale
/// `y^power` (`ln y` for power 0), from the fit's residuals on that scale:
/// (1/m)·Σᵢ g⁻¹(z + eᵢ). `None` when the back-transform is undefined for some term.
pub fn smearing_estimate(z: f64, residuals: &[f64], power: f64) -> Option<f64> {
    if residuals.is_empty() {
        return None;
    }
    let mut sum = 0.0;
    for e in residuals {
        sum += inverse_power(z + e, power)?;
    }
    let v = sum / residuals.len() as f64;
    v.is_finite().then_some(v)
}

/// The inverse of `y ↦ y^power` (`ln y` at 0) on positive responses. For positive powers a
/// value below 0 maps to 0, the edge of the range; for negative powers it is undefined.
fn inverse_power(z: f64, power: f64) -> Option<f64> {
    if power == 0.0 {
        let v = z.exp();
        return v.is_finite().then_some(v);
    }
    if power == 1.0 {
        return Some(z);
    }
    if z <= 0.0 {
        return if power > 0.0 { Some(0.0) } else { None };
    }
    let v = z.powf(1.0 / power);
    v.is_finite().then_some(v)
}

/// `v^power` (`ln v` at 0).
fn apply_power(v: f64, power: f64) -> f64 {
    if power == 0.0 {
        v.ln()
    } else if power == 1.0 {
        v
    } else {
        v.powf(power)
    }
}

/// A readable label of a column at a power.
fn power_label(name: &str, power: f64) -> String {
    match power {
        -1.0 => format!("1/{name}"),
        -0.5 => format!("1/sqrt({name})"),
        0.0 => format!("log({name})"),
        0.5 => format!("sqrt({name})"),
        1.0 => name.to_owned(),
        2.0 => format!("{name}^2"),
        v => format!("{name}^{}", fmt4(v)),
    }
}

/// Diagnostics of a candidate specification fitted to all rows.
#[derive(Debug, Clone, PartialEq)]
pub struct CandidateSummary {
    r_squared: f64,
    shapiro_p: Option<f64>,
    breusch_pagan_p: Option<f64>,
    reset_p: Option<f64>,
    max_vif: Option<f64>,
}

impl CandidateSummary {
    /// R² on the candidate's own response scale.
    pub fn r_squared(&self) -> f64 {
        self.r_squared
    }
    /// Shapiro-Wilk p-value of its residuals.
    pub fn shapiro_p(&self) -> Option<f64> {
        self.shapiro_p
    }
    /// Breusch-Pagan (Koenker) p-value against its predictors.
    pub fn breusch_pagan_p(&self) -> Option<f64> {
        self.breusch_pagan_p
    }
    /// RESET p-value.
    pub fn reset_p(&self) -> Option<f64> {
        self.reset_p
    }
    /// Largest VIF.
    pub fn max_vif(&self) -> Option<f64> {
        self.max_vif
    }
}

/// One candidate specification of the search.
#[derive(Debug, Clone, PartialEq)]
pub struct SearchCandidate {
    rank: usize,
    label: String,
    response_power: f64,
    predictor_powers: Vec<(String, f64)>,
    is_current: bool,
    cv_rmse: Option<f64>,
    note: Option<String>,
    summary: Option<CandidateSummary>,
}

impl SearchCandidate {
    /// Rank by CV RMSE (1 is best); candidates without an RMSE come last.
    pub fn rank(&self) -> usize {
        self.rank
    }
    /// A readable label, e.g. "log(vacancy_pct); response as is".
    pub fn label(&self) -> &str {
        &self.label
    }
    /// The response power (1 = as is, 0 = log).
    pub fn response_power(&self) -> f64 {
        self.response_power
    }
    /// The power of each searched predictor column (1 = as is, 0 = log).
    pub fn predictor_powers(&self) -> &[(String, f64)] {
        &self.predictor_powers
    }
    /// Whether this is the model as currently specified.
    pub fn is_current(&self) -> bool {
        self.is_current
    }
    /// Cross-validated RMSE on the response scale of the model.
    pub fn cv_rmse(&self) -> Option<f64> {
        self.cv_rmse
    }
    /// Why the RMSE is missing, if it is.
    pub fn note(&self) -> Option<&str> {
        self.note.as_deref()
    }
    /// Diagnostics of the candidate fitted to all rows (top candidates only).
    pub fn summary(&self) -> Option<&CandidateSummary> {
        self.summary.as_ref()
    }
}

/// The ranked transformation search.
#[derive(Debug, Clone, PartialEq)]
pub struct TransformSearch {
    criterion: String,
    folds: usize,
    seed: u64,
    searched: Vec<String>,
    candidates: Vec<SearchCandidate>,
    notes: Vec<String>,
}

impl TransformSearch {
    /// The ranking criterion, in words.
    pub fn criterion(&self) -> &str {
        &self.criterion
    }
    /// Cross-validation folds.
    pub fn folds(&self) -> usize {
        self.folds
    }
    /// Seed of the folds.
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// The predictor columns whose powers were searched.
    pub fn searched(&self) -> &[String] {
        &self.searched
    }
    /// Every candidate, best first.
    pub fn candidates(&self) -> &[SearchCandidate] {
        &self.candidates
    }
    /// The best candidate.
    pub fn best(&self) -> Option<&SearchCandidate> {
        self.candidates.first()
    }
    /// Notes on what was and was not searched.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

/// SplitMix64 (Steele, Lea & Flood 2014), enough to shuffle rows reproducibly from a seed.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// A uniform index below `bound` (bound > 0), by rejection to avoid modulo bias.
    fn below(&mut self, bound: usize) -> usize {
        let b = bound as u64;
        let zone = u64::MAX - u64::MAX % b;
        loop {
            let v = self.next();
            if v < zone {
                return (v % b) as usize;
            }
        }
    }
}

/// Fold of each row: a seeded Fisher-Yates shuffle dealt round-robin into `k` folds.
fn fold_assignment(n: usize, k: usize, seed: u64) -> Vec<usize> {
    let mut order: Vec<usize> = (0..n).collect();
    let mut rng = SplitMix64(seed);
    for i in (1..n).rev() {
        let j = rng.below(i + 1);
        order.swap(i, j);
    }
    let mut fold = vec![0; n];
    for (pos, &row) in order.iter().enumerate() {
        fold[row] = pos % k;
    }
    fold
}

/// One candidate specification before evaluation.
#[derive(Debug, Clone)]
struct Spec {
    response_power: f64,
    powers: Vec<f64>,
}

/// Cross-validated RMSE of a specification on the response scale of the model.
fn cv_rmse(
    w: &Working,
    cols: &[usize],
    spec: &Spec,
    folds: &[usize],
    k: usize,
) -> std::result::Result<f64, String> {
    let x = candidate_design(w, cols, &spec.powers);
    let z: Vec<f64> = w.y_raw.iter().map(|&v| apply_power(v, spec.response_power)).collect();
    let n = w.n;
    let mut sq = 0.0;
    let mut wsum = 0.0;
    for f in 0..k {
        let train: Vec<usize> = (0..n).filter(|&i| folds[i] != f).collect();
        let test: Vec<usize> = (0..n).filter(|&i| folds[i] == f).collect();
        if test.is_empty() {
            continue;
        }
        let xt = x.select_rows(&train);
        let zt: Vec<f64> = train.iter().map(|&i| z[i]).collect();
        let wt: Option<Vec<f64>> = w.weights.as_ref().map(|wv| train.iter().map(|&i| wv[i]).collect());
        let (xs, zs) = super::scale_by_weights(&xt, &zt, wt.as_deref());
        let (_, ls) = least_squares(&xs, &zs).map_err(|e| format!("in one fold: {e}"))?;
        // Residuals on the transformed scale, unscaled, for the smearing estimate.
        let fitted_t = xt.mul_vec(&ls.coefficients);
        let resid_t: Vec<f64> = zt.iter().zip(&fitted_t).map(|(a, b)| a - b).collect();
        for &i in &test {
            let zi: f64 = (0..x.ncols()).map(|j| x.get(i, j) * ls.coefficients[j]).sum();
            let pred = if spec.response_power == 1.0 {
                zi
            } else {
                smearing_estimate(zi, &resid_t, spec.response_power)
                    .ok_or_else(|| "back-transformed predictions are undefined for some rows".to_owned())?
            };
            let wi = w.weights.as_ref().map_or(1.0, |wv| wv[i]);
            sq += wi * (w.y_raw[i] - pred).powi(2);
            wsum += wi;
        }
    }
    let v = (sq / wsum).sqrt();
    if v.is_finite() { Ok(v) } else { Err("the cross-validated error is not a finite number".to_owned()) }
}

/// The design with the searched columns `cols` raised to `powers`.
fn candidate_design(w: &Working, cols: &[usize], powers: &[f64]) -> Matrix {
    let mut x = w.x_raw.clone();
    for (&j, &pw) in cols.iter().zip(powers) {
        if pw != 1.0 {
            for v in x.column_mut(j) {
                *v = apply_power(*v, pw);
            }
        }
    }
    x
}

fn candidate_summary(w: &Working, cols: &[usize], spec: &Spec, alpha: f64) -> Option<CandidateSummary> {
    let x = candidate_design(w, cols, &spec.powers);
    let z: Vec<f64> = w.y_raw.iter().map(|&v| apply_power(v, spec.response_power)).collect();
    let cw =
        Working::fit_parts(x, z, w.weights.clone(), w.names.clone(), w.keys.clone(), w.intercept).ok()?;
    let total = if cw.intercept.is_some() {
        let (_, ys) = super::scale_by_weights(&cw.x_raw, &cw.y_raw, cw.weights.as_deref());
        match &cw.weights {
            None => super::centered_ss(&ys),
            Some(wt) => {
                let sw: f64 = wt.iter().sum();
                let m: f64 = cw.y_raw.iter().zip(wt).map(|(a, b)| a * b).sum::<f64>() / sw;
                cw.y_raw.iter().zip(wt).map(|(a, b)| b * (a - m) * (a - m)).sum()
            }
        }
    } else {
        super::sum_sq(&cw.y)
    };
    let r_squared = if total > 0.0 { (1.0 - cw.sse / total).clamp(0.0, 1.0) } else { 0.0 };
    Some(CandidateSummary {
        r_squared,
        shapiro_p: super::normality::shapiro_check(&cw, alpha).value().map(super::ShapiroWilk::p_value),
        breusch_pagan_p: super::variance::breusch_pagan_predictors(&cw, alpha)
            .value()
            .map(super::BreuschPagan::lm_p_value),
        reset_p: super::linearity::reset_check(&cw, alpha).value().map(super::Reset::p_value),
        max_vif: super::collinearity::vifs(&cw)
            .value()
            .and_then(|v| v.iter().map(super::Vif::vif).max_by(f64::total_cmp)),
    })
}

/// Counts the steps of a search and reports each one to the caller's progress callback.
struct Steps<'a> {
    done: usize,
    total: usize,
    control: SearchControl<'a>,
}

impl Steps<'_> {
    /// Whether the caller raised the cancel flag.
    fn cancelled(&self) -> bool {
        self.control.cancel.is_some_and(|c| c.load(Ordering::Relaxed))
    }

    /// Marks one more step as finished.
    fn step(&mut self) {
        self.done = (self.done + 1).min(self.total);
        if let Some(f) = self.control.progress {
            f(self.done, self.total);
        }
    }
}

/// The search was stopped by its cancel flag.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Cancelled;

/// The transformation search on the working model (see the module notes). It stops with
/// [`Cancelled`] between two candidates once the control's cancel flag is raised.
pub(crate) fn search(
    w: &Working,
    profile: &CheckOutcome<PowerProfile>,
    opts: &CheckOptions,
    control: SearchControl<'_>,
) -> std::result::Result<CheckOutcome<TransformSearch>, Cancelled> {
    let k = opts.cv_folds();
    let n = w.n;
    if n < k {
        return Ok(CheckOutcome::Unavailable(format!(
            "{k}-fold cross-validation needs at least {k} rows; there are {n}"
        )));
    }
    let largest_fold = n.div_ceil(k);
    if n - largest_fold <= w.p {
        return Ok(CheckOutcome::Unavailable(format!(
            "with {n} rows, a {k}-fold training set is too small for {} coefficients",
            w.p
        )));
    }
    let mut notes = Vec::new();
    let cols: Vec<usize> = w
        .predictor_columns()
        .into_iter()
        .filter(|&j| {
            let c = w.x_raw.column(j);
            let mut d = c.to_vec();
            d.sort_by(f64::total_cmp);
            d.dedup();
            w.untransformed[j] && c.iter().all(|&v| v > 0.0) && d.len() >= 3
        })
        .collect();
    let skipped: Vec<String> =
        w.predictor_columns().into_iter().filter(|j| !cols.contains(j)).map(|j| w.names[j].clone()).collect();
    if !skipped.is_empty() {
        notes.push(format!(
            "Kept as specified (already transformed, categorical, not always positive, or fewer than three distinct values): {}.",
            crate::error::join_names(&skipped)
        ));
    }
    if let Some(note) = &w.response_note {
        notes.push(note.clone());
    }
    let mut responses = vec![1.0];
    match profile {
        CheckOutcome::Ok(p) if p.family() == PowerFamily::BoxCox => {
            if let Some(s) = p.suggested().filter(|&s| s != 1.0) {
                responses.push(s);
            }
        }
        CheckOutcome::Ok(_) => notes.push(
            "The response has zero or negative values, so only predictor powers were searched.".to_owned(),
        ),
        CheckOutcome::Unavailable(_) => {
            notes.push("No response power was available, so only predictor powers were searched.".to_owned())
        }
    }
    let folds = fold_assignment(n, k, opts.cv_seed());
    let mut combined_present = false;
    let base = vec![1.0; cols.len()];
    // Every tried specification is one step (a repeated one too, though it is not evaluated
    // again), then one step per place among the top candidates that get a summary.
    let per_response = 1 + cols.len() * (LADDER.len() - 1) + usize::from(cols.len() > 1);
    let tried = responses.len() * per_response;
    let mut steps = Steps { done: 0, total: tried + opts.top_candidates().min(tried), control };
    let mut evaluated: Vec<(Spec, std::result::Result<f64, String>)> = Vec::new();
    let mut seen: Vec<(f64, Vec<f64>)> = Vec::new();
    let mut evaluate = |spec: Spec,
                        evaluated: &mut Vec<(Spec, std::result::Result<f64, String>)>,
                        steps: &mut Steps<'_>|
     -> std::result::Result<(), Cancelled> {
        if steps.cancelled() {
            return Err(Cancelled);
        }
        let key = (spec.response_power, spec.powers.clone());
        if !seen.contains(&key) {
            seen.push(key);
            let r = cv_rmse(w, &cols, &spec, &folds, k);
            evaluated.push((spec, r));
        }
        steps.step();
        Ok(())
    };
    for &rp in &responses {
        let start = evaluated.len();
        evaluate(Spec { response_power: rp, powers: base.clone() }, &mut evaluated, &mut steps)?;
        for c in 0..cols.len() {
            for &pw in LADDER.iter().filter(|&&pw| pw != 1.0) {
                let mut powers = base.clone();
                powers[c] = pw;
                evaluate(Spec { response_power: rp, powers }, &mut evaluated, &mut steps)?;
            }
        }
        // Each column at its best single power, all together.
        if cols.len() > 1 {
            let mut combined = base.clone();
            for (c, slot) in combined.iter_mut().enumerate() {
                let best = evaluated[start..]
                    .iter()
                    .filter(|(s, r)| {
                        r.is_ok() && s.powers.iter().enumerate().all(|(i, &p)| i == c || p == 1.0)
                    })
                    .min_by(|a, b| {
                        a.1.as_ref()
                            .unwrap_or(&f64::INFINITY)
                            .total_cmp(b.1.as_ref().unwrap_or(&f64::INFINITY))
                    });
                if let Some((s, _)) = best {
                    *slot = s.powers[c];
                }
            }
            if combined.iter().filter(|&&p| p != 1.0).count() > 1 {
                combined_present = true;
            }
            evaluate(Spec { response_power: rp, powers: combined }, &mut evaluated, &mut steps)?;
        }
    }
    if combined_present {
        notes.push(
            "Candidates that change several columns at once take each column's best single power on the same folds, so their cross-validated error is somewhat optimistic; prefer them only by a clear margin.".to_owned(),
        );
    }
    let mut order: Vec<usize> = (0..evaluated.len()).collect();
    order.sort_by(|&a, &b| {
        let va = evaluated[a].1.as_ref().copied().unwrap_or(f64::INFINITY);
        let vb = evaluated[b].1.as_ref().copied().unwrap_or(f64::INFINITY);
        va.total_cmp(&vb)
    });
    let mut candidates = Vec::with_capacity(order.len());
    for (rank0, &i) in order.iter().enumerate() {
        let (spec, res) = &evaluated[i];
        let mut parts: Vec<String> = cols
            .iter()
            .zip(&spec.powers)
            .filter(|(_, p)| **p != 1.0)
            .map(|(&j, &p)| power_label(&w.names[j], p))
            .collect();
        if parts.is_empty() {
            parts.push("predictors as specified".to_owned());
        }
        let response = if spec.response_power == 1.0 {
            "response as is".to_owned()
        } else {
            format!("response {}", power_label("y", spec.response_power))
        };
        let is_current = spec.response_power == 1.0 && spec.powers.iter().all(|&p| p == 1.0);
        let summary = if rank0 < opts.top_candidates() {
            if steps.cancelled() {
                return Err(Cancelled);
            }
            let summary = if res.is_ok() { candidate_summary(w, &cols, spec, opts.alpha()) } else { None };
            steps.step();
            summary
        } else {
            None
        };
        candidates.push(SearchCandidate {
            rank: rank0 + 1,
            label: format!("{}; {response}", parts.join(", ")),
            response_power: spec.response_power,
            predictor_powers: cols.iter().zip(&spec.powers).map(|(&j, &p)| (w.names[j].clone(), p)).collect(),
            is_current,
            cv_rmse: res.as_ref().ok().copied(),
            note: res.as_ref().err().cloned(),
            summary,
        });
    }
    // Repeated specifications leave fewer places than counted; finish the count step by step.
    while steps.done < steps.total {
        steps.step();
    }
    Ok(CheckOutcome::Ok(TransformSearch {
        criterion: format!(
            "{k}-fold cross-validated RMSE on the response scale of the model{}; transformed responses back-transformed with Duan's smearing estimate",
            if w.weights.is_some() { ", weighted by the case weights" } else { "" }
        ),
        folds: k,
        seed: opts.cv_seed(),
        searched: cols.iter().map(|&j| w.names[j].clone()).collect(),
        candidates,
        notes,
    }))
}

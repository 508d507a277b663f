//! Normality of the residuals: the Shapiro-Wilk test and normal quantile plot data.
//!
//! The W statistic and its p-value follow Royston (1995), "Remark AS R94: A remark on algorithm
//! AS 181: the W-test for normality", Applied Statistics 44(4), 547–551, for 3 ≤ n ≤ 5000:
//! coefficients from Royston's (1992) approximation, whose normal scores use the normal quantile
//! routine the algorithm specifies (Beasley & Springer 1977, algorithm AS 111), W computed as the
//! squared correlation between the ordered sample and the coefficients, and the p-value from
//! Royston's normalising transformation (exact for n = 3). The upper normal tail comes from
//! [`crate::dist::norm_sf`].

use super::{CheckOutcome, Verdict, Working, fmt4};
use crate::dist;

/// Smallest and largest sample size Royston's algorithm covers.
pub const SHAPIRO_MIN_N: usize = 3;
/// Largest sample size Royston's algorithm covers.
pub const SHAPIRO_MAX_N: usize = 5000;

/// The Shapiro-Wilk test of normality.
#[derive(Debug, Clone, PartialEq)]
pub struct ShapiroWilk {
    n: usize,
    w: f64,
    p_value: f64,
    verdict: Verdict,
}

impl ShapiroWilk {
    /// Sample size.
    pub fn n(&self) -> usize {
        self.n
    }
    /// The W statistic.
    pub fn w(&self) -> f64 {
        self.w
    }
    /// The p-value (Royston 1995).
    pub fn p_value(&self) -> f64 {
        self.p_value
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// The Shapiro-Wilk test of a sample, judged at `alpha`.
pub fn shapiro_wilk(sample: &[f64], alpha: f64) -> CheckOutcome<ShapiroWilk> {
    match shapiro_w_p(sample) {
        Err(e) => CheckOutcome::Unavailable(e),
        Ok((w, p)) => CheckOutcome::Ok(ShapiroWilk {
            n: sample.len(),
            w,
            p_value: p,
            verdict: Verdict::from_test(
                "Shapiro-Wilk W (Royston 1995)",
                w,
                p,
                alpha,
                &format!(
                    "No evidence against normally distributed errors (W = {}, p = {}); intervals and tests can be read at face value.",
                    fmt4(w),
                    fmt4(p)
                ),
                &format!(
                    "The residuals depart from a normal shape (W = {}, p = {}); with few rows, treat p-values and intervals as approximate.",
                    fmt4(w),
                    fmt4(p)
                ),
            ),
        }),
    }
}

/// The Shapiro-Wilk test of the working residuals.
pub(crate) fn shapiro_check(w: &Working, alpha: f64) -> CheckOutcome<ShapiroWilk> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    shapiro_wilk(&w.resid, alpha)
}

/// The polynomial `c[0] + c[1]·x + c[2]·x² + …`.
fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ci| acc * x + ci)
}

/// W and its p-value by Royston's algorithm AS R94 (see the module notes).
fn shapiro_w_p(sample: &[f64]) -> std::result::Result<(f64, f64), String> {
    let n = sample.len();
    if n < SHAPIRO_MIN_N {
        return Err(format!("the Shapiro-Wilk test needs at least {SHAPIRO_MIN_N} values; there are {n}"));
    }
    if n > SHAPIRO_MAX_N {
        return Err(format!(
            "the Shapiro-Wilk p-value is defined for at most {SHAPIRO_MAX_N} values (Royston 1995); there are {n}. Use the normal quantile plot instead"
        ));
    }
    if sample.iter().any(|v| !v.is_finite()) {
        return Err("the sample contains a value that is not a finite number".to_owned());
    }
    let mut x = sample.to_vec();
    x.sort_by(f64::total_cmp);
    let range = x[n - 1] - x[0];
    if !(range > 1e-19 && range > 1e-13 * x[n - 1].abs().max(x[0].abs())) {
        return Err("all values are equal, so their shape cannot be tested".to_owned());
    }
    // Royston (1992) coefficient approximation; c1 and c2 are the polynomials in 1/√n for the
    // two most extreme coefficients.
    const C1: [f64; 6] = [0.0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056];
    const C2: [f64; 6] = [0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633];
    let nn2 = n / 2;
    let an = n as f64;
    // a[i] is the coefficient of the (i+1)-th largest value (positive); the smallest values get
    // the same coefficients with opposite sign.
    let mut a = vec![0.0; nn2];
    if n == 3 {
        a[0] = std::f64::consts::FRAC_1_SQRT_2;
    } else {
        let an25 = an + 0.25;
        let m: Vec<f64> = (0..nn2).map(|i| ppnd_as111((i as f64 + 1.0 - 0.375) / an25)).collect();
        let summ2 = 2.0 * m.iter().map(|v| v * v).sum::<f64>();
        let ssumm2 = summ2.sqrt();
        let rsn = 1.0 / an.sqrt();
        let a1 = poly(&C1, rsn) - m[0] / ssumm2;
        let (i1, fac) = if n > 5 {
            let a2 = -m[1] / ssumm2 + poly(&C2, rsn);
            let fac = ((summ2 - 2.0 * m[0] * m[0] - 2.0 * m[1] * m[1])
                / (1.0 - 2.0 * a1 * a1 - 2.0 * a2 * a2))
                .sqrt();
            a[1] = a2;
            (2, fac)
        } else {
            let fac = ((summ2 - 2.0 * m[0] * m[0]) / (1.0 - 2.0 * a1 * a1)).sqrt();
            (1, fac)
        };
        a[0] = a1;
        for i in i1..nn2 {
            a[i] = -m[i] / fac;
        }
    }
    // W as the squared correlation between the ordered sample (scaled by its range) and the
    // coefficients; 1 − W is formed directly to keep precision when W is near 1.
    let coef = |i: usize| -> f64 {
        let j = n - 1 - i;
        match i.cmp(&j) {
            std::cmp::Ordering::Less => -a[i],
            std::cmp::Ordering::Greater => a[j],
            std::cmp::Ordering::Equal => 0.0,
        }
    };
    let sa = (0..n).map(coef).sum::<f64>() / an;
    let sx = x.iter().map(|v| v / range).sum::<f64>() / an;
    let (mut ssa, mut ssx, mut sax) = (0.0, 0.0, 0.0);
    for (i, xi) in x.iter().enumerate() {
        let asa = coef(i) - sa;
        let xsx = xi / range - sx;
        ssa += asa * asa;
        ssx += xsx * xsx;
        sax += asa * xsx;
    }
    let ssassx = (ssa * ssx).sqrt();
    let w1 = ((ssassx - sax) * (ssassx + sax) / (ssa * ssx)).max(0.0);
    let w = 1.0 - w1;
    if n == 3 {
        // Exact for n = 3: p = 1 − (6/π)·arccos(√W), with W ≥ 3/4 in theory.
        if w < 0.75 {
            return Ok((0.75, 0.0));
        }
        let p = 1.0 - 6.0 / std::f64::consts::PI * w.sqrt().acos();
        return Ok((w, p.clamp(0.0, 1.0)));
    }
    if w1 <= 0.0 {
        return Ok((w, 1.0));
    }
    let y = w1.ln();
    let (yy, m, s) = if n <= 11 {
        let gamma = poly(&[-2.273, 0.459], an);
        if y >= gamma {
            // Beyond the range of the transformation: the p-value is below 1e-19.
            return Ok((w, 1e-19));
        }
        let m = poly(&[0.5440, -0.39978, 0.025054, -6.714e-4], an);
        let s = poly(&[1.3822, -0.77857, 0.062767, -0.0020322], an).exp();
        (-(gamma - y).ln(), m, s)
    } else {
        let xx = an.ln();
        let m = poly(&[-1.5861, -0.31082, -0.083751, 0.0038915], xx);
        let s = poly(&[-0.4803, -0.082676, 0.0030302], xx).exp();
        (y, m, s)
    };
    let p = dist::norm_sf((yy - m) / s);
    Ok((w, p.clamp(0.0, 1.0)))
}

/// The normal quantile of `p` by Beasley & Springer (1977), "Algorithm AS 111: the percentage
/// points of the normal distribution", Applied Statistics 26(1), 118–121 — the routine Royston's
/// algorithm is specified with (about seven correct digits). Used only for the Shapiro-Wilk
/// coefficients, so that W agrees with the published algorithm to working precision.
fn ppnd_as111(p: f64) -> f64 {
    const A: [f64; 4] = [2.50662823884, -18.61500062529, 41.39119773534, -25.44106049637];
    const B: [f64; 4] = [-8.47351093090, 23.08336743743, -21.06224101826, 3.13082909833];
    const C: [f64; 4] = [-2.78718931138, -2.29796479134, 4.85014127135, 2.32121276858];
    const D: [f64; 2] = [3.54388924762, 1.63706781897];
    let q = p - 0.5;
    if q.abs() <= 0.42 {
        let r = q * q;
        return q * (((A[3] * r + A[2]) * r + A[1]) * r + A[0])
            / ((((B[3] * r + B[2]) * r + B[1]) * r + B[0]) * r + 1.0);
    }
    let r = if q > 0.0 { 1.0 - p } else { p };
    if r <= 0.0 {
        return 0.0;
    }
    let r = (-r.ln()).sqrt();
    let v = (((C[3] * r + C[2]) * r + C[1]) * r + C[0]) / ((D[1] * r + D[0]) * r + 1.0);
    if q < 0.0 { -v } else { v }
}

/// One point of the normal quantile plot.
#[derive(Debug, Clone, PartialEq)]
pub struct QqPoint {
    key: String,
    theoretical: f64,
    residual: f64,
}

impl QqPoint {
    /// Region key of the row.
    pub fn key(&self) -> &str {
        &self.key
    }
    /// Normal quantile at the row's plotting position.
    pub fn theoretical(&self) -> f64 {
        self.theoretical
    }
    /// The row's standardized (internally studentized) residual.
    pub fn residual(&self) -> f64 {
        self.residual
    }
}

/// Normal quantile plot data: standardized residuals in increasing order against normal
/// quantiles at Blom's (1958) plotting positions `(i − 3/8)/(n + 1/4)`.
#[derive(Debug, Clone, PartialEq)]
pub struct QqPlot {
    positions: String,
    points: Vec<QqPoint>,
    omitted: Vec<String>,
}

impl QqPlot {
    /// The plotting-position rule, in words.
    pub fn positions(&self) -> &str {
        &self.positions
    }
    /// Points in increasing order of residual.
    pub fn points(&self) -> &[QqPoint] {
        &self.points
    }
    /// Keys of rows left out because their standardized residual is undefined (leverage 1).
    pub fn omitted(&self) -> &[String] {
        &self.omitted
    }
}

/// Normal quantile plot data of the working residuals.
pub(crate) fn qq_plot(w: &Working) -> std::result::Result<QqPlot, String> {
    if let Some(reason) = w.residual_problem() {
        return Err(reason);
    }
    let (internal, _) = super::residuals::studentized(w);
    let mut rows: Vec<(String, f64)> = Vec::with_capacity(w.n);
    let mut omitted = Vec::new();
    for (k, r) in w.keys.iter().zip(&internal) {
        match r {
            Some(v) => rows.push((k.clone(), *v)),
            None => omitted.push(k.clone()),
        }
    }
    if rows.len() < 2 {
        return Err("fewer than two rows have a defined standardized residual".to_owned());
    }
    rows.sort_by(|a, b| a.1.total_cmp(&b.1));
    let m = rows.len() as f64;
    let points = rows
        .into_iter()
        .enumerate()
        .map(|(i, (key, residual))| QqPoint {
            key,
            theoretical: dist::norm_quantile((i as f64 + 1.0 - 0.375) / (m + 0.25)),
            residual,
        })
        .collect();
    Ok(QqPlot { positions: "Blom (1958): (i - 3/8) / (n + 1/4)".to_owned(), points, omitted })
}

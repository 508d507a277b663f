# Generator of the reference JSON fixtures in tests/fixtures/, computed with pinned numpy, scipy and statsmodels.
"""Write every reference fixture that the Rust tests compare against.

Run from anywhere:

    python3 -m pip install -r tests/generate/requirements.txt
    python3 tests/generate/make_fixtures.py

The output is deterministic: every synthetic table comes from a seeded numpy
Generator, keys are written in a fixed order and floats are written by the json
module with repr precision, so two runs give byte-identical files.

Besides the library values, the generator recomputes the central quantities of
every fit and diagnostics case in exact rational arithmetic (Python fractions,
applied to the very same double inputs) and stores the largest relative
difference under "exact_check". That tells a reader how many digits of each
fixture value are trustworthy before choosing a test tolerance.
"""

import json
import math
import os
import sys
from fractions import Fraction
from importlib import metadata
from pathlib import Path

import numpy as np
import pandas as pd
import scipy
import statsmodels
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import optimize, stats
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.diagnostic import het_breuschpagan, linear_reset
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor

GENERATOR = "tests/generate/make_fixtures.py"
HERE = Path(__file__).resolve().parent
ROOT = HERE.parent.parent
FIXTURES = ROOT / "tests" / "fixtures"

# Largest relative difference between a library value and exact arithmetic that the
# generator accepts before it refuses to write a fixture.
EXACT_CHECK_LIMIT = 1e-7


# ---------------------------------------------------------------------------
# Version pinning and output helpers.
# ---------------------------------------------------------------------------


def check_versions():
    """Refuse to run with library versions other than the pinned ones."""
    pins = {}
    for line in (HERE / "requirements.txt").read_text().splitlines():
        line = line.split("#", 1)[0].strip()
        if "==" in line:
            name, version = line.split("==", 1)
            pins[name.strip().lower()] = version.strip()
    wrong = []
    for name, version in sorted(pins.items()):
        try:
            installed = metadata.version(name)
        except metadata.PackageNotFoundError:
            installed = "not installed"
        if installed != version:
            wrong.append(f"{name}: pinned {version}, found {installed}")
    if wrong and os.environ.get("WARDCAST_FIXTURES_ANY_VERSION") != "1":
        sys.exit(
            "make_fixtures.py: installed versions differ from tests/generate/requirements.txt:\n  "
            + "\n  ".join(wrong)
            + "\nInstall the pins, or set WARDCAST_FIXTURES_ANY_VERSION=1 to write anyway."
        )


def versions():
    return (
        f"numpy {np.__version__}, scipy {scipy.__version__}, "
        f"statsmodels {statsmodels.__version__}, pandas {pd.__version__}"
    )


def fl(v):
    """Convert a scalar to a Python float, refusing NaN and infinity."""
    v = float(v)
    if not math.isfinite(v):
        raise ValueError(f"non-finite value {v!r} would be written to a fixture")
    return v


def fls(a):
    return [fl(v) for v in np.asarray(a, dtype=float).ravel()]


def mat(a):
    a = np.asarray(a, dtype=float)
    return [fls(row) for row in a]


def write(rel, obj):
    path = FIXTURES / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    text = json.dumps(obj, indent=1, allow_nan=False, ensure_ascii=True) + "\n"
    path.write_text(text)
    print(f"wrote {path.relative_to(ROOT)} ({len(text)} bytes)")


def inputs(names, y, x, weights, intercept):
    return {
        "intercept": bool(intercept),
        "names": list(names),
        "n": int(len(y)),
        "y": fls(y),
        "x": mat(x),
        "weights": None if weights is None else fls(weights),
    }


def design(x, intercept):
    x = np.asarray(x, dtype=float)
    return sm.add_constant(x, has_constant="add") if intercept else x


# ---------------------------------------------------------------------------
# Exact rational least squares, used only to measure the fixtures' accuracy.
# ---------------------------------------------------------------------------


def frac_inverse(a):
    """Gauss-Jordan inverse of a square matrix of Fractions."""
    k = len(a)
    m = [list(row) + [Fraction(int(i == j)) for j in range(k)] for i, row in enumerate(a)]
    for col in range(k):
        piv = next(r for r in range(col, k) if m[r][col] != 0)
        m[col], m[piv] = m[piv], m[col]
        p = m[col][col]
        m[col] = [v / p for v in m[col]]
        for r in range(k):
            if r != col and m[r][col] != 0:
                f = m[r][col]
                m[r] = [vr - f * vc for vr, vc in zip(m[r], m[col])]
    return [row[k:] for row in m]


class ExactFit:
    """Weighted least squares in exact rational arithmetic on double inputs."""

    def __init__(self, y, exog, weights=None):
        self.n, self.k = exog.shape
        self.X = [[Fraction(float(v)) for v in row] for row in exog]
        self.y = [Fraction(float(v)) for v in y]
        self.w = [Fraction(1)] * self.n if weights is None else [Fraction(float(v)) for v in weights]
        xtx = [
            [sum(self.w[i] * self.X[i][a] * self.X[i][b] for i in range(self.n)) for b in range(self.k)]
            for a in range(self.k)
        ]
        xty = [sum(self.w[i] * self.X[i][a] * self.y[i] for i in range(self.n)) for a in range(self.k)]
        self.ainv = frac_inverse(xtx)
        self.beta = [sum(self.ainv[a][b] * xty[b] for b in range(self.k)) for a in range(self.k)]
        self.resid = [self.y[i] - sum(self.X[i][a] * self.beta[a] for a in range(self.k)) for i in range(self.n)]
        self.ssr = sum(self.w[i] * self.resid[i] ** 2 for i in range(self.n))
        self.df_resid = self.n - self.k
        self.scale = self.ssr / self.df_resid

    def ainv_x(self, i):
        return [sum(self.ainv[a][b] * self.X[i][b] for b in range(self.k)) for a in range(self.k)]

    def hat(self):
        out = []
        for i in range(self.n):
            v = self.ainv_x(i)
            out.append(self.w[i] * sum(self.X[i][a] * v[a] for a in range(self.k)))
        return out


def sqrt_signed(frac_sq, sign=1):
    return math.copysign(math.sqrt(float(frac_sq)), sign)


def max_rel(lib, exact):
    lib = np.asarray(lib, dtype=float).ravel()
    exact = np.asarray(exact, dtype=float).ravel()
    denom = np.maximum(np.abs(exact), np.finfo(float).tiny)
    return float(np.max(np.abs(lib - exact) / denom))


def check_limit(case, report):
    bad = {k: v for k, v in report.items() if v > EXACT_CHECK_LIMIT and not k.endswith("_raw_response")}
    if bad:
        sys.exit(f"make_fixtures.py: {case}: library values differ from exact arithmetic: {bad}")


# ---------------------------------------------------------------------------
# Input tables.
# ---------------------------------------------------------------------------


def load_longley():
    d = sm.datasets.longley.load_pandas()
    return {
        "names": list(d.exog.columns),
        "y": d.endog.to_numpy(dtype=float),
        "x": d.exog.to_numpy(dtype=float),
        "weights": None,
        "intercept": True,
        "data_source": "statsmodels.api.datasets.longley.load_pandas() (shipped inside statsmodels; "
        "response TOTEMP, the same 16 rows as the NIST StRD Longley file)",
    }


def load_stackloss():
    d = sm.datasets.stackloss.load_pandas()
    return {
        "names": list(d.exog.columns),
        "y": d.endog.to_numpy(dtype=float),
        "x": d.exog.to_numpy(dtype=float),
        "weights": None,
        "intercept": True,
        "data_source": "statsmodels.api.datasets.stackloss.load_pandas() (shipped inside statsmodels; "
        "response STACKLOSS)",
    }


def make_synthetic_ols():
    rng = np.random.default_rng(20240101)
    n = 40
    income = np.round(rng.uniform(25.0, 90.0, n), 3)
    unemployment = np.round(rng.uniform(2.0, 15.0, n), 3)
    vacancy = np.round(0.08 * unemployment + rng.uniform(1.0, 18.0, n), 3)
    y = 60.0 - 0.45 * income + 2.2 * unemployment + 0.9 * vacancy + rng.normal(0.0, 4.0, n)
    return {
        "names": ["income", "unemployment", "vacancy"],
        "y": np.round(y, 4),
        "x": np.column_stack([income, unemployment, vacancy]),
        "weights": None,
        "intercept": True,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240101), n = 40, 3 predictors",
    }


def make_synthetic_wls():
    rng = np.random.default_rng(20240202)
    n = 50
    population = rng.integers(500, 20001, n).astype(float)
    income = np.round(rng.uniform(25.0, 90.0, n), 1)
    unemployment = np.round(rng.uniform(2.0, 15.0, n), 2)
    vacancy = np.round(rng.uniform(1.0, 20.0, n), 2)
    # The noise of a per-10,000 rate shrinks with the district population.
    noise = rng.normal(0.0, 1.0, n) * 4.0 * np.sqrt(10000.0 / population)
    y = 80.0 - 0.6 * income + 3.0 * unemployment + 1.5 * vacancy + noise
    return {
        "names": ["income", "unemployment", "vacancy"],
        "y": np.round(y, 3),
        "x": np.column_stack([income, unemployment, vacancy]),
        "weights": population,
        "intercept": True,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240202), n = 50, 3 predictors, "
        "weights are district populations drawn from 500..20000",
    }


def make_synthetic_noint():
    rng = np.random.default_rng(20240303)
    n = 30
    a = np.round(rng.uniform(1.0, 10.0, n), 3)
    b = np.round(rng.uniform(0.0, 5.0, n), 3)
    c = np.round(rng.normal(3.0, 1.5, n), 3)
    y = 2.0 * a - 1.0 * b + 0.5 * c + rng.normal(0.0, 1.0, n)
    return {
        "names": ["a", "b", "c"],
        "y": np.round(y, 4),
        "x": np.column_stack([a, b, c]),
        "weights": None,
        "intercept": False,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240303), n = 30, 3 predictors, "
        "fitted without an intercept",
    }


def make_synthetic_influence():
    rng = np.random.default_rng(20240404)
    n = 30
    x1 = np.round(rng.uniform(10.0, 50.0, n), 2)
    x2 = np.round(rng.normal(20.0, 4.0, n), 2)
    x3 = np.round(rng.uniform(0.0, 100.0, n), 2)
    y = 12.0 + 0.5 * x1 + 1.5 * x2 - 0.1 * x3 + rng.normal(0.0, 3.0, n)
    # Row 7 is planted far out in x1 and well below the plane: high leverage and influence.
    x1[7] = 120.0
    y[7] = 12.0 + 0.5 * 120.0 + 1.5 * x2[7] - 0.1 * x3[7] - 30.0
    return {
        "names": ["x1", "x2", "x3"],
        "y": np.round(y, 4),
        "x": np.column_stack([x1, x2, x3]),
        "weights": None,
        "intercept": True,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240404), n = 30, 3 predictors, "
        "row 7 (0-based) planted at x1 = 120 and 30 below the true plane",
    }


def make_synthetic_hetero():
    rng = np.random.default_rng(20240505)
    n = 60
    x1 = np.round(rng.uniform(1.0, 10.0, n), 3)
    x2 = np.round(rng.normal(5.0, 1.0, n), 3)
    # The error standard deviation grows with x1, so the variance is not constant.
    y = 10.0 + 2.0 * x1 + 1.0 * x2 + rng.normal(0.0, 1.0, n) * 0.4 * x1
    return {
        "names": ["x1", "x2"],
        "y": np.round(y, 4),
        "x": np.column_stack([x1, x2]),
        "weights": None,
        "intercept": True,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240505), n = 60, 2 predictors, "
        "error standard deviation 0.4 * x1",
    }


def make_selection_table():
    rng = np.random.default_rng(20240606)
    n = 60
    income = rng.normal(50.0, 12.0, n)
    unemployment = rng.normal(8.0, 2.5, n)
    youth_share = 0.15 * unemployment + rng.normal(12.0, 2.0, n)
    vacancy = rng.uniform(2.0, 20.0, n)
    outlets = 0.6 * vacancy / 4.0 + rng.normal(3.0, 1.0, n)
    seats = rng.normal(25.0, 6.0, n)
    outages = 0.3 * vacancy + rng.normal(4.0, 1.5, n)
    density = rng.uniform(1.0, 12.0, n)
    y = (
        90.0
        - 0.7 * income
        + 2.5 * unemployment
        + 1.2 * vacancy
        + 1.5 * outlets
        - 0.2 * seats
        + rng.normal(0.0, 5.0, n)
    )
    x = np.column_stack([income, unemployment, youth_share, vacancy, outlets, seats, outages, density])
    return {
        "names": ["income", "unemployment", "youth_share", "vacancy", "outlets", "seats", "outages", "density"],
        "y": np.round(y, 4),
        "x": np.round(x, 3),
        "weights": None,
        "intercept": True,
        "data_source": "seeded synthetic table: numpy.random.default_rng(20240606), n = 60, 8 candidate "
        "predictors (income, unemployment, vacancy, outlets, seats carry effects; youth_share, outlets "
        "and outages are correlated with others; density is noise)",
    }


# ---------------------------------------------------------------------------
# Fit fixtures.
# ---------------------------------------------------------------------------


def fit_model(y, exog, weights):
    if weights is None:
        return sm.OLS(y, exog).fit()
    return sm.WLS(y, exog, weights=weights).fit()


def seq_rows(terms, sum_sq, mse, df_resid):
    rows = []
    for term, ss in zip(terms, sum_sq):
        f = ss / mse
        rows.append(
            {
                "term": term,
                "df": 1.0,
                "sum_sq": fl(ss),
                "mean_sq": fl(ss),
                "F": fl(f),
                "PR(>F)": fl(stats.f.sf(f, 1, df_resid)),
            }
        )
    return rows


def fit_fixture(case, t, x_new, w_new):
    names, y, x, weights, intercept = t["names"], t["y"], t["x"], t["weights"], t["intercept"]
    exog = design(x, intercept)
    res = fit_model(y, exog, weights)
    k0 = 1 if intercept else 0
    ex = ExactFit(y, exog, weights)

    # Sequential sums of squares from nested statsmodels fits, valid for OLS and WLS.
    ssr_prev = (
        fit_model(y, exog[:, :1], weights).ssr
        if intercept
        else float(np.sum((np.ones_like(y) if weights is None else weights) * y * y))
    )
    seq_ss = []
    for j in range(1, len(names) + 1):
        ssr_j = fit_model(y, exog[:, : k0 + j], weights).ssr
        seq_ss.append(ssr_prev - ssr_j)
        ssr_prev = ssr_j
    anova_nested = seq_rows(names, seq_ss, res.mse_resid, res.df_resid)

    anova_typ1 = None
    if weights is None:
        frame = pd.DataFrame(x, columns=names)
        frame["wardcast_response"] = y
        formula = "wardcast_response ~ " + " + ".join(names) + ("" if intercept else " - 1")
        fres = smf.ols(formula, frame).fit()
        if max_rel(fres.params.to_numpy(), res.params) > 1e-9:
            sys.exit(f"{case}: formula fit differs from array fit")
        table = anova_lm(fres, typ=1)
        anova_typ1 = []
        for term in names:
            row = table.loc[term]
            anova_typ1.append(
                {
                    "term": term,
                    "df": fl(row["df"]),
                    "sum_sq": fl(row["sum_sq"]),
                    "mean_sq": fl(row["mean_sq"]),
                    "F": fl(row["F"]),
                    "PR(>F)": fl(row["PR(>F)"]),
                }
            )
        gap = max_rel([r["sum_sq"] for r in anova_typ1], seq_ss)
        if gap > 1e-8:
            sys.exit(f"{case}: anova_lm typ=1 differs from nested fits by {gap}")

    partial = []
    exact_partial = []
    for j, term in enumerate(names):
        keep = [c for c in range(exog.shape[1]) if c != k0 + j]
        restricted = fit_model(y, exog[:, keep], weights)
        f_value, p_value, df_diff = res.compare_f_test(restricted)
        partial.append(
            {
                "term": term,
                "F": fl(f_value),
                "p": fl(p_value),
                "df_diff": fl(df_diff),
                "extra_ss": fl(restricted.ssr - res.ssr),
            }
        )
        exr = ExactFit(y, exog[:, keep], weights)
        exact_partial.append(float((exr.ssr - ex.ssr) / ex.scale))

    exog_new = design(x_new, intercept)
    pred = res.get_prediction(exog_new, weights=None if w_new is None else np.asarray(w_new, dtype=float))
    frame = pred.summary_frame(alpha=0.05)
    predict = {
        "x_new": mat(x_new),
        "weights_new": None if w_new is None else fls(w_new),
        "alpha": 0.05,
    }
    for col in ["mean", "mean_se", "mean_ci_lower", "mean_ci_upper", "obs_ci_lower", "obs_ci_upper"]:
        predict[col] = fls(frame[col].to_numpy())

    tss = res.centered_tss if intercept else res.uncentered_tss
    expected = {
        "nobs": fl(res.nobs),
        "params": fls(res.params),
        "bse": fls(res.bse),
        "tvalues": fls(res.tvalues),
        "pvalues": fls(res.pvalues),
        "conf_int_95": mat(res.conf_int(alpha=0.05)),
        "conf_int_90": mat(res.conf_int(alpha=0.10)),
        "cov_params": mat(res.cov_params()),
        "ssr": fl(res.ssr),
        "ess": fl(res.ess),
        "tss": fl(tss),
        "tss_kind": "centered" if intercept else "uncentered",
        "centered_tss": fl(res.centered_tss),
        "uncentered_tss": fl(res.uncentered_tss),
        "df_model": fl(res.df_model),
        "df_resid": fl(res.df_resid),
        "mse_resid": fl(res.mse_resid),
        "scale_sqrt": fl(math.sqrt(res.scale)),
        "rsquared": fl(res.rsquared),
        "rsquared_adj": fl(res.rsquared_adj),
        "fvalue": fl(res.fvalue),
        "f_pvalue": fl(res.f_pvalue),
        "llf": fl(res.llf),
        "aic": fl(res.aic),
        "bic": fl(res.bic),
        "fittedvalues": fls(res.fittedvalues),
        "resid": fls(res.resid),
        "anova_lm_typ1": anova_typ1,
        "anova_seq_nested": anova_nested,
        "partial_f": partial,
        "predict": predict,
    }

    exact_bse = [math.sqrt(float(ex.scale * ex.ainv[a][a])) for a in range(ex.k)]
    report = {
        "params": max_rel(res.params, [float(b) for b in ex.beta]),
        "bse": max_rel(res.bse, exact_bse),
        "ssr": max_rel(res.ssr, float(ex.ssr)),
        "resid": max_rel(res.resid, [float(r) for r in ex.resid]),
        "partial_f_F": max_rel([p["F"] for p in partial], exact_partial),
    }
    check_limit(case, report)

    calls = (
        f"{'statsmodels.api.WLS(y, exog, weights=w)' if weights is not None else 'statsmodels.api.OLS(y, exog)'}"
        ".fit() (default pinv solver) with exog = "
        + ("statsmodels.api.add_constant(x)" if intercept else "x (no constant)")
        + "; results attributes params, bse, tvalues, pvalues, conf_int(alpha), cov_params(), ssr, ess, "
        + ("centered_tss" if intercept else "uncentered_tss")
        + ", df_model, df_resid, mse_resid, sqrt(scale), rsquared, rsquared_adj, fvalue, f_pvalue, llf, aic, "
        "bic, fittedvalues, resid; "
        + (
            "statsmodels.stats.anova.anova_lm(statsmodels.formula.api.ols(formula, frame).fit(), typ=1); "
            if weights is None
            else "anova_lm_typ1 is null because anova_lm typ=1 ignores weights; "
        )
        + "anova_seq_nested from ssr differences of nested fits; partial_f from "
        "results.compare_f_test(restricted) with each predictor dropped in turn; "
        "predict from results.get_prediction(exog_new"
        + (", weights=weights_new" if w_new is not None else "")
        + ").summary_frame(alpha=0.05)"
    )
    doc = {
        "source": f"{t['data_source']}. Computed with {versions()}: {calls}.",
        "generator": GENERATOR,
        "conventions": {
            "llf": "Gaussian log-likelihood at the ML variance SSE/n"
            + (", plus 0.5 * sum(ln w) for weights" if weights is not None else ""),
            "aic": "-2 llf + 2 p, p = number of coefficients including the intercept (sigma not counted)",
            "bic": "-2 llf + ln(n) p, same p",
            "tss": "centered about the mean (weighted mean under weights)"
            if intercept
            else "uncentered (about zero) because there is no intercept; rsquared and fvalue use it",
        },
        "exact_check": {
            "method": "largest relative difference from exact rational arithmetic (Python fractions) "
            "on the same double inputs",
            **report,
        },
    }
    doc.update(inputs(names, y, x, weights, intercept))
    doc["expected"] = expected
    write(f"fit/{case}.json", doc)


# ---------------------------------------------------------------------------
# Diagnostics fixtures.
# ---------------------------------------------------------------------------

BOXCOX_LAMBDAS = [float(v) for v in np.round(np.arange(-2.0, 2.0001, 0.25), 2)]


def regression_boxcox_llf(lam, y, exog):
    """Box-Cox profile log-likelihood of the regression, -(n/2) ln(SSE/n) + (lam-1) sum ln y.

    With an intercept in exog the shift -1/lam of (y^lam - 1)/lam is absorbed by the
    intercept, so the regression is run on y^lam / lam. That avoids cancelling
    y^lam against 1, which loses digits when y^lam is far from 1.
    """
    n = len(y)
    z = np.log(y) if lam == 0.0 else y**lam / lam
    sse = sm.OLS(z, exog).fit().ssr
    return -0.5 * n * math.log(sse / n) + (lam - 1.0) * float(np.sum(np.log(y))), z, sse


def profile_summary(fun, lo=-5.0, hi=5.0):
    """Maximiser of a profile log-likelihood and its 95% likelihood interval."""
    opt = optimize.minimize_scalar(lambda v: -fun(v), bounds=(lo, hi), method="bounded",
                                   options={"xatol": 1e-10})
    lam_hat = float(opt.x)
    top = fun(lam_hat)
    cut = top - 0.5 * stats.chi2.ppf(0.95, 1)
    g = lambda v: fun(v) - cut  # noqa: E731
    lower = optimize.brentq(g, lo, lam_hat, xtol=1e-12) if g(lo) < 0 else None
    upper = optimize.brentq(g, lam_hat, hi, xtol=1e-12) if g(hi) < 0 else None
    return lam_hat, top, lower, upper


def diagnostics_fixture(case, t):
    names, y, x, intercept = t["names"], t["y"], t["x"], t["intercept"]
    assert intercept and t["weights"] is None
    n = len(y)
    exog = design(x, True)
    k = exog.shape[1]
    res = sm.OLS(y, exog).fit()
    resid = np.asarray(res.resid)
    fitted = np.asarray(res.fittedvalues)
    ex = ExactFit(y, exog)
    report = {}

    sw = stats.shapiro(resid)

    med = np.median(fitted)
    lower = fitted <= med
    lev = stats.levene(resid[lower], resid[~lower], center="median")

    bp = het_breuschpagan(resid, exog, robust=True)
    bp_fit = het_breuschpagan(resid, np.column_stack([np.ones(n), fitted]), robust=True)

    infl = OLSInfluence(res)
    hat = infl.hat_matrix_diag
    cooks_d, cooks_p = infl.cooks_distance
    dffits, dffits_cut = infl.dffits
    dfbetas = infl.dfbetas
    sri = infl.resid_studentized_internal
    sre = infl.resid_studentized_external

    # Exact influence measures from the rational fit.
    ehat = ex.hat()
    p_ = ex.k
    e_sri, e_sre, e_cook, e_dffits, e_dfbetas = [], [], [], [], []
    for i in range(n):
        e = ex.resid[i]
        h = ehat[i]
        sri_sq = e * e / (ex.scale * (1 - h))
        s_del_sq = (ex.ssr - e * e / (1 - h)) / (n - p_ - 1)
        sre_sq = e * e / (s_del_sq * (1 - h))
        sign = 1 if e >= 0 else -1
        e_sri.append(sqrt_signed(sri_sq, sign))
        e_sre.append(sqrt_signed(sre_sq, sign))
        e_cook.append(float(sri_sq * h / ((1 - h) * p_)))
        e_dffits.append(sqrt_signed(sre_sq * h / (1 - h), sign))
        v = ex.ainv_x(i)
        row = []
        for a in range(p_):
            num = v[a] * e / (1 - h)
            row.append(sqrt_signed(num * num / (s_del_sq * ex.ainv[a][a]), 1 if num >= 0 else -1))
        e_dfbetas.append(row)
    report["hat"] = max_rel(hat, [float(h) for h in ehat])
    report["student_resid_internal"] = max_rel(sri, e_sri)
    report["student_resid_external"] = max_rel(sre, e_sre)
    report["cooks_d"] = max_rel(cooks_d, e_cook)
    report["dffits"] = max_rel(dffits, e_dffits)
    report["dfbetas"] = max_rel(dfbetas, e_dfbetas)

    vif = {}
    e_vif = []
    for j, name in enumerate(names):
        vif[name] = fl(variance_inflation_factor(exog, j + 1))
        others = [c for c in range(k) if c != j + 1]
        aux = ExactFit(exog[:, j + 1], exog[:, others])
        xj = [Fraction(float(v)) for v in exog[:, j + 1]]
        mean = sum(xj) / n
        ctss = sum((v - mean) ** 2 for v in xj)
        e_vif.append(float(ctss / aux.ssr))
    report["vif"] = max_rel(list(vif.values()), e_vif)

    # RESET is invariant to an affine change of the response when the model has an
    # intercept: the fitted values change by the same map and the span of
    # [X, fitted^2, fitted^3] is unchanged. Powers of raw fitted values near 6e4
    # (Longley) make the augmented design so ill-conditioned that the library's
    # answer is wrong, so the test is applied to the fit of the standardized response.
    y_std = (y - np.mean(y)) / np.std(y)
    reset = linear_reset(sm.OLS(y_std, exog).fit(), power=[2, 3], use_f=True)
    reset_raw = linear_reset(res, power=[2, 3], use_f=True)
    aug = np.column_stack([exog, fitted**2, fitted**3])
    exa = ExactFit(y, aug)
    e_reset = float(((ex.ssr - exa.ssr) / 2) / (exa.ssr / (n - k - 2)))
    report["reset_F"] = max_rel(float(np.squeeze(reset.fvalue)), e_reset)
    report["reset_F_raw_response"] = max_rel(float(np.squeeze(reset_raw.fvalue)), e_reset)

    outl = np.asarray(res.outlier_test(method="bonf"))

    hc = {}
    xa = ex.X
    for kind in ["HC0", "HC1", "HC2", "HC3"]:
        hc[kind] = fls(sm.OLS(y, exog).fit(cov_type=kind).bse)
    # Exact sandwich standard errors.
    e_hc = {}
    for kind in ["HC0", "HC1", "HC2", "HC3"]:
        omega = []
        for i in range(n):
            e2 = ex.resid[i] ** 2
            if kind == "HC0":
                omega.append(e2)
            elif kind == "HC1":
                omega.append(e2 * Fraction(n, n - p_))
            elif kind == "HC2":
                omega.append(e2 / (1 - ehat[i]))
            else:
                omega.append(e2 / (1 - ehat[i]) ** 2)
        meat = [[sum(omega[i] * xa[i][a] * xa[i][b] for i in range(n)) for b in range(p_)] for a in range(p_)]
        tmp = [[sum(ex.ainv[a][c] * meat[c][b] for c in range(p_)) for b in range(p_)] for a in range(p_)]
        e_hc[kind] = [
            math.sqrt(float(sum(tmp[a][c] * ex.ainv[c][a] for c in range(p_)))) for a in range(p_)
        ]
        report[kind] = max_rel(hc[kind], e_hc[kind])

    if np.any(y <= 0):
        raise ValueError(f"{case}: Box-Cox needs a positive response")
    prof = []
    e_prof = []
    for lam in BOXCOX_LAMBDAS:
        llf, z, _sse = regression_boxcox_llf(lam, y, exog)
        prof.append(fl(llf))
        ez = ExactFit(z, exog)
        e_prof.append(-0.5 * n * math.log(float(ez.ssr) / n) + (lam - 1.0) * float(np.sum(np.log(y))))
    report["boxcox_profile_llf"] = max_rel(prof, e_prof)
    lam_hat, top, lo95, hi95 = profile_summary(lambda v: regression_boxcox_llf(v, y, exog)[0])

    bc_llf = [fl(stats.boxcox_llf(lam, y)) for lam in BOXCOX_LAMBDAS]
    ones = np.ones((n, 1))
    own = [regression_boxcox_llf(lam, y, ones)[0] for lam in BOXCOX_LAMBDAS]
    gap = max_rel(bc_llf, own)
    if gap > 1e-10:
        sys.exit(f"{case}: boxcox_llf differs from the profile formula by {gap}")
    _, bc_lambda = stats.boxcox(y)

    # Yeo-Johnson on the response shifted by its middle order statistic, so the
    # sample holds negatives and an exact zero.
    yj_data = y - np.sort(y)[n // 2]
    yj_llf = [fl(stats.yeojohnson_llf(lam, yj_data)) for lam in BOXCOX_LAMBDAS]
    _, yj_lambda = stats.yeojohnson(yj_data)

    check_limit(case, report)

    expected = {
        "params": fls(res.params),
        "fittedvalues": fls(fitted),
        "resid": fls(resid),
        "shapiro": {"W": fl(sw.statistic), "pvalue": fl(sw.pvalue)},
        "brown_forsythe": {
            "groups_rule": "fitted <= median fitted -> lower",
            "median_fitted": fl(med),
            "lower_rows": [int(i) for i in np.flatnonzero(lower)],
            "n_lower": int(lower.sum()),
            "n_upper": int((~lower).sum()),
            "levene_W": fl(lev.statistic),
            "levene_p": fl(lev.pvalue),
        },
        "breusch_pagan_predictors": {
            "lm": fl(bp[0]),
            "lm_pvalue": fl(bp[1]),
            "fvalue": fl(bp[2]),
            "f_pvalue": fl(bp[3]),
        },
        "breusch_pagan_fitted": {
            "lm": fl(bp_fit[0]),
            "lm_pvalue": fl(bp_fit[1]),
            "fvalue": fl(bp_fit[2]),
            "f_pvalue": fl(bp_fit[3]),
        },
        "influence": {
            "hat": fls(hat),
            "cooks_d": fls(cooks_d),
            "cooks_p": fls(cooks_p),
            "dffits": fls(dffits),
            "dffits_threshold": fl(dffits_cut),
            "dfbetas": mat(dfbetas),
            "student_resid_internal": fls(sri),
            "student_resid_external": fls(sre),
        },
        "vif": vif,
        "reset": {
            "F": fl(np.squeeze(reset.fvalue)),
            "pvalue": fl(reset.pvalue),
            "df_num": fl(reset.df_num),
            "df_denom": fl(reset.df_denom),
            "response": "standardized (y - mean) / sd, which leaves the statistic unchanged",
            "F_raw_response": fl(np.squeeze(reset_raw.fvalue)),
        },
        "outlier_bonf": {
            "student_resid": fls(outl[:, 0]),
            "unadj_p": fls(outl[:, 1]),
            "bonf_p": fls(outl[:, 2]),
        },
        "bse_nonrobust": fls(res.bse),
        "hc": hc,
        "boxcox_profile": {
            "lambdas": BOXCOX_LAMBDAS,
            "llf": prof,
            "lambda_max": fl(lam_hat),
            "llf_max": fl(top),
            "ci95": [None if lo95 is None else fl(lo95), None if hi95 is None else fl(hi95)],
        },
        "boxcox_llf_intercept_only": {
            "lambdas": BOXCOX_LAMBDAS,
            "llf": bc_llf,
            "lambda_mle": fl(bc_lambda),
        },
        "yeojohnson": {
            "data": fls(yj_data),
            "lambdas": BOXCOX_LAMBDAS,
            "llf": yj_llf,
            "lambda_mle": fl(yj_lambda),
        },
        "corr": mat(np.corrcoef(np.asarray(x, dtype=float), rowvar=False)),
    }
    calls = (
        "res = statsmodels.api.OLS(y, add_constant(x)).fit(); scipy.stats.shapiro(res.resid); "
        "scipy.stats.levene(resid[lower], resid[upper], center='median') with lower = fitted <= "
        "numpy.median(fitted); statsmodels.stats.diagnostic.het_breuschpagan(resid, add_constant(x), "
        "robust=True) and het_breuschpagan(resid, column_stack([1, fitted]), robust=True); "
        "statsmodels.stats.outliers_influence.OLSInfluence(res): hat_matrix_diag, cooks_distance, dffits, "
        "dfbetas, resid_studentized_internal, resid_studentized_external; "
        "variance_inflation_factor(add_constant(x), j) for j = 1..k; "
        "statsmodels.stats.diagnostic.linear_reset(OLS((y - mean(y)) / std(y), add_constant(x)).fit(), "
        "power=[2, 3], use_f=True) (F_raw_response: the same call on res, kept to show its rounding "
        "damage on badly scaled responses); "
        "res.outlier_test(method='bonf'); OLS(...).fit(cov_type='HC0'..'HC3').bse; "
        "Box-Cox regression profile -(n/2) ln(SSE(lambda)/n) + (lambda-1) sum ln y with SSE from "
        "OLS of y^lambda/lambda (ln y at 0) on add_constant(x), maximiser by "
        "scipy.optimize.minimize_scalar(bounded, xatol=1e-10) and 95% interval ends by scipy.optimize.brentq; "
        "scipy.stats.boxcox_llf(lambda, y) and scipy.stats.boxcox(y) for the intercept-only case; "
        "scipy.stats.yeojohnson_llf(lambda, data) and scipy.stats.yeojohnson(data); "
        "numpy.corrcoef(x, rowvar=False)"
    )
    doc = {
        "source": f"{t['data_source']}. Computed with {versions()}: {calls}.",
        "generator": GENERATOR,
        "notes": {
            "dfbetas": "rows are observations, columns follow params (intercept first)",
            "cooks_p": "scipy.stats.f.sf(cooks_d, p, n - p) as statsmodels reports it; the percentile is 1 - cooks_p",
            "lambda_max": "optimizer output searched on [-5, 5], trust about 1e-7 absolute; ci95 ends by brentq "
            "to 1e-12, null when that end lies outside [-5, 5]",
            "lambda_mle": "scipy optimizer output (brent, default tolerance), trust about 1e-7 absolute",
            "yeojohnson.data": "y minus its middle order statistic sort(y)[n // 2], so it holds negatives and a zero",
        },
        "exact_check": {
            "method": "largest relative difference from exact rational arithmetic (Python fractions) "
            "on the same double inputs",
            **report,
        },
    }
    doc.update(inputs(names, y, x, None, True))
    doc["expected"] = expected
    write(f"diagnostics/{case}.json", doc)


def shapiro_fixture():
    rng = np.random.default_rng(20240707)
    sizes = [3, 4, 5, 7, 11, 12, 20, 50, 100, 1000, 5000]
    cases = []
    for kind in ["normal", "skewed"]:
        for n in sizes:
            if kind == "normal":
                data = rng.normal(10.0, 2.0, n)
            else:
                data = rng.gamma(4.0, 1.0, n)
            data = np.round(data, 6)
            r = stats.shapiro(data)
            cases.append({"kind": kind, "n": n, "data": fls(data), "W": fl(r.statistic), "pvalue": fl(r.pvalue)})
    doc = {
        "source": f"Seeded samples from numpy.random.default_rng(20240707): normal(10, 2) and gamma(shape 4, "
        f"scale 1) (skewed), rounded to 6 decimals. Computed with {versions()}: scipy.stats.shapiro(data) "
        "(Royston's AS R94 algorithm).",
        "generator": GENERATOR,
        "cases": cases,
    }
    write("diagnostics/shapiro.json", doc)


# ---------------------------------------------------------------------------
# Distribution tails.
# ---------------------------------------------------------------------------

DFS = [1.0, 2.0, 3.0, 5.0, 10.0, 30.0, 100.0, 1000.0, 1e5]
SF_TARGETS = [0.3, 0.05, 1e-3, 1e-6, 1e-9, 1e-12]
LOWER_P = [1e-12, 1e-9, 1e-6, 1e-3, 0.025, 0.1, 0.4]
UPPER_Q = [0.1, 0.025, 1e-3, 1e-6, 1e-9, 1e-12]
F_PAIRS = [
    (1.0, 1.0), (1.0, 5.0), (1.0, 30.0), (1.0, 1e5), (2.0, 10.0), (2.0, 1e5), (3.0, 3.0),
    (3.0, 100.0), (5.0, 2.0), (5.0, 1000.0), (10.0, 10.0), (10.0, 1e5), (30.0, 30.0), (100.0, 1000.0),
]


def nice(v):
    """Round an abscissa to 6 significant digits so the table holds plain numbers."""
    return float(f"{v:.6g}")


def upper(q):
    """A probability p >= 0.5 as a double together with its exact complement q = 1 - p."""
    p = 1.0 - q
    return p, 1.0 - p  # Sterbenz: 1 - p is exact for p in [0.5, 1].


def invert_sf(sf, q, start):
    """Solve sf(x) = q for x > 0 by bracketing and scipy.optimize.brentq on the library's sf."""
    lo, hi = 0.0, max(1.0, start if math.isfinite(start) else 1.0)
    while sf(hi) > q:
        lo, hi = hi, hi * 2.0
    while sf(hi / 2.0) < q and hi / 2.0 > lo:
        hi = hi / 2.0
    return optimize.brentq(lambda v: sf(v) - q, lo, hi, xtol=1e-300, rtol=4.0 * np.finfo(float).eps, maxiter=2000)


def quantile_entry(entry, dist, args, p, q=None):
    """A quantile from the library, validated by a round trip through its sf or cdf.

    scipy's inverse functions fail at some extreme arguments (scipy issue #20835:
    fdtri is inaccurate for large denominator df and tiny tail areas). When the
    round trip shows a relative quantile error above 1e-9, the value is replaced by
    brentq on the library's own sf and the failing library value is kept beside it.
    """
    if q is None:
        value = float(dist.ppf(p, *args))
        resid = abs(dist.cdf(value, *args) - p)
    else:
        value = float(dist.isf(q, *args))
        resid = abs(dist.sf(value, *args) - q)
    dens = dist.pdf(value, *args) if math.isfinite(value) else 0.0
    err = resid / (dens * abs(value)) if dens > 0 and value != 0 else math.inf
    if err > 1e-9:
        if q is None:
            raise ValueError(f"lower-tail quantile failed its round trip: {entry}, p = {p}")
        entry["method"] = "brentq_on_sf"
        entry["library_isf"] = value if math.isfinite(value) else None
        value = invert_sf(lambda v: dist.sf(v, *args), q, value)
    entry["value"] = fl(value)
    return entry


def sf_grid(dist, args, targets):
    """Abscissas whose upper tail areas are near the targets, rounded to 6 digits."""
    out = []
    for p in targets:
        x = invert_sf(lambda v: dist.sf(v, *args), p, float(dist.isf(p, *args)))
        out.append(nice(x))
    return out


def dist_fixture():
    t_sf, t_ppf, f_sf, f_ppf, chi2_sf, norm_sf, norm_ppf = [], [], [], [], [], [], []
    for df in DFS:
        for x in [-3.0, 0.5, 1.96] + sf_grid(stats.t, (df,), SF_TARGETS):
            t_sf.append({"x": x, "df": df, "value": fl(stats.t.sf(x, df))})
        for p in LOWER_P:
            t_ppf.append(quantile_entry({"p": p, "df": df}, stats.t, (df,), p))
        for q0 in UPPER_Q:
            p, q = upper(q0)
            t_ppf.append(quantile_entry({"p": p, "q": q, "df": df}, stats.t, (df,), p, q))
        for x in [0.5] + sf_grid(stats.chi2, (df,), SF_TARGETS):
            chi2_sf.append({"x": x, "df": df, "value": fl(stats.chi2.sf(x, df))})
    for d1, d2 in F_PAIRS:
        for x in sf_grid(stats.f, (d1, d2), [0.5] + SF_TARGETS[1:]):
            f_sf.append({"x": x, "d1": d1, "d2": d2, "value": fl(stats.f.sf(x, d1, d2))})
        for p in [1e-6, 0.5]:
            f_ppf.append(quantile_entry({"p": p, "d1": d1, "d2": d2}, stats.f, (d1, d2), p))
        for q0 in [0.1, 0.05, 0.01, 1e-3, 1e-6, 1e-12]:
            p, q = upper(q0)
            f_ppf.append(quantile_entry({"p": p, "q": q, "d1": d1, "d2": d2}, stats.f, (d1, d2), p, q))
    for x in [-3.0, -1.0, 0.0, 0.5, 1.0, 1.644854, 1.959964, 2.5, 3.0, 4.0, 5.0, 6.0, 7.0, 7.25]:
        norm_sf.append({"x": x, "value": fl(stats.norm.sf(x))})
    for p in LOWER_P:
        norm_ppf.append(quantile_entry({"p": p}, stats.norm, (), p))
    for q0 in UPPER_Q:
        p, q = upper(q0)
        norm_ppf.append(quantile_entry({"p": p, "q": q}, stats.norm, (), p, q))
    doc = {
        "source": f"Computed with {versions()}: scipy.stats.t.sf, scipy.stats.t.ppf (p < 0.5) and "
        "scipy.stats.t.isf(q) (p >= 0.5), scipy.stats.f.sf, scipy.stats.f.ppf (p <= 0.5) and "
        "scipy.stats.f.isf(q) (p > 0.5), scipy.stats.chi2.sf, scipy.stats.norm.sf, scipy.stats.norm.ppf "
        "(p < 0.5) and scipy.stats.norm.isf(q) (p >= 0.5). Quantiles that fail a round trip through the "
        "library's own sf are replaced by scipy.optimize.brentq on that sf (marked method: brentq_on_sf).",
        "generator": GENERATOR,
        "notes": {
            "q": "Entries with p >= 0.5 carry q = 1 - p, which is exact in doubles for such p; value is the "
            "quantile at exactly that p, computed as isf(q).",
            "x": "sf abscissas solve sf(x) = target for target tail areas 0.3 .. 1e-12 (brentq on the library "
            "sf), rounded to 6 significant digits; value is the sf at the rounded x",
            "brentq_on_sf": "scipy.stats.f.isf returns a wrong quantile there (scipy issue #20835, fdtri at "
            "large denominator df and tiny tail areas); library_isf keeps the wrong value for the record",
            "accuracy": "see tests/fixtures/README.md: some scipy values carry relative errors up to about "
            "1e-10 (t and F quantiles, F sf at d2 = 1e5)",
        },
        "t_sf": t_sf,
        "t_ppf": t_ppf,
        "f_sf": f_sf,
        "f_ppf": f_ppf,
        "chi2_sf": chi2_sf,
        "norm_sf": norm_sf,
        "norm_ppf": norm_ppf,
    }
    write("dist/tails.json", doc)


# ---------------------------------------------------------------------------
# Selection fixture.
# ---------------------------------------------------------------------------


def selection_fixture():
    t = make_selection_table()
    names, y, x = t["names"], t["y"], t["x"]
    n, m = x.shape
    full = sm.OLS(y, design(x, True)).fit()
    mse_full = full.mse_resid
    subsets = []
    for mask in range(1, 2**m):
        cols = [j for j in range(m) if mask >> j & 1]
        exog = design(x[:, cols], True)
        res = sm.OLS(y, exog).fit()
        h = res.get_influence().hat_matrix_diag
        press = float(np.sum((res.resid / (1.0 - h)) ** 2))
        p = exog.shape[1]
        subsets.append(
            {
                "mask": mask,
                "vars": [names[j] for j in cols],
                "p": p,
                "ssr": fl(res.ssr),
                "rsquared": fl(res.rsquared),
                "rsquared_adj": fl(res.rsquared_adj),
                "aic": fl(res.aic),
                "bic": fl(res.bic),
                "press": fl(press),
                "cp": fl(res.ssr / mse_full - (n - 2 * p)),
            }
        )
    exog = design(x, True)
    errors = []
    for i in range(n):
        keep = np.arange(n) != i
        r = sm.OLS(y[keep], exog[keep]).fit()
        errors.append(float(y[i] - r.predict(exog[i : i + 1])[0]))
    errors = np.asarray(errors)
    loo = {
        "errors": fls(errors),
        "press": fl(np.sum(errors**2)),
        "rmse": fl(math.sqrt(np.mean(errors**2))),
    }
    gap = abs(loo["press"] - subsets[-1]["press"]) / subsets[-1]["press"]
    if gap > 1e-9:
        sys.exit(f"selection: leave-one-out refits differ from the PRESS shortcut by {gap}")
    doc = {
        "source": f"{t['data_source']}. Computed with {versions()}: for every non-empty subset of the 8 "
        "candidates, statsmodels.api.OLS(y, add_constant(x[:, subset])).fit() with ssr, rsquared, "
        "rsquared_adj, aic, bic; PRESS = sum((resid / (1 - h))^2) with h from "
        "results.get_influence().hat_matrix_diag; Mallows Cp = ssr / mse_resid(full) - (n - 2 p); "
        "leave-one-out errors of the full model from n explicit refits with statsmodels OLS.",
        "generator": GENERATOR,
        "notes": {
            "mask": "bit j set means names[j] is in the subset; subsets are listed by increasing mask",
            "p": "number of coefficients including the intercept, which is always in",
            "aic": "-2 llf + 2 p; bic = -2 llf + ln(n) p",
        },
    }
    doc.update(inputs(names, y, x, None, True))
    doc["expected"] = {
        "mse_full": fl(mse_full),
        "subsets": subsets,
        "loo_full": loo,
    }
    write("selection/all_subsets.json", doc)


# ---------------------------------------------------------------------------


def main():
    check_versions()

    longley = load_longley()
    stackloss = load_stackloss()

    fit_fixture(
        "longley",
        longley,
        np.array([[100.0, 400000.0, 3500.0, 2800.0, 120000.0, 1955.0],
                  [95.0, 300000.0, 2500.0, 3000.0, 115000.0, 1951.0],
                  [118.0, 560000.0, 4000.0, 2600.0, 132000.0, 1963.0]]),
        None,
    )
    fit_fixture(
        "stackloss",
        stackloss,
        np.array([[60.0, 20.0, 85.0], [70.0, 24.0, 90.0], [85.0, 28.0, 95.0]]),
        None,
    )
    fit_fixture(
        "synthetic_ols",
        make_synthetic_ols(),
        np.array([[50.0, 8.0, 10.0], [30.0, 14.0, 17.5], [95.0, 1.5, 0.5]]),
        None,
    )
    fit_fixture(
        "synthetic_wls",
        make_synthetic_wls(),
        np.array([[50.0, 8.0, 10.0], [30.0, 14.0, 17.5], [95.0, 1.5, 0.5]]),
        [1000.0, 5000.0, 15000.0],
    )
    fit_fixture(
        "synthetic_noint",
        make_synthetic_noint(),
        np.array([[5.0, 2.5, 3.0], [9.5, 0.5, 1.0], [12.0, 6.0, 7.0]]),
        None,
    )

    diagnostics_fixture("longley", longley)
    diagnostics_fixture("stackloss", stackloss)
    diagnostics_fixture("synthetic_influence", make_synthetic_influence())
    diagnostics_fixture("synthetic_hetero", make_synthetic_hetero())
    shapiro_fixture()

    dist_fixture()
    selection_fixture()


if __name__ == "__main__":
    main()

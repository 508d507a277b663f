# Optional cross-check of tests/fixtures/dist/tails.json against 60-digit arithmetic with mpmath.
"""Measure how far the scipy values in dist/tails.json are from high-precision values.

This script is not needed to write the fixtures. It exists so that a reader can see
how many digits of each scipy value are right before picking a test tolerance:

    python3 -m pip install mpmath==1.3.0
    python3 tests/generate/check_tails.py

The survival functions are evaluated at 60 significant digits: the t and F tails
through the regularized incomplete beta function (continued fraction, Numerical
Recipes form), chi-square through mpmath's regularized upper incomplete gamma and
the normal through erfc. For a quantile v of tail area q the error is measured as
|sf(v) - q| / (pdf(v) |v|), the relative distance from v to the exact quantile to
first order.
"""

import json
from pathlib import Path

import mpmath as mp

mp.mp.dps = 60
TAILS = Path(__file__).resolve().parent.parent / "fixtures" / "dist" / "tails.json"


def mpf(v):
    return mp.mpf(v)


def _beta_cf(a, b, x):
    tiny = mp.mpf(10) ** -300
    c = mp.mpf(1)
    d = 1 - (a + b) * x / (a + 1)
    d = 1 / (tiny if abs(d) < tiny else d)
    h = d
    for m in range(1, 200000):
        m2 = 2 * m
        for aa in (
            m * (b - m) * x / ((a + m2 - 1) * (a + m2)),
            -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1)),
        ):
            d = 1 + aa * d
            d = 1 / (tiny if abs(d) < tiny else d)
            c = 1 + aa / c
            c = tiny if abs(c) < tiny else c
            step = d * c
            h *= step
        if abs(step - 1) < mp.mpf(10) ** -50:
            return h
    raise RuntimeError("continued fraction did not converge")


def ibeta(a, b, x):
    """Regularized incomplete beta I_x(a, b)."""
    a, b, x = mpf(a), mpf(b), mpf(x)
    if x <= 0:
        return mp.mpf(0)
    if x >= 1:
        return mp.mpf(1)
    front = mp.exp(mp.loggamma(a + b) - mp.loggamma(a) - mp.loggamma(b) + a * mp.log(x) + b * mp.log1p(-x))
    if x < (a + 1) / (a + b + 2):
        return front * _beta_cf(a, b, x) / a
    return 1 - front * _beta_cf(b, a, 1 - x) / b


def t_sf(x, df):
    x, df = mpf(x), mpf(df)
    half = ibeta(df / 2, mp.mpf(1) / 2, df / (df + x * x)) / 2
    return half if x >= 0 else 1 - half


def f_sf(x, d1, d2):
    x, d1, d2 = mpf(x), mpf(d1), mpf(d2)
    return ibeta(d2 / 2, d1 / 2, d2 / (d2 + d1 * x))


def chi2_sf(x, df):
    return mp.gammainc(mpf(df) / 2, mpf(x) / 2, mp.inf, regularized=True)


def norm_sf(x):
    return mp.erfc(mpf(x) / mp.sqrt(2)) / 2


def main():
    doc = json.loads(TAILS.read_text())
    families = {
        "t_sf": (t_sf, ["x", "df"]),
        "f_sf": (f_sf, ["x", "d1", "d2"]),
        "chi2_sf": (chi2_sf, ["x", "df"]),
        "norm_sf": (norm_sf, ["x"]),
    }
    print(f"{'family':10} {'entries':>7} {'max rel err':>12}  worst entry")
    for key, (fn, args) in families.items():
        worst, where = 0.0, None
        for e in doc[key]:
            exact = fn(*[e[a] for a in args])
            err = float(abs(mpf(e["value"]) - exact) / exact)
            if err > worst:
                worst, where = err, e
        print(f"{key:10} {len(doc[key]):7d} {worst:12.2e}  {where}")
    quantiles = {
        "t_ppf": (lambda v, e: t_sf(v, e["df"])),
        "f_ppf": (lambda v, e: f_sf(v, e["d1"], e["d2"])),
        "norm_ppf": (lambda v, e: norm_sf(v)),
    }
    for key, sf in quantiles.items():
        worst, where = 0.0, None
        for e in doc[key]:
            v = mpf(e["value"])
            if v == 0:
                continue
            target = mpf(e["q"]) if "q" in e else 1 - mpf(e["p"])
            dens = -mp.diff(lambda z: sf(z, e), v, h=abs(v) * mp.mpf(10) ** -20)
            err = float(abs((sf(v, e) - target) / dens / v))
            if err > worst:
                worst, where = err, e
        print(f"{key:10} {len(doc[key]):7d} {worst:12.2e}  {where}")


if __name__ == "__main__":
    main()

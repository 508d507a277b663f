# Checks the planted structure of the Larkmoor demo with a small standard-library least-squares fit.
"""Print the numbers that show the planted structure of the Larkmoor demo.

Run from the repository root after demo/generate.py:

    python3 demo/check_planted.py

It fits ordinary least squares by modified Gram-Schmidt QR (adequate for this
small, well-conditioned check; the product's engine is the reference) and
reports the income-unemployment correlation, the fit of ln(vacancy) against
linear vacancy, and the influence measures of the arena quarter. It exits with
status 1 if any planted property does not hold.
"""

import csv
import math
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
INDICATORS = [
    "median_income", "unemployment_pct", "youth_share_pct", "vacancy_pct",
    "alcohol_outlets_per_1k", "afterschool_seats_per_100", "streetlight_outages_per_km",
]


def load():
    """Read the district table and derive the rate per 10,000 residents."""
    with open(os.path.join(HERE, "larkmoor_districts.csv"), encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    for row in rows:
        row["rate"] = int(row["assaults"]) / int(row["residents"]) * 10000.0
    return rows


def qr(x):
    """Return Q (n by p, as columns) and R of x by modified Gram-Schmidt."""
    n, p = len(x), len(x[0])
    q = [[x[i][j] for i in range(n)] for j in range(p)]
    r = [[0.0] * p for _ in range(p)]
    for j in range(p):
        for k in range(j):
            r[k][j] = sum(q[k][i] * q[j][i] for i in range(n))
            q[j] = [q[j][i] - r[k][j] * q[k][i] for i in range(n)]
        r[j][j] = math.sqrt(sum(v * v for v in q[j]))
        q[j] = [v / r[j][j] for v in q[j]]
    return q, r


def ols(x, y):
    """Fit y on x; return coefficients, residuals, leverages and SSE."""
    n, p = len(x), len(x[0])
    q, r = qr(x)
    qty = [sum(q[j][i] * y[i] for i in range(n)) for j in range(p)]
    beta = [0.0] * p
    for j in reversed(range(p)):
        beta[j] = (qty[j] - sum(r[j][k] * beta[k] for k in range(j + 1, p))) / r[j][j]
    fitted = [sum(x[i][j] * beta[j] for j in range(p)) for i in range(n)]
    resid = [y[i] - fitted[i] for i in range(n)]
    lev = [sum(q[j][i] ** 2 for j in range(p)) for i in range(n)]
    sse = sum(e * e for e in resid)
    return beta, resid, lev, sse


def influence(resid, lev, sse, p):
    """Return Cook's distance and DFFITS for every row."""
    n = len(resid)
    mse = sse / (n - p)
    cooks, dffits = [], []
    for e, h in zip(resid, lev):
        cooks.append(e * e / (p * mse) * h / (1.0 - h) ** 2)
        s_del = math.sqrt((sse - e * e / (1.0 - h)) / (n - p - 1))
        t = e / (s_del * math.sqrt(1.0 - h))
        dffits.append(t * math.sqrt(h / (1.0 - h)))
    return cooks, dffits


def corr(a, b):
    """Pearson correlation of two equal-length lists."""
    ma, mb = sum(a) / len(a), sum(b) / len(b)
    sab = sum((u - ma) * (v - mb) for u, v in zip(a, b))
    saa = sum((u - ma) ** 2 for u in a)
    sbb = sum((v - mb) ** 2 for v in b)
    return sab / math.sqrt(saa * sbb)


def design(rows, log_vacancy):
    """Build the design matrix (intercept plus the seven indicators)."""
    x = []
    for row in rows:
        values = [1.0]
        for c in INDICATORS:
            v = float(row[c])
            values.append(math.log(v) if (c == "vacancy_pct" and log_vacancy) else v)
        x.append(values)
    return x


def r_squared(y, sse):
    """Coefficient of determination about the mean."""
    m = sum(y) / len(y)
    return 1.0 - sse / sum((v - m) ** 2 for v in y)


def main():
    rows = load()
    failures = []
    missing = [(r["district_code"], c) for r in rows for c in INDICATORS if r[c] == ""]
    print("rows: %d, missing indicator cells: %d %s" % (len(rows), len(missing), missing))
    rates = sorted((r["rate"], r["district_code"]) for r in rows)
    print("rate range without the arena: %.1f to %.1f; arena LK-47: %.1f"
          % (rates[0][0], max(v for v, c in rates if c != "LK-47"),
             next(v for v, c in rates if c == "LK-47")))
    complete = [r for r in rows if all(r[c] != "" for c in INDICATORS)]
    inc = [float(r["median_income"]) for r in complete]
    une = [float(r["unemployment_pct"]) for r in complete]
    r_iu = corr(inc, une)
    print("r(median_income, unemployment_pct) = %.3f over %d complete rows" % (r_iu, len(complete)))
    if not -0.92 < r_iu < -0.78:
        failures.append("income-unemployment correlation")

    for label, subset in (("all complete rows", complete),
                          ("without LK-47", [r for r in complete if r["district_code"] != "LK-47"])):
        y = [r["rate"] for r in subset]
        fits = {}
        for log_vac in (False, True):
            beta, resid, lev, sse = ols(design(subset, log_vac), y)
            fits[log_vac] = (beta, resid, lev, sse)
        print("%s (n=%d): SSE linear vacancy %.1f (R2 %.4f), ln vacancy %.1f (R2 %.4f)"
              % (label, len(subset), fits[False][3], r_squared(y, fits[False][3]),
                 fits[True][3], r_squared(y, fits[True][3])))
        if fits[True][3] >= fits[False][3]:
            failures.append("ln(vacancy) does not beat linear vacancy (%s)" % label)
        beta = fits[True][0]
        print("  ln-vacancy model coefficients: " + ", ".join(
            "%s %.4g" % (n, b) for n, b in zip(["intercept"] + INDICATORS, beta)))
        if beta[1 + INDICATORS.index("afterschool_seats_per_100")] >= 0:
            failures.append("after-school seats not negative (%s)" % label)
        if label == "all complete rows":
            p = len(beta)
            for log_vac in (False, True):
                _, resid, lev, sse = fits[log_vac]
                cooks, dffits = influence(resid, lev, sse, p)
                order = sorted(range(len(subset)), key=lambda i: -cooks[i])
                top = [(subset[i]["district_code"], round(cooks[i], 3), round(dffits[i], 2),
                        round(lev[i], 3)) for i in order[:3]]
                print("  %s vacancy: top Cook's D (code, D, DFFITS, leverage): %s"
                      % ("ln" if log_vac else "linear", top))
                big_dffits = max(range(len(subset)), key=lambda i: abs(dffits[i]))
                if subset[order[0]]["district_code"] != "LK-47" or \
                        subset[big_dffits]["district_code"] != "LK-47":
                    failures.append("arena is not the most influential district")
                print("  cut-offs: 4/n = %.3f, 2*sqrt(p/n) = %.3f"
                      % (4.0 / len(subset), 2.0 * math.sqrt(p / len(subset))))
    if failures:
        print("FAILED: " + "; ".join(failures))
        sys.exit(1)
    print("all planted properties hold")


if __name__ == "__main__":
    main()

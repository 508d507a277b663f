# Seeded generator of the invented Larkmoor demo: writes the committed CSVs and column metadata.
"""Generate the fictional Larkmoor demo data set.

Larkmoor, its boroughs, districts, agencies and every figure written here are
invented. Run from the repository root:

    python3 demo/generate.py

The script uses the Python standard library only and a fixed seed, so the
output files are byte-for-byte reproducible. The planted structure that tests
rely on is described in demo/README.md.
"""

import csv
import json
import math
import os
import random

SEED = 20250417
VINTAGE = 2025
HERE = os.path.dirname(os.path.abspath(__file__))

# Eight invented boroughs of eight districts each. Each entry is (name, type),
# where type is one of residential, mixed or centre. Codes are assigned in this
# order, so borough k holds LK-(8k+1) to LK-(8k+8).
BOROUGHS = [
    ("Quillmere", [
        ("Fernhollow", "residential"), ("Copperlane", "mixed"),
        ("Quillmere Green", "residential"), ("Thistlegate", "mixed"),
        ("Wrenmarsh", "residential"), ("Bramblewick", "residential"),
        ("Lanternfold", "mixed"), ("Otterbrink Row", "residential"),
    ]),
    ("Slatemoor", [
        ("Slatemoor Heights", "residential"), ("Slatecourt", "mixed"),
        ("Moth Hill", "residential"), ("Juniper Steps", "residential"),
        ("Kestrel Yard", "mixed"), ("Cobblenook", "residential"),
        ("Ironweir", "mixed"), ("Pennyhollow", "residential"),
    ]),
    ("Cindergate", [
        ("Cindergate Market", "centre"), ("Tallowfield", "mixed"),
        ("Foundry Reach", "mixed"), ("Ashcinder Row", "residential"),
        ("Bellwether Square", "centre"), ("Gorsewhistle End", "residential"),
        ("Kilnmoor", "mixed"), ("Sootmarket Lane", "centre"),
    ]),
    ("Marrowby", [
        ("Marrowby Fields", "residential"), ("Hazelcrook", "residential"),
        ("Sorrel Bank", "residential"), ("Dovetail Close", "residential"),
        ("Wickerfen", "mixed"), ("Nettlebright", "residential"),
        ("Quinceway", "mixed"), ("Larchmoss", "residential"),
    ]),
    ("Hollowcress", [
        ("Hollowcress Cross", "mixed"), ("Mistlebank", "residential"),
        ("Rookhallow", "residential"), ("Candlemere", "residential"),
        ("Fiddler's Knoll", "mixed"), ("Briarwold", "residential"),
        ("Owlsgate", "mixed"), ("Hearthlow Vale", "residential"),
    ]),
    ("Tidewick", [
        ("Tidewick Quay", "centre"), ("Saltspire", "mixed"),
        ("Netmender's Row", "mixed"), ("Gullrock", "residential"),
        ("Brinewater", "residential"), ("Anchorfall", "mixed"),
        ("Harbour Arena Quarter", "centre"), ("Capstan Reach", "mixed"),
    ]),
    ("Wyvernhold", [
        ("Wyvernhold Park", "residential"), ("Glimmerford", "residential"),
        ("Starling Mews", "mixed"), ("Tinderbrook", "residential"),
        ("Cresset Hill", "residential"), ("Vellum Square", "centre"),
        ("Oriel Down", "residential"), ("Pewter Gardens", "mixed"),
    ]),
    ("Emberlow", [
        ("Emberlow Commons", "mixed"), ("Mosswick", "residential"),
        ("Lindentide", "residential"), ("Gannet Point", "mixed"),
        ("Thimble Green", "residential"), ("Corvid Hill", "residential"),
        ("Sable Orchard", "residential"), ("Yarrowgate", "centre"),
    ]),
]

ARENA_CODE = "LK-47"

# Indicator cells left empty on purpose, to exercise listwise deletion.
MISSING_CELLS = [
    ("LK-12", "vacancy_pct"),
    ("LK-29", "median_income"),
    ("LK-38", "afterschool_seats_per_100"),
    ("LK-55", "streetlight_outages_per_km"),
]

# Budget rows: LK-07 appears under the typo-style code LK-7A, LK-58 has no row,
# and LK-65 names a district that the district table does not have.
BUDGET_TYPO = ("LK-07", "LK-7A")
BUDGET_ABSENT = "LK-58"
BUDGET_EXTRA = "LK-65"

# Coefficients of the true rate per 10,000 residents. The vacancy term is
# logarithmic; every other indicator enters linearly.
TRUE_RATE = {
    "intercept": 12.0,
    "unemployment_pct": 4.0,
    "ln_vacancy_pct": 16.0,
    "youth_share_pct": 1.2,
    "alcohol_outlets_per_1k": 4.0,
    "afterschool_seats_per_100": -0.6,
    "streetlight_outages_per_km": 3.0,
    "centre": 9.0,
    "mixed": 3.0,
}

DISTRICT_COLUMNS = [
    "district_code", "district_name", "borough", "district_type", "residents",
    "assaults", "median_income", "unemployment_pct", "youth_share_pct",
    "vacancy_pct", "alcohol_outlets_per_1k", "afterschool_seats_per_100",
    "streetlight_outages_per_km",
]


def clamp(x, lo, hi):
    """Keep x inside [lo, hi]."""
    return max(lo, min(hi, x))


def fixed(x, places):
    """Format x with a fixed number of decimal places, as the CSV stores it."""
    return "%.*f" % (places, x)


def poisson(rng, lam):
    """Draw a Poisson count by multiplying uniforms (exact for the small means used here)."""
    if lam > 500.0:
        half = lam / 2.0
        return poisson(rng, half) + poisson(rng, half)
    limit = math.exp(-lam)
    k = 0
    p = rng.random()
    while p > limit:
        k += 1
        p *= rng.random()
    return k


def true_rate(row):
    """Return the expected assault rate per 10,000 residents before noise.

    The rate is computed from the values as written to the CSV, so the
    planted relation holds exactly for the published figures.
    """
    c = TRUE_RATE
    numeric = ("unemployment_pct", "vacancy_pct", "youth_share_pct", "alcohol_outlets_per_1k",
               "afterschool_seats_per_100", "streetlight_outages_per_km")
    row = {k: (float(v) if k in numeric else v) for k, v in row.items()}
    ln_vac = math.log(row["vacancy_pct"])
    rate = (
        c["intercept"]
        + c["unemployment_pct"] * row["unemployment_pct"]
        + c["ln_vacancy_pct"] * ln_vac
        + c["youth_share_pct"] * (row["youth_share_pct"] - 14.0)
        + c["alcohol_outlets_per_1k"] * row["alcohol_outlets_per_1k"]
        + c["afterschool_seats_per_100"] * row["afterschool_seats_per_100"]
        + c["streetlight_outages_per_km"] * row["streetlight_outages_per_km"]
    )
    if row["district_type"] in ("centre", "mixed"):
        rate += c[row["district_type"]]
    return rate


def standardise(values):
    """Centre values and scale them to unit sample standard deviation."""
    n = len(values)
    mean = sum(values) / n
    sd = math.sqrt(sum((v - mean) ** 2 for v in values) / (n - 1))
    return [(v - mean) / sd for v in values]


def correlated_with(base, noise, rho):
    """Return a standardised series whose sample correlation with base is exactly rho.

    The noise is first made orthogonal to base, so the correlation does not
    depend on the luck of the draw.
    """
    b = standardise(base)
    e = standardise(noise)
    n = len(b)
    slope = sum(x * y for x, y in zip(b, e)) / (n - 1)
    e = standardise([y - slope * x for x, y in zip(b, e)])
    return [rho * x + math.sqrt(1.0 - rho * rho) * y for x, y in zip(b, e)]


def generate_districts(rng):
    """Draw the 64 district rows, with the arena quarter fixed by hand."""
    drawn = []
    number = 0
    for borough, districts in BOROUGHS:
        # A borough-level shift makes boroughs meaningful groups for grouped CV.
        borough_shift = rng.gauss(0.0, 0.55)
        for name, dtype in districts:
            number += 1
            # z is a latent deprivation score shared by several indicators.
            z = borough_shift + rng.gauss(0.0, 0.85)
            residents = int(round(math.exp(rng.uniform(math.log(3000), math.log(25000))) / 10.0)) * 10
            unemp = math.exp(math.log(6.8) + 0.36 * z + rng.gauss(0.0, 0.15))
            youth = clamp(14.0 + 1.2 * z + rng.gauss(0.0, 1.8) + (3.0 if dtype == "centre" else 0.0), 7.0, 27.0)
            # Vacancy spreads over more than an order of magnitude, so the
            # curvature of the logarithmic relation is visible.
            vacancy = clamp(math.exp(math.log(4.0) + 0.25 * z + rng.gauss(0.0, 0.8)), 1.0, 40.0)
            alcohol = math.exp(math.log(1.1) + rng.gauss(0.0, 0.35))
            alcohol += {"centre": 2.4, "mixed": 0.8}.get(dtype, 0.0)
            seats = clamp(22.0 - 3.0 * z + rng.gauss(0.0, 7.0), 3.0, 48.0)
            lights = clamp(math.exp(math.log(0.9) + 0.2 * z + rng.gauss(0.0, 0.4)), 0.05, 6.0)
            drawn.append({
                "district_code": "LK-%02d" % number,
                "district_name": name,
                "borough": borough,
                "district_type": dtype,
                "residents": residents,
                "income_noise": rng.gauss(0.0, 1.0),
                "unemployment_pct": fixed(unemp, 1),
                "youth_share_pct": fixed(youth, 1),
                "vacancy_pct": fixed(vacancy, 1),
                "alcohol_outlets_per_1k": fixed(alcohol, 2),
                "afterschool_seats_per_100": fixed(seats, 1),
                "streetlight_outages_per_km": fixed(lights, 2),
            })
    # Median income is built to have a sample correlation of exactly -0.85
    # with unemployment (before rounding), which plants the collinear pair.
    income_z = correlated_with([float(r["unemployment_pct"]) for r in drawn],
                               [r.pop("income_noise") for r in drawn], -0.85)
    rows = []
    for row, iz in zip(drawn, income_z):
        row["median_income"] = int(round(clamp(47000.0 + 9500.0 * iz, 12000.0, 98000.0) / 100.0)) * 100
        if row["district_code"] == ARENA_CODE:
            # The harbour-front arena quarter: few residents, a large
            # night-time economy and crowds of visitors on event days.
            row.update({
                "residents": 820,
                "median_income": 61400,
                "unemployment_pct": "4.3",
                "youth_share_pct": "12.6",
                "vacancy_pct": "9.4",
                "alcohol_outlets_per_1k": "9.76",
                "afterschool_seats_per_100": "6.5",
                "streetlight_outages_per_km": "0.58",
            })
        rate = max(10.0, true_rate(row) + rng.gauss(0.0, 5.0))
        lam = rate * row["residents"] / 10000.0
        if row["district_code"] == ARENA_CODE:
            # Incidents involving visitors are recorded in the district but
            # have no residents behind them.
            lam += 30.0
        row["assaults"] = poisson(rng, lam)
        rows.append(row)
    for code, column in MISSING_CELLS:
        for row in rows:
            if row["district_code"] == code:
                row[column] = ""
    return rows


def generate_budgets(rng, districts):
    """Draw this year's programme budget per district, as another department records it."""
    rows = []
    for row in districts:
        code = row["district_code"]
        if code == BUDGET_ABSENT:
            continue
        budget = 30000.0 + 4.5 * row["residents"] + 40.0 * row["assaults"] + rng.gauss(0.0, 8000.0)
        if code == BUDGET_TYPO[0]:
            code = BUDGET_TYPO[1]
        rows.append({
            "district_code": code,
            "programme_budget": int(round(max(20000.0, budget) / 50.0)) * 50,
            "budget_vintage": VINTAGE,
        })
    rows.append({
        "district_code": BUDGET_EXTRA,
        "programme_budget": 41250,
        "budget_vintage": VINTAGE,
    })
    return rows


def column_metadata():
    """Describe every column with its label, unit, source agency, vintage and role."""
    office = "Larkmoor Office of Data"
    def meta(column, label, unit, source, role):
        return {"column": column, "label": label, "unit": unit, "source": source,
                "vintage": VINTAGE, "role": role}
    return [
        meta("district_code", "District code", "", office, "key"),
        meta("district_name", "District", "", office, "name"),
        meta("borough", "Borough", "", office, "group"),
        meta("district_type", "District type", "", "Larkmoor Planning Department", "category"),
        meta("residents", "Residents", "persons", office + " (population register)", "population"),
        meta("assaults", "Assault incidents", "incidents per year",
             "Larkmoor Community Safety Service (recorded incidents)", "count"),
        meta("assault_rate_per_10k", "Assault incidents per 10,000 residents",
             "incidents per 10,000 residents per year",
             "Derived: assaults / residents \u00d7 10,000", "rate"),
        meta("median_income", "Median household income", "marks per household per year",
             office + " (household survey)", "indicator"),
        meta("unemployment_pct", "Unemployment", "% of labour force",
             "Larkmoor Employment Bureau", "indicator"),
        meta("youth_share_pct", "Residents aged 15\u201324", "% of residents",
             office + " (population register)", "indicator"),
        meta("vacancy_pct", "Vacant dwellings", "% of dwellings",
             "Larkmoor Housing Department", "indicator"),
        meta("alcohol_outlets_per_1k", "Licensed alcohol outlets", "outlets per 1,000 residents",
             "Larkmoor Licensing Board", "indicator"),
        meta("afterschool_seats_per_100", "After-school programme seats", "seats per 100 youths",
             "Larkmoor Youth Services", "indicator"),
        meta("streetlight_outages_per_km", "Streetlight outage reports", "reports per km of road",
             "Larkmoor Public Works Department", "indicator"),
        meta("programme_budget", "Prevention programme budget", "marks",
             "Larkmoor Finance Department", "budget"),
    ]


def write_csv(path, columns, rows):
    """Write rows with a fixed column order and Unix line endings."""
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=columns, lineterminator="\n")
        writer.writeheader()
        for row in rows:
            writer.writerow({c: row[c] for c in columns})


def main():
    rng = random.Random(SEED)
    districts = generate_districts(rng)
    budgets = generate_budgets(rng, districts)
    write_csv(os.path.join(HERE, "larkmoor_districts.csv"), DISTRICT_COLUMNS, districts)
    write_csv(os.path.join(HERE, "larkmoor_budgets.csv"),
              ["district_code", "programme_budget", "budget_vintage"], budgets)
    with open(os.path.join(HERE, "larkmoor_columns.json"), "w", encoding="utf-8", newline="\n") as handle:
        json.dump(column_metadata(), handle, indent=2, ensure_ascii=False)
        handle.write("\n")


if __name__ == "__main__":
    main()

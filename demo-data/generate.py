#!/usr/bin/env python3
# Spinney demo data generator.
#
# Writes two INVENTED demo data sets next to this file:
#
#   surgery-complications.csv  4,000 fictional surgical patients of the
#                              fictional "Larkspur Vale General Hospital";
#                              binary outcome complication_30d (yes/no).
#   field-survey.csv           2,500 sampling sites of the fictional
#                              "Upper Tarrow Catchment Survey"; continuous
#                              outcome nitrate_mg_l.
#
# No real records are used or imitated: every value is drawn from the
# simple, known models below (documented in README.md), so tests can check
# that a fitted model finds the true drivers and ignores the noise columns.
#
# Determinism: the script uses only the Python 3 standard library. All
# randomness comes from random.Random(seed) instances with fixed integer
# seeds, and only from their .random() method; the normal, log-normal and
# exponential draws are made here from .random() (Box-Muller, inverse
# transform) rather than with the library's helpers, so no change in those
# helpers between Python versions can alter the output. Files are written
# as UTF-8 without BOM, '\n' line endings, fixed decimal formatting.
# Running `python3 demo-data/generate.py` twice gives byte-identical files
# (check with `sha256sum demo-data/*.csv`).
#
# Usage: python3 demo-data/generate.py      (from any working directory)

import datetime
import math
import os
import random

SEED = 20250611  # master seed; each stream below uses SEED + a fixed offset

HERE = os.path.dirname(os.path.abspath(__file__))


# ---------------------------------------------------------------------------
# Random helpers built on Random.random() only.
# ---------------------------------------------------------------------------

def normal(rng, mean, sd):
    """One N(mean, sd) draw by Box-Muller (uses two uniforms, no caching)."""
    u1 = 1.0 - rng.random()  # in (0, 1], so log() is safe
    u2 = rng.random()
    z = math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)
    return mean + sd * z


def normal_in(rng, mean, sd, lo, hi):
    """Normal draw truncated to [lo, hi] by rejection (no pile-up at the ends)."""
    while True:
        x = normal(rng, mean, sd)
        if lo <= x <= hi:
            return x


def lognormal_in(rng, median, sigma, lo, hi):
    """Log-normal draw with the given median, truncated to [lo, hi]."""
    while True:
        x = median * math.exp(normal(rng, 0.0, sigma))
        if lo <= x <= hi:
            return x


def exponential_in(rng, mean, hi):
    """Exponential draw with the given mean, truncated to [0, hi]."""
    while True:
        x = -mean * math.log(1.0 - rng.random())
        if x <= hi:
            return x


def weighted_choice(rng, items, weights):
    u = rng.random() * sum(weights)
    acc = 0.0
    for item, w in zip(items, weights):
        acc += w
        if u < acc:
            return item
    return items[-1]


def bernoulli(rng, p):
    return rng.random() < p


def logistic(x):
    return 1.0 / (1.0 + math.exp(-x))


def fmt(x, decimals):
    """Fixed-point text with a '.' decimal point; never '-0'."""
    s = f"{x:.{decimals}f}"
    if s.lstrip("-0.") == "":  # every digit is 0
        s = s.lstrip("-")
    return s


def write_csv(name, header, rows):
    path = os.path.join(HERE, name)
    lines = [",".join(header)]
    for row in rows:
        # Missing values (None) are written as empty fields.
        lines.append(",".join("" if v is None else v for v in row))
    data = ("\n".join(lines) + "\n").encode("utf-8")
    with open(path, "wb") as f:
        f.write(data)
    return path, len(rows), len(data)


# ---------------------------------------------------------------------------
# (a) surgery-complications.csv
# ---------------------------------------------------------------------------

N_PATIENTS = 4000
WARDS = ["Birch", "Cedar", "Rowan", "Hazel", "Alder", "Willow"]
WARD_WEIGHTS = [0.20, 0.20, 0.15, 0.15, 0.15, 0.15]
HIGH_RISK_WARD = "Rowan"
SURGERY_FIRST_DAY = datetime.date(2023, 1, 1)
SURGERY_DAYS = (datetime.date(2025, 12, 31) - SURGERY_FIRST_DAY).days + 1

# Fitness grade = 1 + number of these cut points that the latent score exceeds.
FITNESS_CUTS = (-1.2, 0.1, 1.2, 2.1)

# Coefficients of the true logistic model for complication_30d.
B0 = -3.30
B_AGE_OVER_65 = 0.08      # per year above 65
B_LONG_OPERATION = 1.80    # operation_minutes > 180
B_FITNESS = 0.15           # per fitness grade above 1
B_SMOKER = 0.10            # smoker, any fitness grade
B_SMOKER_UNFIT = 2.20      # extra for a smoker with fitness_grade >= 4
B_LOW_ALBUMIN = 0.22       # per g/L of albumin below 35
B_WARD = 0.90              # admitted to the high-risk ward


def complication_logit(age, smoker, fitness, minutes, albumin, ward):
    """True log-odds of complication_30d, from the values as recorded
    (before any value is masked as missing)."""
    eta = B0
    eta += B_AGE_OVER_65 * max(0, age - 65)
    eta += B_LONG_OPERATION * (1 if minutes > 180 else 0)
    eta += B_FITNESS * (fitness - 1)
    if smoker:
        eta += B_SMOKER + (B_SMOKER_UNFIT if fitness >= 4 else 0.0)
    eta += B_LOW_ALBUMIN * max(0, 35 - albumin)
    eta += B_WARD * (1 if ward == HIGH_RISK_WARD else 0)
    return eta


def creatinine_missing_probability(age):
    """Creatinine is missing more often in younger patients (MAR on age)."""
    return logistic(-1.6 - 0.06 * (age - 40))


def surgery_rows():
    cov = random.Random(SEED + 1)   # covariates
    mis = random.Random(SEED + 2)   # missingness masks
    out = random.Random(SEED + 3)   # outcome draws
    patients = []
    for _ in range(N_PATIENTS):
        age = round(normal_in(cov, 60.0, 16.0, 17.5, 95.49))
        female = bernoulli(cov, 0.53)
        bmi = round(normal_in(cov, 27.8, 5.2, 16.0, 55.0), 1)
        smoke_p = 0.24 if age < 50 else (0.17 if age < 70 else 0.10)
        smoker = bernoulli(cov, smoke_p)
        latent = (0.035 * (age - 60) + 0.07 * (bmi - 28.0)
                  + 0.5 * (1 if smoker else 0) + normal(cov, 0.0, 1.0))
        fitness = 1 + sum(1 for c in FITNESS_CUTS if latent > c)
        ward = weighted_choice(cov, WARDS, WARD_WEIGHTS)
        minutes = round(lognormal_in(cov, 115.0, 0.42, 20.0, 600.0))
        blood = round(lognormal_in(cov, 1.8 * minutes, 0.65, 5.0, 5000.0))
        hb = round(normal_in(cov,
                             (13.1 if female else 14.6)
                             - 0.015 * max(0, age - 60) - 0.15 * (fitness - 1),
                             1.3, 7.0, 19.0), 1)
        creat = round(lognormal_in(cov,
                                   (68.0 if female else 84.0)
                                   * (1.0 + 0.008 * max(0, age - 50))
                                   * (1.0 + 0.05 * (fitness - 1)),
                                   0.22, 30.0, 600.0))
        albumin = round(normal_in(cov,
                                  40.0 - 0.08 * max(0, age - 50)
                                  - 1.2 * (fitness - 1),
                                  4.0, 15.0, 55.0))
        day = int(cov.random() * SURGERY_DAYS)
        admitted = SURGERY_FIRST_DAY + datetime.timedelta(days=day)

        p = logistic(complication_logit(age, smoker, fitness, minutes,
                                        albumin, ward))
        complication = bernoulli(out, p)

        # Masks: haemoglobin 5% MCAR, albumin 15% MCAR, creatinine MAR on age.
        hb_missing = bernoulli(mis, 0.05)
        creat_missing = bernoulli(mis, creatinine_missing_probability(age))
        alb_missing = bernoulli(mis, 0.15)

        patients.append((
            admitted.isoformat(),
            [
                str(age),
                "female" if female else "male",
                fmt(bmi, 1),
                "yes" if smoker else "no",
                str(fitness),
                str(minutes),
                str(blood),
                None if hb_missing else fmt(hb, 1),
                None if creat_missing else str(creat),
                None if alb_missing else str(albumin),
                ward,
                admitted.isoformat(),
                "yes" if complication else "no",
            ],
        ))
    # Patient numbers follow admission order (stable sort: ties keep
    # generation order), like a hospital's running number.
    patients.sort(key=lambda t: t[0])
    return [[f"P{i:05d}"] + row for i, (_, row) in enumerate(patients, 1)]


SURGERY_HEADER = [
    "patient_id", "age", "sex", "bmi", "smoker", "fitness_grade",
    "operation_minutes", "blood_loss_ml", "haemoglobin_g_dl",
    "creatinine_umol_l", "albumin_g_l", "ward", "admission_date",
    "complication_30d",
]


# ---------------------------------------------------------------------------
# (b) field-survey.csv
# ---------------------------------------------------------------------------

N_SITES = 2500
# region: (weight, altitude mean m, altitude sd m, canopy mean %)
REGIONS = {
    "North Fell": (0.20, 520.0, 130.0, 30.0),
    "Low Carr":   (0.20, 40.0, 20.0, 15.0),
    "East Dale":  (0.20, 180.0, 60.0, 45.0),
    "Mere Basin": (0.20, 90.0, 40.0, 25.0),
    "West Scarp": (0.20, 320.0, 110.0, 55.0),
}
HIGH_NITRATE_REGION = "Mere Basin"
SURVEY_FIRST_DAY = datetime.date(2024, 4, 1)
SURVEY_DAYS = (datetime.date(2024, 9, 30) - SURVEY_FIRST_DAY).days + 1


def nitrate_mean(region, altitude, slope, ph, canopy, rain):
    """True median of nitrate_mg_l (mg/L), from the values as recorded
    (before any value is masked as missing)."""
    mu = 0.5
    mu += 6.0 * math.exp(-altitude / 150.0)
    mu += 0.05 * rain * (1.0 - canopy / 100.0)
    mu += 3.0 * math.exp(-((ph - 6.6) / 0.6) ** 2)
    mu += 0.05 * slope
    mu += 1.0 if region == HIGH_NITRATE_REGION else 0.0
    return mu


NITRATE_LOG_SD = 0.15  # multiplicative noise: nitrate = median * exp(N(0, 0.15))


def canopy_missing_probability(slope):
    """Canopy cover is missing more often on steep slopes (MAR on slope)."""
    return 0.04 + (0.12 if slope > 15.0 else 0.0)


def survey_rows():
    cov = random.Random(SEED + 11)  # covariates
    mis = random.Random(SEED + 12)  # missingness masks
    out = random.Random(SEED + 13)  # outcome noise
    names = list(REGIONS)
    weights = [REGIONS[n][0] for n in names]
    rows = []
    for i in range(1, N_SITES + 1):
        region = weighted_choice(cov, names, weights)
        _, alt_mean, alt_sd, canopy_mean = REGIONS[region]
        altitude = round(normal_in(cov, alt_mean, alt_sd, 1.5, 950.0))
        slope = round(exponential_in(cov, 3.0 + altitude / 50.0, 45.0), 1)
        ph = round(normal_in(cov, 7.2 - altitude / 400.0, 0.5, 3.8, 8.6), 1)
        road = round(exponential_in(cov, 450.0, 5000.0))
        canopy = round(min(100.0, max(0.0, normal(cov, canopy_mean, 25.0))))
        rain = round(lognormal_in(cov, 60.0 + 0.08 * altitude, 0.45,
                                  2.0, 400.0), 1)
        day = int(cov.random() * SURVEY_DAYS)
        sampled = SURVEY_FIRST_DAY + datetime.timedelta(days=day)

        mu = nitrate_mean(region, altitude, slope, ph, canopy, rain)
        nitrate = round(mu * math.exp(normal(out, 0.0, NITRATE_LOG_SD)), 2)

        # Masks: canopy MAR on slope, soil pH 3% MCAR.
        canopy_missing = bernoulli(mis, canopy_missing_probability(slope))
        ph_missing = bernoulli(mis, 0.03)

        rows.append([
            f"TS{i:04d}",
            region,
            str(altitude),
            fmt(slope, 1),
            None if ph_missing else fmt(ph, 1),
            str(road),
            None if canopy_missing else str(canopy),
            fmt(rain, 1),
            sampled.isoformat(),
            fmt(nitrate, 2),
        ])
    return rows


SURVEY_HEADER = [
    "site_code", "region", "altitude_m", "slope_deg", "soil_ph",
    "distance_to_road_m", "canopy_cover_pct", "rainfall_mm_30d",
    "sample_date", "nitrate_mg_l",
]


def main():
    for name, header, rows in (
        ("surgery-complications.csv", SURGERY_HEADER, surgery_rows()),
        ("field-survey.csv", SURVEY_HEADER, survey_rows()),
    ):
        path, n, size = write_csv(name, header, rows)
        print(f"wrote {os.path.relpath(path)}: {n} rows, {size} bytes")


if __name__ == "__main__":
    main()

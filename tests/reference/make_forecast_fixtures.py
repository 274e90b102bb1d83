#!/usr/bin/env python3
"""Writes the synthetic daily histories tests/reference/check_forecast.py
compares sluice's fit on (tests/reference/fixtures/forecast-*.csv).

Each series is level x (1 + trend per week x weeks before the end) x a
weekday multiplier x lognormal noise with mean 1, from a seeded generator
(Python's own Mersenne Twister), so the files are the same on every run;
`holiday` adds a three-day dip and a two-day outage (zeros) in the last
four weeks. The true values of each series are in CASES, which
check_forecast.py reads too. SHAPED adds series for the shift search and
the yearly season: 30% steps 14 and 7 days before the end, short
episodes, a slow drift, and three years with a New-Year surge. Standard
library only:

    python3 tests/reference/make_forecast_fixtures.py
"""

import datetime as dt
import math
import os
import random

START = dt.date(2026, 3, 2)  # a Monday

# name: days, level at the end, weekday pattern Monday first (mean 1),
#       trend per week, daily noise cv, with a holiday and an outage
CASES = {
    "flat": (182, 20000.0, [1.06, 1.12, 1.10, 1.04, 0.96, 0.80, 0.92], 0.0, 0.03, False),
    "trend": (182, 10000.0, [1.05, 1.07, 1.05, 1.01, 0.95, 0.90, 0.97], 0.01, 0.04, False),
    "weekend-heavy": (182, 3000.0, [0.85, 0.88, 0.90, 0.95, 1.05, 1.22, 1.15], 0.0, 0.06, False),
    "falling": (140, 50000.0, [1.04, 1.06, 1.04, 1.00, 0.95, 0.92, 0.99], -0.008, 0.03, False),
    "holiday": (154, 8000.0, [1.06, 1.12, 1.10, 1.04, 0.96, 0.80, 0.92], 0.0, 0.03, True),
}


def noisy(days, level, pattern, cv, seed, factor):
    """`days` rounded daily units from START: `factor(i, day, pattern,
    noise)` gives day i's units from the weekday pattern (scaled to
    average 1) and its lognormal noise (mean 1, coefficient of variation
    `cv`), drawn in day order from a generator seeded with `seed`."""
    mean = sum(pattern) / 7
    pattern = [m / mean for m in pattern]
    sigma = math.sqrt(math.log(1 + cv * cv))
    rng = random.Random(seed)
    out = []
    for i in range(days):
        day = START + dt.timedelta(days=i)
        noise = math.exp(rng.gauss(0.0, sigma) - sigma * sigma / 2)
        out.append((day, round(factor(i, day, pattern, noise))))
    return out


def series(name, seed):
    days, level, pattern, trend, cv, holiday = CASES[name]

    def units(i, day, pattern, noise):
        weeks = (i - (days - 1)) / 7
        u = level * (1 + trend * weeks) * pattern[day.weekday()] * noise
        if holiday and days - 20 <= i < days - 17:
            u *= 0.4
        if holiday and days - 10 <= i < days - 8:
            u = 0.0
        return u

    return noisy(days, level, pattern, cv, seed, units)


# Series with a shape over time, for the shift search and the yearly
# season: name: days, level at the end before the shape, weekday pattern,
# daily noise cv, the shape (see `shape`), its parameter.
SHAPED = {
    # A 30% drop that began 14 (7) days before the history's end.
    "step14": (182, 12000.0, [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96], 0.04, "step", 14),
    "step7": (182, 12000.0, [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96], 0.04, "step", 7),
    # A one-day spike x2.5 and a three-day holiday at 0.4 in the last
    # four weeks, and a one-day outage on the last day.
    "episodes": (182, 12000.0, [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96], 0.04, "episodes", 0),
    # A slow drift: -1.5% a week, compounded, all along.
    "drift": (182, 12000.0, [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96], 0.04, "drift", -0.015),
    # Three years growing 15% a year with a New-Year surge (x1.5 on the
    # first day of each 364-day year, fading linearly over eight weeks);
    # the history ends 120 days into the third year, on the decay's tail.
    "surge": (848, 20000.0, [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96], 0.03, "surge", 0.15),
}


def shape(kind, param, i, days):
    """The multiplier of day `i` of `days` for a SHAPED series."""
    if kind == "step":
        return 0.7 if i >= days - param else 1.0
    if kind == "episodes":
        if i == days - 25:
            return 2.5
        if days - 15 <= i < days - 12:
            return 0.4
        if i == days - 1:
            return 0.0
        return 1.0
    if kind == "drift":
        return (1 + param) ** ((i - (days - 1)) / 7)
    if kind == "surge":
        return (1 + param) ** ((i - (days - 1)) / 364) * surge(i)
    raise ValueError(kind)


def surge(i):
    """The New-Year surge on day `i` of a series that starts on a New Year."""
    p = i % 364
    return 1 + 0.5 * (1 - p / 56) if p < 56 else 1.0


def shaped(name, seed):
    days, level, pattern, cv, kind, param = SHAPED[name]

    def units(i, day, pattern, noise):
        return level * shape(kind, param, i, days) * pattern[day.weekday()] * noise

    return noisy(days, level, pattern, cv, seed, units)


def write(folder, name, rows):
    path = os.path.join(folder, f"forecast-{name}.csv")
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write("date,units\n")
        for day, units in rows:
            f.write(f"{day.isoformat()},{units}\n")
    print(f"wrote {os.path.relpath(path)}")


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    folder = os.path.join(here, "fixtures")
    os.makedirs(folder, exist_ok=True)
    for seed, name in enumerate(CASES, start=1):
        write(folder, name, series(name, seed))
    for seed, name in enumerate(SHAPED, start=101):
        write(folder, name, shaped(name, seed))


if __name__ == "__main__":
    main()

#!/usr/bin/env python3
"""Writes the synthetic daily histories tests/reference/check_forecast.py
compares sluice's fit on (tests/reference/fixtures/forecast-*.csv).

Each series is level x (1 + trend per week x weeks before the end) x a
weekday multiplier x lognormal noise with mean 1, from a seeded generator
(Python's own Mersenne Twister), so the files are the same on every run;
`holiday` adds a three-day dip and a two-day outage (zeros) in the last
four weeks. The true values of each series are in CASES, which
check_forecast.py reads too. Standard library only:

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


def series(name, seed):
    days, level, pattern, trend, cv, holiday = CASES[name]
    mean = sum(pattern) / 7
    pattern = [m / mean for m in pattern]
    sigma = math.sqrt(math.log(1 + cv * cv))
    rng = random.Random(seed)
    out = []
    for i in range(days):
        day = START + dt.timedelta(days=i)
        weeks = (i - (days - 1)) / 7
        noise = math.exp(rng.gauss(0.0, sigma) - sigma * sigma / 2)
        units = level * (1 + trend * weeks) * pattern[day.weekday()] * noise
        if holiday and days - 20 <= i < days - 17:
            units *= 0.4
        if holiday and days - 10 <= i < days - 8:
            units = 0.0
        out.append((day, round(units)))
    return out


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    folder = os.path.join(here, "fixtures")
    os.makedirs(folder, exist_ok=True)
    for seed, name in enumerate(CASES, start=1):
        path = os.path.join(folder, f"forecast-{name}.csv")
        with open(path, "w", encoding="utf-8", newline="\n") as f:
            f.write("date,units\n")
            for day, units in series(name, seed):
                f.write(f"{day.isoformat()},{units}\n")
        print(f"wrote {os.path.relpath(path)}")


if __name__ == "__main__":
    main()

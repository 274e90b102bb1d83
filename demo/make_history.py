#!/usr/bin/env python3
"""Writes the demo pools' daily traffic histories (invented data).

Larkspur & Loom is an invented shop; these files are made up to show
`history:` in portfolios/demo.yaml. Each pool gets 31 weeks of daily
eligible units, from Monday 2026-06-01 to Sunday 2027-01-03 (the day
before the demo's window opens), built as

    level at the end x (1 + trend per week x weeks before the end)
        x the weekday multiplier x a holiday factor x lognormal noise,

with a Christmas dip (24-26 December) in every pool, a one-day tracking
outage on the search pool, and a seeded generator, so the files are the
same on every run. Standard library only:

    python3 demo/make_history.py     # rewrites portfolios/history/*.csv
"""

import datetime as dt
import math
import os
import random

START = dt.date(2026, 6, 1)
END = dt.date(2027, 1, 3)

# id: (level on an average day at the end, weekday pattern Monday first,
#      relative trend per week, daily noise as a coefficient of variation)
POOLS = {
    "home": (60000, [1.06, 1.08, 1.05, 1.02, 0.94, 0.88, 0.97], 0.002, 0.04),
    "search": (38000, [1.04, 1.06, 1.04, 1.0, 0.95, 0.92, 0.99], 0.0, 0.04),
    "product": (75000, [1.05, 1.07, 1.05, 1.01, 0.95, 0.9, 0.97], 0.003, 0.04),
    "basket": (9500, [1.08, 1.06, 1.03, 1.0, 0.97, 0.9, 0.96], 0.0, 0.05),
    "app-onboarding": (2600, [0.9, 0.92, 0.95, 1.0, 1.05, 1.12, 1.06], 0.006, 0.08),
}

# Days off the usual rhythm: Christmas everywhere, an outage on search.
HOLIDAY = {dt.date(2026, 12, 24): 0.75, dt.date(2026, 12, 25): 0.55, dt.date(2026, 12, 26): 0.7}
OUTAGE = {"search": {dt.date(2026, 11, 18): 0.0}}


def series(pool, seed):
    level, pattern, trend, cv = POOLS[pool]
    mean = sum(pattern) / 7
    pattern = [m / mean for m in pattern]
    sigma = math.sqrt(math.log(1 + cv * cv))
    rng = random.Random(seed)
    day = START
    while day <= END:
        weeks = (day - END).days / 7
        noise = math.exp(rng.gauss(0.0, sigma) - sigma * sigma / 2)
        units = level * (1 + trend * weeks) * pattern[day.weekday()] * noise
        units *= HOLIDAY.get(day, 1.0)
        units *= OUTAGE.get(pool, {}).get(day, 1.0)
        yield day, round(units)
        day += dt.timedelta(days=1)


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out = os.path.join(here, "..", "portfolios", "history")
    os.makedirs(out, exist_ok=True)
    for seed, pool in enumerate(POOLS, start=1):
        path = os.path.join(out, f"{pool}.csv")
        with open(path, "w", encoding="utf-8", newline="\n") as f:
            f.write("date,units\n")
            for day, units in series(pool, seed):
                f.write(f"{day.isoformat()},{units}\n")
        print(f"wrote {os.path.relpath(path)}")


if __name__ == "__main__":
    main()

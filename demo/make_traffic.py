#!/usr/bin/env python3
"""Writes the demo pools' actual daily traffic for the quarter's first 30 days
(invented data).

Larkspur & Loom is an invented shop. The re-plan of demo/walkthrough.sh on
day 30 (2027-02-03) refits each pool's forecast from what came in from
2027-01-04 to 2027-02-02. The days follow the same model as
demo/make_history.py (level, trend, weekday pattern, lognormal noise), with
the scenario's own surprises:

- product pages lose a fifth of their visitors from 2027-01-18 on (in the
  story, a comparison site stopped listing the shop's fabrics);
- the app's onboarding runs 10% above its trend all month (a store
  feature);
- the other pools come in as their history would have it.

Seeded, so the files are the same on every run. Standard library only:

    python3 demo/make_traffic.py     # rewrites demo/traffic/*.csv
"""

import datetime as dt
import math
import os
import random
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from make_history import END, POOLS  # noqa: E402

FIRST = dt.date(2027, 1, 4)
LAST = dt.date(2027, 2, 2)

# id: (from this day on, a factor on the model's units)
SURPRISES = {
    "product": (dt.date(2027, 1, 18), 0.8),
    "app-onboarding": (FIRST, 1.1),
}


def series(pool, seed):
    level, pattern, trend, cv = POOLS[pool]
    mean = sum(pattern) / 7
    pattern = [m / mean for m in pattern]
    sigma = math.sqrt(math.log(1 + cv * cv))
    rng = random.Random(seed)
    since, factor = SURPRISES.get(pool, (LAST + dt.timedelta(days=1), 1.0))
    day = FIRST
    while day <= LAST:
        weeks = (day - END).days / 7
        noise = math.exp(rng.gauss(0.0, sigma) - sigma * sigma / 2)
        units = level * (1 + trend * weeks) * pattern[day.weekday()] * noise
        if day >= since:
            units *= factor
        yield day, round(units)
        day += dt.timedelta(days=1)


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out = os.path.join(here, "traffic")
    os.makedirs(out, exist_ok=True)
    for seed, pool in enumerate(POOLS, start=101):
        path = os.path.join(out, f"{pool}.csv")
        with open(path, "w", encoding="utf-8", newline="\n") as f:
            f.write("date,units\n")
            for day, units in series(pool, seed):
                f.write(f"{day.isoformat()},{units}\n")
        print(f"wrote {os.path.relpath(path)}")


if __name__ == "__main__":
    main()

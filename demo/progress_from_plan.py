#!/usr/bin/env python3
"""Writes a progress file for the demo walkthrough from a saved plan.

Usage: progress_from_plan.py PLAN.json TODAY [DELIVERED]

Every test the plan started before TODAY is recorded: `finished` when its
planned run ended before TODAY, else `running` with the units its pool's
forecast gave it from its start to the day before TODAY (its share, times
the share of units its targeting admits, times what an overlap pool's
holdout leaves), times DELIVERED
(default 0.9: traffic ran 10% under the forecast). A stand-in for the counts
an experimentation platform would report; the data is the demo's own.
"""
import json
import sys
from datetime import date


def main() -> int:
    if len(sys.argv) < 3:
        print(__doc__, file=sys.stderr)
        return 2
    plan = json.load(open(sys.argv[1], encoding="utf-8"))
    today = date.fromisoformat(sys.argv[2])
    delivered = float(sys.argv[3]) if len(sys.argv) > 3 else 0.9
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
    lines = [
        f"# Progress on {today}, made from the plan by demo/progress_from_plan.py",
        f"# (traffic delivered at {delivered:.0%} of the forecast so far).",
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
        if end < today:
            lines += [
                "    state: finished",
                f"    started: {start}",
                f"    ended: {end}",
                f"    share: {e['share']}",
            ]
            continue
        days = forecast[e["pool"]]
        units = sum(v for d, v in days.items() if start <= d < today)
        entering = e.get("eligible", 1.0) * open_to_tests[e["pool"]]
        units = int(units * e["share"] * entering * delivered)
        lines += [
            "    state: running",
            f"    started: {start}",
            f"    share: {e['share']}",
            f"    units: {units}",
        ]
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())

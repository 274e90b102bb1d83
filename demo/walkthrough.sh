#!/usr/bin/env bash
# The whole story of sluice on the demo portfolio (Larkspur & Loom, an
# invented shop for home textiles, first quarter of 2027):
#
#   1. check the queue;            2. plan the quarter, and the tests
#      that run on several pools, admit part of a pool, have a given size,
#      ramp up, or are kept apart on traffic;
#   3. the HTML report and the results calendar (iCalendar);
#   4. day 30: progress so far, and each pool's actual traffic since the
#      quarter began (demo/traffic/, invented by demo/make_traffic.py:
#      product pages lost a fifth of their visitors from 18 January);
#   5. re-plan, refitted from that traffic: the drop on product pages is
#      found as a shift on its day and named first, the new level comes
#      from the days since it; a running test whose arms came in 53:47
#      on a 1:1 design is flagged as a sample-ratio mismatch; and what
#      moved since the first plan;
#   6. a what-if on top: product pages lose another 30% from today (--scale).
#
# Every output goes to demo/out/ (git-ignored), made afresh on each run.
# Runs from any folder; needs cargo and python3 (standard library only).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/.." && pwd)"
out="$here/out"
portfolio="$root/portfolios/demo.yaml"
today=2027-02-03          # day 30 of the window, which starts on 2027-01-04
drop="product=0.7@$today" # what if product pages lose another 30% from today

heading() { printf '\n==> %s\n\n' "$*"; }

heading "building sluice (release)"
(cd "$root" && cargo build --release --quiet)
sluice="${CARGO_TARGET_DIR:-$root/target}/release/sluice"
case "$sluice" in /*) ;; *) sluice="$root/$sluice" ;; esac

rm -rf "$out"
mkdir -p "$out"

heading "1. check the queue: sizes, and what could fit alone"
"$sluice" check "$portfolio" | tee "$out/check.txt"

heading "2. plan the quarter from its first day"
"$sluice" plan "$portfolio" --no-timing | tee "$out/plan.txt"
"$sluice" plan "$portfolio" --no-timing --format json --out "$out/plan.json"

heading "2b. what a real programme needs: tests on several pools, targeting, given sizes, ramps, holdouts, pairs apart on traffic"
# The plan's own JSON, read back: each of these tests as the plan has it.
python3 - "$out/plan.json" <<'PY'
import json, sys
plan = json.load(open(sys.argv[1], encoding="utf-8"))
for p in plan["pools"]:
    if p.get("holdout"):
        print(f"pool {p['id']}: {p['holdout']:.0%} of its units held out of every test")
for e in plan["experiments"]:
    facts = []
    if len(e["pools"]) > 1:
        facts.append("on " + ", ".join(e["pools"]) + " at once")
    if e.get("eligible", 1) < 1:
        facts.append(f"admits {e['eligible']:.0%} of its pool's units")
    if e.get("sample_size_given"):
        facts.append(f"sample size given: {e['units_needed']:,} units")
    for step in e.get("ramp", []):
        facts.append(f"ramp {step['share']:.0%} from {step['start']} to {step['end']}")
    if not facts:
        continue
    when = (f"{e['share']:.0%} from {e['start']}, result {e['result_date']}"
            if e["status"] == "scheduled" else e["status"])
    print(f"{e['id']}: {'; '.join(facts)}; {when}")
PY
grep -n "apart: traffic" "$portfolio" | sed 's/^/demo.yaml line /'

heading "3. the report to share and the calendar of result dates"
"$sluice" plan "$portfolio" --no-timing --format html --out "$out/plan.html"
"$sluice" plan "$portfolio" --no-timing --format ics --out "$out/results.ics"

heading "4. day 30 ($today): progress so far, and the traffic each pool actually had"
python3 "$here/progress_from_plan.py" "$out/plan.json" "$today" --traffic "$here/traffic" \
    > "$out/progress-day30.yaml"
cat "$out/progress-day30.yaml"

heading "5. re-plan from the traffic observed, around the running tests, and what moved"
replan=("$sluice" replan "$portfolio" --progress "$out/progress-day30.yaml"
    --today "$today" --previous "$out/plan.json" --no-timing)
"${replan[@]}" | tee "$out/replan.txt"
# The news comes first: the shift found in product pages' traffic.
python3 - "$out/replan.txt" <<'PY'
import sys
text = open(sys.argv[1], encoding="utf-8").read()
if not text.startswith("Traffic shift"):
    sys.exit("walkthrough: the re-plan does not open with the traffic shift")
if "Tests with a sample-ratio mismatch" not in text:
    sys.exit("walkthrough: the re-plan does not flag the lopsided test")
flat = " ".join(text.split())
if "look 2, better" not in flat:
    sys.exit("walkthrough: the re-plan does not show the ranking test stopped at its look")
PY
"${replan[@]}" --format md --out "$out/replan.md"
"${replan[@]}" --format html --out "$out/replan.html"
"${replan[@]}" --format json --out "$out/replan.json"
# Imported over results.ics, it moves the changed events (a higher SEQUENCE)
# and cancels those of tests that stopped or no longer fit.
"${replan[@]}" --format ics --out "$out/replan.ics"
# The ranking test stopped at its second look: look 1 stands as held,
# look 2 marks the stop on the day its result came, and its result event
# moved there, confirmed.
python3 - "$out/replan.ics" <<'PY'
import sys
ics = open(sys.argv[1], encoding="utf-8", newline="").read().replace("\r\n ", "")
events = {e.split("UID:")[1].split("\r\n")[0]: e for e in ics.split("BEGIN:VEVENT")[1:]}
look2 = events["look-2.search-ranking-v2.demo@sluice"]
result = events["result.search-ranking-v2.demo@sluice"]
if "stopped the test" not in look2 or "STATUS:CONFIRMED" not in look2:
    sys.exit("walkthrough: look 2 of the ranking test is not the confirmed stop")
if "Result in (better than control)" not in result:
    sys.exit("walkthrough: the ranking test's result event is not in the past tense")
PY

heading "6. what if product pages lose another 30% from today: --scale $drop"
"${replan[@]}" --scale "$drop" | tee "$out/whatif.txt"

written=$(cd "$out" && ls | tr '\n' ' ')
heading "done"
echo "wrote to ${out#"$PWD"/}: $written"

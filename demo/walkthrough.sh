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
#   6. a what-if on top: product pages lose another 30% from today (--scale);
#   7. the planning meeting on the board (sluice board), scripted: it drops
#      a test, watches another result come earlier, scales product pages
#      to 0.7, pins a start, takes one change back, saves the scenario, and
#      `sluice plan --scenario` plans that file byte for byte the same.
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

heading "7. the planning meeting on the board (sluice board), driven over its API"
"$sluice" board "$portfolio" --no-open --port 0 >"$out/board.log" 2>&1 &
board_pid=$!
trap 'kill -INT "$board_pid" 2>/dev/null || true' EXIT
for _ in $(seq 1 100); do
    grep -q '^sluice board: http' "$out/board.log" 2>/dev/null && break
    sleep 0.1
done
url="$(sed -n 's/^sluice board: //p' "$out/board.log" | head -1)"
python3 - "$url" "$out" <<'PY'
import json, sys, urllib.request
url, out = sys.argv[1], sys.argv[2]
base, token = url.split("/?token=")
def call(method, path, body=None):
    data = None if body is None else json.dumps(body).encode()
    req = urllib.request.Request(base + path, data=data, method=method,
                                 headers={"X-Sluice-Token": token, "Content-Type": "application/json"})
    with urllib.request.urlopen(req) as r:
        raw = r.read()
    return raw if path.endswith((".json", "scenario")) else json.loads(raw)
def dates(v):
    return {t["id"]: t["result_date"] for t in v["tests"]}
def say(v, what):
    print(f"- {what}: {v['summary']} {v['moved']['headline']}")
start = call("GET", "/api/state")
print(f"- the portfolio as written: {start['summary']}")
v = call("POST", "/api/edit", {"test": "home-static-hero", "leave_out": True})
say(v, "drop the hero test")
earlier = [i for i, d in dates(v).items() if d and dates(start)[i] and d < dates(start)[i]]
if not earlier:
    sys.exit("walkthrough: dropping a test moved no result earlier")
print(f"  earlier now: {', '.join(earlier)}")
say(call("POST", "/api/edit", {"pool": "product", "scale": 0.7, "from": "2027-02-01"}),
    "what if product pages lose 30% from February")
say(call("POST", "/api/edit", {"test": "app-style-quiz", "start": "2027-02-01"}),
    "the app team wants the style quiz to start on 1 February")
say(call("POST", "/api/undo"), "second thoughts on the pin (undo)")
say(call("POST", "/api/redo"), "the pin stays after all (redo)")
open(f"{out}/meeting.yaml", "wb").write(call("GET", "/api/scenario"))
open(f"{out}/meeting-board.json", "wb").write(call("GET", "/api/plan.json"))
print(f"- saved the meeting as {out}/meeting.yaml")
PY
kill -INT "$board_pid"
wait "$board_pid" || true
trap - EXIT
cat "$out/meeting.yaml"
"$sluice" plan "$portfolio" --scenario "$out/meeting.yaml" --format json --no-timing --out "$out/meeting-cli.json"
cmp "$out/meeting-board.json" "$out/meeting-cli.json"
echo "sluice plan --scenario $out/meeting.yaml gives the board's plan byte for byte"

written=$(cd "$out" && ls | tr '\n' ' ')
heading "done"
echo "wrote to ${out#"$PWD"/}: $written"

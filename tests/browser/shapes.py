"""Portfolios of other shapes for the browser checks, written to a folder.

    python3 tests/browser/shapes.py DIR

many-pools: twelve pools of three tests, a window that opens on a
Thursday while tests start on Mondays, a blackout, interim looks;
long-names: long pool names, titles and ids; one-test: one pool, one
test; tests-300: three hundred tests on eight pools over half a year.
The shop and its tests are invented; the numbers are deterministic.
"""
import random
import sys
from pathlib import Path


def pool(pid, label, daily, sharing="split", cap=3):
    return (
        f"  - id: {pid}\n    label: \"{label}\"\n    daily: {daily}\n"
        f"    sharing: {sharing}\n    max_concurrent: {cap}\n"
    )


def test(tid, title, pid, baseline, mde, extra=""):
    return (
        f"  - id: {tid}\n    title: \"{title}\"\n    owner: Web team\n    pool: {pid}\n"
        f"    baseline: {baseline}\n    mde: {mde}\n{extra}"
    )


def portfolio(name, start, end, pools, tests, more=""):
    return (
        f"name: {name}\nwindow: {{start: {start}, end: {end}}}\n"
        f"planning: {{start_grid: weekly, start_weekday: monday}}\n{more}"
        f"pools:\n{''.join(pools)}experiments:\n{''.join(tests)}"
    )


def many_pools(rng):
    pools, tests = [], []
    for p in range(12):
        pid = f"area-{p + 1}"
        pools.append(pool(pid, f"Shop area {p + 1}", rng.choice([4000, 9000, 20000]),
                          "overlap" if p % 3 == 0 else "split"))
        for t in range(3):
            extra = "    looks: 3\n" if (p + t) % 7 == 0 else ""
            tests.append(test(f"a{p + 1}-t{t + 1}", f"Change {t + 1} in area {p + 1}", pid,
                              rng.choice([0.03, 0.06, 0.12]), rng.choice([0.05, 0.08, 0.12]), extra))
    blackout = ("blackouts:\n  - {from: 2027-03-15, to: 2027-03-21, kind: no_starts, "
                "note: release freeze}\n")
    return portfolio("Shop with many areas", "2027-01-07", "2027-04-07", pools, tests, blackout)


def long_names(rng):
    pools, tests = [], []
    labels = [
        "Basket, checkout and the payment pages after it, for signed-in and guest visitors alike",
        "Product detail pages of the curtains, blinds and made-to-measure window dressings range",
        "Search",
    ]
    for p, label in enumerate(labels):
        pid = f"pool-with-a-rather-long-identifier-{p + 1}"
        pools.append(pool(pid, label, 12000))
        for t in range(4):
            tests.append(test(
                f"a-very-long-experiment-identifier-for-area-{p + 1}-number-{t + 1}",
                "A long title that explains the change in full: a larger photo, a shorter "
                f"headline and a clearer delivery promise, variant {t + 1}",
                pid, 0.05, rng.choice([0.06, 0.1])))
    return portfolio("Shop whose names run long, to see that nothing is cut", "2027-01-04",
                     "2027-04-04", pools, tests)


def one_test(rng):
    return portfolio("Shop with a single test", "2027-01-04", "2027-04-04",
                     [pool("home", "Home page", 8000)],
                     [test("hero-copy", "Shorter hero headline", "home", 0.05, 0.1)])


def tests_300(rng):
    pools, tests = [], []
    for p in range(8):
        pid = f"p{p + 1}"
        pools.append(pool(pid, f"Pool {p + 1}", rng.choice([30000, 60000, 120000]),
                          "split", 6))
    for t in range(300):
        pid = f"p{t % 8 + 1}"
        extra = "    looks: 2\n" if t % 23 == 0 else ""
        tests.append(test(f"t{t + 1:03}", f"Test number {t + 1}", pid,
                          rng.choice([0.04, 0.08, 0.15]), rng.choice([0.04, 0.06, 0.1, 0.2]), extra))
    return portfolio("Programme of three hundred tests", "2027-01-04", "2027-06-27", pools, tests)


def main():
    out = Path(sys.argv[1])
    out.mkdir(parents=True, exist_ok=True)
    for name, make in [("many-pools", many_pools), ("long-names", long_names),
                       ("one-test", one_test), ("tests-300", tests_300)]:
        (out / f"{name}.yaml").write_text(make(random.Random(name)), encoding="utf-8")


main()

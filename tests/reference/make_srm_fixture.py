#!/usr/bin/env python3
"""Writes tests/fixtures/srm-scipy.json: Pearson's chi-square goodness of
fit of per-arm counts against a design's allocation, computed by scipy's
`scipy.stats.chisquare` (expected counts: the total split in proportion
to each arm's weight, control 1 and each treatment the design's ratio).
src/sizing/srm.rs checks its statistic and p-value against these rows.

The counts are invented: balanced and unbalanced splits, uneven
allocations, three and four arms, small and large totals. Run with the
reference venv (tests/reference/run.sh makes it):

    tests/reference/.venv/bin/python tests/reference/make_srm_fixture.py
"""

import json
import os

import scipy
from scipy.stats import chisquare

CASES = [
    ([27400, 24288], [1, 1]),
    ([50120, 49880], [1, 1]),
    ([10000, 10100, 9900], [1, 1, 1]),
    ([33500, 66100], [1, 2]),
    ([5000, 5400, 4800, 5100], [1, 1.5, 1.5, 1.5]),
    ([100, 130], [1, 1]),
    ([1000000, 1003500], [1, 1]),
    ([0, 12], [1, 1]),
]


def main():
    rows = []
    for counts, weights in CASES:
        total, w = sum(counts), sum(weights)
        expected = [total * x / w for x in weights]
        r = chisquare(counts, expected)
        rows.append(
            {
                "counts": counts,
                "weights": weights,
                "statistic": float(r.statistic),
                "p_value": float(r.pvalue),
            }
        )
    here = os.path.dirname(os.path.abspath(__file__))
    path = os.path.join(here, "..", "fixtures", "srm-scipy.json")
    with open(path, "w", encoding="utf-8") as f:
        json.dump({"source": f"scipy {scipy.__version__} scipy.stats.chisquare", "rows": rows}, f, indent=1)
        f.write("\n")
    print(f"wrote {os.path.relpath(path)}")


if __name__ == "__main__":
    main()

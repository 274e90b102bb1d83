#!/usr/bin/env python3
"""Checks `sluice size --format json` against scipy and statsmodels.

Every design in a grid of rate and mean designs is sized by the real sluice
binary (one subprocess per design, run in parallel) and by an outside
reference for its method:

* pooled (Fleiss, pooled variance under H0, unpooled under H1):
  statsmodels.stats.proportion.samplesize_proportions_2indep_onetail;
* arcsine (Cohen's h): statsmodels.stats.power.NormalIndPower().solve_power
  with statsmodels.stats.proportion.proportion_effectsize;
* unpooled and corrected (Fleiss, Tytun & Ury 1980, Biometrics 36,
  343-346): the closed forms, written out below with scipy.stats.norm
  quantiles;
* t: statsmodels.stats.power.TTestIndPower().solve_power (effect size
  d = delta / sd); z: NormalIndPower().solve_power.

The grid crosses baselines, relative and absolute, positive and negative
MDEs with unequal ratios, one-sided tests, several arms under Bonferroni,
Sidak and no correction, CUPED rho, and other alpha and power. For each
design the check asserts:

* `control` and `treatment` within +-1 unit of the reference rounded up;
* `control_exact` within a small relative tolerance of the reference
  (the maximum relative difference is printed per method);
* `treatment_exact` = ratio x `control_exact`, `total` = control +
  (arms - 1) x treatment, `comparison_alpha` from the correction;
* `achieved_power` (sluice's power at its rounded size) equal to the
  reference's power at that size, and at least the target.

Conventions shared with the references, each stated where it is used:
two-sided normal-approximation sizes of rates count only the near tail
(as samplesize_proportions_2indep_onetail; the far tail is measured and
reported), both tests on means count both tails (t as TTestIndPower, z as
NormalIndPower with alternative='two-sided'), and CUPED
scales the variance by 1 - rho^2 (Deng, Xu, Kohavi & Walker 2013).

Then the minimum-detectable-effect inverse on a subset: the reference
finds the effect a given size N detects (scipy's brentq on the
reference's own power function: statsmodels' TTestIndPower,
NormalIndPower, power_proportions_2indep, or the corrected closed form);
sluice, sized for that effect, must need N units again. Together with the
library's own MDE(sample_size(d)) = d property test this ties sluice's MDE
inverse to the reference's. Designs the engine must refuse (a treatment
rate outside (0, 1), alpha, power, rho, ratio, arms or sd out of range, a
rate method on a mean, a total beyond any traffic) must exit 2 and name
the flag.

Then the checks of check_stats.py: non-inferiority (guardrail) sizes,
group-sequential designs and `sluice detect` (see its docstring).

Prints one line `N passed, M failed` and exits 1 on any failure.
"""

import argparse
import json
import math
import os
import subprocess
import sys
import warnings
from concurrent.futures import ThreadPoolExecutor
from types import SimpleNamespace

import check_stats
from scipy.optimize import brentq
from scipy.stats import norm
from statsmodels.stats.power import NormalIndPower, TTestIndPower, normal_power_het
from statsmodels.stats.proportion import (
    power_proportions_2indep,
    proportion_effectsize,
    samplesize_proportions_2indep_onetail,
)

# Relative tolerance on `control_exact` against the reference's float.
# Closed forms agree to rounding; solve_power (a root finder) and the far
# tail that NormalIndPower counts in two-sided tests leave a little more.
EXACT_RTOL = {
    "pooled": 1e-9,
    "unpooled": 1e-9,
    "corrected": 1e-9,
    "arcsine": 1e-6,
    "z": 1e-6,
    "t": 1e-6,
}
# Absolute tolerance on `achieved_power` against the reference power.
POWER_ATOL = 1e-7
# Relative tolerance on the size sluice needs for the reference's MDE.
MDE_RTOL = 1e-6
# The far tail of a two-sided normal test, which sluice and
# samplesize_proportions_2indep_onetail leave out: it must stay negligible on
# the grid (it grows where the null and alternative variances differ most,
# e.g. a baseline of 0.9 moved to 0.99 with unequal arms).
FAR_TAIL_MAX = 1e-3


# ---------------------------------------------------------------- designs


def design(**kw):
    """A design with sluice's documented defaults, overridden by `kw`."""
    d = dict(
        baseline=None,
        mean=None,
        sd=None,
        effect_kind="rel",
        effect=None,
        alpha=0.05,
        power=0.8,
        one_sided=False,
        arms=2,
        ratio=1.0,
        method=None,
        correction="bonferroni",
        rho=0.0,
    )
    d.update(kw)
    if d["method"] is None:
        d["method"] = "pooled" if d["baseline"] is not None else "t"
    return d


def cli_args(d):
    """The `sluice size` flags for a design. Values are joined with `=`
    (`--mean=-50.0`) so a negative value can never be read as a flag, and
    floats are written with repr, which round-trips exactly through Rust's
    f64 parser."""
    a = ["size", "--format=json"]
    if d["baseline"] is not None:
        a.append(f"--baseline={d['baseline']!r}")
    else:
        a += [f"--mean={d['mean']!r}", f"--sd={d['sd']!r}"]
    flag = "--mde" if d["effect_kind"] == "rel" else "--mde-abs"
    a.append(f"{flag}={d['effect']!r}")
    a += [f"--alpha={d['alpha']!r}", f"--power={d['power']!r}"]
    if d["one_sided"]:
        a.append("--one-sided")
    a += [f"--arms={d['arms']}", f"--ratio={d['ratio']!r}"]
    a += [f"--method={d['method']}", f"--correction={d['correction']}"]
    a.append(f"--rho={d['rho']!r}")
    return a


def describe(d):
    return " ".join(cli_args(d)[2:])


VARIANTS = [
    {},
    {"ratio": 2.5},
    {"ratio": 0.4, "one_sided": True},
    {"arms": 3, "correction": "bonferroni"},
    {"arms": 5, "correction": "sidak", "ratio": 1.5},
    {"arms": 4, "correction": "none"},
    {"rho": 0.3},
    {"alpha": 0.1, "power": 0.9, "one_sided": True, "rho": 0.6},
    {"alpha": 0.01, "power": 0.95, "arms": 3, "correction": "sidak"},
]

RATE_BASELINES = [0.01, 0.05, 0.2, 0.5, 0.9]
RATE_EFFECTS = [("rel", 0.1), ("rel", -0.25), ("abs", 0.02), ("abs", -0.005)]
RATE_METHODS = ["pooled", "unpooled", "corrected", "arcsine"]

MEAN_METRICS = [(10.0, 5.0), (100.0, 40.0), (-50.0, 20.0)]
# d = |delta| / sd from 0.0015 (7 million units per arm, 35 million with
# the strictest variant) to 0.5: large t sizes are where a t quantile or a
# noncentral t that drifts at large df shows.
MEAN_EFFECTS = [
    ("rel", 0.05),
    ("rel", -0.2),
    ("rel", 0.002),
    ("abs", 2.5),
    ("abs", -7.5),
    ("abs", 0.06),
]
MEAN_METHODS = ["t", "z"]


def grid():
    out = []
    for p in RATE_BASELINES:
        for kind, e in RATE_EFFECTS:
            for m in RATE_METHODS:
                for v in VARIANTS:
                    out.append(
                        design(baseline=p, effect_kind=kind, effect=e, method=m, **v)
                    )
    for mean, sd in MEAN_METRICS:
        for kind, e in MEAN_EFFECTS:
            for m in MEAN_METHODS:
                for v in VARIANTS:
                    out.append(
                        design(mean=mean, sd=sd, effect_kind=kind, effect=e, method=m, **v)
                    )
    return out


# ------------------------------------------------------------- references
#
# Conventions. sluice: `control` is arm 1 (the baseline), each treatment arm
# has ratio x control units, sizes are per arm. statsmodels' two-sample
# functions size "sample 1" and take ratio = nobs2 / nobs1, so sample 1 is
# sluice's control and sample 2 its treatment throughout.


def treatment_value(d):
    """The treatment arm's rate or mean: baseline x (1 + relative MDE) or
    baseline + absolute MDE (the meaning of --mde and --mde-abs)."""
    base = d["baseline"] if d["baseline"] is not None else d["mean"]
    if d["effect_kind"] == "rel":
        return base * (1.0 + d["effect"])
    return base + d["effect"]


def comparison_alpha(d):
    """Alpha of each of the k = arms - 1 treatment-versus-control tests."""
    k = d["arms"] - 1
    if d["correction"] == "none" or k == 1:
        return d["alpha"]
    if d["correction"] == "bonferroni":
        return d["alpha"] / k
    return 1.0 - (1.0 - d["alpha"]) ** (1.0 / k)  # Sidak


def tail_alpha(d):
    """Alpha in the one tail the normal-approximation formulas use."""
    ca = comparison_alpha(d)
    return ca if d["one_sided"] else ca / 2.0


def variance_factor(d):
    """CUPED (Deng, Xu, Kohavi & Walker 2013): the adjusted metric's
    variance is (1 - rho^2) times the raw one."""
    return 1.0 - d["rho"] ** 2


def sm_rate_args(d):
    """statsmodels' proportion arguments for a rate design.

    From statsmodels 0.15.0 stats/proportion.py (_std_2prop_power and the
    docstring of samplesize_proportions_2indep_onetail): `prop2` is the
    reference proportion of sample 2, sample 1 has p1 = prop2 + diff,
    nobs2 = ratio x nobs1, the pooled null proportion is
    (p1 + ratio p2) / (1 + ratio), and the returned size is nobs1. With
    sample 1 = control: diff = p_control - p_treatment, prop2 = p_treatment.
    `alternative` 'larger' means p1 > p2; for one-sided designs we pass the
    direction of the effect, as sluice tests in the effect's direction.
    """
    pc = d["baseline"]
    pt = treatment_value(d)
    diff = pc - pt
    directional = "larger" if diff > 0 else "smaller"
    return pc, pt, diff, directional


def ref_control(d):
    """The reference control-arm size (float) for a design."""
    m = d["method"]
    ca = comparison_alpha(d)
    a_tail = tail_alpha(d)
    r = d["ratio"]
    vf = variance_factor(d)
    power = d["power"]
    z_a = norm.isf(a_tail)
    z_b = norm.ppf(power)
    if m in ("pooled", "unpooled", "corrected"):
        pc, pt, diff, directional = sm_rate_args(d)
        if m == "pooled":
            alt = directional if d["one_sided"] else "two-sided"
            n = samplesize_proportions_2indep_onetail(
                diff, pt, power, ratio=r, alpha=ca, alternative=alt
            )
            return float(n) * vf
        var_alt = pc * (1 - pc) + pt * (1 - pt) / r
        if m == "unpooled":
            # n1 = (z_a + z_b)^2 (p1 q1 + p2 q2 / r) / delta^2
            return (z_a + z_b) ** 2 * var_alt * vf / diff**2
        # Fleiss, Tytun & Ury (1980): m from the pooled-null formula, then
        # m' = m/4 (1 + sqrt(1 + 2 (r + 1) / (m r |delta|)))^2 for groups of
        # m and r m. CUPED shrinks the variance terms, so it enters m; the
        # correction term depends only on delta and r.
        return corrected_from_zb(d, z_b)
    # NormalIndPower counts both tails of a two-sided test; sluice's rate
    # methods, like samplesize_proportions_2indep_onetail, only the near one
    # (its z on means counts both, checked below). The far tail
    # shifts n by about 2.6e-6 of itself at power 0.8 (40 units at 15
    # million), so the normal references solve the near tail alone:
    # one-sided ('larger', |effect|) at the tail alpha. ref_power reports
    # the far tail's size.
    if m == "arcsine":
        pc, pt, _, _ = sm_rate_args(d)
        h = abs(proportion_effectsize(pt, pc))  # 2 asin sqrt(pt) - 2 asin sqrt(pc)
        n = NormalIndPower().solve_power(
            effect_size=h / math.sqrt(vf), alpha=a_tail, power=power, ratio=r,
            alternative="larger",
        )
        return float(n)
    es = abs(treatment_value(d) - d["mean"]) / (d["sd"] * math.sqrt(vf))
    alt = "larger" if d["one_sided"] else "two-sided"
    if m == "z":
        # Both tails when two-sided, as sluice's z on means.
        n = NormalIndPower().solve_power(
            effect_size=es, alpha=ca, power=power, ratio=r, alternative=alt
        )
        return float(n)
    n = TTestIndPower().solve_power(effect_size=es, alpha=ca, power=power, ratio=r, alternative=alt)
    return float(n)


def corrected_from_zb(d, z_b):
    pc, pt = d["baseline"], treatment_value(d)
    r = d["ratio"]
    delta = abs(pt - pc)
    z_a = norm.isf(tail_alpha(d))
    pbar = (pc + r * pt) / (1 + r)
    s0 = math.sqrt(pbar * (1 - pbar) * (1 + 1 / r))
    s1 = math.sqrt(pc * (1 - pc) + pt * (1 - pt) / r)
    m = max(z_a * s0 + z_b * s1, 0.0) ** 2 / delta**2 * variance_factor(d)
    if m == 0.0:
        return 0.0
    return m / 4 * (1 + math.sqrt(1 + 2 * (r + 1) / (m * r * delta))) ** 2


def ref_power(d, n_control):
    """The reference power with `n_control` control units and ratio x
    n_control in each treatment arm.

    Two-sided normal-approximation tests: sluice, like
    samplesize_proportions_2indep_onetail, counts only the tail in the
    effect's direction, so the reference is statsmodels' one-sided power at
    alpha/2 (the near tail). `far_tail` returns what the two-sided
    statsmodels power adds on top (reported, and asserted tiny).
    The t and z tests on means count both tails in sluice, as in
    TTestIndPower and NormalIndPower.
    """
    m = d["method"]
    ca = comparison_alpha(d)
    a_tail = tail_alpha(d)
    r = d["ratio"]
    vf = variance_factor(d)
    if m == "pooled":
        _, pt, diff, directional = sm_rate_args(d)
        near = power_proportions_2indep(
            diff, pt, n_control / vf, ratio=r, alpha=a_tail, alternative=directional
        ).power
        both = (
            near
            if d["one_sided"]
            else power_proportions_2indep(
                diff, pt, n_control / vf, ratio=r, alpha=ca, alternative="two-sided"
            ).power
        )
        return float(near), float(both) - float(near)
    if m == "unpooled":
        pc, pt, diff, directional = sm_rate_args(d)
        s = math.sqrt(pc * (1 - pc) + pt * (1 - pt) / r)
        near = normal_power_het(
            diff, n_control / vf, a_tail, std_null=s, std_alternative=s, alternative=directional
        )
        return float(near), 0.0
    if m == "corrected":
        # Invert the corrected size in the power: the z_b at which the
        # corrected closed form needs exactly n_control units.
        if corrected_from_zb(d, 40.0) <= n_control:
            return 1.0, 0.0
        lo = -40.0
        while corrected_from_zb(d, lo) > n_control:
            lo -= 10.0
        zb = brentq(lambda z: corrected_from_zb(d, z) - n_control, lo, 40.0, xtol=1e-13)
        return float(norm.cdf(zb)), 0.0
    if m == "z":
        es = abs(treatment_value(d) - d["mean"]) / (d["sd"] * math.sqrt(vf))
        alt = "larger" if d["one_sided"] else "two-sided"
        pw = NormalIndPower().power(es, n_control, ca, ratio=r, alternative=alt)
        return float(pw), 0.0
    if m == "arcsine":
        pc, pt = d["baseline"], treatment_value(d)
        es = abs(proportion_effectsize(pt, pc))
        es /= math.sqrt(vf)
        near = NormalIndPower().power(es, n_control, a_tail, ratio=r, alternative="larger")
        both = (
            near
            if d["one_sided"]
            else NormalIndPower().power(es, n_control, ca, ratio=r, alternative="two-sided")
        )
        return float(near), float(both) - float(near)
    es = abs(treatment_value(d) - d["mean"]) / (d["sd"] * math.sqrt(vf))
    alt = "larger" if d["one_sided"] else "two-sided"
    pw = TTestIndPower().power(es, n_control, ca, ratio=r, alternative=alt)
    return float(pw), 0.0


# ------------------------------------------------------------ sluice runs


def run_sluice(binary, d):
    proc = subprocess.run(
        [binary] + cli_args(d), capture_output=True, text=True, check=False
    )
    return proc.returncode, proc.stdout, proc.stderr


def run_all(binary, designs):
    workers = max(2, min(8, os.cpu_count() or 2))
    with ThreadPoolExecutor(max_workers=workers) as pool:
        return list(pool.map(lambda d: run_sluice(binary, d), designs))


# ----------------------------------------------------------------- checks


def new_tally():
    """Counts of passed and failed checks, and the largest deviations seen."""
    return SimpleNamespace(
        passed=0,
        failed=0,
        max_rel={},  # method -> max relative difference of control_exact
        max_units=0,  # largest |sluice - ceil(reference)| in units
        max_power_gap=0.0,
        max_far_tail=0.0,
    )


def record(tally, name, problems):
    if problems:
        tally.failed += 1
        print(f"FAIL {name}")
        for p in problems:
            print(f"     {p}")
    else:
        tally.passed += 1


def check_design(tally, d, result):
    code, out, err = result
    problems = []
    if code != 0:
        record(tally, describe(d), [f"sluice exited {code}: {err.strip()}"])
        return
    j = json.loads(out)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = ref_control(d)
    m = d["method"]
    r = d["ratio"]
    if not (math.isfinite(ref) and ref > 0):
        record(tally, describe(d), [f"the reference gave no size ({ref})"])
        return
    rel = abs(j["control_exact"] - ref) / ref
    tally.max_rel[m] = max(tally.max_rel.get(m, 0.0), rel)
    if rel > EXACT_RTOL[m]:
        problems.append(
            f"control_exact {j['control_exact']!r} vs reference {ref!r} "
            f"(relative difference {rel:.3g} > {EXACT_RTOL[m]:g})"
        )
    ref_c, ref_t = math.ceil(ref), math.ceil(ref * r)
    units = max(abs(j["control"] - ref_c), abs(j["treatment"] - ref_t))
    tally.max_units = max(tally.max_units, units)
    if units > 1:
        problems.append(
            f"per-arm sizes {j['control']}/{j['treatment']} vs reference "
            f"{ref_c}/{ref_t}: more than 1 unit apart"
        )
    if abs(j["treatment_exact"] - r * j["control_exact"]) > 1e-9 * j["treatment_exact"]:
        problems.append("treatment_exact is not ratio x control_exact")
    if j["total"] != j["control"] + (d["arms"] - 1) * j["treatment"]:
        problems.append(f"total {j['total']} is not control + (arms - 1) x treatment")
    if j["arms"] != d["arms"] or j["method"] != m:
        problems.append(f"echoed arms/method {j['arms']}/{j['method']} differ")
    ca = comparison_alpha(d)
    if abs(j["comparison_alpha"] - ca) > 1e-12 * ca:
        problems.append(f"comparison_alpha {j['comparison_alpha']} vs {ca}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pw, far = ref_power(d, float(j["control"]))
    gap = abs(j["achieved_power"] - pw)
    tally.max_power_gap = max(tally.max_power_gap, gap)
    tally.max_far_tail = max(tally.max_far_tail, far)
    if gap > POWER_ATOL:
        problems.append(
            f"achieved_power {j['achieved_power']!r} vs reference {pw!r} at "
            f"{j['control']} units (gap {gap:.3g})"
        )
    if j["achieved_power"] < d["power"] - 1e-12 or pw < d["power"] - POWER_ATOL:
        problems.append(
            f"power at the rounded size ({j['achieved_power']}, reference {pw}) "
            f"is below the target {d['power']}"
        )
    if far > FAR_TAIL_MAX:
        problems.append(f"the far tail sluice ignores carries {far:.3g} of power")
    record(tally, describe(d), problems)


# --------------------------------------------------- the inverse: the MDE


def ref_mde_designs():
    """(design with an absolute MDE found by the reference, target N)."""
    out = []
    for n in (80.0, 2_500.0, 300_000.0):
        for base in (
            dict(baseline=0.08, method="pooled"),
            dict(baseline=0.3, method="pooled", ratio=2.0, one_sided=True),
            dict(baseline=0.08, method="arcsine", arms=3),
            dict(baseline=0.6, method="corrected", ratio=0.5),
            dict(mean=40.0, sd=12.0, method="t"),
            dict(mean=40.0, sd=12.0, method="t", ratio=3.0, arms=4, correction="sidak"),
            dict(mean=40.0, sd=12.0, method="z", one_sided=True, rho=0.5),
        ):
            for sign in (1.0, -1.0):
                d = design(effect_kind="abs", effect=0.0, **base)
                e = ref_mde(d, n, sign)
                if e is None:
                    continue
                out.append((dict(d, effect=e), n))
    return out


def ref_mde(d, n, sign):
    """The absolute effect (with `sign`) that n control units detect at the
    design's power, found by scipy's brentq on the reference's own power
    function (solve_power for the effect stops at a loose tolerance, about
    1e-4 relative at large n, so we solve to 1e-14 ourselves).

    Normal-approximation methods on rates: the near tail only, as sluice
    and samplesize_proportions_2indep_onetail (one-sided at the tail
    alpha). t and z on means: TTestIndPower and NormalIndPower count both
    tails of a two-sided test, as sluice."""
    m = d["method"]
    ca = comparison_alpha(d)
    a_tail = tail_alpha(d)
    r = d["ratio"]
    vf = variance_factor(d)
    target = d["power"]
    if m in ("t", "z", "arcsine"):
        if m == "t":
            alt = "larger" if d["one_sided"] else "two-sided"

            def excess(es):
                return TTestIndPower().power(es, n, ca, ratio=r, alternative=alt) - target

        elif m == "z":
            alt = "larger" if d["one_sided"] else "two-sided"

            def excess(es):
                return (
                    NormalIndPower().power(es, n / vf, ca, ratio=r, alternative=alt) - target
                )

        else:

            def excess(es):
                return (
                    NormalIndPower().power(es, n / vf, a_tail, ratio=r, alternative="larger")
                    - target
                )

        # Bracket: twice the normal-approximation answer has power near 1
        # (statsmodels' noncentral t returns nan far beyond it).
        z_sum = norm.isf(a_tail) + norm.ppf(target)
        hi = 2.0 * z_sum * math.sqrt((1 + 1 / r) * vf / n)
        es = brentq(excess, 1e-9, hi, xtol=1e-15, rtol=1e-14)
        if m == "t":
            return sign * es * d["sd"] * math.sqrt(vf)
        if m == "z":
            return sign * es * d["sd"]
        pc = d["baseline"]
        phi = 2 * math.asin(math.sqrt(pc)) + sign * es
        if not 0 < phi < math.pi:
            return None
        return math.sin(phi / 2) ** 2 - pc
    pc = d["baseline"]
    limit = (1 - pc) if sign > 0 else pc
    if m == "pooled":

        def excess(e):
            pt = pc + sign * e
            return (
                power_proportions_2indep(
                    pc - pt, pt, n / vf, ratio=r, alpha=a_tail,
                    alternative="larger" if pc > pt else "smaller",
                ).power
                - target
            )

    else:  # corrected: the closed form's size as a function of the effect

        def excess(e):
            return n - corrected_from_zb(dict(d, effect=sign * e), norm.ppf(target))

    hi = limit * (1 - 1e-9)
    if excess(hi) < 0:
        return None
    return sign * brentq(excess, 1e-12, hi, xtol=1e-15, rtol=1e-14)


def check_mde(tally, d, n, result):
    code, out, err = result
    name = f"MDE inverse: {describe(d)} (reference N = {n:g})"
    if code != 0:
        record(tally, name, [f"sluice exited {code}: {err.strip()}"])
        return
    j = json.loads(out)
    rel = abs(j["control_exact"] - n) / n
    key = f"mde/{d['method']}"
    tally.max_rel[key] = max(tally.max_rel.get(key, 0.0), rel)
    problems = []
    if rel > MDE_RTOL:
        problems.append(
            f"sluice needs {j['control_exact']!r} units, the reference {n:g} "
            f"(relative {rel:.3g})"
        )
    record(tally, name, problems)


# ------------------------------------------------------- refused designs


def refused_designs():
    """Designs sluice must refuse with exit code 2 and the flag's name."""
    return [
        (design(baseline=0.9, effect=0.2), "--mde"),  # treatment rate 1.08
        (design(baseline=0.01, effect_kind="abs", effect=-0.02), "--mde-abs"),
        (design(baseline=1.2, effect=0.1), "--baseline"),
        (design(baseline=0.1, effect=0.1, alpha=0.7), "--alpha"),
        (design(baseline=0.1, effect=0.1, power=1.0), "--power"),
        (design(baseline=0.1, effect=0.1, rho=1.0), "--rho"),
        (design(baseline=0.1, effect=0.1, ratio=0.0), "--ratio"),
        (design(baseline=0.1, effect=0.1, arms=1), "--arms"),
        (design(mean=10.0, sd=0.0, effect=0.1), "--sd"),
        (design(mean=10.0, sd=2.0, effect=0.1, method="pooled"), "pooled"),
        (design(mean=10.0, sd=-2.0, effect=0.1), "--sd"),
        (design(baseline=0.1, effect=0.1, alpha=-0.05), "--alpha"),
        (design(baseline=0.1, effect_kind="abs", effect=1e-6, arms=4294967295), "--arms"),
    ]


def check_refused(tally, d, needle, result):
    code, out, err = result
    problems = []
    if code != 2:
        problems.append(f"exit code {code}, expected 2 (stdout: {out.strip()[:80]})")
    if needle not in err:
        problems.append(f"the message does not name {needle}: {err.strip()}")
    record(tally, f"refused: {describe(d)}", problems)


# ------------------------------------------------------------------- main


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--bin", required=True, help="path to the sluice binary")
    args = ap.parse_args()
    if not os.access(args.bin, os.X_OK):
        print(f"error: no sluice binary at `{args.bin}`", file=sys.stderr)
        return 2

    designs = grid()
    mde = ref_mde_designs()
    refused = refused_designs()
    everything = designs + [d for d, _ in mde] + [d for d, _ in refused]
    results = run_all(args.bin, everything)

    tally = new_tally()
    i = 0
    for d in designs:
        check_design(tally, d, results[i])
        i += 1
    for d, n in mde:
        check_mde(tally, d, n, results[i])
        i += 1
    for d, needle in refused:
        check_refused(tally, d, needle, results[i])
        i += 1

    # Non-inferiority sizes, interim looks and `sluice detect`: check_stats.py.
    check_stats.check_noninferiority(args.bin, tally, record, design, comparison_alpha)
    check_stats.check_sequential(args.bin, tally, record)
    check_stats.check_detect(
        args.bin, tally, record, design, comparison_alpha, tail_alpha, ref_mde, ref_power
    )
    check_stats.check_detect_designs(args.bin, tally, record)

    print(
        f"designs: {len(designs)} sized, {len(mde)} MDE inverses, "
        f"{len(refused)} refused designs"
    )
    for key in sorted(tally.max_rel):
        print(f"max relative difference of control_exact, {key}: {tally.max_rel[key]:.3g}")
    print(f"max per-arm difference from the reference rounded up: {tally.max_units} unit(s)")
    print(f"max |achieved_power - reference power|: {tally.max_power_gap:.3g}")
    print(f"max far-tail power ignored by the normal methods: {tally.max_far_tail:.3g}")
    print(f"{tally.passed} passed, {tally.failed} failed")
    return 1 if tally.failed else 0


if __name__ == "__main__":
    sys.exit(main())

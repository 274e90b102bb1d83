"""Checks of `sluice size --margin`, `sluice size --looks` and `sluice
detect` against scipy and statsmodels; run from check_sizing.py, which
shares its tally, its design helpers and the references of the superiority
sizes.

Non-inferiority (guardrail) sizes, true difference 0, one-sided at the
comparison's alpha, the null at a difference of -margin:

* rates: Blackwelder (1982), the closed form
  n = (z_alpha + z_beta)^2 p (1 - p) (1 + 1/r) / margin^2 with scipy's
  normal quantiles; and, as a second reference, statsmodels'
  normal_sample_size_one_tail with the standard deviation from its internal
  helper statsmodels.stats.proportion._std_diff_prop(p, p, r) (the
  unpooled variance at the assumed rates);
* means (Chow, Shao & Wang 2008, 3.2.2): NormalIndPower (method z) and
  TTestIndPower (method t), one-sided ('larger') with effect size
  margin / sd.

Group-sequential designs (K looks equally spaced in information, the
statistics' joint normal law with cov(Z_j, Z_k) = sqrt(t_j / t_k)):

* Jennison & Turnbull (2000), Tables 2.1 to 2.4 (FROM MEMORY): C_B(K),
  C_P(K) for K = 2..5 at alpha 0.05 two-sided, and the inflation factors
  R_B, R_P at power 0.8 and 0.9. Each remembered value is cross-checked
  here against a value solved with scipy's multivariate_normal.cdf (brentq
  on the overall alpha for C, on the power in the planned direction for
  R); remembered and sluice's values must both lie within 0.001 of it.
* At sluice's boundaries, multivariate_normal.cdf gives the overall alpha
  (within 1e-4 of 0.05) and, at sluice's maximum information, the power
  (within 1e-3 of the target) and each look's stop probability.
* Lan & DeMets (1983) spending: the cumulative alpha of sluice's
  boundaries (multivariate_normal.cdf) equals the spending function at
  each look within 1e-6; the issue's remembered K = 5 O'Brien-Fleming-type
  boundaries (4.88, 3.36, 2.68, 2.29, 2.03) are compared at two decimals.

`sluice detect`: the effect found for N control units against statsmodels'
solve_power for the effect (t, z, arcsine; within solve_power's own loose
tolerance) and against a tight brentq on the reference power functions of
check_sizing.py; the round trip (sluice size at that effect needs N units,
within 1); and the power for a given effect against the reference power.
`sluice detect --guardrail` (the smallest margin N rules out) against
statsmodels' NormalIndPower solve_power, one-sided, times the standard
deviation (sqrt(p (1 - p)) for a rate, Blackwelder's unpooled variance);
and `sluice detect --looks K --boundary B` (classical boundaries) against
the same solve_power at N over the inflation factor R solved with scipy's
multivariate_normal as above.
"""

import json
import math
import subprocess
import warnings
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from scipy.optimize import brentq
from scipy.stats import multivariate_normal, norm
from statsmodels.stats.power import (
    NormalIndPower,
    TTestIndPower,
    normal_sample_size_one_tail,
)
from statsmodels.stats.proportion import _std_diff_prop

# ------------------------------------------------------------ helpers


def run(binary, args):
    proc = subprocess.run([binary] + args, capture_output=True, text=True, check=False)
    return proc.returncode, proc.stdout, proc.stderr


def run_many(binary, arg_lists):
    with ThreadPoolExecutor(max_workers=4) as pool:
        return list(pool.map(lambda a: run(binary, a), arg_lists))


def settings_args(d):
    a = [f"--alpha={d['alpha']!r}", f"--power={d['power']!r}"]
    a += [f"--arms={d['arms']}", f"--ratio={d['ratio']!r}"]
    a += [f"--correction={d['correction']}", f"--rho={d['rho']!r}"]
    if d.get("method"):
        a.append(f"--method={d['method']}")
    if d.get("one_sided"):
        a.append("--one-sided")
    return a


def metric_args(d):
    if d.get("baseline") is not None:
        return [f"--baseline={d['baseline']!r}"]
    return [f"--mean={d['mean']!r}", f"--sd={d['sd']!r}"]


# ------------------------------------------------- non-inferiority sizes


def ni_designs(design):
    out = []
    variants = [
        {},
        {"ratio": 2.0},
        {"alpha": 0.025, "power": 0.9},
        {"arms": 3, "correction": "bonferroni"},
        {"rho": 0.3, "ratio": 0.5},
    ]
    for p in [0.01, 0.05, 0.2, 0.5, 0.8]:
        for kind, m in [("rel", 0.05), ("rel", 0.2), ("rel", -0.1), ("abs", 0.005), ("abs", -0.01)]:
            for v in variants:
                out.append(design(baseline=p, effect_kind=kind, effect=m, method="unpooled", **v))
    for mean, sd in [(10.0, 5.0), (100.0, 40.0), (-50.0, 20.0)]:
        for kind, m in [("rel", 0.05), ("rel", -0.1), ("abs", 2.5)]:
            for method in ["t", "z"]:
                for v in variants:
                    out.append(design(mean=mean, sd=sd, effect_kind=kind, effect=m, method=method, **v))
    return out


def ni_args(d):
    flag = "--margin" if d["effect_kind"] == "rel" else "--margin-abs"
    return ["size", "--format=json"] + metric_args(d) + [f"{flag}={d['effect']!r}"] + settings_args(d)


def ni_margin_abs(d):
    base = d["baseline"] if d.get("baseline") is not None else d["mean"]
    return d["effect"] * abs(base) if d["effect_kind"] == "rel" else d["effect"]


def ni_references(d, comparison_alpha):
    """The reference control sizes (floats) of a non-inferiority design."""
    a = comparison_alpha(d)
    r = d["ratio"]
    vf = 1.0 - d["rho"] ** 2
    m = abs(ni_margin_abs(d))
    z = norm.isf(a) + norm.ppf(d["power"])
    if d.get("baseline") is not None:
        p = d["baseline"]
        closed = z**2 * p * (1 - p) * (1 + 1 / r) * vf / m**2
        sd = _std_diff_prop(p, p, ratio=r)
        second = normal_sample_size_one_tail(m, d["power"], a, std_null=sd) * vf
        return {"Blackwelder closed form": closed, "statsmodels one-tail": float(second)}
    es = m / (d["sd"] * math.sqrt(vf))
    power = TTestIndPower() if d["method"] == "t" else NormalIndPower()
    n = power.solve_power(effect_size=es, alpha=a, power=d["power"], ratio=r, alternative="larger")
    name = "TTestIndPower" if d["method"] == "t" else "NormalIndPower"
    return {name: float(n)}


def check_noninferiority(binary, tally, record, design, comparison_alpha):
    designs = ni_designs(design)
    results = run_many(binary, [ni_args(d) for d in designs])
    worst_units = 0
    worst_rel = 0.0
    for d, (code, out, err) in zip(designs, results):
        name = "non-inferiority: " + " ".join(ni_args(d)[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            continue
        j = json.loads(out)
        problems = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            refs = ni_references(d, comparison_alpha)
        for ref_name, ref in refs.items():
            units = abs(j["control"] - math.ceil(ref))
            rel = abs(j["control_exact"] - ref) / ref
            worst_units = max(worst_units, units)
            worst_rel = max(worst_rel, rel)
            if units > 1:
                problems.append(f"control {j['control']} vs {ref_name} {ref:.3f}: more than 1 unit")
        if j["sides"] != "one":
            problems.append("a guardrail is one-sided")
        base = d["baseline"] if d.get("baseline") is not None else d["mean"]
        if abs(j["null_value"] - (base - ni_margin_abs(d))) > 1e-12 * max(1.0, abs(base)):
            problems.append(f"null_value {j['null_value']} is not the baseline less the margin")
        record(tally, name, problems)
    print(
        f"non-inferiority: {len(designs)} designs; max per-arm difference from the "
        f"references rounded up: {worst_units} unit(s); max relative difference of "
        f"control_exact: {worst_rel:.3g}"
    )


# ------------------------------------------------ group-sequential designs

# Jennison & Turnbull (2000), Tables 2.1 and 2.3 (C_P, R_P) and 2.2 and
# 2.4 (C_B, R_B), two-sided alpha 0.05: FROM MEMORY.
MEMORY = {
    "pocock": {
        "C": {2: 2.178, 3: 2.289, 4: 2.361, 5: 2.413},
        "R0.8": {2: 1.110, 3: 1.166, 4: 1.202, 5: 1.229},
        "R0.9": {2: 1.100, 3: 1.151, 4: 1.183, 5: 1.207},
    },
    "obrien-fleming": {
        "C": {2: 1.977, 3: 2.004, 4: 2.024, 5: 2.040},
        "R0.8": {2: 1.008, 3: 1.017, 4: 1.024, 5: 1.028},
        "R0.9": {2: 1.007, 3: 1.016, 4: 1.022, 5: 1.026},
    },
}
# The issue's remembered K = 5 Lan-DeMets O'Brien-Fleming-type boundaries.
ISSUE_SPENDING_OBF_K5 = [4.88, 3.36, 2.68, 2.29, 2.03]


def cov(k):
    t = np.arange(1, k + 1) / k
    return np.sqrt(np.minimum.outer(t, t) / np.maximum.outer(t, t)), t


def rect(c, mean, lower, eps):
    """P(lower_j < Z_j < c_j for every j) for the first len(c) looks."""
    k = len(c)
    if k == 0:
        return 1.0
    cv, _ = cov_cache(k)
    return float(
        multivariate_normal.cdf(
            np.array(c), mean=np.array(mean), cov=cv[:k, :k], lower_limit=np.array(lower),
            maxpts=20_000_000, abseps=eps, releps=0, rng=np.random.default_rng(7),
        )
    ) if k > 1 else float(norm.cdf(c[0] - mean[0]) - norm.cdf(lower[0] - mean[0]))


_COV = {}


def cov_cache(k):
    if k not in _COV:
        _COV[k] = cov(k)
    return _COV[k]


def alpha_of(c, eps):
    """Overall two-sided alpha of boundaries c (all looks)."""
    return 1.0 - rect(c, [0.0] * len(c), [-x for x in c], eps)


def cumulative_alpha(c, k, eps):
    return 1.0 - rect(c[:k], [0.0] * k, [-x for x in c[:k]], eps)


def upper_crossings(c, drift, eps):
    """P(first exit at look k is through the upper boundary), k = 1..K,
    for information fractions k / K and the final look's mean `drift`."""
    k_all = len(c)
    t = np.arange(1, k_all + 1) / k_all
    mean = drift * np.sqrt(t)
    out = []
    for k in range(1, k_all + 1):
        # P(|Z_j| < c_j for j < k, Z_k > c_k)
        # = P(|Z_j| < c_j, j < k) - P(|Z_j| < c_j, j < k, Z_k < c_k).
        lower = [-x for x in c[: k - 1]]
        before = rect(c[: k - 1], mean[: k - 1], lower, eps)
        with_k = rect(list(c[: k - 1]) + [c[k - 1]], mean[:k], lower + [-40.0], eps)
        out.append(before - with_k)
    return out


def shape(boundary, k):
    t = np.arange(1, k + 1) / k
    return list(np.sqrt(1 / t)) if boundary == "obrien-fleming" else [1.0] * k


def solve_c(boundary, k):
    s = shape(boundary, k)
    return brentq(lambda c: alpha_of([c * x for x in s], 1e-6) - 0.05, 1.9, 3.0, xtol=1e-7)


def solve_r(c, power):
    fixed = norm.isf(0.025) + norm.ppf(power)
    d = brentq(lambda d: sum(upper_crossings(c, d, 1e-6)) - power, fixed, 1.3 * fixed, xtol=1e-7)
    return (d / fixed) ** 2


def looks_args(k, boundary, power):
    return [
        "size", "--format=json", "--baseline=0.1", "--mde=0.1",
        f"--looks={k}", f"--boundary={boundary}", f"--power={power!r}",
    ]


def spending(boundary, t, alpha=0.05):
    a_s = alpha / 2
    if boundary == "spending-obrien-fleming":
        one = 2 - 2 * norm.cdf(norm.isf(a_s / 2) / math.sqrt(t))
    else:
        one = a_s * math.log(1 + (math.e - 1) * t)
    return 2 * one


def check_sequential(binary, tally, record):
    cases = [
        (k, b, p)
        for b in ["obrien-fleming", "pocock", "spending-obrien-fleming", "spending-pocock"]
        for k in range(2, 6)
        for p in (0.8, 0.9)
    ]
    results = run_many(binary, [looks_args(*c) for c in cases])
    out = {}
    for c, (code, stdout, err) in zip(cases, results):
        if code != 0:
            record(tally, f"looks: {c}", [f"sluice exited {code}: {err.strip()}"])
            continue
        out[c] = json.loads(stdout)
    worst = {"C": 0.0, "R": 0.0, "C memory": 0.0, "R memory": 0.0, "alpha": 0.0,
             "power": 0.0, "stop": 0.0, "spent": 0.0}
    for b in ["obrien-fleming", "pocock"]:
        for k in range(2, 6):
            if (k, b, 0.8) not in out:
                continue
            j = out[(k, b, 0.8)]
            c = j["boundaries"]
            sluice_c = c[-1] if b == "obrien-fleming" else c[0]
            ref_c = solve_c(b, k)
            mem_c = MEMORY[b]["C"][k]
            problems = []
            worst["C"] = max(worst["C"], abs(sluice_c - ref_c))
            worst["C memory"] = max(worst["C memory"], abs(mem_c - ref_c))
            if abs(sluice_c - ref_c) > 1e-3:
                problems.append(f"C = {sluice_c:.5f}, scipy {ref_c:.5f}")
            if abs(mem_c - ref_c) > 1e-3:
                problems.append(f"the remembered C = {mem_c} is not scipy's {ref_c:.5f}")
            if abs(sluice_c - mem_c) > 1e-3:
                problems.append(f"C = {sluice_c:.5f}, Jennison & Turnbull (memory) {mem_c}")
            a = alpha_of(c, 1e-7)
            worst["alpha"] = max(worst["alpha"], abs(a - 0.05))
            if abs(a - 0.05) > 1e-4:
                problems.append(f"alpha of sluice's boundaries {a:.6f}")
            record(tally, f"looks: C {b} K={k}: sluice {sluice_c:.4f}, scipy {ref_c:.4f}, "
                          f"memory {mem_c}", problems)
            for power in (0.8, 0.9):
                j = out[(k, b, power)]
                ref_r = solve_r(c, power)
                mem_r = MEMORY[b][f"R{power}"][k]
                problems = []
                worst["R"] = max(worst["R"], abs(j["inflation"] - ref_r))
                worst["R memory"] = max(worst["R memory"], abs(mem_r - ref_r))
                if abs(j["inflation"] - ref_r) > 1e-3:
                    problems.append(f"R = {j['inflation']:.5f}, scipy {ref_r:.5f}")
                if abs(mem_r - ref_r) > 1e-3:
                    problems.append(f"the remembered R = {mem_r} is not scipy's {ref_r:.5f}")
                if abs(j["inflation"] - mem_r) > 1e-3:
                    problems.append(f"R = {j['inflation']:.5f}, memory {mem_r}")
                record(tally, f"looks: R {b} K={k} power {power}: sluice "
                              f"{j['inflation']:.4f}, scipy {ref_r:.4f}, memory {mem_r}", problems)
    # Power and stop probabilities at sluice's own maximum information, and
    # the spending functions, for every boundary.
    for (k, b, power), j in sorted(out.items()):
        fixed = norm.isf(0.025) + norm.ppf(power)
        drift = math.sqrt(j["inflation"]) * fixed
        stops = upper_crossings(j["boundaries"], drift, 1e-6)
        problems = []
        worst["power"] = max(worst["power"], abs(sum(stops) - power))
        if abs(sum(stops) - power) > 1e-3:
            problems.append(f"scipy's power at sluice's maximum is {sum(stops):.5f}")
        for mine, ref in zip(j["stop_probabilities"], stops):
            worst["stop"] = max(worst["stop"], abs(mine - ref))
            if abs(mine - ref) > 1e-3:
                problems.append(f"stop probabilities {j['stop_probabilities']} vs scipy {stops}")
                break
        if abs(sum(j["stop_probabilities"]) - j["power"]) > 1e-6:
            problems.append("the stop probabilities do not sum to the power")
        if abs(j["control_exact"] - j["fixed_control_exact"] * j["inflation"]) > 1e-6 * j["control_exact"]:
            problems.append("control_exact is not fixed x inflation")
        if not j["expected_control_exact_h1"] < j["expected_control_exact_h0"] <= j["control_exact"]:
            problems.append("expected sizes out of order")
        if b.startswith("spending") and power == 0.8:
            for look in range(1, k + 1):
                got = cumulative_alpha(j["boundaries"], look, 1e-8)
                want = spending(b, look / k)
                worst["spent"] = max(worst["spent"], abs(got - want))
                if abs(got - want) > 1e-6:
                    problems.append(f"look {look}: alpha spent {got:.8f}, function {want:.8f}")
        record(tally, f"looks: power/stops {b} K={k} power {power}", problems)
    j = out.get((5, "spending-obrien-fleming", 0.8))
    if j:
        got = [round(x, 2) for x in j["boundaries"]]
        record(
            tally,
            f"looks: the issue's K=5 spending O'Brien-Fleming values {ISSUE_SPENDING_OBF_K5}",
            [] if got == ISSUE_SPENDING_OBF_K5 else [f"sluice gives {j['boundaries']}"],
        )
        print("looks: K=5 spending O'Brien-Fleming boundaries " + ", ".join(f"{x:.4f}" for x in j["boundaries"]))
    print("looks: max |difference|: " + ", ".join(f"{k} {v:.3g}" for k, v in worst.items()))


# ------------------------------------------------------------- detect


def detect_designs(design):
    out = []
    for n in (120.0, 4_000.0, 250_000.0):
        for base in (
            dict(mean=40.0, sd=12.0, method="t"),
            dict(mean=40.0, sd=12.0, method="t", ratio=2.0, arms=3),
            dict(mean=-5.0, sd=3.0, method="t", one_sided=True, rho=0.4),
            dict(mean=40.0, sd=12.0, method="z"),
            dict(mean=40.0, sd=12.0, method="z", one_sided=True, ratio=0.5),
            dict(baseline=0.08, method="arcsine"),
            dict(baseline=0.3, method="arcsine", one_sided=True, ratio=1.5),
            dict(baseline=0.08, method="pooled"),
            dict(baseline=0.3, method="pooled", arms=4, correction="sidak"),
        ):
            out.append((design(effect_kind="abs", effect=0.0, **base), n))
    return out


def detect_args(d, n, extra=()):
    return ["detect", "--format=json", f"--n={n!r}"] + metric_args(d) + settings_args(d) + list(extra)


def solve_power_effect(d, n, comparison_alpha, tail_alpha):
    """statsmodels' solve_power for the effect (absolute), or None."""
    r = d["ratio"]
    vf = 1.0 - d["rho"] ** 2
    if d["method"] == "t":
        alt = "larger" if d["one_sided"] else "two-sided"
        es = TTestIndPower().solve_power(
            effect_size=None, nobs1=n, alpha=comparison_alpha(d), power=d["power"], ratio=r,
            alternative=alt,
        )
        return float(es) * d["sd"] * math.sqrt(vf)
    # The normal methods count the near tail (one-sided at the tail alpha).
    es = NormalIndPower().solve_power(
        effect_size=None, nobs1=n / vf, alpha=tail_alpha(d), power=d["power"], ratio=r,
        alternative="larger",
    )
    es = float(es)
    if d["method"] == "z":
        return es * d["sd"]
    if d["method"] == "arcsine":
        pc = d["baseline"]
        return math.sin(math.asin(math.sqrt(pc)) + es / 2) ** 2 - pc
    return None


def check_detect_designs(binary, tally, record):
    """`detect --guardrail` and `detect --looks` against statsmodels and scipy."""
    guard = [
        (metric, n, harm)
        for metric in (["--baseline=0.08"], ["--baseline=0.41"], ["--mean=40", "--sd=12", "--method=z"])
        for n in (4_000.0, 60_000.0)
        for harm in ("fall", "rise")
    ]
    looks = [
        (k, b, n)
        for k in (2, 3, 5)
        for b in ("obrien-fleming", "pocock")
        for n in (4_000.0, 60_000.0)
    ]
    g_args = [["detect", "--format=json", f"--n={n!r}", f"--guardrail={h}"] + m for m, n, h in guard]
    l_args = [["detect", "--format=json", f"--n={n!r}", "--mean=40", "--sd=12", "--method=z",
               f"--looks={k}", f"--boundary={b}"] for k, b, n in looks]
    worst = {"guardrail": 0.0, "looks": 0.0}
    for (m, n, h), args, (code, out, err) in zip(guard, g_args, run_many(binary, g_args)):
        name = "detect guardrail: " + " ".join(args[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            continue
        j = json.loads(out)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            es = float(NormalIndPower().solve_power(
                effect_size=None, nobs1=n, alpha=0.05, power=0.8, ratio=1.0,
                alternative="larger",
            ))
        sd = 12.0 if "--sd=12" in m else math.sqrt(float(m[0].split("=")[1]) * (1 - float(m[0].split("=")[1])))
        ref = es * sd * (1.0 if h == "fall" else -1.0)
        got = j["guardrail"]["margin_abs"]
        rel = abs(got - ref) / abs(ref)
        worst["guardrail"] = max(worst["guardrail"], rel)
        problems = [] if rel <= 1e-3 else [f"margin_abs {got!r}, solve_power {ref!r}"]
        if abs(j["mde_abs"] + got) > 1e-15:
            problems.append("mde_abs is not the difference at the null")
        record(tally, name, problems)
    r_of = {}
    for (k, b, n), args, (code, out, err) in zip(looks, l_args, run_many(binary, l_args)):
        name = "detect looks: " + " ".join(args[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            continue
        j = json.loads(out)
        if (k, b) not in r_of:
            r_of[(k, b)] = solve_r([solve_c(b, k) * x for x in shape(b, k)], 0.8)
        r = r_of[(k, b)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            es = float(NormalIndPower().solve_power(
                effect_size=None, nobs1=n / r, alpha=0.025, power=0.8, ratio=1.0,
                alternative="larger",
            ))
        ref = es * 12.0
        rel = abs(j["mde_abs"] - ref) / ref
        worst["looks"] = max(worst["looks"], rel)
        problems = []
        # R is solved to about 1e-4 here and solve_power stops near 1e-4.
        if rel > 2e-3:
            problems.append(f"mde_abs {j['mde_abs']!r}, solve_power at N / R {ref!r}")
        if abs(j["looks"]["inflation"] - r) > 1e-3:
            problems.append(f"inflation {j['looks']['inflation']!r}, scipy {r!r}")
        record(tally, name, problems)
    print(
        f"detect designs: {len(guard)} guardrails, max relative difference of the margin from "
        f"solve_power {worst['guardrail']:.3g}; {len(looks)} with looks, from solve_power at "
        f"N / R {worst['looks']:.3g}"
    )


def check_detect(binary, tally, record, design, comparison_alpha, tail_alpha, ref_mde, ref_power):
    cases = detect_designs(design)
    results = run_many(binary, [detect_args(d, n) for d, n in cases])
    worst = {"solve_power": 0.0, "brentq": 0.0, "round trip units": 0, "power": 0.0}
    back = []
    for (d, n), (code, out, err) in zip(cases, results):
        name = "detect: " + " ".join(detect_args(d, n)[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            back.append(None)
            continue
        j = json.loads(out)
        problems = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sp = solve_power_effect(d, n, comparison_alpha, tail_alpha)
            tight = ref_mde(d, n, 1.0)
        if sp is not None:
            rel = abs(j["mde_abs"] - sp) / sp
            worst["solve_power"] = max(worst["solve_power"], rel)
            # solve_power stops at a loose tolerance (about 1e-4 relative).
            if rel > 1e-3:
                problems.append(f"mde_abs {j['mde_abs']!r}, solve_power {sp!r}")
        if tight is not None:
            rel = abs(j["mde_abs"] - tight) / tight
            worst["brentq"] = max(worst["brentq"], rel)
            if rel > 1e-6:
                problems.append(f"mde_abs {j['mde_abs']!r}, brentq on the reference power {tight!r}")
        base = d["baseline"] if d.get("baseline") is not None else d["mean"]
        if abs(j["mde"] - j["mde_abs"] / abs(base)) > 1e-12:
            problems.append("mde is not mde_abs over the baseline")
        record(tally, name, problems)
        back.append(j)
    # Round trip: size at detect's effect needs N again (within 1 unit);
    # and detect's power for that effect is the target.
    trips, powers = [], []
    for (d, n), j in zip(cases, back):
        if j is None:
            continue
        trips.append((d, n, ["size", "--format=json"] + metric_args(d) + settings_args(d)
                      + [f"--mde-abs={j['mde_abs']!r}"]))
        powers.append((d, n, j, detect_args(d, n, [f"--mde-abs={j['mde_abs']!r}"])))
    for (d, n, args), (code, out, err) in zip(trips, run_many(binary, [a for _, _, a in trips])):
        name = "detect round trip: " + " ".join(args[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            continue
        s = json.loads(out)
        units = abs(s["control"] - n)
        worst["round trip units"] = max(worst["round trip units"], units)
        record(tally, name, [] if units <= 1 else [f"size needs {s['control']}, detect had {n}"])
    for (d, n, j, args), (code, out, err) in zip(powers, run_many(binary, [a for *_, a in powers])):
        name = "detect power: " + " ".join(args[2:])
        if code != 0:
            record(tally, name, [f"sluice exited {code}: {err.strip()}"])
            continue
        p = json.loads(out)["power"]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref, _ = ref_power(dict(d, effect=j["mde_abs"]), n)
        worst["power"] = max(worst["power"], abs(p - ref), abs(p - d["power"]))
        problems = []
        if abs(p - ref) > 1e-6 or abs(p - d["power"]) > 1e-6:
            problems.append(f"power {p!r}, reference {ref!r}, target {d['power']}")
        record(tally, name, problems)
    print(
        f"detect: {len(cases)} designs; max relative difference of mde_abs from "
        f"solve_power {worst['solve_power']:.3g}, from brentq {worst['brentq']:.3g}; "
        f"round trip within {worst['round trip units']} unit(s); "
        f"max power difference {worst['power']:.3g}"
    )

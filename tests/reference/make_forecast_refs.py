#!/usr/bin/env python3
"""Generate the committed reference values for fleet failure forecasts.

Run from the repository root:

    python3 tests/reference/make_forecast_refs.py

Writes fixtures/reference/forecast.json with:

  (a) "poisson_binomial": the distribution of the number of failures among
      independent units, unit i failing with probability p_i, for sets of 5,
      50, 1000 and 20 000 units with mixed probabilities (including 0, 1,
      1e-9 and 1 - 1e-6). Each pmf is the direct convolution of the factors
      [1 - p_i, p_i] with numpy.convolve in float64, one unit at a time.
      Checks written beside each set: the largest difference from
      scipy.stats.poisson_binom.pmf (scipy's own implementation; it agrees
      with numpy to the last bit on these sets, so it confirms the script
      rather than adding an independent method) and, for
      5 and 50 units, from exact rational arithmetic (fractions.Fraction of
      the very doubles p_i); for those two sets the written pmf is the exact
      rational value rounded to double. Quantiles (smallest k with
      P(N <= k) >= q) are written only where P(N <= k) is more than 1e-9 away
      from q on both sides of the answer, so that rounding cannot flip them.
  (b) "monte_carlo_count": a seeded simulation (numpy Generator PCG64) of the
      count for one fleet of 300 units, 1 000 000 draws, as a histogram.
  (c) "renewal": seeded simulations of the number of failures within a
      horizon at one position whose current unit has survived to an age,
      each failed unit replaced at once by a new one: Weibull units (scale
      1000, shapes 2.5 and 0.8), horizons 0.5, 1 and 3 times the scale,
      current ages 0, 700 and 1500; 1 000 000 draws each. The first failure
      is drawn from the unit's conditional life, T1 = eta ((a/eta)^beta + E)^(1/beta) - a
      with E standard exponential (inverse of R(a + t)/R(a)); new units'
      lives are eta E^(1/beta). Plus a small fleet (6 positions) whose
      total count is simulated the same way.

The output is deterministic (every simulation has its own fixed seed,
written beside it) and written with a fixed layout; numbers are in Python's
shortest round-trip form, so each parses back to the same double. A
different numpy version could change the random streams. Python is needed
only to regenerate the file: the Rust tests read the JSON.
"""

import json
import math
import os
import platform
from fractions import Fraction

import numpy as np
import scipy
from scipy import stats

GENERATOR = "tests/reference/make_forecast_refs.py"
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT = os.path.join(ROOT, "fixtures", "reference", "forecast.json")

LIBRARIES = {
    "python": platform.python_version(),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
}

# Entries of a pmf below this are not written (the test checks that ours
# are below it there too).
WRITE_FLOOR = 1e-300
QUANTILE_QS = [0.001, 0.05, 0.5, 0.9, 0.95, 0.99, 0.999999]
QUANTILE_MARGIN = 1e-9

# ---------------------------------------------------------------------------
# JSON output with a compact, stable layout (leaf lists on one line)
# ---------------------------------------------------------------------------


def _scalar(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if not math.isfinite(v):
            raise ValueError("non-finite number in output")
        return json.dumps(v)  # repr: shortest round-tripping form
    if v is None or isinstance(v, str):
        return json.dumps(v)
    raise TypeError(type(v))


def _dump(v, ind):
    pad = " " * ind
    if isinstance(v, dict):
        if not v:
            return "{}"
        if all(not isinstance(x, (list, dict)) for x in v.values()) and len(v) <= 8:
            return "{" + ", ".join("%s: %s" % (json.dumps(k), _scalar(x)) for k, x in v.items()) + "}"
        items = ["%s  %s: %s" % (pad, json.dumps(k), _dump(x, ind + 2)) for k, x in v.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(v, list):
        if all(not isinstance(x, (list, dict)) for x in v):
            return "[" + ", ".join(_scalar(x) for x in v) + "]"
        items = [pad + "  " + _dump(x, ind + 2) for x in v]
        return "[\n" + ",\n".join(items) + "\n" + pad + "]"
    return _scalar(v)


def write_json(path, obj):
    text = _dump(obj, 0) + "\n"
    json.loads(text)  # must parse back
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)
    return len(text.encode("utf-8"))


# ---------------------------------------------------------------------------
# (a) Poisson-binomial pmfs by direct convolution
# ---------------------------------------------------------------------------


def recipe_20000():
    """p_i = ((7919 i + 13) mod 10007) / 10007 * 0.2, i = 0..19999.

    Integer arithmetic, then one division and one multiplication, each
    correctly rounded in IEEE double: Rust's f64 gives the same doubles.
    """
    return [((7919 * i + 13) % 10007) / 10007 * 0.2 for i in range(20000)]


RECIPE_20000 = "p_i = ((7919 i + 13) mod 10007) / 10007 * 0.2 for i = 0..19999, in IEEE double"


def prob_sets():
    rng = np.random.Generator(np.random.PCG64(20240701))
    sets = []
    sets.append(("n5_mixed", "5 units, mixed probabilities", [0.1, 0.5, 0.93, 0.02, 0.37], None))
    p50 = list(rng.uniform(0.0, 0.6, size=44)) + [0.0, 1.0, 1e-9, 1.0 - 1e-6, 0.999, 1.0]
    rng.shuffle(p50)
    sets.append(("n50_with_0_and_1", "50 units: 44 uniform on [0, 0.6) plus 0, 1 (twice), 1e-9, 1 - 1e-6, 0.999", [float(x) for x in p50], None))
    # 1000 units: mostly small probabilities (a fleet early in life) with a
    # minority of old units near wear-out.
    small = rng.beta(0.5, 30.0, size=900)
    old = rng.uniform(0.2, 0.95, size=100)
    p1000 = np.concatenate([small, old])
    rng.shuffle(p1000)
    sets.append(("n1000_mixed", "1000 units: 900 from beta(0.5, 30), 100 uniform on [0.2, 0.95), shuffled", [float(x) for x in p1000], None))
    sets.append(("n20000_recipe", "20000 units on [0, 0.2) from an integer recipe", recipe_20000(), RECIPE_20000))
    return sets


def convolve_float(probs):
    pmf = np.array([1.0])
    for p in probs:
        pmf = np.convolve(pmf, np.array([1.0 - p, p]))
    return pmf


def convolve_exact(probs):
    pmf = [Fraction(1)]
    for p in probs:
        p = Fraction(p)  # the exact value of the double
        q = 1 - p
        nxt = [Fraction(0)] * (len(pmf) + 1)
        for k, w in enumerate(pmf):
            nxt[k] += w * q
            nxt[k + 1] += w * p
        pmf = nxt
    return pmf


def quantiles(cdf_at):
    """[[q, k]] for QUANTILE_QS where the answer has a clear margin."""
    out, skipped = [], []
    for q in QUANTILE_QS:
        k = 0
        while cdf_at(k) < q:
            k += 1
        below = cdf_at(k - 1) if k > 0 else 0.0
        if cdf_at(k) - q > QUANTILE_MARGIN and q - below > QUANTILE_MARGIN:
            out.append([q, k])
        else:
            skipped.append(q)
    return out, skipped


def poisson_binomial_cases():
    cases = []
    worst = {"scipy": 0.0, "exact": 0.0}
    for name, description, probs, recipe in prob_sets():
        pmf = convolve_float(probs)
        n = len(probs)
        ks = np.arange(n + 1)
        scipy_pmf = stats.poisson_binom(np.array(probs)).pmf(ks)
        scipy_diff = float(np.max(np.abs(scipy_pmf - pmf)))
        worst["scipy"] = max(worst["scipy"], scipy_diff)
        exact_diff = None
        source = "numpy.convolve of [1 - p, p] factors, float64"
        if n <= 50:
            exact = convolve_exact(probs)
            exact_diff = max(abs(Fraction(float(a)) - b) for a, b in zip(pmf, exact))
            exact_diff = float(exact_diff)
            worst["exact"] = max(worst["exact"], exact_diff)
            assert sum(exact) == 1
            pmf = np.array([float(x) for x in exact])
            source = "exact rational convolution (fractions), rounded to double"
            cum = []
            acc = Fraction(0)
            for x in exact:
                acc += x
                cum.append(acc)
            qs, skipped = quantiles(lambda k: float(cum[k]) if k < len(cum) else 1.0)
        else:
            qs, skipped = quantiles(lambda k: math.fsum(pmf[: k + 1]))
        nz = np.nonzero(pmf >= WRITE_FLOOR)[0]
        lo, hi = int(nz[0]), int(nz[-1])
        case = {
            "name": name,
            "description": description,
            "n": n,
        }
        if recipe is None:
            case["probs"] = [float(p) for p in probs]
        else:
            case["recipe"] = recipe
            case["probs_head"] = [float(p) for p in probs[:8]]
        case["probs_sum"] = math.fsum(probs)
        case["mean"] = math.fsum(probs)
        case["var"] = math.fsum(p * (1.0 - p) for p in probs)
        case["pmf_source"] = source
        case["pmf_offset"] = lo
        case["pmf"] = [float(x) for x in pmf[lo : hi + 1]]
        case["checks"] = {
            "scipy_poisson_binom_max_abs_diff": scipy_diff,
            "exact_rational_max_abs_diff_of_float_convolution": exact_diff,
            "float_pmf_total_minus_1": float(math.fsum(convolve_float(probs)) - 1.0),
        }
        case["quantiles"] = qs
        case["quantiles_skipped_for_margin"] = skipped
        cases.append(case)
        print(
            "%-18s n=%-6d support written %d..%d  scipy diff %.2e  exact diff %s"
            % (name, n, lo, hi, scipy_diff, "%.2e" % exact_diff if exact_diff is not None else "-")
        )
    return cases, worst


# ---------------------------------------------------------------------------
# (b) Monte Carlo of the count for one fleet
# ---------------------------------------------------------------------------

MC_SEED = 20240702
MC_DRAWS = 1_000_000


def monte_carlo_count():
    rng = np.random.Generator(np.random.PCG64(MC_SEED))
    probs = np.concatenate([rng.beta(0.7, 12.0, size=250), rng.uniform(0.1, 0.8, size=50)])
    rng.shuffle(probs)
    probs = [float(x) for x in probs]
    count = np.zeros(MC_DRAWS, dtype=np.int64)
    for p in probs:
        count += rng.random(MC_DRAWS) < p
    hist = np.bincount(count)
    exact = convolve_float(probs)
    z = max(
        abs(hist[k] / MC_DRAWS - exact[k]) / math.sqrt(max(exact[k] * (1 - exact[k]), 1e-300) / MC_DRAWS)
        for k in range(len(hist))
        if exact[k] > 1e-7
    )
    print("monte carlo count: %d draws, mean %.4f (exact %.4f), worst |z| per bin %.2f" % (MC_DRAWS, count.mean(), sum(probs), z))
    return {
        "description": "300 units: 250 from beta(0.7, 12), 50 uniform on [0.1, 0.8), shuffled; "
        "each draw counts units with a uniform number < p",
        "seed": MC_SEED,
        "draws": MC_DRAWS,
        "probs": probs,
        "histogram": [int(x) for x in hist],
        "sample_mean": float(count.mean()),
        "sample_var": float(count.var(ddof=1)),
        "check_worst_abs_z_vs_convolution": float(z),
    }


# ---------------------------------------------------------------------------
# (c) Renewal: Monte Carlo per position and for a small fleet
# ---------------------------------------------------------------------------

SCALE = 1000.0
SHAPES = [2.5, 0.8]
HORIZONS = [500.0, 1000.0, 3000.0]
AGES = [0.0, 700.0, 1500.0]
RENEWAL_DRAWS = 1_000_000
RENEWAL_SEED0 = 20240710
FLEET_SEED = 20240720
FLEET_AGES = [0.0, 150.0, 400.0, 800.0, 1200.0, 2000.0]
FLEET_SHAPE = 2.5
FLEET_HORIZON = 1500.0


def simulate_counts(rng, shape, age, horizon, draws):
    e = rng.standard_exponential(draws)
    t = SCALE * ((age / SCALE) ** shape + e) ** (1.0 / shape) - age
    count = np.zeros(draws, dtype=np.int64)
    alive = t <= horizon
    while alive.any():
        count[alive] += 1
        idx = np.nonzero(alive)[0]
        t[idx] += SCALE * rng.standard_exponential(idx.size) ** (1.0 / shape)
        alive[idx] = t[idx] <= horizon
    return count


def renewal_refs():
    cases = []
    seed = RENEWAL_SEED0
    worst_z = 0.0
    for shape in SHAPES:
        for horizon in HORIZONS:
            for age in AGES:
                rng = np.random.Generator(np.random.PCG64(seed))
                count = simulate_counts(rng, shape, age, horizon, RENEWAL_DRAWS)
                hist = np.bincount(count)
                w = stats.weibull_min(shape, scale=SCALE)
                p_first = float(-np.expm1(w.logsf(age + horizon) - w.logsf(age)))
                share = float(np.mean(count >= 1))
                se = math.sqrt(p_first * (1 - p_first) / RENEWAL_DRAWS)
                z = (share - p_first) / se if se > 0 else (0.0 if share == p_first else math.inf)
                worst_z = max(worst_z, abs(z))
                cases.append(
                    {
                        "shape": shape,
                        "scale": SCALE,
                        "age": age,
                        "horizon": horizon,
                        "seed": seed,
                        "draws": RENEWAL_DRAWS,
                        "histogram": [int(x) for x in hist],
                        "sample_mean": float(count.mean()),
                        "sample_sd": float(count.std(ddof=1)),
                        "p_first_failure_scipy": p_first,
                    }
                )
                print(
                    "renewal shape %.1f horizon %6.0f age %6.0f: mean %.5f (sd %.4f), P(N>=1) z vs scipy %.2f"
                    % (shape, horizon, age, count.mean(), count.std(ddof=1), z)
                )
                seed += 1
    rng = np.random.Generator(np.random.PCG64(FLEET_SEED))
    total = np.zeros(RENEWAL_DRAWS, dtype=np.int64)
    for age in FLEET_AGES:
        total += simulate_counts(rng, FLEET_SHAPE, age, FLEET_HORIZON, RENEWAL_DRAWS)
    fleet = {
        "description": "6 positions, Weibull shape 2.5 scale 1000, horizon 1500; "
        "positions simulated one after another from one stream",
        "shape": FLEET_SHAPE,
        "scale": SCALE,
        "horizon": FLEET_HORIZON,
        "ages": FLEET_AGES,
        "seed": FLEET_SEED,
        "draws": RENEWAL_DRAWS,
        "histogram": [int(x) for x in np.bincount(total)],
        "sample_mean": float(total.mean()),
        "sample_sd": float(total.std(ddof=1)),
    }
    print("renewal fleet: mean %.5f sd %.4f" % (total.mean(), total.std(ddof=1)))
    return {
        "method": "seeded simulation; first failure from the conditional life of a unit of the given age "
        "(inverse of R(age + t)/R(age)), then new-unit lives, counted while the running sum is <= horizon",
        "cases": cases,
        "fleet": fleet,
        "check_worst_abs_z_first_failure_vs_scipy": worst_z,
    }


def main():
    print("libraries:", LIBRARIES)
    pb, worst = poisson_binomial_cases()
    print("worst |numpy - scipy.poisson_binom| %.2e, worst |numpy - exact rational| %.2e" % (worst["scipy"], worst["exact"]))
    out = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "pmf": "pmf[j] = P(N = pmf_offset + j); entries outside the written range are below 1e-300",
            "quantile": "smallest k with P(N <= k) >= q",
            "histogram": "histogram[k] = number of draws with count k",
        },
        "poisson_binomial": pb,
        "monte_carlo_count": monte_carlo_count(),
        "renewal": renewal_refs(),
    }
    size = write_json(OUT, out)
    print("wrote %s (%d bytes)" % (os.path.relpath(OUT, ROOT), size))


if __name__ == "__main__":
    main()

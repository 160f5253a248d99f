#!/usr/bin/env python3
"""Generate the committed reference values for the replacement-economics maths.

Run from the repository root:

    python3 tests/reference/make_policy_refs.py

Writes fixtures/reference/policy.json (read by tests/reference_policy.rs):

* renewal function M(t) = expected failures in (0, t] when failed units are
  replaced by new ones, the solution of M(t) = F(t) + int_[0,t] M(t - x) dF(x):
  - closed forms: exponential M(t) = t/theta; Erlang-2 and Erlang-3 (gamma
    with whole shape), derived below from the Laplace transform and checked
    here against the integral equation with scipy.integrate.quad;
  - numerical: Weibull shapes 0.8, 1.5 and 3, gamma 0.5, lognormal,
    log-logistic, normal (with its mass below age 0 as failures at age 0) and
    a 3-parameter Weibull, by the numerical convolution below in numpy on
    grids of 1024 to 16384 steps with Richardson extrapolation;
  - a seeded Monte Carlo check for the three Weibull shapes (simulated
    failure counts; mean and standard error per age);
* age replacement: cost-rate curves (planned and unplanned parts) with the
  integral of the reliability by scipy.integrate.quad, and optima by scipy
  brentq on the first-order condition and by minimize_scalar (bounded);
* availability under age replacement: optimum by minimize_scalar on -A and by
  brentq on the first-order condition; A at several ages;
* block replacement: cost rates (cp + cf M(T))/T with the numpy renewal
  function and the optimum by brentq on T M'(T) - M(T) = cp/cf and by
  minimize_scalar, both on a cubic spline through the numpy renewal function.

Numerical convolution (independent of the Rust code, which discretises the
other form of the equation): M = F + F * M = F + M * F, so also
M(t) = F(t) + int_[0,t] F(t - x) dM(x). On a grid t_i = i h, dM is taken as
the increments M_j - M_{j-1} and F(t_i - x) at the midpoint of each step
(F(t_{i-j} + h/2), exact from scipy), which gives M_i from M_0..M_{i-1}. A
model with mass p0 = F(0) at age 0 has M_0 = p0/(1 - p0). The grid error is a
series in h with exponents 2, 4 and 1 + b, 2 + b, 1 + 2b, where b is the power
of F at the start of its support (the Weibull or gamma shape; the
3-parameter Weibull's location is put on the grid); these are removed in turn
by Richardson extrapolation over five grids, and the change of the last stage
is written as "est_error" (the script requires it below 1e-10 relative).
The method is run on the closed-form cases too and must agree to 1e-11.

Python with numpy 2.4.6 and scipy 1.17.1 was used; the versions found are
written into the file under "libraries". Python is needed only to regenerate
the file: the Rust tests read the JSON.
"""

import json
import math
import os
import platform

import numpy as np
import scipy
from scipy import integrate, interpolate, optimize, stats

GENERATOR = "tests/reference/make_policy_refs.py"
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT = os.path.join(ROOT, "fixtures", "reference", "policy.json")

SEED = 20240917
LIBRARIES = {
    "python": platform.python_version(),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
}

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
        return json.dumps(v)  # shortest round-tripping form
    if v is None or isinstance(v, str):
        return json.dumps(v)
    raise TypeError(type(v))


def _dump(v, ind):
    pad = " " * ind
    if isinstance(v, dict):
        if not v:
            return "{}"
        if all(not isinstance(x, (list, dict)) for x in v.values()) and len(v) <= 6:
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


def rel(a, b):
    return abs(a - b) / abs(b) if b != 0 else abs(a)


# ---------------------------------------------------------------------------
# Models: our family names and parameters -> scipy frozen distributions
# ---------------------------------------------------------------------------


def frozen(family, p):
    if family == "weibull":
        return stats.weibull_min(p["shape"], scale=p["scale"])
    if family == "weibull3":
        return stats.weibull_min(p["shape"], loc=p["location"], scale=p["scale"])
    if family == "gamma":
        return stats.gamma(p["shape"], scale=p["scale"])
    if family == "exponential":
        return stats.expon(scale=p["scale"])
    if family == "lognormal":
        return stats.lognorm(p["sigma"], scale=math.exp(p["mu"]))
    if family == "loglogistic":
        return stats.fisk(p["shape"], scale=p["scale"])
    if family == "normal":
        return stats.norm(p["mu"], p["sigma"])
    raise ValueError(family)


def start_power(family, p):
    """Power b of F(s0 + u) - F(s0) ~ u^b at the start of the support (None: flatter than any power)."""
    if family in ("weibull", "weibull3", "gamma", "loglogistic"):
        return p["shape"]
    if family in ("exponential", "normal"):
        return 1.0  # the density starts at a positive value
    return None  # lognormal: F vanishes faster than any power at 0


# ---------------------------------------------------------------------------
# Renewal function by numerical convolution (see the module docstring)
# ---------------------------------------------------------------------------


def sweep(cdf, T, n):
    """M at the n + 1 points of the grid of [0, T]."""
    h = T / n
    grid = h * np.arange(n + 1)
    Fg = cdf(grid)
    p0 = Fg[0]
    m0 = p0 / (1.0 - p0)
    Fmid = cdf(grid[:-1] + h / 2)        # F(t_k + h/2), k = 0..n-1
    Fmid_rev = Fmid[::-1].copy()          # Fmid_rev[n-1-k] = Fmid[k]
    M = np.empty(n + 1)
    M[0] = m0
    dM = np.zeros(n + 1)                  # dM[j] = M_j - M_{j-1}
    a = 1.0 - Fmid[0]
    for i in range(1, n + 1):
        # sum_{j=1}^{i-1} F(t_{i-j} + h/2) dM_j (F at t_{i-1}..t_1 + h/2)
        s = np.dot(Fmid_rev[n - i:n - 1], dM[1:i]) if i > 1 else 0.0
        M[i] = (Fg[i] * (1.0 + m0) + s - Fmid[0] * M[i - 1]) / a
        dM[i] = M[i] - M[i - 1]
    return M


def error_exponents(b):
    ps = [2.0, 4.0] + ([1 + b, 2 + b, 1 + 2 * b] if b is not None else [])
    out = []
    for p in sorted(ps):
        if all(abs(p - q) > 1e-9 for q in out):
            out.append(p)
    return out


def renewal_numeric(family, p, T, n0=1024, levels=5):
    """M at the n0 + 1 points of the grid of [0, T], extrapolated, and the
    change of the last extrapolation stage (an error estimate)."""
    cdf = frozen(family, p).cdf
    rows = []
    for k in range(levels):
        M = sweep(cdf, T, n0 * 2 ** k)
        rows.append(M[:: 2 ** k])  # the points of the first grid
    stages = [rows]
    for q in error_exponents(start_power(family, p)):
        prev = stages[-1]
        if len(prev) < 2:
            break
        w = 2.0 ** q
        stages.append([(w * prev[k] - prev[k - 1]) / (w - 1) for k in range(1, len(prev))])
    last = stages[-1] if len(stages[-1]) >= 2 else stages[-2]
    value = last[-1]
    change = np.abs(last[-1] - last[-2])
    return value, change


# ---------------------------------------------------------------------------
# Closed forms for whole-shape gamma (Erlang) lives
# ---------------------------------------------------------------------------
#
# The Laplace transform of the Erlang-k density with scale theta is
# f*(s) = (1 + theta s)^-k, and the renewal equation M = F + M * F becomes
# M*(s) = f*(s) / (s (1 - f*(s))) = 1 / (s ((1 + theta s)^k - 1)).
# (1 + theta s)^k - 1 vanishes at s = 0 (simply) and at
# s_r = (w^r - 1)/theta, r = 1..k-1, w = exp(2 pi i / k). The double pole at 0
# gives t/(k theta) - (k - 1)/(2k); the residue at s_r is
# 1 / (s_r k theta (1 + theta s_r)^(k-1)) = w^r / (k (w^r - 1)). So
#   M(t) = t/(k theta) - (k-1)/(2k) + (1/k) sum_r w^r/(w^r - 1) exp((w^r - 1) t/theta).
# For k = 2 (w = -1): M(t) = t/(2 theta) - 1/4 + exp(-2t/theta)/4.
# erlang_renewal() evaluates the general form; check_closed_form() confirms
# it satisfies the integral equation with scipy.integrate.quad.


def erlang_renewal(k, theta, t):
    w = np.exp(2j * np.pi * np.arange(1, k) / k)
    s = np.sum(w / (w - 1) * np.exp((w - 1) * t / theta))
    return float(t / (k * theta) - (k - 1) / (2 * k) + (s / k).real)


def erlang2_renewal(theta, t):
    return t / (2 * theta) - 0.25 + math.exp(-2 * t / theta) / 4


def check_closed_form(k, theta, ts):
    """Largest |M(t) - F(t) - int_0^t M(t - x) f(x) dx| relative to M(t)."""
    d = stats.gamma(k, scale=theta)
    worst = 0.0
    for t in ts:
        conv, _ = integrate.quad(lambda x: erlang_renewal(k, theta, t - x) * d.pdf(x), 0, t,
                                 epsabs=0, epsrel=1e-13, limit=500)
        m = erlang_renewal(k, theta, t)
        worst = max(worst, abs(m - d.cdf(t) - conv) / m)
    return worst


def life_moments(family, p):
    """Mean and variance of the life as renewals see it, max(X, 0): scipy's
    mean and var, except for the normal, whose mass below 0 fails at age 0:
    E max(X,0) = mu Phi(z) + sigma phi(z), E max(X,0)^2 = (mu^2 + sigma^2) Phi(z)
    + mu sigma phi(z), z = mu/sigma, checked against quad of R and 2 t R."""
    d = frozen(family, p)
    if family != "normal":
        return float(d.mean()), float(d.var())
    mu, sigma = p["mu"], p["sigma"]
    z = mu / sigma
    m1 = mu * stats.norm.cdf(z) + sigma * stats.norm.pdf(z)
    m2 = (mu * mu + sigma * sigma) * stats.norm.cdf(z) + mu * sigma * stats.norm.pdf(z)
    q1, _ = integrate.quad(d.sf, 0, np.inf, epsabs=0, epsrel=1e-12, limit=500)
    q2, _ = integrate.quad(lambda t: 2 * t * d.sf(t), 0, np.inf, epsabs=0, epsrel=1e-12, limit=500)
    LIFE_MOMENT_CHECK.append(max(rel(q1, m1), rel(q2, m2)))
    return float(m1), float(m2 - m1 * m1)


LIFE_MOMENT_CHECK = []


# ---------------------------------------------------------------------------
# Renewal section
# ---------------------------------------------------------------------------

# (name, family, params, T): the ages are T/32, T/8, T/4, T/2, 3T/4, T.
NUMERIC_CASES = [
    ("weibull_0.8", "weibull", {"shape": 0.8, "scale": 1000.0}, 4000.0),
    ("weibull_1.5", "weibull", {"shape": 1.5, "scale": 1000.0}, 4000.0),
    ("weibull_3", "weibull", {"shape": 3.0, "scale": 1000.0}, 4000.0),
    ("gamma_0.5", "gamma", {"shape": 0.5, "scale": 200.0}, 400.0),
    ("lognormal_0.5", "lognormal", {"mu": 7.0, "sigma": 0.5}, 4000.0),
    ("lognormal_1.5", "lognormal", {"mu": 7.0, "sigma": 1.5}, 8000.0),
    ("loglogistic_3", "loglogistic", {"shape": 3.0, "scale": 1000.0}, 4000.0),
    ("normal_2.5", "normal", {"mu": 1000.0, "sigma": 400.0}, 4000.0),
    ("weibull3_1.5", "weibull3", {"shape": 1.5, "scale": 1000.0, "location": 500.0}, 4000.0),
]
FRACTIONS = [1 / 32, 1 / 8, 1 / 4, 1 / 2, 3 / 4, 1.0]
N0 = 1024  # a multiple of 32 (the ages above) and of 8 (the weibull3 location)


def build_renewal():
    out = {"closed_form": [], "numeric": [], "monte_carlo": []}
    checks = {}

    # Closed forms, and the numerical method on them.
    worst_method = 0.0
    theta = 500.0
    T = 4000.0
    ts = [T * f for f in FRACTIONS]
    exp_vals, _ = renewal_numeric("exponential", {"scale": theta}, T)
    idx = [int(round(f * N0)) for f in FRACTIONS]
    for i, t in zip(idx, ts):
        worst_method = max(worst_method, rel(exp_vals[i], t / theta))
    out["closed_form"].append({
        "name": "exponential", "family": "exponential", "params": {"scale": theta},
        "source": "M(t) = t/theta: failures of an exponential life form a Poisson process",
        "t": ts, "m": [t / theta for t in ts]})
    for k in (2, 3):
        m = [erlang_renewal(k, theta, t) for t in ts]
        if k == 2:
            checks["erlang2_general_vs_k2_formula"] = max(
                rel(a, erlang2_renewal(theta, t)) for a, t in zip(m, ts))
        checks["erlang%d_integral_equation" % k] = check_closed_form(k, theta, ts[:4])
        vals, _ = renewal_numeric("gamma", {"shape": float(k), "scale": theta}, T)
        for i, t, v in zip(idx, ts, m):
            worst_method = max(worst_method, rel(vals[i], v))
        out["closed_form"].append({
            "name": "erlang_%d" % k, "family": "gamma",
            "params": {"shape": float(k), "scale": theta},
            "source": ("M(t) = t/(2 theta) - 1/4 + exp(-2t/theta)/4" if k == 2 else
                       "M(t) = t/(k theta) - (k-1)/(2k) + (1/k) sum_r w^r/(w^r - 1) "
                       "exp((w^r - 1) t/theta), w = exp(2 pi i/k)")
                      + ", derived in make_policy_refs.py from the Laplace transform",
            "t": ts, "m": m})
    checks["numeric_method_vs_closed_forms"] = worst_method

    worst_est = 0.0
    for name, family, p, T in NUMERIC_CASES:
        vals, change = renewal_numeric(family, p, T)
        idx = [int(round(f * N0)) for f in FRACTIONS]
        ts = [T * f for f in FRACTIONS]
        m = [float(vals[i]) for i in idx]
        est = [float(change[i]) for i in idx]
        worst_est = max(worst_est, max(e / v if v > 0 else e for e, v in zip(est, m)))
        mean, var = life_moments(family, p)
        out["numeric"].append({
            "name": name, "family": family, "params": p,
            "mean": mean, "variance": var,
            "t": ts, "m": m, "est_error": est})
    checks["numeric_worst_est_error_rel"] = worst_est
    checks["normal_moments_formula_vs_quad"] = max(LIFE_MOMENT_CHECK)

    # Monte Carlo for the Weibull shapes: simulated lives summed until past T.
    rng = np.random.default_rng(SEED)
    paths = 400_000
    worst_z = 0.0
    for case in out["numeric"]:
        if case["family"] != "weibull":
            continue
        p = case["params"]
        ts = case["t"]
        T = ts[-1]
        mean = case["mean"]
        cols = int(math.ceil(3 * T / mean)) + 20
        total = np.zeros(paths)
        counts = np.zeros((paths, len(ts)))
        while True:
            lives = p["scale"] * rng.weibull(p["shape"], size=(paths, cols))
            ends = total[:, None] + np.cumsum(lives, axis=1)
            for j, t in enumerate(ts):
                counts[:, j] += (ends <= t).sum(axis=1)
            total = ends[:, -1]
            if total.min() > T:
                break
        mc = counts.mean(axis=0)
        se = counts.std(axis=0, ddof=1) / math.sqrt(paths)
        z = [abs(a - b) / s for a, b, s in zip(mc, case["m"], se)]
        worst_z = max(worst_z, max(z))
        out["monte_carlo"].append({
            "name": case["name"], "family": "weibull", "params": p,
            "seed": SEED, "paths": paths, "generator": "numpy.random.default_rng(seed).weibull",
            "t": ts, "mean_count": [float(x) for x in mc], "standard_error": [float(x) for x in se]})
    checks["monte_carlo_worst_z"] = worst_z
    return out, checks


# ---------------------------------------------------------------------------
# Age replacement and availability (scipy quad + brentq / minimize_scalar)
# ---------------------------------------------------------------------------


def usage(d, T):
    """integral_0^T R by quad, split at the median for accuracy."""
    med = float(d.median())
    pts = [0.0] + ([med] if 0 < med < T else []) + [T]
    total = 0.0
    for a, b in zip(pts[:-1], pts[1:]):
        v, _ = integrate.quad(d.sf, a, b, epsabs=0, epsrel=1e-13, limit=500)
        total += v
    return total


def hazard(d, t):
    with np.errstate(divide="ignore"):  # logsf of a far tail may be -inf
        return math.exp(d.logpdf(t) - d.logsf(t))


def first_root(d, a, b):
    """The first age at which the first-order condition h U - F = a/(b - a)
    of the rate (a R + b F)/U turns positive (the first local minimum of the
    rate, as the Rust search finds it): located on a log grid from 1e-3 to 50
    times the median, then brentq. None if it never does."""
    med = float(d.median())
    target = a / (b - a)

    def foc(T):
        return hazard(d, T) * usage(d, T) - d.cdf(T) - target

    grid = med * np.geomspace(1e-3, 50, 241)
    prev = grid[0]
    for T in grid[1:]:
        if foc(T) > 0:
            return optimize.brentq(foc, prev, T, xtol=1e-300, rtol=4 * np.finfo(float).eps,
                                   maxiter=500)
        prev = T
    return None


def bounded_minimum(d, a, b, upper):
    """minimize_scalar (bounded) of (a R + b F)/U on (1e-4, 1) x upper."""
    def rate(T):
        return (a * d.sf(T) + b * d.cdf(T)) / usage(d, T)

    rb = optimize.minimize_scalar(rate, bounds=(1e-4 * upper, upper), method="bounded",
                                  options=dict(xatol=1e-10 * upper, maxiter=2000))
    return float(rb.x)


AGE_CASES = [
    ("weibull_2.5_r10", "weibull", {"shape": 2.5, "scale": 1000.0}, 1.0, 10.0),
    ("weibull_2.5_r3", "weibull", {"shape": 2.5, "scale": 1000.0}, 1.0, 3.0),
    ("gamma_3_r5", "gamma", {"shape": 3.0, "scale": 300.0}, 1.0, 5.0),
    ("lognormal_0.4_r8", "lognormal", {"mu": 7.0, "sigma": 0.4}, 1.0, 8.0),
    ("normal_r5", "normal", {"mu": 1000.0, "sigma": 250.0}, 2.0, 10.0),
    ("loglogistic_4_r6", "loglogistic", {"shape": 4.0, "scale": 1000.0}, 1.0, 6.0),
    ("loglogistic_2_r5", "loglogistic", {"shape": 2.0, "scale": 1000.0}, 1.0, 5.0),
    ("weibull_0.8_r10", "weibull", {"shape": 0.8, "scale": 1000.0}, 1.0, 10.0),
]
CURVE_FRACTIONS = [0.05, 0.1, 0.2, 0.35, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0]


def build_age_replacement():
    curves, verdicts = [], []
    checks = {"bounded_vs_root": 0.0}
    for name, family, p, cp, cf in AGE_CASES:
        d = frozen(family, p)
        med = float(d.median())
        ages = [med * f for f in CURVE_FRACTIONS]
        planned, unplanned = [], []
        for T in ages:
            u = usage(d, T)
            planned.append(cp * float(d.sf(T)) / u)
            unplanned.append(cf * float(d.cdf(T)) / u)
        curves.append({"name": name, "family": family, "params": p,
                       "cost_planned": cp, "cost_failure": cf, "ages": ages,
                       "planned_rate": planned, "unplanned_rate": unplanned,
                       "total_rate": [a + b for a, b in zip(planned, unplanned)]})
        rtf = cf / float(d.mean())
        case = {"name": name, "family": family, "params": p,
                "cost_planned": cp, "cost_failure": cf, "run_to_failure_rate": rtf}
        root = first_root(d, cp, cf)
        rate_root = None if root is None else float(
            (cp * d.sf(root) + cf * d.cdf(root)) / usage(d, root))
        case.update({"t_first_root": root, "rate_at_first_root": rate_root})
        if root is None or rate_root >= rtf:
            case.update({"t_opt": None, "t_opt_bounded": None,
                         "cost_rate_at_opt": rtf, "saving": 0.0})
        else:
            tb = bounded_minimum(d, cp, cf, 5 * med)
            checks["bounded_vs_root"] = max(checks["bounded_vs_root"], rel(tb, root))
            case.update({"t_opt": root, "t_opt_bounded": tb, "cost_rate_at_opt": rate_root,
                         "saving": 1 - rate_root / rtf})
        verdicts.append(case)
    return curves, verdicts, checks


AVAILABILITY_CASES = [
    ("weibull_2.5", "weibull", {"shape": 2.5, "scale": 1000.0}, 2.0, 20.0),
    ("gamma_4", "gamma", {"shape": 4.0, "scale": 250.0}, 5.0, 30.0),
    ("lognormal_0.3", "lognormal", {"mu": 7.0, "sigma": 0.3}, 1.0, 4.0),
]


def build_availability():
    out = []
    checks = {"maximiser_vs_root": 0.0}
    for name, family, p, tp, tf in AVAILABILITY_CASES:
        d = frozen(family, p)
        med = float(d.median())

        def avail(T):
            u = usage(d, T)
            return u / (u + tp * d.sf(T) + tf * d.cdf(T))

        upper = 5 * med
        rb = optimize.minimize_scalar(lambda T: -avail(T), bounds=(1e-4 * upper, upper),
                                      method="bounded", options=dict(xatol=1e-10 * upper, maxiter=2000))
        t_root = first_root(d, tp, tf)
        checks["maximiser_vs_root"] = max(checks["maximiser_vs_root"], rel(float(rb.x), t_root))
        ages = [med * f for f in (0.1, 0.3, 0.6, 1.0, 2.0)]
        out.append({"name": name, "family": family, "params": p,
                    "downtime_planned": tp, "downtime_failure": tf,
                    "t_opt": t_root, "t_opt_maximiser": float(rb.x),
                    "availability_at_opt": float(avail(t_root)),
                    "ages": ages, "availability": [float(avail(T)) for T in ages]})
    return out, checks


# ---------------------------------------------------------------------------
# Block replacement with the numpy renewal function
# ---------------------------------------------------------------------------

BLOCK_CASES = [
    ("weibull_2.5_r10", "weibull", {"shape": 2.5, "scale": 1000.0}, 1.0, 10.0, 2000.0),
    ("weibull_3_r5", "weibull", {"shape": 3.0, "scale": 1000.0}, 1.0, 5.0, 2000.0),
    ("gamma_3_r10", "gamma", {"shape": 3.0, "scale": 300.0}, 1.0, 10.0, 2000.0),
    ("lognormal_0.3_r8", "lognormal", {"mu": 7.0, "sigma": 0.3}, 1.0, 8.0, 2000.0),
    ("weibull_0.8_r10", "weibull", {"shape": 0.8, "scale": 1000.0}, 1.0, 10.0, 3000.0),
]


def build_block():
    out = []
    checks = {"minimiser_vs_root": 0.0, "spline_vs_grid": 0.0}
    for name, family, p, cp, cf, max_t in BLOCK_CASES:
        d = frozen(family, p)
        vals, change = renewal_numeric(family, p, max_t)
        grid = np.linspace(0.0, max_t, N0 + 1)
        spline = interpolate.CubicSpline(grid, vals)
        # spline accuracy: against a direct solve at an off-grid age
        probe = max_t * 0.6180339887
        pv, _ = renewal_numeric(family, p, probe, n0=N0, levels=5)
        checks["spline_vs_grid"] = max(checks["spline_vs_grid"], rel(float(spline(probe)), float(pv[-1])))
        ts = [max_t * f for f in (1 / 16, 1 / 8, 1 / 4, 3 / 8, 1 / 2, 3 / 4, 1.0)]
        idx = [int(round(t / max_t * N0)) for t in ts]
        rates = [(cp + cf * float(vals[i])) / t for i, t in zip(idx, ts)]

        def rate(T):
            return (cp + cf * float(spline(T))) / T

        lo_b = max_t / 64
        rb = optimize.minimize_scalar(rate, bounds=(lo_b, max_t), method="bounded",
                                      options=dict(xatol=1e-10 * max_t, maxiter=2000))
        tb = float(rb.x)
        rtf = cf / float(d.mean())
        case = {"name": name, "family": family, "params": p, "cost_planned": cp,
                "cost_failure": cf, "max_t": max_t, "t": ts, "rate": rates,
                "run_to_failure_rate": rtf}
        if tb > 0.99 * max_t or rate(tb) >= rtf:
            case.update({"t_opt": None, "t_opt_minimiser": None, "rate_at_opt": None})
        else:
            def foc(T):
                return T * float(spline(T, 1)) - float(spline(T)) - cp / cf
            t = optimize.brentq(foc, tb * 0.8, tb * 1.2, xtol=1e-300, rtol=4 * np.finfo(float).eps)
            checks["minimiser_vs_root"] = max(checks["minimiser_vs_root"], rel(tb, t))
            case.update({"t_opt": t, "t_opt_minimiser": tb, "rate_at_opt": rate(t)})
        out.append(case)
    return out, checks


# ---------------------------------------------------------------------------


def main():
    print("lifedata policy reference generator")
    print("  python %s, numpy %s, scipy %s" % (
        LIBRARIES["python"], LIBRARIES["numpy"], LIBRARIES["scipy"]))
    renewal, rc = build_renewal()
    for k, v in rc.items():
        print("  renewal check %-34s %.2e" % (k, v))
    assert rc["erlang2_general_vs_k2_formula"] < 1e-14
    assert rc["erlang2_integral_equation"] < 1e-12 and rc["erlang3_integral_equation"] < 1e-12
    assert rc["numeric_method_vs_closed_forms"] < 1e-11
    assert rc["numeric_worst_est_error_rel"] < 1e-10
    assert rc["monte_carlo_worst_z"] < 4.0
    curves, verdicts, ac = build_age_replacement()
    print("  age replacement: bounded minimiser vs root, worst relative %.2e" % ac["bounded_vs_root"])
    avail, vc = build_availability()
    print("  availability: maximiser vs root, worst relative %.2e" % vc["maximiser_vs_root"])
    block, bc = build_block()
    print("  block replacement: minimiser vs root %.2e, spline vs direct solve %.2e" % (
        bc["minimiser_vs_root"], bc["spline_vs_grid"]))
    assert bc["spline_vs_grid"] < 1e-9
    doc = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "renewal": "M(t) = F(t) + int_[0,t] M(t-x) dF(x); numeric: midpoint rule on "
                       "M = F + int F(t-x) dM(x), grids 1024..16384 steps, Richardson over "
                       "exponents 2, 4, 1+b, 2+b, 1+2b; est_error = change of the last stage",
            "mean_variance": "of the life max(X, 0) as renewals see it: scipy's mean and var; "
                             "for the normal the moments of max(X, 0) (formula checked by quad)",
            "monte_carlo": "mean and standard error of the number of simulated failures in (0, t]",
            "age_cost_rate": "planned = cp R(T)/U(T), unplanned = cf F(T)/U(T), "
                             "U = scipy.integrate.quad of sf (epsrel 1e-13)",
            "age_t_opt": "t_first_root: brentq root of h U - F = cp/(cf - cp) at its first sign "
                         "change on a log grid (1e-3..50 x median); t_opt: that root when its rate "
                         "is below run_to_failure_rate = cf/mean, else null; t_opt_bounded: "
                         "minimize_scalar (bounded) of the cost rate on (5e-4, 5) x median",
            "availability": "A(T) = U/(U + tp R + tf F); t_opt: brentq root of h U - F = tp/(tf - tp); "
                            "t_opt_maximiser: minimize_scalar of -A",
            "block_rate": "(cp + cf M(T))/T with the numeric renewal function; t_opt: brentq root of "
                          "T M'(T) - M(T) = cp/cf on a cubic spline through it; t_opt_minimiser: "
                          "minimize_scalar; null when the minimum is at max_t or not below cf/mean",
        },
        "checks": {**rc, **ac, **vc, **bc},
        "renewal": renewal,
        "age_replacement": {"curves": curves, "verdicts": verdicts},
        "availability": avail,
        "block_replacement": block,
    }
    write_json(OUT, doc)
    print("wrote", os.path.relpath(OUT, ROOT))


if __name__ == "__main__":
    main()

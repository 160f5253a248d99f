#!/usr/bin/env python3
"""Generate the committed Weibull reference fixtures for lifedata.

Run from the repository root:

    python3 tests/reference/make_weibull_refs.py

Writes
    fixtures/reference/weibull_mle.json       censored 2-parameter Weibull ML fits
    fixtures/reference/weibull_readers.json   quantiles, cdf/sf/pdf/hazard, mean,
                                              conditional failure probabilities
    fixtures/reference/age_replacement.json   optimum age-replacement intervals

Reference values come from general-purpose libraries only: scipy (stats,
optimize, integrate, special), numpy (seeded random generation), lifelines
(WeibullFitter, as an independent second fitter) and mpmath (a 50-digit check
of the ML estimates).  The library versions are printed and written into every
file.  The output is deterministic: every random dataset uses a fixed seed and
the files are written with a fixed layout.

Python is needed only to regenerate these files; the Rust test suite reads the
committed JSON and never runs Python.
"""

import json
import math
import os
import platform
import warnings

import mpmath
import numpy as np
import scipy
from scipy import integrate, optimize, special
from scipy.stats import weibull_min

import lifelines
from lifelines import WeibullFitter

GENERATOR = "tests/reference/make_weibull_refs.py"
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
REF_DIR = os.path.join(ROOT, "fixtures", "reference")
LZ_CSV = os.path.join(ROOT, "fixtures", "published", "lieblein_zelen_1956_bearings.csv")

LIBRARIES = {
    "python": platform.python_version(),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "lifelines": lifelines.__version__,
    "mpmath": mpmath.__version__,
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
            raise ValueError("non-finite number in output: %r" % v)
        return json.dumps(v)  # repr: shortest round-tripping form
    if v is None or isinstance(v, str):
        return json.dumps(v)
    raise TypeError(type(v))


def _is_leaf_list(v):
    return isinstance(v, list) and all(not isinstance(x, (list, dict)) for x in v)


def _dump(v, ind):
    pad = " " * ind
    if isinstance(v, dict):
        if not v:
            return "{}"
        items = ['%s  %s: %s' % (pad, json.dumps(k), _dump(x, ind + 2)) for k, x in v.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(v, list):
        if _is_leaf_list(v):
            return "[" + ", ".join(_scalar(x) for x in v) + "]"
        if all(_is_leaf_list(x) for x in v):
            rows = [pad + "  " + _dump(x, ind + 2) for x in v]
            return "[\n" + ",\n".join(rows) + "\n" + pad + "]"
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
# Data sets
# ---------------------------------------------------------------------------


def read_lieblein_zelen():
    vals = []
    with open(LZ_CSV, encoding="utf-8") as fh:
        header_seen = False
        for line in fh:
            s = line.strip()
            if not s or s.startswith("#"):
                continue
            if not header_seen:
                if s != "life_mrev":
                    raise ValueError("unexpected header in %s: %r" % (LZ_CSV, s))
                header_seen = True
                continue
            vals.append(float(s))
    if len(vals) != 23:
        raise ValueError("expected 23 bearing lives, found %d" % len(vals))
    return vals


def round_ages(t, rounding):
    """Round positive ages up onto a grid so that they tie.

    ("step", e): ceiling to a multiple of 10**e (e.g. e=0: whole days).
    ("sig", d):  round to d significant decimal digits (log-spread data).
    Values are re-read from decimal text so they are the nearest doubles of
    short decimal numbers (e.g. 0.000123, not 0.00012300000000000001).
    """
    kind, p = rounding
    out = np.empty_like(t)
    if kind == "step":
        units = np.ceil(t / 10.0 ** p)
        units = np.maximum(units, 1.0)
        for i, u in enumerate(units):
            out[i] = float("%de%d" % (int(u), p))
    elif kind == "sig":
        for i, x in enumerate(t):
            out[i] = float("%.*e" % (p - 1, x))
    else:
        raise ValueError(kind)
    if np.any(out <= 0) or not np.all(np.isfinite(out)):
        raise ValueError("rounding produced a non-positive age")
    return out


def round_one(x, rounding):
    return float(round_ages(np.array([x]), rounding)[0])


def simulate(spec, seed):
    """Return (ages, failed) arrays for one spec and seed."""
    rng = np.random.default_rng(seed)
    n, k, lam = spec["n"], spec["shape"], spec["scale"]
    cens = spec["censoring"]
    rounding = spec.get("rounding")
    t = lam * rng.weibull(k, size=n)
    if cens[0] == "none":
        obs, failed = t, np.ones(n, dtype=bool)
        if rounding:
            obs = round_ages(obs, rounding)
    elif cens[0] == "random":
        # Independent Weibull censoring time with the same shape: the
        # expected suspended fraction is exactly p.
        p = cens[1]
        lam_c = lam * ((1.0 - p) / p) ** (1.0 / k)
        c = lam_c * rng.weibull(k, size=n)
        failed = t <= c
        obs = np.minimum(t, c)
        if rounding:
            obs = round_ages(obs, rounding)
    elif cens[0] == "type1":
        # Fixed end of observation where the true reliability equals p.
        p = cens[1]
        tc = lam * (-math.log(p)) ** (1.0 / k)
        if rounding:
            tc = round_one(tc, rounding)
        failed = t <= tc
        obs = np.where(failed, t, tc)
        if rounding:
            fa = round_ages(obs[failed], rounding)
            obs = obs.copy()
            obs[failed] = np.minimum(fa, tc)
    else:
        raise ValueError(cens)
    return obs.astype(float), failed


def to_rows(ages, failed):
    counts = {}
    for a, f in zip(ages.tolist(), failed.tolist()):
        key = (float(a), 1 if f else 0)
        counts[key] = counts.get(key, 0) + 1
    return [[a, f, c] for (a, f), c in sorted(counts.items())]


def mle_is_finite(rows):
    fail_ages = [a for a, f, c in rows if f == 1]
    if not fail_ages:
        return False
    return min(fail_ages) < max(a for a, f, c in rows)


def dataset_specs():
    """The simulated datasets.  Seeds are fixed; on rejection the seed is
    advanced by 1000 until the acceptance conditions hold."""
    S = []

    def add(name, n, shape, scale, censoring, rounding=None, seed=0, desc="", **req):
        S.append(dict(name=name, n=n, shape=shape, scale=scale, censoring=censoring,
                      rounding=rounding, seed=seed, desc=desc, req=req))

    add("n3_complete", 3, 2.0, 100.0, ("none",), None, 101,
        "3 failures, no suspensions, continuous ages")
    add("n3_one_suspension", 3, 1.0, 10.0, ("random", 0.34), None, 102,
        "2 failures and 1 random suspension, continuous ages", n_susp=(1, 1))
    add("n5_shape02_complete", 5, 0.2, 1.0, ("none",), None, 103,
        "5 failures from a very wide shape-0.2 population, continuous ages")
    add("n5_type1", 5, 1.5, 1000.0, ("type1", 0.4), None, 104,
        "end-of-observation suspension at the time where true reliability is 0.4",
        n_susp=(1, 3))
    add("n10_random30", 10, 3.5, 50.0, ("random", 0.3), None, 105,
        "random suspensions, expected fraction 0.3, continuous ages", n_susp=(1, 9))
    add("n20_one_failure_95pct", 20, 2.0, 5000.0, ("type1", 0.95), None, 106,
        "a single failure and 19 end-of-observation suspensions (95% suspended)",
        n_fail=(1, 1))
    add("n23_shape05_scale1e-3_random30", 23, 0.5, 1e-3, ("random", 0.3), None, 107,
        "small scale (1e-3), shape 0.5, random suspensions", n_susp=(1, 22))
    add("n23_sig1_type1_ties", 23, 1.0, 1.0, ("type1", 0.5), ("sig", 1), 108,
        "ages rounded to 1 significant digit (many ties), end-of-observation suspension",
        n_susp=(1, 22))
    add("n50_shape8_scale1e9_type1", 50, 8.0, 1e9, ("type1", 0.4), None, 109,
        "large scale (1e9), steep shape 8, end-of-observation suspension at R=0.4")
    add("n50_95pct_type1", 50, 3.5, 100.0, ("type1", 0.95), None, 110,
        "end-of-observation suspension where true reliability is 0.95",
        n_fail=(2, 3))
    add("n100_shape20_complete", 100, 20.0, 1.0, ("none",), None, 111,
        "very steep shape 20, complete, continuous ages")
    add("n100_shape02_scale1e6_random50", 100, 0.2, 1e6, ("random", 0.5), None, 112,
        "very shallow shape 0.2, half suspended at random, continuous ages")
    add("n500_days_shape1_random20", 500, 1.0, 30.0, ("random", 0.2), ("step", 0), 113,
        "ages rounded up to whole days (heavy ties), random suspensions")
    add("n1000_days_shape1_random20", 1000, 1.0, 500.0, ("random", 0.2), ("step", 0), 114,
        "ages rounded up to whole days, random suspensions")
    add("n1000_shape05_scale1e9_complete", 1000, 0.5, 1e9, ("none",), None, 115,
        "complete, shape 0.5, scale 1e9, continuous ages")
    add("n1000_90pct_type1_scale1e-3", 1000, 3.5, 1e-3, ("type1", 0.9), None, 116,
        "90% end-of-observation suspensions, small scale, continuous ages")
    add("n1000_90pct_random_hours", 1000, 2.0, 200.0, ("random", 0.9), ("step", 0), 117,
        "90% random suspensions, ages rounded up to whole hours")
    add("n10000_hours_type1_60", 10000, 2.0, 8760.0, ("type1", 0.6), ("step", 0), 118,
        "ages rounded up to whole hours, end-of-observation suspension at R=0.6")
    add("n10000_shape05_95pct_random_sig2", 10000, 0.5, 1e4, ("random", 0.95), ("sig", 2), 119,
        "95% random suspensions, shape 0.5, ages rounded to 2 significant digits")
    add("n10000_shape20_scale1e-3_step1e-6", 10000, 20.0, 1e-3, ("random", 0.3), ("step", -6), 120,
        "steep shape 20, scale 1e-3, ages rounded up to multiples of 1e-6")
    add("n10000_shape1_scale1e6_type1_90_sig2", 10000, 1.0, 1e6, ("type1", 0.9), ("sig", 2), 121,
        "90% end-of-observation suspensions, ages rounded to 2 significant digits")
    add("n20000_continuous_random40", 20000, 1.2, 3000.0, ("random", 0.4), None, 122,
        "large continuous set (about 20000 distinct rows), random suspensions")
    add("n100000_step100_random30", 100000, 1.5, 2e4, ("random", 0.3), ("step", 2), 123,
        "ages rounded up to multiples of 100 (e.g. days in hundreds), random suspensions")
    add("n100000_scale1e9_95pct_type1_step1e7", 100000, 3.5, 1e9, ("type1", 0.95), ("step", 7), 124,
        "95% end-of-observation suspensions, scale 1e9, ages rounded up to multiples of 1e7")
    add("n100000_shape8_complete_whole", 100000, 8.0, 1000.0, ("none",), ("step", 0), 125,
        "complete, shape 8, ages rounded up to whole units")
    add("n100000_shape02_scale1e-3_90pct_sig2", 100000, 0.2, 1e-3, ("random", 0.9), ("sig", 2), 126,
        "shape 0.2, scale 1e-3, 90% random suspensions, ages rounded to 2 significant digits")
    return S


def accept(rows, req):
    if not mle_is_finite(rows):
        return False
    nf = sum(c for a, f, c in rows if f == 1)
    ns = sum(c for a, f, c in rows if f == 0)
    if "n_fail" in req and not (req["n_fail"][0] <= nf <= req["n_fail"][1]):
        return False
    if "n_susp" in req and not (req["n_susp"][0] <= ns <= req["n_susp"][1]):
        return False
    return True


def build_case(spec):
    seed = spec["seed"]
    for attempt in range(200):
        ages, failed = simulate(spec, seed)
        rows = to_rows(ages, failed)
        if accept(rows, spec["req"]):
            return rows, seed, attempt
        seed += 1000
    raise RuntimeError("no acceptable dataset for %s" % spec["name"])


def censoring_text(spec):
    c = spec["censoring"]
    if c[0] == "none":
        s = "complete (no suspensions)"
    elif c[0] == "random":
        s = ("random suspensions: independent Weibull censoring times with the same shape, "
             "expected suspended fraction %g" % c[1])
    else:
        s = ("end-of-observation (type I) suspension at the time where the true reliability "
             "is %g" % c[1])
    r = spec["rounding"]
    if r is None:
        s += "; continuous ages"
    elif r[0] == "step":
        s += "; ages rounded up to multiples of 1e%d" % r[1]
    else:
        s += "; ages rounded to %d significant digit(s)" % r[1]
    return s


# ---------------------------------------------------------------------------
# Weighted right-censored Weibull log-likelihood and its ML estimate
# ---------------------------------------------------------------------------


class Data:
    def __init__(self, rows):
        self.t = np.array([r[0] for r in rows], dtype=float)
        self.d = np.array([r[1] for r in rows], dtype=bool)
        self.w = np.array([r[2] for r in rows], dtype=float)
        self.logt = np.log(self.t)
        self.r = float(self.w[self.d].sum())
        self.n = float(self.w.sum())
        # centre of the log ages: weighted mean over failures
        self.c0 = math.fsum((self.w[self.d] * self.logt[self.d]).tolist()) / self.r
        self.x = self.logt - self.c0
        self.sum_fx = math.fsum((self.w[self.d] * self.x[self.d]).tolist())


def loglik_scipy(data, k, lam):
    """Weighted log-likelihood from scipy.stats.weibull_min.logpdf / logsf."""
    lp = weibull_min.logpdf(data.t[data.d], k, scale=lam)
    ls = weibull_min.logsf(data.t[~data.d], k, scale=lam)
    return math.fsum((data.w[data.d] * lp).tolist() + (data.w[~data.d] * ls).tolist())


def profile_score(data, k):
    """d/dk of the profile log-likelihood, divided by the failure count r:
    g(k) = 1/k + sum_f w x / r - sum w x e^{kx} / sum w e^{kx}."""
    kx = k * data.x
    m = kx.max()
    e = data.w * np.exp(kx - m)
    a0 = math.fsum(e.tolist())
    a1 = math.fsum((e * data.x).tolist())
    return 1.0 / k + data.sum_fx / data.r - a1 / a0


def scale_given_shape(data, k):
    kx = k * data.x
    m = kx.max()
    a0 = math.fsum((data.w * np.exp(kx - m)).tolist())
    return math.exp(data.c0 + (m + math.log(a0) - math.log(data.r)) / k)


def fit_profile_brentq(data):
    """Route B: brentq on the profile score equation in the shape; the scale
    then follows in closed form (lambda^k = sum w t^k / r)."""
    lo, hi = 1.0, 1.0
    while profile_score(data, lo) <= 0:
        lo /= 2.0
        if lo < 1e-8:
            raise RuntimeError("no lower bracket")
    while profile_score(data, hi) >= 0:
        hi *= 2.0
        if hi > 1e8:
            raise RuntimeError("no upper bracket")
    k = optimize.brentq(lambda s: profile_score(data, s), lo, hi,
                        xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=1000)
    return k, scale_given_shape(data, k)


def score_and_hessian(data, k, theta):
    """Analytic gradient and Hessian of the weighted log-likelihood in
    (shape k, theta = log scale)."""
    u = data.logt - theta
    z = np.exp(k * u)
    w, d = data.w, data.d
    r = data.r
    swz = math.fsum((w * z).tolist())
    swzu = math.fsum((w * z * u).tolist())
    swzuu = math.fsum((w * z * u * u).tolist())
    sfu = math.fsum((w[d] * u[d]).tolist())
    g_k = r / k + sfu - swzu
    g_t = k * (swz - r)
    h_kk = -r / k ** 2 - swzuu
    h_kt = -r + swz + k * swzu
    h_tt = -k * k * swz
    return np.array([g_k, g_t]), np.array([[h_kk, h_kt], [h_kt, h_tt]])


def fit_minimize_newton(data):
    """Route A: scipy.optimize.minimize (BFGS, then Nelder-Mead restart) on
    (log shape, log scale) of the scipy log-likelihood, then Newton steps with
    the analytic gradient and Hessian (step-halving on the scipy loglik)."""
    nrm = data.n

    def negll(p):
        k, lam = math.exp(p[0]), math.exp(p[1])
        v = loglik_scipy(data, k, lam)
        return -v / nrm if math.isfinite(v) else 1e300

    # start: shape 1 (exponential MLE for the scale)
    lam0 = math.fsum((data.w * data.t).tolist()) / data.r
    p0 = np.array([0.0, math.log(lam0)])
    res = optimize.minimize(negll, p0, method="Nelder-Mead",
                            options=dict(xatol=1e-10, fatol=1e-14, maxiter=20000, maxfev=40000))
    res = optimize.minimize(negll, res.x, method="BFGS", options=dict(gtol=1e-12, maxiter=2000))
    k, theta = math.exp(res.x[0]), res.x[1]
    for _ in range(100):
        g, H = score_and_hessian(data, k, theta)
        step = np.linalg.solve(H, -g)
        base = loglik_scipy(data, k, math.exp(theta))
        a = 1.0
        while True:
            k1, t1 = k + a * step[0], theta + a * step[1]
            if k1 > 0 and loglik_scipy(data, k1, math.exp(t1)) >= base - 1e-9 * abs(base):
                break
            a /= 2.0
            if a < 1e-10:
                k1, t1 = k, theta
                break
        dk, dt = abs(k1 - k) / k, abs(t1 - theta)
        k, theta = k1, t1
        if dk < 1e-16 and dt < 1e-16:
            break
    return k, math.exp(theta), res


def fit_mpmath(data, dps=50):
    """High-precision check: Newton on the profile score in mpmath."""
    with mpmath.workdps(dps):
        xs = [mpmath.mpf(float(v)) for v in data.logt]
        ws = [mpmath.mpf(float(v)) for v in data.w]
        r = mpmath.mpf(data.r)
        sfl = mpmath.fsum(w * x for w, x, dd in zip(ws, xs, data.d) if dd)
        c0 = sfl / r
        xs = [x - c0 for x in xs]

        def parts(k):
            e = [w * mpmath.exp(k * x) for w, x in zip(ws, xs)]
            a0 = mpmath.fsum(e)
            a1 = mpmath.fsum(ei * x for ei, x in zip(e, xs))
            a2 = mpmath.fsum(ei * x * x for ei, x in zip(e, xs))
            return a0, a1, a2

        k = mpmath.mpf(fit_profile_brentq(data)[0])
        for _ in range(60):
            a0, a1, a2 = parts(k)
            g = 1 / k - a1 / a0  # sum_f w x = 0 after centring
            gp = -1 / k ** 2 - (a2 / a0 - (a1 / a0) ** 2)
            step = g / gp
            k = k - step
            if abs(step) < mpmath.mpf(10) ** (-dps + 5) * k:
                break
        a0, _, _ = parts(k)
        lam = mpmath.exp(c0 + mpmath.log(a0 / r) / k)
        return float(k), float(lam)


def rel(a, b):
    return abs(a - b) / abs(b)


def fit_lifelines(rows):
    t = np.array([r[0] for r in rows], dtype=float)
    e = np.array([r[1] for r in rows], dtype=int)
    w = np.array([r[2] for r in rows], dtype=float)
    wf = WeibullFitter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            wf.fit(t, event_observed=e, weights=w)
        except Exception as exc:  # recorded, the case is kept
            return None, "lifelines WeibullFitter.fit raised %s: %s" % (
                type(exc).__name__, str(exc).strip().splitlines()[0][:300])
    msgs = sorted({str(c.message).strip().splitlines()[0][:200] for c in caught})
    cov = wf.variance_matrix_
    out = {
        "shape": float(wf.rho_),
        "scale": float(wf.lambda_),
        "loglik": float(wf.log_likelihood_),
        "cov": [[float(cov.loc["rho_", "rho_"]), float(cov.loc["rho_", "lambda_"])],
                [float(cov.loc["lambda_", "rho_"]), float(cov.loc["lambda_", "lambda_"])]],
    }
    vals = [out["shape"], out["scale"], out["loglik"]] + [v for row in out["cov"] for v in row]
    if not all(math.isfinite(v) for v in vals):
        return None, "lifelines returned non-finite values (shape %r, scale %r, variance matrix %r)" % (
            out["shape"], out["scale"], out["cov"])
    note = None
    if msgs:
        note = "lifelines warnings: " + " | ".join(msgs)
    return out, note


def make_mle_case(name, description, true_shape, true_scale, rows, extra=None):
    data = Data(rows)
    kb, lb = fit_profile_brentq(data)
    ka, la, res = fit_minimize_newton(data)
    km, lm = fit_mpmath(data)
    g, _ = score_and_hessian(data, kb, math.log(lb))
    route_diff = max(rel(ka, kb), rel(la, lb))
    mp_diff = max(rel(kb, km), rel(lb, lm))
    ll = loglik_scipy(data, kb, lb)
    case = {
        "name": name,
        "description": description,
        "true_shape": true_shape,
        "true_scale": true_scale,
    }
    if extra:
        case.update(extra)
    case.update({
        "rows": rows,
        "n": int(round(data.n)),
        "failures": int(round(data.r)),
        "scipy": {
            "shape": kb,
            "scale": lb,
            "loglik": ll,
            "max_abs_score": float(np.max(np.abs(g))),
        },
    })
    lf, note = fit_lifelines(rows)
    case["lifelines"] = lf
    if note is not None:
        case["lifelines_note"] = note
    stats = dict(route_diff=route_diff, mp_diff=mp_diff, score=float(np.max(np.abs(g))),
                 score_rel=float(np.max(np.abs(g))) / data.n,
                 bfgs_diff=max(rel(math.exp(res.x[0]), kb), rel(math.exp(res.x[1]), lb)))
    if lf is not None:
        stats["lifelines_diff"] = max(rel(lf["shape"], kb), rel(lf["scale"], lb))
        stats["lifelines_ll_diff"] = abs(lf["loglik"] - ll)
    return case, stats


def build_mle():
    cases, stats = [], []
    lz = read_lieblein_zelen()
    rows = to_rows(np.array(lz), np.ones(len(lz), dtype=bool))
    c, s = make_mle_case(
        "lieblein_zelen_1956",
        "Deep-groove ball bearing fatigue lives (millions of revolutions), 23 complete "
        "failures, Lieblein and Zelen (1956), J. Res. NBS 57(5) 273-316; values recalled "
        "from memory, see fixtures/published/lieblein_zelen_1956_bearings.csv",
        None, None, rows,
        extra={"published_from_memory": {
            "shape": 2.102, "scale": 81.88,
            "source": "ML estimates for these data as quoted (from memory) from Lawless, "
                      "Statistical Models and Methods for Lifetime Data, 2nd ed., Wiley, 2003"}})
    cases.append(c)
    stats.append((c["name"], s))
    for spec in dataset_specs():
        rows, seed, attempt = build_case(spec)
        desc = "%s. Simulated with numpy.random.default_rng(%d): %s." % (
            spec["desc"], seed, censoring_text(spec))
        if attempt:
            desc += " (seed advanced %d time(s) from %d to meet the acceptance rules)" % (
                attempt, spec["seed"])
        c, s = make_mle_case(spec["name"], desc, spec["shape"], spec["scale"], rows,
                             extra={"seed": seed})
        cases.append(c)
        stats.append((c["name"], s))
        print("  %-45s n=%6d rows=%5d fail=%6d  shape %.6g (true %g)  scale %.6g (true %g)"
              % (c["name"], c["n"], len(rows), c["failures"], c["scipy"]["shape"],
                 spec["shape"], c["scipy"]["scale"], spec["scale"]), flush=True)
    return {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "loglik_convention": "sum over failures of log f(t) + sum over suspensions of log S(t), "
                             "weights = counts, ages as given",
        "cases": cases,
    }, stats


# ---------------------------------------------------------------------------
# Readers: quantiles, cdf/sf/pdf/hazard, mean, conditional failure
# ---------------------------------------------------------------------------

READER_PAIRS = [(0.5, 1e-3), (1.0, 1.0), (1.5, 1000.0), (3.5, 1e9), (20.0, 1.0),
                (0.5, 1e9), (2.0, 1000.0), (20.0, 1e-3), (1.0, 1e9), (3.5, 1e-3)]
PROBS = [0.0, 1e-9, 1e-4, 0.01, 0.1, 0.5, 0.632, 0.9, 0.99, 0.999999]
T_MULTS = [1e-3, 1e-2, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0]
COND_AGE_MULTS = [0.0, 0.5, 1.0, 2.0]
COND_H_MULTS = [1e-6, 0.1, 1.0]


def mp_weibull(k, lam, t):
    """mpmath check values: (cdf, sf, pdf, hazard) at 60 digits."""
    with mpmath.workdps(60):
        k, lam, t = mpmath.mpf(k), mpmath.mpf(lam), mpmath.mpf(t)
        z = (t / lam) ** k
        sf = mpmath.exp(-z)
        cdf = -mpmath.expm1(-z)
        haz = k / lam * (t / lam) ** (k - 1)
        return float(cdf), float(sf), float(haz * sf), float(haz)


def mp_cond(k, lam, age, h):
    with mpmath.workdps(60):
        k, lam, age, h = mpmath.mpf(k), mpmath.mpf(lam), mpmath.mpf(age), mpmath.mpf(h)
        return float(-mpmath.expm1(-(((age + h) / lam) ** k - (age / lam) ** k)))


def build_readers():
    cases = []
    worst = dict(quantile=0.0, cdf=0.0, sf=0.0, pdf=0.0, hazard_scipy=0.0, cond_scipy=0.0)
    hazard_replaced, cond_replaced = [], []
    for k, lam in READER_PAIRS:
        q = [[p, float(weibull_min.ppf(p, k, scale=lam))] for p in PROBS]
        for p, v in q[1:]:
            with mpmath.workdps(60):
                exact = float(mpmath.mpf(lam) * (-mpmath.log1p(-mpmath.mpf(p))) ** (1 / mpmath.mpf(k)))
            worst["quantile"] = max(worst["quantile"], rel(v, exact))
        pts = []
        for m in T_MULTS:
            t = lam * m
            cdf = float(weibull_min.cdf(t, k, scale=lam))
            sf = float(weibull_min.sf(t, k, scale=lam))
            pdf = float(weibull_min.pdf(t, k, scale=lam))
            lpdf = float(weibull_min.logpdf(t, k, scale=lam))
            lsf = float(weibull_min.logsf(t, k, scale=lam))
            haz_scipy = math.exp(lpdf - lsf)
            # Closed form of pdf/sf for the Weibull model, used where the
            # difference logpdf - logsf cancels catastrophically.
            haz_closed = float(k / lam * np.power(t / lam, k - 1.0))
            e_cdf, e_sf, e_pdf, e_haz = mp_weibull(k, lam, t)
            hr = rel(haz_scipy, e_haz)
            worst["hazard_scipy"] = max(worst["hazard_scipy"], hr)
            if hr > 1e-13:
                haz = haz_closed
                hazard_replaced.append((k, lam, t, haz_scipy, haz_closed, hr))
            else:
                haz = haz_scipy
            for key, v, e in (("cdf", cdf, e_cdf), ("sf", sf, e_sf), ("pdf", pdf, e_pdf)):
                if e != 0:
                    worst[key] = max(worst[key], rel(v, e))
                elif v != 0:
                    worst[key] = max(worst[key], float("inf"))
            if rel(haz, e_haz) > 1e-13:
                raise RuntimeError("hazard check failed at %r" % ((k, lam, t),))
            pts.append([t, cdf, sf, pdf, haz])
        cond = []
        for am in COND_AGE_MULTS:
            for hm in COND_H_MULTS:
                age, h = lam * am, lam * hm
                v_scipy = float(-np.expm1(weibull_min.logsf(age + h, k, scale=lam)
                                          - weibull_min.logsf(age, k, scale=lam)))
                # Same quantity without the subtraction of two nearly equal
                # cumulative hazards: H(a+h) - H(a) = H(a) * expm1(k*log1p(h/a)).
                if age > 0:
                    dH = (age / lam) ** k * math.expm1(k * math.log1p(h / age))
                else:
                    dH = (h / lam) ** k
                v_stable = -math.expm1(-dH)
                exact = mp_cond(k, lam, age, h)
                cr = rel(v_scipy, exact)
                worst["cond_scipy"] = max(worst["cond_scipy"], cr)
                if cr > 1e-13:
                    v = v_stable
                    cond_replaced.append((k, lam, age, h, v_scipy, v_stable, cr))
                else:
                    v = v_scipy
                if rel(v, exact) > 1e-13:
                    raise RuntimeError("cond_fail check failed at %r" % ((k, lam, age, h),))
                cond.append([age, h, v])
        cases.append({
            "shape": k,
            "scale": lam,
            "quantile": q,
            "points": pts,
            "mean": float(weibull_min.mean(k, scale=lam)),
            "cond_fail": cond,
        })
        with mpmath.workdps(40):
            em = float(mpmath.mpf(lam) * mpmath.gamma(1 + 1 / mpmath.mpf(k)))
        worst.setdefault("mean", 0.0)
        worst["mean"] = max(worst["mean"], rel(cases[-1]["mean"], em))
    return {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "quantile": "[p, weibull_min.ppf(p, shape, scale=scale)]",
            "points": "[t, cdf, sf, pdf, hazard]; hazard = exp(logpdf - logsf) from scipy, except "
                      "where that difference cancels (|rel error| > 1e-13 against a 60-digit "
                      "mpmath value): there the closed form (shape/scale)*(t/scale)^(shape-1)",
            "mean": "weibull_min.mean(shape, scale=scale)",
            "cond_fail": "[age, horizon, -expm1(logsf(age+horizon) - logsf(age))] from scipy, except "
                         "where that difference cancels (|rel error| > 1e-13 against a 60-digit "
                         "mpmath value): there -expm1(-(age/scale)^shape * "
                         "expm1(shape*log1p(horizon/age)))",
        },
        "cases": cases,
    }, worst, hazard_replaced, cond_replaced


# ---------------------------------------------------------------------------
# Age replacement
# ---------------------------------------------------------------------------


def age_replacement_case(k, lam, cp, cf):
    def I_quad(T):
        v, err = integrate.quad(lambda t: weibull_min.sf(t, k, scale=lam), 0.0, T,
                                epsabs=0.0, epsrel=1e-13, limit=500)
        return v

    def I_gamma(T):
        return lam * special.gamma(1.0 + 1.0 / k) * special.gammainc(1.0 / k, (T / lam) ** k)

    def cost(T, I=I_quad):
        return (cp * weibull_min.sf(T, k, scale=lam) + cf * weibull_min.cdf(T, k, scale=lam)) / I(T)

    def hazard(T):
        return math.exp(weibull_min.logpdf(T, k, scale=lam) - weibull_min.logsf(T, k, scale=lam))

    target = cp / (cf - cp)

    def foc(T, I=I_quad):
        return hazard(T) * I(T) - weibull_min.cdf(T, k, scale=lam) - target

    upper = 5.0 * lam
    rb = optimize.minimize_scalar(cost, bounds=(1e-6 * lam, upper), method="bounded",
                                  options=dict(xatol=1e-12 * lam, maxiter=2000))
    tb = float(rb.x)
    if tb > 0.95 * upper:
        raise RuntimeError("bounded optimum at the upper bound for %r" % ((k, lam, cp, cf),))
    lo, hi = tb * 0.9, tb * 1.1
    while foc(lo) > 0:
        lo *= 0.9
    while foc(hi) < 0:
        hi *= 1.1
    t_opt = optimize.brentq(foc, lo, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    t_opt_g = optimize.brentq(lambda T: foc(T, I_gamma), lo, hi, xtol=1e-300,
                              rtol=4 * np.finfo(float).eps, maxiter=500)
    c_opt = cost(t_opt)
    checks = dict(
        bounded_vs_root=rel(tb, t_opt),
        quad_vs_gammainc_root=rel(t_opt_g, t_opt),
        cost_identity=rel(c_opt, (cf - cp) * hazard(t_opt)),
        quad_vs_gammainc_integral=rel(I_quad(t_opt), I_gamma(t_opt)),
        cost_bounded_minus_root=(cost(tb) - c_opt) / c_opt,
    )
    case = {
        "shape": k,
        "scale": lam,
        "cost_planned": cp,
        "cost_failure": cf,
        "t_opt": t_opt,
        "t_opt_bounded": tb,
        "cost_rate_at_opt": float(c_opt),
        "run_to_failure_rate": float(cf / weibull_min.mean(k, scale=lam)),
    }
    return case, checks


def build_age_replacement():
    cases, checks = [], []
    for k in [1.5, 2.0, 2.5, 3.0, 4.0]:
        for lam in [1000.0, 2.5e5]:
            for ratio in [2.0, 5.0, 10.0]:
                c, ch = age_replacement_case(k, lam, 1.0, ratio)
                cases.append(c)
                checks.append(ch)
    c, ch = age_replacement_case(2.5, 2.5e5, 250.0, 2500.0)
    cases.append(c)
    checks.append(ch)
    return {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "cost_rate": "C(T) = (cost_planned*R(T) + cost_failure*F(T)) / integral_0^T R(t) dt, "
                         "R = weibull_min.sf, F = weibull_min.cdf",
            "t_opt": "brentq root of h(T)*I(T) - F(T) = cost_planned/(cost_failure - cost_planned), "
                     "I by scipy.integrate.quad(epsabs=0, epsrel=1e-13, limit=500)",
            "t_opt_bounded": "scipy.optimize.minimize_scalar(method='bounded', "
                             "bounds=(1e-6*scale, 5*scale), xatol=1e-12*scale); accurate only to "
                             "about sqrt(machine epsilon) relative because C is flat at its minimum",
            "cost_rate_at_opt": "C(t_opt)",
            "run_to_failure_rate": "cost_failure / weibull_min.mean",
        },
        "cases": cases,
    }, checks


# ---------------------------------------------------------------------------


def main():
    print("lifedata Weibull reference generator")
    print("  python %s, numpy %s, scipy %s, lifelines %s, mpmath %s" % (
        LIBRARIES["python"], LIBRARIES["numpy"], LIBRARIES["scipy"], LIBRARIES["lifelines"],
        LIBRARIES["mpmath"]))
    os.makedirs(REF_DIR, exist_ok=True)
    np.seterr(all="ignore")  # extreme tails legitimately underflow

    print("weibull_mle.json:")
    mle, stats = build_mle()
    size = write_json(os.path.join(REF_DIR, "weibull_mle.json"), mle)
    worst_route = max(s["route_diff"] for _, s in stats)
    worst_mp = max(s["mp_diff"] for _, s in stats)
    worst_score = max(s["score"] for _, s in stats)
    worst_score_rel = max(s["score_rel"] for _, s in stats)
    print("  %d cases, %d bytes" % (len(mle["cases"]), size))
    print("  max |score| (shape, log scale) at reported optimum: %.3g (per unit of n: %.3g)"
          % (worst_score, worst_score_rel))
    print("  max rel diff route A (minimize+Newton) vs route B (profile brentq): %.3g" % worst_route)
    print("  max rel diff route B vs 50-digit mpmath profile Newton:             %.3g" % worst_mp)
    ll_fail = [(n, c.get("lifelines_note")) for n, c in
               ((c["name"], c) for c in mle["cases"]) if c["lifelines"] is None]
    print("  lifelines failures: %d" % len(ll_fail))
    for n, note in ll_fail:
        print("    %s: %s" % (n, note))
    for n, s in stats:
        if "lifelines_diff" in s:
            print("    lifelines vs scipy %-45s rel diff %.2e  loglik diff %.2e"
                  % (n, s["lifelines_diff"], s["lifelines_ll_diff"]))
    if worst_route > 1e-10 or worst_mp > 1e-10:
        raise SystemExit("MLE routes disagree beyond 1e-10")

    print("weibull_readers.json:")
    rd, worst, replaced, cond_replaced = build_readers()
    size = write_json(os.path.join(REF_DIR, "weibull_readers.json"), rd)
    print("  %d cases, %d bytes" % (len(rd["cases"]), size))
    for key, v in worst.items():
        print("  max rel diff scipy vs mpmath, %-13s %.3g" % (key + ":", v))
    print("  hazard points using the closed form (logpdf - logsf cancels): %d" % len(replaced))
    for k, lam, t, hs, hc, hr in replaced:
        print("    shape %g scale %g t %g: exp(logpdf-logsf) %.17g, closed form %.17g (rel err %.2g)"
              % (k, lam, t, hs, hc, hr))
    print("  cond_fail values using the stable form (logsf difference cancels): %d" % len(cond_replaced))
    for k, lam, age, h, vs, vc, cr in cond_replaced:
        print("    shape %g scale %g age %g horizon %g: scipy form %.17g, stable form %.17g (rel err %.2g)"
              % (k, lam, age, h, vs, vc, cr))

    print("age_replacement.json:")
    ar, checks = build_age_replacement()
    size = write_json(os.path.join(REF_DIR, "age_replacement.json"), ar)
    print("  %d cases, %d bytes" % (len(ar["cases"]), size))
    for key in checks[0]:
        print("  max %-28s %.3g" % (key + ":", max(abs(c[key]) for c in checks)))


if __name__ == "__main__":
    main()

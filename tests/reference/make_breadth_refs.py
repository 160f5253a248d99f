#!/usr/bin/env python3
"""Generate the committed breadth reference fixtures for lifedata.

Run from the repository root:

    python3 tests/reference/make_breadth_refs.py

Writes fixtures/reference/breadth/
    fits_mle.json        maximum-likelihood fits for seven families and all
                         censoring kinds (exact, right, left, interval, left
                         truncation, grouped counts), with covariances
    median_ranks.json    exact and approximate (Bernard) median ranks,
                         adjusted (non-integer) orders, a worked example of
                         adjusted orders for suspensions
    rank_regression.json least-squares fits on probability-plot coordinates
    known_shape.json     Weibull scale estimate and lower bounds with a known
                         shape (zero or few failures)
    kaplan_meier.json    Kaplan-Meier steps, Greenwood variance and intervals
    group_tests.json     likelihood-ratio tests that groups share a model
    lr_bounds.json       likelihood-ratio and Fisher-matrix confidence bounds

Reference values come from general-purpose libraries only: scipy (stats,
optimize, special), numpy (seeded random generation, least squares),
lifelines (second-opinion fitters and the Kaplan-Meier estimator) and mpmath
(50-digit Newton polishing and checks).  The library versions are printed and
written into every file.  The output is deterministic: every random data set
uses a fixed seed and the files are written with a fixed layout.

Python is needed only to regenerate these files; the Rust test suite reads the
committed JSON and never runs Python.
"""

import json
import math
import os
import platform
import sys
import time
import warnings
from fractions import Fraction

import mpmath
import numpy as np
import scipy
from scipy import integrate, optimize, special
from scipy.stats import chi2, expon, fisk, lognorm, norm, weibull_min
from scipy.stats import gamma as gamma_dist
from scipy.stats import CensoredData

import lifelines
from lifelines import (ExponentialFitter, KaplanMeierFitter, LogLogisticFitter,
                       LogNormalFitter, WeibullFitter)

GENERATOR = "tests/reference/make_breadth_refs.py"
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT_DIR = os.path.join(ROOT, "fixtures", "reference", "breadth")

LIBRARIES = {
    "python": platform.python_version(),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "lifelines": lifelines.__version__,
    "mpmath": mpmath.__version__,
}

MP_DPS = 50          # working precision of the mpmath polish and checks
INF = float("inf")

ROW_FORMAT = ("[earliest, latest, entry, count]: exact failure earliest == latest == t; "
              "right-censored (suspension) [t, null, entry, count]; left-censored (found "
              "failed at the first inspection) [0, t, entry, count]; interval-censored "
              "[a, b, entry, count] with 0 < a < b; entry = age at which the unit entered "
              "observation (left truncation), 0 when none; count = number of identical units")
LOGLIK_CONVENTION = ("sum over rows of count * (exact: ln f(t); right: ln S(t); left: ln F(t); "
                     "interval: ln(F(b) - F(a)); minus ln S(entry) when entry > 0)")

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
        items = [pad + "  " + _dump(x, ind + 2) for x in v]
        return "[\n" + ",\n".join(items) + "\n" + pad + "]"
    return _scalar(v)


def write_json(name, obj):
    text = _dump(obj, 0) + "\n"
    json.loads(text)  # must parse back
    path = os.path.join(OUT_DIR, name)
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)
    return len(text.encode("utf-8"))


def rel(a, b):
    a, b = float(a), float(b)
    if a == b:
        return 0.0
    return abs(a - b) / abs(b)


# ---------------------------------------------------------------------------
# Families: scipy frozen distributions (float route) and mpmath formulas
# ---------------------------------------------------------------------------

mpf = mpmath.mpf


class Family:
    """One parametric family in the project's own parameter names.

    kinds: "pos" (positive parameter), "loc" (location of t or ln t, any
    sign; its natural unit is the parameter named sigma), "w3loc" (Weibull
    failure-free period; natural unit is the scale)."""

    def __init__(self, name, params, kinds, sp, lpdf, cdf, sf, scipy_text):
        self.name, self.params, self.kinds = name, params, kinds
        self.sp, self.lpdf, self.cdf, self.sf = sp, lpdf, cdf, sf
        self.scipy_text = scipy_text


def _mp_weibull_lpdf(t, p):
    b, e = p
    x = t / e
    return mpmath.log(b / e) + (b - 1) * mpmath.log(x) - x ** b


def _mp_weibull_cdf(t, p):
    return -mpmath.expm1(-(t / p[1]) ** p[0])


def _mp_weibull_sf(t, p):
    return mpmath.exp(-(t / p[1]) ** p[0])


def _mp_w3_lpdf(t, p):
    u = t - p[2]
    if u <= 0:
        return mpf("-inf")
    return _mp_weibull_lpdf(u, p[:2])


def _mp_w3_cdf(t, p):
    u = t - p[2]
    return mpf(0) if u <= 0 else _mp_weibull_cdf(u, p[:2])


def _mp_w3_sf(t, p):
    u = t - p[2]
    return mpf(1) if u <= 0 else _mp_weibull_sf(u, p[:2])


def _half_log_2pi():
    return mpmath.log(2 * mpmath.pi) / 2


def _mp_lognormal_lpdf(t, p):
    mu, s = p
    z = (mpmath.log(t) - mu) / s
    return -mpmath.log(t) - mpmath.log(s) - _half_log_2pi() - z * z / 2


def _mp_lognormal_cdf(t, p):
    return mpmath.ncdf((mpmath.log(t) - p[0]) / p[1])


def _mp_lognormal_sf(t, p):
    return mpmath.ncdf(-(mpmath.log(t) - p[0]) / p[1])


def _mp_exp_lpdf(t, p):
    return -mpmath.log(p[0]) - t / p[0]


def _mp_exp_cdf(t, p):
    return -mpmath.expm1(-t / p[0])


def _mp_exp_sf(t, p):
    return mpmath.exp(-t / p[0])


def _mp_normal_lpdf(t, p):
    mu, s = p
    z = (t - mu) / s
    return -mpmath.log(s) - _half_log_2pi() - z * z / 2


def _mp_normal_cdf(t, p):
    return mpmath.ncdf((t - p[0]) / p[1])


def _mp_normal_sf(t, p):
    return mpmath.ncdf(-(t - p[0]) / p[1])


def _mp_ll_lpdf(t, p):
    b, a = p
    x = t / a
    return mpmath.log(b / a) + (b - 1) * mpmath.log(x) - 2 * mpmath.log1p(x ** b)


def _mp_ll_cdf(t, p):
    u = (t / p[1]) ** p[0]
    return u / (1 + u)


def _mp_ll_sf(t, p):
    return 1 / (1 + (t / p[1]) ** p[0])


def _mp_gamma_lpdf(t, p):
    k, th = p
    x = t / th
    return (k - 1) * mpmath.log(x) - x - mpmath.loggamma(k) - mpmath.log(th)


def _mp_gamma_cdf(t, p):
    return mpmath.gammainc(p[0], 0, t / p[1], regularized=True)


def _mp_gamma_sf(t, p):
    return mpmath.gammainc(p[0], t / p[1], mpmath.inf, regularized=True)


FAMILIES = {
    "weibull": Family("weibull", ["shape", "scale"], ["pos", "pos"],
                      lambda p: weibull_min(p[0], scale=p[1]),
                      _mp_weibull_lpdf, _mp_weibull_cdf, _mp_weibull_sf,
                      "weibull_min(c=shape, scale=scale)"),
    "weibull3": Family("weibull3", ["shape", "scale", "location"], ["pos", "pos", "w3loc"],
                       lambda p: weibull_min(p[0], loc=p[2], scale=p[1]),
                       _mp_w3_lpdf, _mp_w3_cdf, _mp_w3_sf,
                       "weibull_min(c=shape, loc=location, scale=scale)"),
    "lognormal": Family("lognormal", ["mu", "sigma"], ["loc", "pos"],
                        lambda p: lognorm(p[1], scale=math.exp(p[0])),
                        _mp_lognormal_lpdf, _mp_lognormal_cdf, _mp_lognormal_sf,
                        "lognorm(s=sigma, scale=exp(mu))"),
    "exponential": Family("exponential", ["scale"], ["pos"],
                          lambda p: expon(scale=p[0]),
                          _mp_exp_lpdf, _mp_exp_cdf, _mp_exp_sf,
                          "expon(scale=scale)"),
    "normal": Family("normal", ["mu", "sigma"], ["loc", "pos"],
                     lambda p: norm(loc=p[0], scale=p[1]),
                     _mp_normal_lpdf, _mp_normal_cdf, _mp_normal_sf,
                     "norm(loc=mu, scale=sigma)"),
    "loglogistic": Family("loglogistic", ["shape", "scale"], ["pos", "pos"],
                          lambda p: fisk(p[0], scale=p[1]),
                          _mp_ll_lpdf, _mp_ll_cdf, _mp_ll_sf,
                          "fisk(c=shape, scale=scale)"),
    "gamma": Family("gamma", ["shape", "scale"], ["pos", "pos"],
                    lambda p: gamma_dist(p[0], scale=p[1]),
                    _mp_gamma_lpdf, _mp_gamma_cdf, _mp_gamma_sf,
                    "gamma(a=shape, scale=scale)"),
}

# ---------------------------------------------------------------------------
# Data: rows [earliest, latest, entry, count]
# ---------------------------------------------------------------------------


def row_kind(r):
    a, b = r[0], r[1]
    if b is None:
        return "right"
    if a == b:
        return "exact"
    if a == 0:
        return "left"
    return "interval"


def check_rows(rows):
    for r in rows:
        a, b, e, c = r
        if not (isinstance(c, int) and c >= 1):
            raise ValueError("bad count in %r" % (r,))
        if e < 0 or (b is None and not a > 0) or (b is not None and not (b > 0 and a <= b)):
            raise ValueError("bad row %r" % (r,))
        if e > a and not (a == 0 and e == 0):
            raise ValueError("entry after earliest in %r" % (r,))
        if b is not None and not e < b:
            raise ValueError("entry not below latest in %r" % (r,))
        if a == 0 and e > 0:
            raise ValueError("left-censored row with entry > 0: %r" % (r,))


def group_rows(raw):
    """Merge identical (earliest, latest, entry) records into count rows,
    sorted by earliest, then latest (right-censored last), then entry."""
    counts = {}
    for a, b, e in raw:
        key = (float(a), None if b is None else float(b), float(e))
        counts[key] = counts.get(key, 0) + 1
    keys = sorted(counts, key=lambda k: (k[0], INF if k[1] is None else k[1], k[2]))
    rows = [[k[0], k[1], k[2], counts[k]] for k in keys]
    check_rows(rows)
    return rows


def expand_rows(rows):
    out = []
    for a, b, e, c in rows:
        out.extend([[a, b, e, 1]] * c)
    return [list(r) for r in out]


def kind_counts(rows):
    out = {"exact": 0, "right": 0, "left": 0, "interval": 0, "truncated": 0}
    for r in rows:
        out[row_kind(r)] += r[3]
        if r[2] > 0:
            out["truncated"] += r[3]
    return out


class Data:
    """Rows split by kind, as numpy arrays (float route) and mpf lists."""

    def __init__(self, rows):
        self.rows = rows
        E, R, L, I, N = [], [], [], [], []
        for r in rows:
            k = row_kind(r)
            a, b, e, c = r
            if k == "exact":
                E.append((a, c))
            elif k == "right":
                R.append((a, c))
            elif k == "left":
                L.append((b, c))
            else:
                I.append((a, b, c))
            if e > 0:
                N.append((e, c))
        arr = lambda xs, j: np.array([x[j] for x in xs], dtype=float)
        self.Et, self.Ew = arr(E, 0), arr(E, 1)
        self.Rt, self.Rw = arr(R, 0), arr(R, 1)
        self.Lb, self.Lw = arr(L, 0), arr(L, 1)
        self.Ia, self.Ib, self.Iw = arr(I, 0), arr(I, 1), arr(I, 2)
        self.Ne, self.Nw = arr(N, 0), arr(N, 1)
        self.mE = [(mpf(t), mpf(w)) for t, w in E]
        self.mR = [(mpf(t), mpf(w)) for t, w in R]
        self.mL = [(mpf(t), mpf(w)) for t, w in L]
        self.mI = [(mpf(a), mpf(b), mpf(w)) for a, b, w in I]
        self.mN = [(mpf(t), mpf(w)) for t, w in N]
        self.total = float(sum(r[3] for r in rows))
        self.n_exact = float(self.Ew.sum())
        self.tmin_exact = float(self.Et.min()) if len(self.Et) else None


def log_interval_scipy(d, a, b):
    """ln(F(b) - F(a)) without cancellation: through the cdf when F(a) < 1/2,
    through the survival function otherwise."""
    lca, lcb = d.logcdf(a), d.logcdf(b)
    lsa, lsb = d.logsf(a), d.logsf(b)
    low = lca < math.log(0.5)
    via_cdf = lcb + np.log(-np.expm1(lca - lcb))
    via_sf = lsa + np.log(-np.expm1(lsb - lsa))
    return np.where(low, via_cdf, via_sf)


def ll_scipy(fam, p, D):
    """Count-weighted log-likelihood from scipy.stats logpdf/logsf/logcdf."""
    if any((k != "loc" and k != "w3loc" and not v > 0) for k, v in zip(fam.kinds, p)):
        return -INF
    if not all(math.isfinite(v) for v in p):
        return -INF
    with np.errstate(all="ignore"):
        d = fam.sp(p)
        parts = []
        if len(D.Et):
            parts.append(D.Ew * d.logpdf(D.Et))
        if len(D.Rt):
            parts.append(D.Rw * d.logsf(D.Rt))
        if len(D.Lb):
            parts.append(D.Lw * d.logcdf(D.Lb))
        if len(D.Ia):
            parts.append(D.Iw * log_interval_scipy(d, D.Ia, D.Ib))
        if len(D.Ne):
            parts.append(-(D.Nw * d.logsf(D.Ne)))
    vals = np.concatenate(parts)
    if not np.all(np.isfinite(vals)):
        return -INF
    return math.fsum(vals.tolist())


def ll_mp(fam, p, D):
    """The same log-likelihood in mpmath at the working precision."""
    s = []
    for t, w in D.mE:
        s.append(w * fam.lpdf(t, p))
    for t, w in D.mR:
        s.append(w * mpmath.log(fam.sf(t, p)))
    for b, w in D.mL:
        s.append(w * mpmath.log(fam.cdf(b, p)))
    for a, b, w in D.mI:
        Fa = fam.cdf(a, p)
        if Fa < 0.5:
            s.append(w * mpmath.log(fam.cdf(b, p) - Fa))
        else:
            s.append(w * mpmath.log(fam.sf(a, p) - fam.sf(b, p)))
    for e, w in D.mN:
        s.append(-w * mpmath.log(fam.sf(e, p)))
    return mpmath.fsum(s)


# ---------------------------------------------------------------------------
# Models and the two-route maximisation
# ---------------------------------------------------------------------------


class FamilyModel:
    def __init__(self, fam, rows):
        self.fam = fam
        self.D = Data(rows)
        self.names = list(fam.params)
        self.kinds = list(fam.kinds)
        self.nw = self.D.total

    def llf(self, th):
        return ll_scipy(self.fam, th, self.D)

    def llm(self, th):
        return ll_mp(self.fam, th, self.D)

    def unit(self, th):
        """Natural unit of each parameter: itself (positive), sigma
        (location), scale (Weibull failure-free period)."""
        out = []
        for k, v in zip(self.kinds, th):
            if k == "pos":
                out.append(abs(v))
            elif k == "loc":
                out.append(abs(th[self.names.index("sigma")]))
            else:
                out.append(abs(th[self.names.index("scale")]))
        return out

    def tmin(self):
        return self.D.tmin_exact


class CommonShapeModel:
    """k groups with a common Weibull shape and separate scales, or a common
    lognormal sigma and separate mu."""

    def __init__(self, fam, groups):
        self.fam = fam
        self.labels = list(groups)
        self.Ds = [Data(groups[g]) for g in self.labels]
        if fam.name == "weibull":
            self.names = ["shape"] + ["scale_" + g for g in self.labels]
            self.kinds = ["pos"] * (1 + len(self.labels))
        elif fam.name == "lognormal":
            self.names = ["mu_" + g for g in self.labels] + ["sigma"]
            self.kinds = ["loc"] * len(self.labels) + ["pos"]
        else:
            raise ValueError(fam.name)
        self.nw = sum(D.total for D in self.Ds)

    def split(self, th):
        k = len(self.labels)
        if self.fam.name == "weibull":
            return [[th[0], th[1 + j]] for j in range(k)]
        return [[th[j], th[k]] for j in range(k)]

    def llf(self, th):
        vals = [ll_scipy(self.fam, p, D) for p, D in zip(self.split(th), self.Ds)]
        return math.fsum(vals) if all(math.isfinite(v) for v in vals) else -INF

    def llm(self, th):
        return mpmath.fsum(ll_mp(self.fam, p, D) for p, D in zip(self.split(th), self.Ds))

    def unit(self, th):
        out = []
        for k, v in zip(self.kinds, th):
            out.append(abs(v) if k == "pos" else abs(th[-1]))
        return out

    def tmin(self):
        return None


def to_u(model, th, ref):
    u = []
    uref = model.unit(ref)
    for k, v, r, s in zip(model.kinds, th, ref, uref):
        if k == "pos":
            u.append(math.log(v))
        elif k == "loc":
            u.append((v - r) / s)
        else:
            u.append(math.log(model.tmin() - v))
    return np.array(u)


def from_u(model, u, ref):
    th = []
    uref = model.unit(ref)
    for k, x, r, s in zip(model.kinds, u, ref, uref):
        if k == "pos":
            th.append(math.exp(x))
        elif k == "loc":
            th.append(r + x * s)
        else:
            th.append(model.tmin() - math.exp(x))
    return th


def _grad4(f, u, h):
    g = np.zeros(len(u))
    for i in range(len(u)):
        e = np.zeros(len(u))
        e[i] = h
        g[i] = (-f(u + 2 * e) + 8 * f(u + e) - 8 * f(u - e) + f(u - 2 * e)) / (12 * h)
    return g


def _hess(f, u, h):
    n = len(u)
    H = np.zeros((n, n))
    f0 = f(u)
    for i in range(n):
        ei = np.zeros(n)
        ei[i] = h
        H[i, i] = (f(u + ei) - 2 * f0 + f(u - ei)) / h ** 2
        for j in range(i):
            ej = np.zeros(n)
            ej[j] = h
            H[i, j] = H[j, i] = (f(u + ei + ej) - f(u + ei - ej) - f(u - ei + ej)
                                 + f(u - ei - ej)) / (4 * h * h)
    return H


def mp_grad(model, th, rel_h):
    """Central-difference gradient of the mpmath log-likelihood (working
    precision MP_DPS, step rel_h times each parameter's natural unit)."""
    units = model.unit(th)
    g = []
    for i in range(len(th)):
        h = units[i] * rel_h
        tp, tm = list(th), list(th)
        tp[i] += h
        tm[i] -= h
        g.append((model.llm(tp) - model.llm(tm)) / (2 * h))
    return mpmath.matrix(g)


def mp_hess(model, th, rel_h):
    units = model.unit(th)
    n = len(th)
    H = mpmath.matrix(n, n)
    f0 = model.llm(th)
    hs = [units[i] * rel_h for i in range(n)]

    def at(di):
        t = list(th)
        for i, d in di:
            t[i] += d
        return model.llm(t)

    for i in range(n):
        hi = hs[i]
        H[i, i] = (at([(i, hi)]) - 2 * f0 + at([(i, -hi)])) / hi ** 2
        for j in range(i):
            hj = hs[j]
            H[i, j] = H[j, i] = (at([(i, hi), (j, hj)]) - at([(i, hi), (j, -hj)])
                                 - at([(i, -hi), (j, hj)]) + at([(i, -hi), (j, -hj)])) / (4 * hi * hj)
    return H


def mp_newton(model, th0):
    """Route B: Newton iteration on the mpmath log-likelihood (MP_DPS
    digits), started from the Nelder-Mead point; the Hessian is refreshed a
    few times and the iteration runs until the relative step is < 1e-30."""
    with mpmath.workdps(MP_DPS):
        th = [mpf(float(x)) for x in th0]
        H = mp_hess(model, th, mpf("1e-10"))
        last = None
        for it in range(80):
            g = mp_grad(model, th, mpf("1e-15"))
            step = mpmath.lu_solve(H, -g)
            a = mpf(1)
            base = model.llm(th)
            while True:
                cand = [th[i] + a * step[i] for i in range(len(th))]
                ok = all(c > 0 for c, k in zip(cand, model.kinds) if k == "pos")
                if ok:
                    val = model.llm(cand)
                    if mpmath.isfinite(val) and val >= base - mpf(10) ** (-MP_DPS + 15) * abs(base):
                        break
                a /= 2
                if a < mpf("1e-12"):
                    raise RuntimeError("mp Newton line search failed")
            units = model.unit(th)
            relstep = max(abs(a * step[i]) / units[i] for i in range(len(th)))
            th = cand
            if it in (1, 3, 6):
                H = mp_hess(model, th, mpf("1e-10"))
            if relstep < mpf("1e-30"):
                break
            last = relstep
        else:
            raise RuntimeError("mp Newton did not converge (last step %s)" % last)
        Hf = mp_hess(model, th, mpf("1e-10"))
        return th, Hf


def fit_model(model, start):
    """Maximise the log-likelihood by two routes.

    Route A (float, scipy): Nelder-Mead then BFGS on unconstrained
    coordinates (log of positive parameters, location / sigma, log of the
    gap below the smallest exact failure for the Weibull failure-free
    period), then Newton steps with finite-difference derivatives of the
    scipy log-likelihood.
    Route B (reported): Newton on the mpmath log-likelihood from the
    Nelder-Mead point, 50 digits.
    Returns a dict with the reported parameters and the checks."""
    ref = list(start)
    nw = model.nw

    def f(u):
        try:
            v = model.llf(from_u(model, u, ref))
        except (ValueError, OverflowError):
            return 1e300
        return -v / nw if math.isfinite(v) else 1e300

    u0 = to_u(model, start, ref)
    nm = optimize.minimize(f, u0, method="Nelder-Mead",
                           options=dict(xatol=1e-11, fatol=1e-15, maxiter=40000, maxfev=80000,
                                        adaptive=len(u0) > 2))
    # restart once from the Nelder-Mead point (guards against a collapsed simplex)
    nm = optimize.minimize(f, nm.x, method="Nelder-Mead",
                           options=dict(xatol=1e-11, fatol=1e-15, maxiter=40000, maxfev=80000,
                                        adaptive=len(u0) > 2))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        bf = optimize.minimize(f, nm.x, method="BFGS", options=dict(gtol=1e-11, maxiter=2000))
    u = bf.x if bf.fun <= nm.fun else nm.x
    for _ in range(40):
        g = _grad4(f, u, 1e-3)
        H = _hess(f, u, 1e-3)
        try:
            step = -np.linalg.solve(H, g)
        except np.linalg.LinAlgError:
            break
        base = f(u)
        a = 1.0
        while f(u + a * step) > base + 1e-15 * abs(base) and a > 1e-6:
            a /= 2
        if a <= 1e-6:
            break
        u = u + a * step
        if np.max(np.abs(a * step)) < 1e-14:
            break
    thA = from_u(model, u, ref)
    thNM = from_u(model, nm.x, ref)

    thB, Hmp = mp_newton(model, thNM)
    th = [float(x) for x in thB]
    with mpmath.workdps(MP_DPS):
        thm = [mpf(x) for x in th]
        g = mp_grad(model, thm, mpf("1e-15"))
        units = model.unit(th)
        max_abs_grad = max(float(abs(g[i])) * units[i] for i in range(len(th)))
        negH = -Hmp
        eig = mpmath.eigsy(negH)[0]
        if min(eig) <= 0:
            raise RuntimeError("Hessian at the optimum is not negative definite")
        cov_mp = negH ** -1
        cov = [[float(cov_mp[i, j]) for j in range(len(th))] for i in range(len(th))]
        ll_mpf = model.llm(thm)
        ll_m = float(ll_mpf)
    ll_f = model.llf(th)
    # float central-difference Hessian in natural parameters, as a check of the covariance
    hf = np.zeros((len(th), len(th)))
    hs = [1e-4 * s for s in units]
    for i in range(len(th)):
        for j in range(len(th)):
            def at(di, dj):
                t = list(th)
                t[i] += di
                t[j] += dj
                return model.llf(t)
            if i == j:
                hf[i, i] = (at(hs[i], 0) - 2 * ll_f + at(-hs[i], 0)) / hs[i] ** 2
            else:
                hf[i, j] = (at(hs[i], hs[j]) - at(hs[i], -hs[j]) - at(-hs[i], hs[j])
                            + at(-hs[i], -hs[j])) / (4 * hs[i] * hs[j])
    cov_f = np.linalg.inv(-hf)
    cov_check = max(abs(cov_f[i, j] - cov[i][j]) / math.sqrt(cov[i][i] * cov[j][j])
                    for i in range(len(th)) for j in range(len(th)))
    routeA = max(abs(a - b) / u_ for a, b, u_ in zip(thA, th, units))
    return dict(params=th, loglik=ll_f, loglik_mp=ll_m, loglik_mpf=ll_mpf, max_abs_grad=max_abs_grad, cov=cov,
                routeA_diff=routeA, cov_check=cov_check, llA=model.llf(thA),
                n_unit=nw)


# ---------------------------------------------------------------------------
# Data generation
# ---------------------------------------------------------------------------


def round_up(x, rounding):
    """("step", e): ceiling to a multiple of 10**e; ("sig", d): d significant
    digits.  Re-read from decimal text so values are short decimals."""
    if rounding is None:
        return float(x)
    kind, p = rounding
    if kind == "step":
        u = max(math.ceil(x / 10.0 ** p), 1)
        return float("%de%d" % (u, p))
    return float("%.*e" % (p - 1, x))


def random_censor_max(dist, p):
    """Upper end cmax of a Uniform(0, cmax) censoring time with expected
    suspended fraction p: (1/cmax) * integral_0^cmax S(c) dc = p."""
    def frac(cmax):
        v, _ = integrate.quad(lambda c: dist.sf(c), 0.0, cmax, limit=400, epsrel=1e-10)
        return v / cmax - p
    lo, hi = dist.ppf(1e-6), dist.ppf(0.5)
    while frac(hi) > 0:
        hi *= 2.0
    while frac(lo) < 0:
        lo /= 2.0
    return optimize.brentq(frac, lo, hi, xtol=1e-12, rtol=1e-12)


def draw_times(dist, n, rng, positive=True):
    """Inverse-transform draws; for a family with mass below 0 (normal),
    non-positive draws are redrawn."""
    out = []
    while len(out) < n:
        u = rng.random(n - len(out))
        t = dist.ppf(u)
        out.extend([float(x) for x in t if (x > 0 or not positive)])
    return np.array(out[:n])


def simulate_simple(fam, true, n, censoring, rounding, rng):
    """Exact failures and right-censored suspensions (no entry)."""
    d = fam.sp(true)
    t = draw_times(d, n, rng)
    raw = []
    kind = censoring[0]
    if kind == "none":
        for x in t:
            v = round_up(x, rounding)
            raw.append((v, v, 0.0))
    elif kind == "type1":
        tc = round_up(float(d.isf(censoring[1])), rounding)
        for x in t:
            v = round_up(x, rounding)
            if x <= tc and v <= tc:
                raw.append((v, v, 0.0))
            else:
                raw.append((tc, None, 0.0))
    elif kind == "random":
        cmax = random_censor_max(d, censoring[1])
        c = rng.random(n) * cmax
        for x, cc in zip(t, c):
            if x <= cc:
                v = round_up(x, rounding)
                raw.append((v, v, 0.0))
            else:
                v = round_up(cc, rounding)
                raw.append((v, None, 0.0))
    else:
        raise ValueError(kind)
    return group_rows(raw)


def simulate_inspection(fam, true, n, k, p_exact, end_q, rng, entry_frac=0.0, entry_q=0.0,
                        exact_rounding=None, first=None):
    """Units inspected at ages first, first + k, first + 2k, ... after entry
    (first = k unless given).

    Each unit has an end of observation C ~ Uniform(first, ppf(end_q)) after
    entry.  A failure before the last inspection up to C is seen exactly with
    probability p_exact (e.g. an in-service failure), otherwise it is found
    at the next inspection: left-censored [0, first] if found at the first
    inspection of a unit without entry, interval [previous, next] otherwise
    (for a unit with entry e found failed at its first inspection: [e, e +
    first]).  A unit still working at its last inspection is right-censored
    there.  With entry_frac > 0, that fraction of units enters at an age
    E ~ Uniform(0, ppf(entry_q)) (4 significant digits) and its life is drawn
    given survival to E."""
    d = fam.sp(true)
    first = k if first is None else first
    cmax = float(d.ppf(end_q))
    emax = float(d.ppf(entry_q)) if entry_frac > 0 else 0.0
    raw = []
    for _ in range(n):
        e = 0.0
        if entry_frac > 0 and rng.random() < entry_frac:
            e = round_up(rng.random() * emax, ("sig", 4))
            if e <= 0:
                e = 0.0
        se = float(d.sf(e)) if e > 0 else 1.0
        x = float(d.isf(rng.random() * se)) if e > 0 else float(draw_times(d, 1, rng)[0])
        c = first + rng.random() * (cmax - first)
        j_last = int(math.floor((c - first) / k)) + 1     # inspections 1..j_last
        last = e + first + (j_last - 1) * k
        exact_draw = rng.random() < p_exact
        if x <= last:
            if exact_draw:
                v = round_up(x, exact_rounding)
                if v <= e:
                    v = x
                raw.append((v, v, e))
            else:
                y = x - e
                j = 1 if y <= first else int(math.ceil((y - first) / k)) + 1
                hi = e + first + (j - 1) * k
                lo = e if j == 1 else e + first + (j - 2) * k
                if lo == 0.0:
                    raw.append((0.0, hi, 0.0))
                else:
                    raw.append((lo, hi, e))
        else:
            raw.append((last, None, e))
    return group_rows(raw)


def simulate_left_exact(fam, true, n, tau, rng):
    """One first inspection at age tau: units already failed are
    left-censored [0, tau]; later failures are seen exactly (monitored)."""
    d = fam.sp(true)
    t = draw_times(d, n, rng)
    raw = [((0.0, tau, 0.0) if x <= tau else (float(x), float(x), 0.0)) for x in t]
    return group_rows(raw)


def simulate_truncated(fam, true, n, entry_frac, entry_q, follow_q, rng):
    """Left-truncated field data: a fraction of the units enters observation
    at age E ~ Uniform(0, ppf(entry_q)) (life drawn given survival to E) and
    is followed for a time Uniform(0.1, 1) * ppf(follow_q); failures exact,
    survivors right-censored at the end of follow-up."""
    d = fam.sp(true)
    emax = float(d.ppf(entry_q))
    fmax = float(d.ppf(follow_q))
    raw = []
    for _ in range(n):
        e = 0.0
        if rng.random() < entry_frac:
            e = round_up(rng.random() * emax, ("sig", 4))
        se = float(d.sf(e)) if e > 0 else 1.0
        x = float(d.isf(rng.random() * se)) if e > 0 else float(draw_times(d, 1, rng)[0])
        end = e + (0.1 + 0.9 * rng.random()) * fmax
        if x <= end:
            raw.append((x, x, e))
        else:
            raw.append((end, None, e))
    return group_rows(raw)


def acceptable(rows, fam):
    """Finite interior MLE: enough exact failures at distinct ages (or
    enough interval information), and a suspension or failure beyond the
    smallest failure."""
    kc = kind_counts(rows)
    distinct = len({r[0] for r in rows if row_kind(r) == "exact"})
    info = kc["exact"] + kc["left"] + kc["interval"]
    need = 3 if len(fam.params) <= 2 else 20
    if fam.name == "exponential":
        need = 1
    if info < need:
        return False
    if kc["exact"] > 0 and distinct < 2 and kc["left"] + kc["interval"] == 0:
        return False
    return True


# ---------------------------------------------------------------------------
# lifelines and scipy.stats.CensoredData second opinions
# ---------------------------------------------------------------------------

LIFELINES = {
    "weibull": (WeibullFitter, lambda f: {"shape": float(f.rho_), "scale": float(f.lambda_)}),
    "lognormal": (LogNormalFitter, lambda f: {"mu": float(f.mu_), "sigma": float(f.sigma_)}),
    "exponential": (ExponentialFitter, lambda f: {"scale": float(f.lambda_)}),
    "loglogistic": (LogLogisticFitter, lambda f: {"shape": float(f.beta_), "scale": float(f.alpha_)}),
}


def fit_lifelines(fam, rows):
    if fam.name not in LIFELINES:
        return None, "lifelines %s has no univariate fitter for this family" % lifelines.__version__
    cls, conv = LIFELINES[fam.name]
    kc = kind_counts(rows)
    w = np.array([r[3] for r in rows], dtype=float)
    e = np.array([r[2] for r in rows], dtype=float)
    f = cls()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            if kc["left"] == 0 and kc["interval"] == 0:
                method = "fit"
                t = np.array([r[0] for r in rows], dtype=float)
                ev = np.array([1 if row_kind(r) == "exact" else 0 for r in rows])
                f.fit(t, event_observed=ev, entry=e if np.any(e > 0) else None, weights=w)
            elif kc["interval"] == 0 and kc["right"] == 0 and kc["truncated"] == 0:
                method = "fit_left_censoring"
                t = np.array([r[1] for r in rows], dtype=float)
                ev = np.array([1 if row_kind(r) == "exact" else 0 for r in rows])
                f.fit_left_censoring(t, event_observed=ev, weights=w)
            else:
                method = "fit_interval_censoring"
                lo = np.array([r[0] for r in rows], dtype=float)
                hi = np.array([INF if r[1] is None else r[1] for r in rows], dtype=float)
                f.fit_interval_censoring(lo, hi, entry=e if np.any(e > 0) else None, weights=w)
        except Exception as exc:
            return None, "lifelines %s.%s raised %s: %s" % (
                cls.__name__, method, type(exc).__name__, str(exc).strip().splitlines()[0][:300])
    out = conv(f)
    out["loglik"] = float(f.log_likelihood_)
    out["method"] = "%s.%s" % (cls.__name__, method)
    msgs = sorted({str(c.message).strip().splitlines()[0][:200] for c in caught})
    note = ("lifelines warnings: " + " | ".join(msgs)) if msgs else None
    if not all(math.isfinite(v) for k, v in out.items() if k != "method"):
        return None, "lifelines returned non-finite values: %r" % out
    return out, note


CD_FIT = {
    "weibull": (weibull_min, dict(floc=0), lambda r: {"shape": r[0], "scale": r[2]}),
    "lognormal": (lognorm, dict(floc=0), lambda r: {"mu": math.log(r[2]), "sigma": r[0]}),
    "exponential": (expon, dict(floc=0), lambda r: {"scale": r[1]}),
    "normal": (norm, {}, lambda r: {"mu": r[0], "sigma": r[1]}),
    "loglogistic": (fisk, dict(floc=0), lambda r: {"shape": r[0], "scale": r[2]}),
    "gamma": (gamma_dist, dict(floc=0), lambda r: {"shape": r[0], "scale": r[2]}),
}


def censored_data(rows):
    """The rows (entry ignored) as scipy.stats.CensoredData, counts expanded."""
    unc, left, right, inter = [], [], [], []
    for r in rows:
        k = row_kind(r)
        if k == "exact":
            unc += [r[0]] * r[3]
        elif k == "right":
            right += [r[0]] * r[3]
        elif k == "left":
            left += [r[1]] * r[3]
        else:
            inter += [[r[0], r[1]]] * r[3]
    return CensoredData(uncensored=unc, left=left, right=right,
                        interval=np.array(inter, dtype=float).reshape(-1, 2))


NNLF_THETA = {
    "weibull": (weibull_min, lambda p: (p[0], 0.0, p[1])),
    "weibull3": (weibull_min, lambda p: (p[0], p[2], p[1])),
    "lognormal": (lognorm, lambda p: (p[1], 0.0, math.exp(p[0]))),
    "exponential": (expon, lambda p: (0.0, p[0])),
    "normal": (norm, lambda p: (p[0], p[1])),
    "loglogistic": (fisk, lambda p: (p[0], 0.0, p[1])),
    "gamma": (gamma_dist, lambda p: (p[0], 0.0, p[1])),
}


def loglik_via_scipy_nnlf(fam, p, rows):
    """Independent evaluation of the log-likelihood convention: scipy's own
    censored negative log-likelihood (rv_continuous._penalized_nnlf on a
    CensoredData, which uses logpdf, logcdf, logsf and the cdf difference),
    minus the count-weighted ln S(entry) for truncated rows.  For the
    3-parameter Weibull, suspensions at ages <= location (ln S = 0 exactly)
    are left out, since scipy penalises data outside the support."""
    dist, theta = NNLF_THETA[fam.name]
    if fam.name == "weibull3":
        rows = [r for r in rows if not (r[1] is None and r[0] <= p[2])]
    with np.errstate(all="ignore"):
        v = -float(dist._penalized_nnlf(theta(p), censored_data(rows)))
        d = fam.sp(p)
        ent = [(r[2], r[3]) for r in rows if r[2] > 0]
        if ent:
            v -= math.fsum(c * float(d.logsf(e)) for e, c in ent)
    return v


def fit_censoreddata(fam, rows):
    kc = kind_counts(rows)
    if kc["truncated"]:
        return None, "scipy.stats.CensoredData has no left truncation"
    if fam.name not in CD_FIT:
        return None, "not attempted: the failure-free period would be a free loc in a generic fit"
    dist, fixed, conv = CD_FIT[fam.name]
    data = censored_data(rows)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            res = dist.fit(data, **fixed)
        except Exception as exc:
            return None, "%s.fit(CensoredData) raised %s: %s" % (
                dist.name, type(exc).__name__, str(exc).strip().splitlines()[0][:300])
    out = {k: float(v) for k, v in conv(res).items()}
    out["loglik"] = ll_scipy(fam, [out[p] for p in fam.params], Data(rows))
    out["call"] = "scipy.stats.%s.fit(CensoredData(...)%s)" % (
        dist.name, "".join(", %s=%r" % kv for kv in fixed.items()))
    msgs = sorted({str(c.message).strip().splitlines()[0][:200] for c in caught})
    note = ("warnings: " + " | ".join(msgs)) if msgs else None
    return out, note


# ---------------------------------------------------------------------------
# 1) fits_mle.json
# ---------------------------------------------------------------------------


def mle_specs():
    S = []

    def add(name, family, true, seed, desc, gen, **kw):
        S.append(dict(name=name, family=family, true=true, seed=seed, desc=desc, gen=gen, kw=kw))

    # Weibull
    add("weibull_n10_complete", "weibull", [1.8, 250.0], 201,
        "10 exact failures, continuous ages", "simple", n=10, censoring=("none",))
    add("weibull_n150_random60", "weibull", [1.3, 5000.0], 202,
        "random suspensions (Uniform(0, cmax) censoring times, expected fraction 0.6)",
        "simple", n=150, censoring=("random", 0.6))
    add("weibull_n800_type1_75_whole", "weibull", [2.5, 1200.0], 203,
        "end-of-observation suspension where the true reliability is 0.75; ages rounded up to "
        "whole units (ties, count rows)", "simple", n=800, censoring=("type1", 0.75),
        rounding=("step", 0))
    add("weibull_n2000_random90_whole", "weibull", [0.8, 3650.0], 204,
        "random suspensions (expected fraction 0.9); ages rounded up to whole units",
        "simple", n=2000, censoring=("random", 0.9), rounding=("step", 0))
    add("weibull_inspection_mixed", "weibull", [2.0, 1000.0], 205,
        "inspection data: first inspection at age 300, then every 100; some failures seen "
        "exactly, the rest found at an inspection (left-censored [0, 300] or interval-censored), "
        "survivors right-censored at their last inspection",
        "inspect", n=400, k=100.0, p_exact=0.3, end_q=0.8, first=300.0)
    add("weibull_left_exact", "weibull", [1.5, 100.0], 206,
        "one first inspection at age 50: units already failed are left-censored [0, 50], later "
        "failures are exact (no right censoring)", "left_exact", n=60, tau=50.0)
    add("weibull_truncated", "weibull", [2.2, 800.0], 207,
        "left truncation: 70% of the units enter observation at an age up to the true 50% "
        "quantile (life drawn given survival to entry); exact failures and right-censored "
        "survivors", "truncated", n=300, entry_frac=0.7, entry_q=0.5, follow_q=0.6)
    add("weibull_truncated_inspection", "weibull", [1.6, 2000.0], 208,
        "left truncation with inspection data: 60% of the units enter at an age up to the true "
        "40% quantile and are inspected every 250 of their age after entry",
        "inspect", n=300, k=250.0, p_exact=0.2, end_q=0.7, entry_frac=0.6, entry_q=0.4)
    # weibull3
    add("weibull3_n200_complete", "weibull3", [2.5, 1000.0, 500.0], 211,
        "200 exact failures, failure-free period 500", "simple", n=200, censoring=("none",))
    add("weibull3_n500_type1_40", "weibull3", [2.0, 1000.0, 500.0], 212,
        "end-of-observation suspension where the true reliability is 0.4", "simple", n=500,
        censoring=("type1", 0.4))
    add("weibull3_n300_random50_tens", "weibull3", [3.0, 1000.0, 500.0], 213,
        "random suspensions (expected fraction 0.5; censoring times below 500 carry no "
        "information); ages rounded up to multiples of 10", "simple", n=300,
        censoring=("random", 0.5), rounding=("step", 1))
    add("weibull3_n2000_random30", "weibull3", [1.8, 1000.0, 500.0], 214,
        "random suspensions (expected fraction 0.3), continuous ages", "simple", n=2000,
        censoring=("random", 0.3))
    # lognormal
    add("lognormal_n12_complete", "lognormal", [5.0, 0.6], 221,
        "12 exact failures, continuous ages", "simple", n=12, censoring=("none",))
    add("lognormal_n200_random40", "lognormal", [7.0, 1.2], 222,
        "random suspensions (expected fraction 0.4)", "simple", n=200, censoring=("random", 0.4))
    add("lognormal_n1000_type1_80_sig2", "lognormal", [3.0, 0.5], 223,
        "end-of-observation suspension where the true reliability is 0.8; ages rounded to 2 "
        "significant digits (ties, count rows)", "simple", n=1000, censoring=("type1", 0.8),
        rounding=("sig", 2))
    add("lognormal_n2000_random70", "lognormal", [9.0, 2.0], 224,
        "random suspensions (expected fraction 0.7), continuous ages", "simple", n=2000,
        censoring=("random", 0.7))
    add("lognormal_inspection_mixed", "lognormal", [6.0, 0.8], 225,
        "inspection data every 100 with some exact failures (left, interval, exact, right rows)",
        "inspect", n=500, k=100.0, p_exact=0.25, end_q=0.75)
    add("lognormal_truncated", "lognormal", [6.5, 0.7], 226,
        "left truncation: 60% of the units enter at an age up to the true 50% quantile; exact "
        "failures and right-censored survivors", "truncated", n=300, entry_frac=0.6,
        entry_q=0.5, follow_q=0.5)
    # exponential
    add("exponential_n10_complete", "exponential", [1000.0], 231,
        "10 exact failures", "simple", n=10, censoring=("none",))
    add("exponential_n200_random50", "exponential", [50.0], 232,
        "random suspensions (expected fraction 0.5)", "simple", n=200, censoring=("random", 0.5))
    add("exponential_n1000_type1_90_tens", "exponential", [2e4, ], 233,
        "end-of-observation suspension where the true reliability is 0.9; ages rounded up to "
        "multiples of 10", "simple", n=1000, censoring=("type1", 0.9), rounding=("step", 1))
    add("exponential_n2000_random30", "exponential", [1e6], 234,
        "random suspensions (expected fraction 0.3), continuous ages", "simple", n=2000,
        censoring=("random", 0.3))
    add("exponential_inspection_mixed", "exponential", [500.0], 235,
        "inspection data every 100 with some exact failures", "inspect", n=300, k=100.0,
        p_exact=0.3, end_q=0.7)
    # normal
    add("normal_n10_complete", "normal", [100.0, 15.0], 241,
        "10 exact failures", "simple", n=10, censoring=("none",))
    add("normal_n200_random40", "normal", [1000.0, 150.0], 242,
        "random suspensions (expected fraction 0.4)", "simple", n=200, censoring=("random", 0.4))
    add("normal_n600_type1_50_whole", "normal", [50.0, 8.0], 243,
        "end-of-observation suspension at the true median; ages rounded up to whole units",
        "simple", n=600, censoring=("type1", 0.5), rounding=("step", 0))
    add("normal_n2000_random80", "normal", [5000.0, 1000.0], 244,
        "random suspensions (expected fraction 0.8), continuous ages", "simple", n=2000,
        censoring=("random", 0.8))
    add("normal_inspection_mixed", "normal", [400.0, 80.0], 245,
        "inspection data: first inspection at age 300, then every 50, with some exact failures; "
        "a left-censored row [0, t] contributes ln F(t) of the normal model (F(0) > 0 is not "
        "subtracted)", "inspect", n=400, k=50.0, p_exact=0.3, end_q=0.8, first=300.0)
    # loglogistic
    add("loglogistic_n10_complete", "loglogistic", [3.0, 100.0], 251,
        "10 exact failures", "simple", n=10, censoring=("none",))
    add("loglogistic_n200_random50", "loglogistic", [1.5, 2000.0], 252,
        "random suspensions (expected fraction 0.5)", "simple", n=200, censoring=("random", 0.5))
    add("loglogistic_n800_type1_60_whole", "loglogistic", [4.0, 300.0], 253,
        "end-of-observation suspension where the true reliability is 0.6; ages rounded up to "
        "whole units", "simple", n=800, censoring=("type1", 0.6), rounding=("step", 0))
    add("loglogistic_n2000_random85", "loglogistic", [0.9, 1e4], 254,
        "random suspensions (expected fraction 0.85), continuous ages", "simple", n=2000,
        censoring=("random", 0.85))
    add("loglogistic_inspection_mixed", "loglogistic", [2.5, 500.0], 255,
        "inspection data: first inspection at age 200, then every 100, with some exact failures",
        "inspect", n=400, k=100.0, p_exact=0.3, end_q=0.75, first=200.0)
    # gamma
    add("gamma_n10_complete", "gamma", [2.0, 50.0], 261,
        "10 exact failures", "simple", n=10, censoring=("none",))
    add("gamma_n200_random40", "gamma", [0.7, 1000.0], 262,
        "random suspensions (expected fraction 0.4)", "simple", n=200, censoring=("random", 0.4))
    add("gamma_n800_type1_60_whole", "gamma", [5.0, 20.0], 263,
        "end-of-observation suspension where the true reliability is 0.6; ages rounded up to "
        "whole units", "simple", n=800, censoring=("type1", 0.6), rounding=("step", 0))
    add("gamma_n2000_random75_whole", "gamma", [1.5, 3000.0], 264,
        "random suspensions (expected fraction 0.75); ages rounded up to whole units", "simple",
        n=2000, censoring=("random", 0.75), rounding=("step", 0))
    add("gamma_inspection_mixed", "gamma", [3.0, 100.0], 265,
        "inspection data every 100 with some exact failures", "inspect", n=400, k=100.0,
        p_exact=0.3, end_q=0.75)
    return S


def generate(spec, seed):
    fam = FAMILIES[spec["family"]]
    rng = np.random.default_rng(seed)
    kw = spec["kw"]
    g = spec["gen"]
    if g == "simple":
        return simulate_simple(fam, spec["true"], kw["n"], kw["censoring"], kw.get("rounding"), rng)
    if g == "inspect":
        return simulate_inspection(fam, spec["true"], kw["n"], kw["k"], kw["p_exact"], kw["end_q"],
                                   rng, entry_frac=kw.get("entry_frac", 0.0),
                                   entry_q=kw.get("entry_q", 0.0),
                                   exact_rounding=kw.get("exact_rounding"), first=kw.get("first"))
    if g == "left_exact":
        return simulate_left_exact(fam, spec["true"], kw["n"], kw["tau"], rng)
    if g == "truncated":
        return simulate_truncated(fam, spec["true"], kw["n"], kw["entry_frac"], kw["entry_q"],
                                  kw["follow_q"], rng)
    raise ValueError(g)


def build_rows(spec):
    fam = FAMILIES[spec["family"]]
    seed = spec["seed"]
    for attempt in range(100):
        rows = generate(spec, seed)
        ok = acceptable(rows, fam)
        if spec["gen"] == "inspect":
            kc = kind_counts(rows)
            ok = ok and min(kc["exact"], kc["right"], kc["interval"]) >= 3
            if spec["kw"].get("entry_frac", 0) == 0:
                ok = ok and kc["left"] >= 3
        if ok:
            return rows, seed, attempt
        seed += 1000
    raise RuntimeError("no acceptable data set for %s" % spec["name"])


def make_fit_case(name, fam, description, true, rows, seed=None, stats=None):
    t0 = time.time()
    model = FamilyModel(fam, rows)
    start = list(true) if true is not None else None
    if start is None:
        raise ValueError("a start is needed")
    if fam.name == "weibull3":
        # start below the smallest exact failure
        start[2] = min(start[2], 0.9 * model.D.tmin_exact)
    r = fit_model(model, start)
    th = r["params"]
    if fam.name == "weibull3" and not th[2] < model.D.tmin_exact:
        raise RuntimeError("weibull3 location not interior in %s" % name)
    sc = {p: v for p, v in zip(fam.params, th)}
    sc.update({"loglik": r["loglik"], "max_abs_grad": r["max_abs_grad"],
               "cov_params": list(fam.params), "cov": r["cov"],
               "route_a_max_rel_diff": r["routeA_diff"]})
    kc = kind_counts(rows)
    case = {"name": name, "family": fam.name, "description": description}
    if seed is not None:
        case["seed"] = seed
    case.update({
        "rows": rows,
        "n": int(sum(x[3] for x in rows)),
        "failures": kc["exact"],
        "row_kinds": kc,
        "true": {p: v for p, v in zip(fam.params, true)},
        "scipy": sc,
    })
    lf, lnote = fit_lifelines(fam, rows)
    case["lifelines"] = lf
    if lnote:
        case["lifelines_note"] = lnote
    cd, cnote = fit_censoreddata(fam, rows)
    case["scipy_censoreddata"] = cd
    if cnote:
        case["scipy_censoreddata_note"] = cnote
    st = dict(routeA=r["routeA_diff"], grad=r["max_abs_grad"], grad_rel=r["max_abs_grad"] / r["n_unit"],
              ll_mp_vs_scipy=abs(r["loglik_mp"] - r["loglik"]) / abs(r["loglik"]),
              llA_minus=r["llA"] - r["loglik"], cov_check=r["cov_check"], secs=time.time() - t0)
    units = FamilyModel(fam, rows).unit(th)
    st["nnlf_check"] = rel(loglik_via_scipy_nnlf(fam, th, rows), r["loglik"])
    if lf is not None:
        st["lifelines"] = max(abs(lf[p] - v) / u for p, v, u in zip(fam.params, th, units))
        st["lifelines_ll"] = abs(lf["loglik"] - r["loglik"])
        # lifelines' own log-likelihood against ours, both at lifelines' estimate
        st["lifelines_ll_same_point"] = rel(
            ll_scipy(fam, [lf[p] for p in fam.params], Data(rows)), lf["loglik"])
    if cd is not None:
        st["cd"] = max(abs(cd[p] - v) / u for p, v, u in zip(fam.params, th, units))
        st["cd_ll"] = r["loglik"] - cd["loglik"]
    if stats is not None:
        stats.append((name, st))
    return case


def build_fits():
    cases, stats = [], []
    for spec in mle_specs():
        fam = FAMILIES[spec["family"]]
        rows, seed, attempt = build_rows(spec)
        desc = "%s. Simulated with numpy.random.default_rng(%d) from the true parameters" % (
            spec["desc"][0].upper() + spec["desc"][1:], seed)
        if attempt:
            desc += " (seed advanced %d time(s) from %d to meet the acceptance rules)" % (
                attempt, spec["seed"])
        desc += "."
        if fam.name == "normal":
            desc += " Non-positive draws were redrawn."
        c = make_fit_case(spec["name"], fam, desc, spec["true"], rows, seed, stats)
        cases.append(c)
        s = stats[-1][1]
        print("  %-34s n=%5d rows=%4d %s  routeA %.1e grad %.1e  %.1fs" % (
            c["name"], c["n"], len(rows),
            " ".join("%s=%.6g" % (p, c["scipy"][p]) for p in fam.params),
            s["routeA"], s["grad"], s["secs"]), flush=True)
    # grouped vs expanded pair: inspection data with ties, as count rows and expanded
    fam = FAMILIES["weibull"]
    spec = dict(name="weibull_grouped", family="weibull", true=[1.7, 500.0], seed=209,
                gen="inspect", kw=dict(n=120, k=100.0, p_exact=0.4, end_q=0.8,
                                       exact_rounding=("step", 1)))
    rows, seed, attempt = build_rows(spec)
    base = ("Grouped-versus-expanded pair. Inspection data every 100 (left, interval, exact "
            "and right rows), exact failure ages rounded up to multiples of 10 so that they "
            "tie. Simulated with numpy.random.default_rng(%d) from the true parameters." % seed)
    cg = make_fit_case("weibull_grouped_counts", fam, base + " This is the count-row form.",
                       spec["true"], rows, seed, stats)
    ex = expand_rows(rows)
    ce = make_fit_case("weibull_grouped_expanded", fam,
                       base + " This is the expanded form (one row per unit, count 1) of "
                       "weibull_grouped_counts; the fit must be identical.",
                       spec["true"], ex, seed, stats)
    same = all(cg["scipy"][p] == ce["scipy"][p] for p in fam.params)
    print("  grouped vs expanded: identical parameters: %s (diff %s)" % (
        same, [rel(cg["scipy"][p], ce["scipy"][p]) for p in fam.params]))
    cases += [cg, ce]
    return {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "row_format": ROW_FORMAT,
        "loglik_convention": LOGLIK_CONVENTION,
        "families": {k: {"params": f.params, "scipy": f.scipy_text} for k, f in FAMILIES.items()},
        "definitions": {
            "scipy": "the maximum-likelihood estimate. Route A maximises the scipy log-likelihood "
                     "(logpdf/logsf/logcdf; interval rows via a cancellation-free cdf or sf "
                     "difference) with Nelder-Mead, BFGS and finite-difference Newton steps in "
                     "unconstrained coordinates; route B, written here, is a Newton iteration on "
                     "the same log-likelihood in mpmath at 50 digits started from the Nelder-Mead "
                     "point, rounded to double",
            "loglik": "scipy log-likelihood at the written parameters",
            "max_abs_grad": "largest |d loglik / d theta| * unit(theta) at the written (double) "
                            "parameters, 50-digit evaluation; unit = the parameter itself for "
                            "shape, scale and sigma, sigma for mu, scale for location",
            "route_a_max_rel_diff": "largest |route A - route B| / unit(theta) over the parameters",
            "cov": "inverse of the observed information: -(Hessian of loglik)^-1 in the natural "
                   "parameters, order cov_params, at the route-B optimum, Hessian by 50-digit "
                   "central differences (relative steps 1e-10, truncation error ~1e-20). A "
                   "float central-difference Hessian of the scipy log-likelihood reproduces it "
                   "only to about 1e-5 (in units of the standard deviations), which is the "
                   "accuracy to expect from an implementation using float finite differences; "
                   "an analytic Hessian should match to about 1e-10",
            "lifelines": "lifelines estimates converted to our names (WeibullFitter rho_ -> "
                         "shape, lambda_ -> scale; LogNormalFitter mu_, sigma_; "
                         "ExponentialFitter lambda_ (the mean) -> scale; LogLogisticFitter "
                         "beta_ -> shape, alpha_ -> scale), loglik = log_likelihood_, method = "
                         "the fitter call used (fit with entry and weights = counts; "
                         "fit_left_censoring; fit_interval_censoring with lower = upper for "
                         "exact, lower = 0 for left, upper = inf for right). lifelines stops "
                         "early: agreement with route B is only 1e-8 to 1e-4 relative. "
                         "log_likelihood_ equals our log-likelihood at lifelines' estimate to "
                         "about 4e-16 relative",
            "scipy_censoreddata": "dist.fit(scipy.stats.CensoredData(...)) with counts expanded and "
                                  "loc fixed at 0 where the family has no location; loglik is our "
                                  "log-likelihood at its estimate. A generic optimiser: agreement "
                                  "2e-6 relative or better. Not available with entry > 0",
        },
        "cases": cases,
    }, stats, same


# ---------------------------------------------------------------------------
# 2) median_ranks.json
# ---------------------------------------------------------------------------


def mp_newton_1d(f, fp, x0, tol=mpf(10) ** -34):
    x = x0
    for _ in range(100):
        step = f(x) / fp(x)
        x -= step
        if abs(step) <= tol * abs(x):
            return x
    raise RuntimeError("1-d Newton did not converge")


def mp_median_rank(j, n):
    """Solve I_x(j, n-j+1) = 1/2 by Newton in mpmath (40 digits); j may be an
    mpf, a Fraction or a number."""
    with mpmath.workdps(40):
        if isinstance(j, Fraction):
            j = mpf(j.numerator) / j.denominator
        j, n = mpf(j), mpf(n)
        a, b = j, n - j + 1
        x0 = mpf(float(special.betaincinv(float(a), float(b), 0.5)))
        lB = mpmath.log(mpmath.beta(a, b))
        f = lambda x: mpmath.betainc(a, b, 0, x, regularized=True) - mpf(1) / 2
        fp = lambda x: mpmath.exp((a - 1) * mpmath.log(x) + (b - 1) * mpmath.log1p(-x) - lB)
        return mp_newton_1d(f, fp, x0)


def johnson_orders(units):
    """Adjusted order numbers (Johnson's method) for the failures of a list of
    units (age, failed) already sorted (failures before suspensions at equal
    ages).  new = previous + (n + 1 - previous) / (1 + units from the present
    one onwards); exact rationals."""
    n = len(units)
    prev = Fraction(0)
    out = []
    for pos, (t, f) in enumerate(units):
        if f:
            rr = n - pos  # units at or beyond this position, the failure included
            prev = prev + (n + 1 - prev) / Fraction(1 + rr)
            out.append(prev)
    return out


def mean_order_by_enumeration(units):
    """Mean position of each failure over all orderings of the units' lives
    that agree with the record (failures in their observed order, each
    suspended unit's life after every failure observed before its
    suspension), each ordering equally likely.  Enumerates the gap each
    suspended life falls into; m suspended lives in one gap can be ordered
    in m! ways."""
    fails = [i for i, (t, f) in enumerate(units) if f]
    r = len(fails)
    susp_min_gap = []
    seen = 0
    for t, f in units:
        if f:
            seen += 1
        else:
            susp_min_gap.append(seen)
    total = Fraction(0)
    sums = [Fraction(0)] * r

    def rec(idx, counts):
        nonlocal total
        if idx == len(susp_min_gap):
            w = 1
            for c in counts:
                w *= math.factorial(c)
            total += w
            before = 0
            for j in range(r):
                before += counts[j]
                sums[j] += w * (j + 1 + before)
            return
        for g in range(susp_min_gap[idx], r + 1):
            counts[g] += 1
            rec(idx + 1, counts)
            counts[g] -= 1

    rec(0, [0] * (r + 1))
    return [s / total for s in sums]


def build_median_ranks():
    worst = 0.0
    exact, bern = [], []
    for n in [1, 2, 3, 5, 10, 20, 50]:
        for i in range(1, n + 1):
            v = float(special.betaincinv(i, n - i + 1, 0.5))
            worst = max(worst, rel(v, float(mp_median_rank(i, n))))
            exact.append({"n": n, "i": i, "rank": v})
            bern.append({"n": n, "i": i, "rank": float(Fraction(10 * i - 3, 10 * n + 4))})
    adj = []
    for n, js in [(10, [1.1, 2.5, 3.75, 6.2, 9.9]), (7, [1.2, 4.5, 6.8]), (25, [1.5, 12.25, 24.6])]:
        for j in js:
            v = float(special.betaincinv(j, n - j + 1, 0.5))
            worst = max(worst, rel(v, float(mp_median_rank(j, n))))
            adj.append({"n": n, "j": j, "rank": v})
    # worked example of adjusted orders
    units = [(95.0, 1), (210.0, 0), (330.0, 1), (480.0, 0), (520.0, 0), (700.0, 1),
             (910.0, 1), (910.0, 0), (1150.0, 0), (1400.0, 1), (1800.0, 0)]
    n = len(units)
    jo = johnson_orders(units)
    en = mean_order_by_enumeration(units)
    if jo != en:
        raise RuntimeError("adjusted orders disagree with the enumeration: %r %r" % (jo, en))
    # straightforward float implementation (the one the fixture shows)
    prev = 0.0
    jf = []
    for pos, (t, f) in enumerate(units):
        if f:
            prev = prev + (n + 1 - prev) / (1 + (n - pos))
            jf.append(prev)
    jo_worst = max(rel(a, float(b)) for a, b in zip(jf, jo))
    jf = [float(x) for x in jo]   # written: the exact fractions, correctly rounded
    ex_ranks = []
    for j in jf:
        v = float(special.betaincinv(j, n - j + 1, 0.5))
        worst = max(worst, rel(v, float(mp_median_rank(jo[len(ex_ranks)], n))))
        ex_ranks.append(v)
    ex = {
        "source": "Worked example constructed for lifedata (ages chosen by hand; no published "
                  "table was available to check offline). The method is the adjusted order "
                  "number of L. G. Johnson, The Statistical Treatment of Fatigue Experiments, "
                  "Elsevier, 1964 (citation from memory); the same increment formula is given in "
                  "reliability textbooks such as Kapur and Lamberson, Reliability in Engineering "
                  "Design, Wiley, 1977 (from memory).",
        "from_memory": False,
        "n": n,
        "rows": [[t, f] for t, f in units],
        "tie_rule": "at equal ages failures come before suspensions (the suspended unit is "
                    "taken to outlive the failure)",
        "formula": "new_order = previous_order + (n + 1 - previous_order) / (1 + reverse_rank), "
                   "previous_order starts at 0, reverse_rank = number of units (failed or "
                   "suspended) at or beyond the present failure in the sorted list, the present "
                   "failure included",
        "adjusted_order": jf,
        "float_loop_note": "a plain float loop of the formula reproduces adjusted_order to within "
                           "one rounding (the written values are the exact fractions rounded to "
                           "double)",
        "adjusted_order_exact_fractions": ["%d/%d" % (x.numerator, x.denominator) for x in jo],
        "bernard_rank": [float((x - Fraction(3, 10)) / (n + Fraction(2, 5))) for x in jo],
        "exact_median_rank": ex_ranks,
        "check": "the adjusted orders equal, as exact fractions, the mean position of each "
                 "failure over all orderings of the units' lives that agree with the record "
                 "(each equally likely), found by enumeration",
    }
    out = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "exact": "rank = scipy.special.betaincinv(i, n - i + 1, 0.5): the median of the i-th "
                     "order statistic of n uniforms",
            "bernard": "rank = (i - 0.3) / (n + 0.4), evaluated exactly and rounded to double",
            "adjusted_exact": "rank = betaincinv(j, n - j + 1, 0.5) for a real (adjusted) order j",
        },
        "exact": exact,
        "bernard": bern,
        "adjusted_exact": adj,
        "johnson_example": ex,
    }
    return out, dict(betaincinv_vs_mp=worst, johnson_float_vs_fraction=jo_worst)


# ---------------------------------------------------------------------------
# 3) rank_regression.json
# ---------------------------------------------------------------------------


def plot_points(rows, ranks):
    """Failures with Johnson adjusted orders, as if count rows were expanded:
    each failure gets its own order; at equal ages failures come before
    suspensions.  Returns [(t, order, F)] as floats and as mp values."""
    units = []
    for r in rows:
        k = row_kind(r)
        if k not in ("exact", "right") or r[2] != 0:
            raise ValueError("rank regression takes exact and right-censored rows only")
        units.extend([(r[0], 1 if k == "exact" else 0)] * r[3])
    units.sort(key=lambda u: (u[0], -u[1]))
    n = len(units)
    # float route
    prev = 0.0
    pts = []
    for pos, (t, f) in enumerate(units):
        if f:
            prev = prev + (n + 1 - prev) / (1 + (n - pos))
            F = (prev - 0.3) / (n + 0.4) if ranks == "bernard" else float(
                special.betaincinv(prev, n - prev + 1, 0.5))
            pts.append((t, prev, F))
    # exact route: fractions and mpmath
    fr = johnson_orders(units)
    mpts = []
    fails = [u for u in units if u[1]]
    with mpmath.workdps(40):
        for (t, f), j in zip(fails, fr):
            jm = mpf(j.numerator) / j.denominator
            if ranks == "bernard":
                F = (jm - mpf(3) / 10) / (n + mpf(4) / 10)
            else:
                F = mp_median_rank(jm, n)
            mpts.append((mpf(t), jm, F))
    return pts, mpts, n


def rr_transform(family, t, F, lib):
    if lib == "np":
        log, log1p, ppf = math.log, math.log1p, lambda p: float(norm.ppf(p))
    else:
        log, log1p = mpmath.log, mpmath.log1p
        ppf = lambda p: mpmath.sqrt(2) * mpmath.erfinv(2 * p - 1)
    if family == "weibull":
        return log(t), log(-log1p(-F))
    if family == "lognormal":
        return log(t), ppf(F)
    if family == "normal":
        return t, ppf(F)
    if family == "loglogistic":
        return log(t), log(F) - log1p(-F)
    if family == "exponential":
        return t, -log1p(-F)
    raise ValueError(family)


def rr_fit(family, xs, ys, regress, lib):
    """Least squares.  regress "y": y = a + b x; "x": x = c + d y.  For the
    exponential both lines go through the origin."""
    if lib == "np":
        X, Y = np.array(xs, dtype=float), np.array(ys, dtype=float)
        if family == "exponential":
            if regress == "y":
                b = np.linalg.lstsq(X[:, None], Y, rcond=None)[0][0]
                params = {"scale": 1.0 / b}
            else:
                d = np.linalg.lstsq(Y[:, None], X, rcond=None)[0][0]
                params = {"scale": d}
        else:
            A = np.column_stack([np.ones_like(X), X if regress == "y" else Y])
            coef = np.linalg.lstsq(A, Y if regress == "y" else X, rcond=None)[0]
            params = rr_params(family, regress, float(coef[0]), float(coef[1]), math.exp)
        r = float(np.corrcoef(X, Y)[0, 1])
        return {k: float(v) for k, v in params.items()}, r
    n = len(xs)
    mx, my = mpmath.fsum(xs) / n, mpmath.fsum(ys) / n
    sxx = mpmath.fsum((x - mx) ** 2 for x in xs)
    syy = mpmath.fsum((y - my) ** 2 for y in ys)
    sxy = mpmath.fsum((x - mx) * (y - my) for x, y in zip(xs, ys))
    r = sxy / mpmath.sqrt(sxx * syy)
    if family == "exponential":
        if regress == "y":
            params = {"scale": mpmath.fsum(x * x for x in xs) / mpmath.fsum(x * y for x, y in zip(xs, ys))}
        else:
            params = {"scale": mpmath.fsum(x * y for x, y in zip(xs, ys)) / mpmath.fsum(y * y for y in ys)}
        return params, r
    if regress == "y":
        b = sxy / sxx
        a = my - b * mx
    else:
        b = sxy / syy
        a = mx - b * my
    return rr_params(family, regress, a, b, mpmath.exp), r


def rr_params(family, regress, a, b, exp):
    if regress == "y":   # y = a + b x
        if family in ("weibull", "loglogistic"):
            return {"shape": b, "scale": exp(-a / b)}
        if family in ("lognormal", "normal"):
            return {"mu": -a / b, "sigma": 1 / b}
    else:                # x = a + b y
        if family in ("weibull", "loglogistic"):
            return {"shape": 1 / b, "scale": exp(a)}
        if family in ("lognormal", "normal"):
            return {"mu": a, "sigma": b}
    raise ValueError(family)


def rr_datasets():
    out = []
    specs = {
        "weibull": [2.0, 1000.0],
        "lognormal": [5.0, 0.7],
        "exponential": [300.0],
        "normal": [200.0, 30.0],
        "loglogistic": [3.0, 80.0],
    }
    for j, (famname, true) in enumerate(specs.items()):
        fam = FAMILIES[famname]
        seed = 301 + 10 * j
        for kind in ("complete", "suspensions", "grouped"):
            s = seed
            for attempt in range(100):
                rng = np.random.default_rng(s)
                if kind == "complete":
                    rows = simulate_simple(fam, true, 12, ("none",), ("sig", 4), rng)
                elif kind == "suspensions":
                    rows = simulate_simple(fam, true, 20, ("random", 0.35), ("sig", 4), rng)
                else:
                    d = fam.sp(true)
                    step = ("step", int(math.floor(math.log10(float(d.ppf(0.5))))) - 1)
                    rows = simulate_simple(fam, true, 40, ("random", 0.3), step, rng)
                kc = kind_counts(rows)
                nf = kc["exact"]
                ok = nf >= 5
                if kind == "suspensions":
                    ok = ok and kc["right"] >= 4 and any(
                        row_kind(r) == "right" and r[0] < max(x[0] for x in rows if row_kind(x) == "exact")
                        for r in rows)
                if kind == "grouped":
                    ok = ok and any(r[3] > 1 and row_kind(r) == "exact" for r in rows) and kc["right"] >= 3
                if ok:
                    break
                s += 1000
            out.append((famname, kind, s, rows))
            seed += 1
    return out


def build_rank_regression():
    cases = []
    worst = 0.0
    worst_r = 0.0
    for famname, kind, seed, rows in rr_datasets():
        for ranks in ("bernard", "exact"):
            pts, mpts, n = plot_points(rows, ranks)
            xs, ys = zip(*[rr_transform(famname, t, F, "np") for t, j, F in pts])
            with mpmath.workdps(40):
                mxs, mys = zip(*[rr_transform(famname, t, F, "mp") for t, j, F in mpts])
            for regress in ("y", "x"):
                params, r = rr_fit(famname, xs, ys, regress, "np")
                with mpmath.workdps(40):
                    mparams, mr = rr_fit(famname, list(mxs), list(mys), regress, "mp")
                    for k in params:
                        worst = max(worst, rel(params[k], float(mparams[k])))
                    worst_r = max(worst_r, rel(r, float(mr)))
                    # report the 40-digit values, rounded to double
                    params = {k: float(mparams[k]) for k in params}
                    r = float(mr)
                cases.append({
                    "name": "%s_%s_%s_on_%s" % (famname, kind, ranks, regress),
                    "family": famname,
                    "data": kind,
                    "seed": seed,
                    "rows": rows,
                    "ranks": ranks,
                    "regress": regress,
                    "params": params,
                    "r": r,
                    "points": [[float(t), float(j), float(F)] for t, j, F in mpts],
                })
    defs = {
        "rows": ROW_FORMAT + "; only exact and right-censored rows, no entry",
        "orders": "Units are expanded from count rows and sorted by age, failures before "
                  "suspensions at equal ages. Each failure gets its own order number, also when "
                  "several failures share an age (as if the count rows were expanded): "
                  "order = previous + (n + 1 - previous) / (1 + reverse_rank), previous starting at "
                  "0, reverse_rank = units at or beyond the present failure (Johnson's adjusted "
                  "order; without suspensions this gives 1, 2, 3, ...). n counts all units.",
        "ranks": "bernard: F = (order - 0.3) / (n + 0.4); exact: F = betaincinv(order, n - order + 1, "
                 "0.5)",
        "points": "[t, order, F] per failure, in plotting order (exact-fraction orders and "
                  "40-digit ranks, rounded to double)",
        "coordinates": {
            "weibull": "x = ln t, y = ln(-ln(1 - F))",
            "lognormal": "x = ln t, y = Phi^-1(F)",
            "normal": "x = t, y = Phi^-1(F)",
            "loglogistic": "x = ln t, y = ln(F / (1 - F))",
            "exponential": "x = t, y = ln(1 / (1 - F)) = -ln(1 - F); both lines through the origin",
        },
        "regress": "y: least squares of y on x, y = a + b x; x: least squares of x on y, x = c + d y. "
                   "Exponential: y = b x (b = sum xy / sum x^2) or x = d y (d = sum xy / sum y^2).",
        "params": "weibull and loglogistic: shape = b, scale = exp(-a/b) (on y); shape = 1/d, "
                  "scale = exp(c) (on x). lognormal and normal: mu = -a/b, sigma = 1/b (on y); "
                  "mu = c, sigma = d (on x). exponential: scale = 1/b (on y), scale = d (on x).",
        "r": "Pearson correlation coefficient of the (x, y) points (with means subtracted, also "
             "for the exponential)",
        "precision": "computed twice: numpy (float) and mpmath at 40 digits from exact-fraction "
                     "orders; the 40-digit values rounded to double are written",
    }
    return {"generator": GENERATOR, "libraries": LIBRARIES, "definitions": defs, "cases": cases}, \
        dict(params_np_vs_mp=worst, r_np_vs_mp=worst_r, n_cases=len(cases))


# ---------------------------------------------------------------------------
# 4) known_shape.json
# ---------------------------------------------------------------------------


def mp_chi2_ppf(C, dof):
    with mpmath.workdps(40):
        a = mpf(dof) / 2
        x0 = mpf(float(chi2.ppf(C, dof)))
        lg = mpmath.loggamma(a)
        f = lambda x: mpmath.gammainc(a, 0, x / 2, regularized=True) - mpf(C)
        fp = lambda x: mpmath.exp((a - 1) * mpmath.log(x / 2) - x / 2 - lg) / 2
        return mp_newton_1d(f, fp, x0)


def build_known_shape():
    specs = [
        ("r0_n5_shape2", 2.0, 0, "five units, no failure, hand-chosen ages",
         [[1000.0, None, 0.0, 1], [1200.0, None, 0.0, 1], [1500.0, None, 0.0, 1],
          [2000.0, None, 0.0, 1], [2400.0, None, 0.0, 1]]),
        ("r0_n50_shape3_grouped", 3.0, 0, "50 units, no failure, fleet ages in count rows",
         None),
        ("r1_n10_shape1.5", 1.5, 1, "10 units, one failure", None),
        ("r1_n30_shape2.5_grouped", 2.5, 1, "30 units in count rows, one failure", None),
        ("r3_n8_shape2", 2.0, 3, "8 units, three failures", None),
        ("r3_n50_shape1.2", 1.2, 3, "50 units, three failures", None),
    ]
    levels = [0.5, 0.632, 0.9, 0.95]
    cases = []
    worst = 0.0
    worst_identity = 0.0
    for i, (name, beta, r, desc, rows) in enumerate(specs):
        seed = 401 + i
        if rows is None:
            rng = np.random.default_rng(seed)
            n = int(name.split("_n")[1].split("_")[0])
            grouped = name.endswith("grouped")
            # ages: uniform over [100, 5000] rounded to 2 (grouped) or 4 significant digits
            ages = [round_up(100 + 4900 * x, ("sig", 2 if grouped else 4)) for x in rng.random(n)]
            fail_idx = set(rng.choice(n, size=r, replace=False).tolist()) if r else set()
            raw = [((a, a, 0.0) if j in fail_idx else (a, None, 0.0)) for j, a in enumerate(ages)]
            rows = group_rows(raw)
        else:
            seed = None
        check_rows(rows)
        kc = kind_counts(rows)
        assert kc["exact"] == r and kc["left"] == kc["interval"] == kc["truncated"] == 0
        T = math.fsum(row[3] * row[0] ** beta for row in rows)
        with mpmath.workdps(40):
            Tm = mpmath.fsum(row[3] * mpf(row[0]) ** beta for row in rows)
        mle = (T / r) ** (1 / beta) if r > 0 else None
        if r > 0:
            with mpmath.workdps(40):
                worst = max(worst, rel(mle, float((Tm / r) ** (1 / mpf(beta)))))
        bounds = []
        for C in levels:
            q = float(chi2.ppf(C, 2 * r + 2))
            eta = (2 * T / q) ** (1 / beta)
            with mpmath.workdps(40):
                em = (2 * Tm / mp_chi2_ppf(C, 2 * r + 2)) ** (1 / mpf(beta))
                worst = max(worst, rel(eta, float(em)))
                if r == 0:
                    ident = (Tm / -mpmath.log1p(-mpf(C))) ** (1 / mpf(beta))
                    worst_identity = max(worst_identity, rel(eta, float(ident)))
            bounds.append([C, eta])
        c = {"name": name, "description": desc}
        if seed is not None:
            c["seed"] = seed
        c.update({"rows": rows, "shape": beta, "r": r, "n": int(sum(x[3] for x in rows)),
                  "sum_t_pow_shape": T, "scale_mle": mle, "bounds": bounds})
        cases.append(c)
    out = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "source": "Weibull analysis with an assumed (known) shape and few or no failures: "
                  "W. Nelson, 'Weibull analysis of reliability data with few or no failures', "
                  "Journal of Quality Technology 17(3), 140-146, 1985; also R. B. Abernethy, The "
                  "New Weibull Handbook (Weibull-Bayesian chapter). Both citations and the "
                  "formula's attribution are from memory; the values here are computed with "
                  "scipy from the formulas under definitions.",
        "definitions": {
            "rows": ROW_FORMAT + "; exact and right-censored rows only",
            "sum_t_pow_shape": "T = sum over all units (failed and suspended, times count) of "
                               "age^shape",
            "scale_mle": "(T / r)^(1/shape) for r > 0 failures; null for r = 0",
            "bounds": "[C, eta_L] with eta_L = (2 T / chi2.ppf(C, 2 r + 2))^(1/shape), a one-sided "
                      "lower confidence bound at level C on the scale; for r = 0 this equals "
                      "(T / -ln(1 - C))^(1/shape), and at C = 0.632 it is close to T^(1/shape)",
        },
        "cases": cases,
    }
    return out, dict(vs_mp=worst, r0_identity=worst_identity)


# ---------------------------------------------------------------------------
# 5) kaplan_meier.json
# ---------------------------------------------------------------------------


def km_datasets():
    fam = FAMILIES["weibull"]
    out = []
    # 1: small, continuous, suspensions; the largest age is a suspension
    s = 501
    while True:
        rows = simulate_simple(fam, [1.5, 1000.0], 15, ("random", 0.35), ("sig", 4),
                               np.random.default_rng(s))
        if row_kind(rows[-1]) == "right" and kind_counts(rows)["right"] >= 3:
            break
        s += 1000
    out.append(("km_n15_suspensions", "15 units, continuous ages rounded to 4 significant "
                "digits, random suspensions; the largest age is a suspension", s, rows))
    # 2: ties and counts: ages rounded up to multiples of 100, failures and suspensions tie
    s = 502
    while True:
        rows = simulate_simple(fam, [2.0, 1000.0], 80, ("random", 0.4), ("step", 2),
                               np.random.default_rng(s))
        ages_f = {r[0] for r in rows if row_kind(r) == "exact"}
        ages_s = {r[0] for r in rows if row_kind(r) == "right"}
        if (row_kind(rows[-1]) == "right" and ages_f & ages_s
                and any(r[3] > 1 and row_kind(r) == "exact" for r in rows)):
            break
        s += 1000
    out.append(("km_grouped_ties", "80 units, ages rounded up to multiples of 100: tied failures "
                "in count rows (lifelines weights = counts), suspensions tied with failures at "
                "some ages", s, rows))
    # 3: left truncation (entry), continuous
    s = 503
    while True:
        rows = simulate_truncated(fam, [1.8, 500.0], 40, 0.6, 0.5, 0.6, np.random.default_rng(s))
        rows = [[round_up(r[0], ("sig", 5)), None if r[1] is None else round_up(r[1], ("sig", 5)),
                 r[2], r[3]] for r in rows]
        rows = [[r[0], r[0] if r[1] is not None else None, r[2], r[3]] for r in rows]
        rows = group_rows([(r[0], r[1], r[2]) for r in rows for _ in range(r[3])])
        ev = {r[0] for r in rows if row_kind(r) == "exact"}
        ent = {r[2] for r in rows if r[2] > 0}
        if row_kind(rows[-1]) == "right" and not (ev & ent) and \
                all(r[2] < r[0] for r in rows) and kind_counts(rows)["truncated"] >= 10:
            break
        s += 1000
    out.append(("km_left_truncated", "40 units, 60% entering observation late (entry > 0); "
                "no entry age equals an event age", s, rows))
    return out


def build_kaplan_meier():
    z = float(norm.ppf(0.975))
    cases = []
    worst = dict(survival=0.0, at_risk=0, greenwood_sum=0.0, loglog_own_vs_lifelines=0.0)
    for name, desc, seed, rows in km_datasets():
        check_rows(rows)
        dur = np.array([r[0] for r in rows], dtype=float)
        ev = np.array([1 if row_kind(r) == "exact" else 0 for r in rows])
        w = np.array([r[3] for r in rows], dtype=float)
        ent = np.array([r[2] for r in rows], dtype=float)
        kmf = KaplanMeierFitter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            kmf.fit(dur, event_observed=ev, entry=ent if np.any(ent > 0) else None, weights=w,
                    alpha=0.05)
        sf = kmf.survival_function_.iloc[:, 0]
        ci = kmf.confidence_interval_
        lo_col = [c for c in ci.columns if "lower" in c][0]
        hi_col = [c for c in ci.columns if "upper" in c][0]
        et = kmf.event_table
        times = sorted({r[0] for r in rows if row_kind(r) == "exact"})
        S = 1.0
        gsum = 0.0
        steps = []
        Sm = mpf(1)
        for t in times:
            at_risk = sum(r[3] for r in rows if r[2] < t <= r[0])
            d = sum(r[3] for r in rows if row_kind(r) == "exact" and r[0] == t)
            S *= (1.0 - d / at_risk)
            gsum += d / (at_risk * (at_risk - d))
            var = S * S * gsum
            l_ll, u_ll = float(ci.loc[t, lo_col]), float(ci.loc[t, hi_col])
            # the same log(-log) interval computed here
            v = math.log(S)
            own_lo = math.exp(-math.exp(math.log(-v) + z * math.sqrt(gsum) / (-v)))
            own_hi = math.exp(-math.exp(math.log(-v) - z * math.sqrt(gsum) / (-v)))
            worst["loglog_own_vs_lifelines"] = max(worst["loglog_own_vs_lifelines"],
                                                   rel(own_lo, l_ll), rel(own_hi, u_ll))
            worst["survival"] = max(worst["survival"], rel(float(sf.loc[t]), S))
            worst["at_risk"] = max(worst["at_risk"], abs(int(et.loc[t, "at_risk"]) - at_risk),
                                   abs(int(et.loc[t, "observed"]) - d))
            worst["greenwood_sum"] = max(worst["greenwood_sum"],
                                         rel(float(kmf._cumulative_sq_.loc[t]), gsum))
            se = math.sqrt(var)
            steps.append({"t": t, "at_risk": at_risk, "failures": d, "survival": S,
                          "greenwood_var": var, "lifelines_lower": l_ll, "lifelines_upper": u_ll,
                          "linear_lower": S - z * se, "linear_upper": S + z * se})
        cases.append({"name": name, "description": desc, "seed": seed, "rows": rows,
                      "steps": steps})
    out = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "lifelines_interval_form": (
            "lifelines KaplanMeierFitter (alpha=0.05) uses the exponential Greenwood interval on "
            "log(-log S): with c = sum d/(n(n-d)) over event times <= t, lower = "
            "exp(-exp(ln(-ln S) + z sqrt(c) / (-ln S))) and upper = exp(-exp(ln(-ln S) - z "
            "sqrt(c) / (-ln S))), i.e. S^exp(+-z sqrt(c)/ln S), z = Phi^-1(0.975) "
            "(lifelines/fitters/kaplan_meier_fitter.py, _bounds)"),
        "definitions": {
            "rows": ROW_FORMAT + "; exact and right-censored rows only",
            "at_risk": "sum of counts of rows with entry < t <= age (a suspension at age t is "
                       "still at risk at t; no entry age in these data equals an event age, so "
                       "the entry convention at ties does not matter)",
            "survival": "product over event times <= t of (1 - failures/at_risk)",
            "greenwood_var": "survival^2 * sum over event times <= t of failures / (at_risk * "
                             "(at_risk - failures))",
            "linear_lower/upper": "survival -+ z sqrt(greenwood_var), z = "
                                  "scipy.stats.norm.ppf(0.975), not clipped to [0, 1]",
            "lifelines_lower/upper": "KaplanMeierFitter.confidence_interval_ at the event time",
        },
        "cases": cases,
    }
    return out, worst


# ---------------------------------------------------------------------------
# 6) group_tests.json
# ---------------------------------------------------------------------------


def group_specs():
    return [
        ("weibull_2groups_scale_shift", "weibull",
         {"A": ([2.0, 1000.0], 40), "B": ([2.0, 1400.0], 50)}, 0.3, 601),
        ("weibull_3groups_shape_differs", "weibull",
         {"A": ([1.5, 500.0], 30), "B": ([1.5, 600.0], 35), "C": ([3.0, 550.0], 40)}, 0.4, 602),
        ("lognormal_2groups_same", "lognormal",
         {"A": ([5.0, 0.5], 30), "B": ([5.0, 0.5], 45)}, 0.3, 603),
        ("lognormal_3groups_mu_shift", "lognormal",
         {"A": ([5.0, 0.8], 25), "B": ([5.3, 0.8], 30), "C": ([5.6, 0.8], 35)}, 0.4, 604),
    ]


def build_group_tests():
    cases = []
    worst = dict(routeA=0.0, grad_rel=0.0, p_vs_mp=0.0)
    for name, famname, gspec, cens, seed in group_specs():
        fam = FAMILIES[famname]
        groups = {}
        s = seed
        for gi, (g, (true, n)) in enumerate(gspec.items()):
            while True:
                rows = simulate_simple(fam, true, n, ("random", cens), ("sig", 4),
                                       np.random.default_rng(s + 17 * gi))
                if acceptable(rows, fam):
                    break
                s += 1000
            groups[g] = rows
        truths = {g: dict(zip(fam.params, t)) for g, (t, n) in gspec.items()}
        pooled_rows = group_rows([(r[0], r[1], r[2]) for g in groups for r in groups[g]
                                  for _ in range(r[3])])
        start = list(next(iter(gspec.values()))[0])

        def track(r):
            worst["routeA"] = max(worst["routeA"], r["routeA_diff"])
            worst["grad_rel"] = max(worst["grad_rel"], r["max_abs_grad"] / r["n_unit"])
            return r

        pooled = track(fit_model(FamilyModel(fam, pooled_rows), start))
        sep = {g: track(fit_model(FamilyModel(fam, groups[g]), list(gspec[g][0])))
               for g in groups}
        cm = CommonShapeModel(fam, groups)
        if famname == "weibull":
            cstart = [start[0]] + [sep[g]["params"][1] for g in groups]
        else:
            cstart = [sep[g]["params"][0] for g in groups] + [start[1]]
        common = track(fit_model(cm, cstart))
        k = len(groups)
        npar = len(fam.params)
        with mpmath.workdps(MP_DPS):
            sep_sum = mpmath.fsum(sep[g]["loglik_mpf"] for g in groups)
            stat_same = float(2 * (sep_sum - pooled["loglik_mpf"]))
            stat_common = float(2 * (sep_sum - common["loglik_mpf"]))
            stat_scale = float(2 * (common["loglik_mpf"] - pooled["loglik_mpf"]))
        fsep = math.fsum(sep[g]["loglik"] for g in groups)
        worst["stat_float_vs_mp"] = max(worst.get("stat_float_vs_mp", 0.0),
                                        abs(2 * (fsep - pooled["loglik"]) - stat_same),
                                        abs(2 * (fsep - common["loglik"]) - stat_common),
                                        abs(2 * (common["loglik"] - pooled["loglik"]) - stat_scale))

        def test(stat, df):
            p = float(chi2.sf(stat, df))
            with mpmath.workdps(40):
                pm = mpmath.gammainc(mpf(df) / 2, mpf(stat) / 2, mpmath.inf, regularized=True)
            worst["p_vs_mp"] = max(worst["p_vs_mp"], rel(p, float(pm)))
            return {"statistic": stat, "df": df, "p": p}

        tests = {
            "same_distribution": test(stat_same, (k - 1) * npar),
            "common_shape": test(stat_common, k - 1),
            "same_scale_given_common_shape": test(stat_scale, k - 1),
        }
        for tname, tv in tests.items():
            if tv["statistic"] < -1e-9:
                raise RuntimeError("negative LR statistic %s in %s" % (tname, name))
        cth = common["params"]
        if famname == "weibull":
            cparams = {"shape": cth[0], "scale": {g: cth[1 + j] for j, g in enumerate(groups)}}
        else:
            cparams = {"mu": {g: cth[j] for j, g in enumerate(groups)}, "sigma": cth[k]}
        cases.append({
            "name": name,
            "family": famname,
            "seed": seed,
            "true": truths,
            "groups": groups,
            "pooled_params": dict(zip(fam.params, pooled["params"])),
            "pooled_loglik": pooled["loglik_mp"],
            "separate_params": {g: dict(zip(fam.params, sep[g]["params"])) for g in groups},
            "separate_logliks": {g: sep[g]["loglik_mp"] for g in groups},
            "common_shape_loglik": common["loglik_mp"],
            "common_shape_params": cparams,
            "tests": tests,
        })
        print("  %-32s same %.6g (p %.4g)  common-shape %.6g (p %.4g)  scale|shape %.6g (p %.4g)" % (
            name, tests["same_distribution"]["statistic"], tests["same_distribution"]["p"],
            tests["common_shape"]["statistic"], tests["common_shape"]["p"],
            tests["same_scale_given_common_shape"]["statistic"],
            tests["same_scale_given_common_shape"]["p"]), flush=True)
    out = {
        "generator": GENERATOR,
        "libraries": LIBRARIES,
        "definitions": {
            "rows": ROW_FORMAT + "; exact and right-censored rows only",
            "loglik": LOGLIK_CONVENTION + "; each maximised as in fits_mle.json (scipy route "
                      "checked against a 50-digit mpmath Newton polish, which is written); the "
                      "logliks written are the 50-digit values at the written parameters, rounded "
                      "to double, and the statistics are formed from the 50-digit values",
            "groups": "the data of each group; pooled = all groups' rows together",
            "common_shape": "weibull: one shape, a scale per group; lognormal: one sigma, a mu "
                            "per group",
            "same_distribution": "statistic = 2 (sum of separate logliks - pooled loglik), df = "
                                 "(k - 1) * number of parameters, p = scipy.stats.chi2.sf",
            "common_shape": "statistic = 2 (sum of separate logliks - common-shape loglik), df = "
                            "k - 1",
            "same_scale_given_common_shape": "statistic = 2 (common-shape loglik - pooled "
                                             "loglik), df = k - 1",
        },
        "cases": cases,
    }
    return out, worst


# ---------------------------------------------------------------------------
# 7) lr_bounds.json
# ---------------------------------------------------------------------------


def lr_specs():
    return [
        ("weibull_n10_complete", "weibull", [2.0, 100.0], 10, ("none",), 701, 60.0),
        ("weibull_n20_suspended", "weibull", [1.5, 1000.0], 20, ("random", 0.35), 702, 400.0),
        ("weibull_n30_type1", "weibull", [3.0, 500.0], 30, ("type1", 0.4), 703, 300.0),
        ("lognormal_n15_complete", "lognormal", [4.0, 0.5], 15, ("none",), 704, 40.0),
        ("lognormal_n25_suspended", "lognormal", [6.0, 1.0], 25, ("random", 0.3), 705, 200.0),
    ]


class Profile:
    """The log-likelihood with one quantity fixed, as a function of one
    nuisance coordinate nu (log of the free positive parameter, or mu)."""

    def __init__(self, fam, model, quantity, arg):
        self.fam, self.model, self.quantity, self.arg = fam, model, quantity, arg

    def theta(self, q, nu, lib):
        exp, log = (math.exp, math.log) if lib == "f" else (mpmath.exp, mpmath.log)
        fq = self.fam.name
        Q, a = self.quantity, self.arg
        if fq == "weibull":
            if Q == "param" and a == "shape":
                return [q, exp(nu)]
            if Q == "param" and a == "scale":
                return [exp(nu), q]
            beta = exp(nu)
            if Q == "b_life":
                c = -math.log1p(-a) if lib == "f" else -mpmath.log1p(-mpf(a))
                return [beta, q / c ** (1 / beta)]
            if Q == "reliability":
                return [beta, a / (-log(q)) ** (1 / beta)]
        else:
            if Q == "param" and a == "mu":
                return [q, exp(nu)]
            if Q == "param" and a == "sigma":
                return [nu, q]
            sigma = exp(nu)
            if Q == "b_life":
                zp = float(norm.ppf(a)) if lib == "f" else mpmath.sqrt(2) * mpmath.erfinv(2 * mpf(a) - 1)
                return [log(q) - sigma * zp, sigma]
            if Q == "reliability":
                zr = float(norm.isf(q)) if lib == "f" else mpmath.sqrt(2) * mpmath.erfinv(1 - 2 * q)
                return [log(a) - sigma * zr, sigma]
        raise ValueError((Q, a))

    def nu_of(self, th):
        if self.fam.name == "lognormal" and self.quantity == "param" and self.arg == "sigma":
            return th[0]
        if self.fam.name == "weibull":
            return math.log(th[1]) if (self.quantity == "param" and self.arg == "shape") else math.log(th[0])
        return math.log(th[1])

    def value(self, q, nu0, scale):
        """Float route: maximise over nu with scipy's bounded scalar minimiser
        (bracketed around nu0), then a few Newton steps."""
        f = lambda nu: -self.model.llf(self.theta(q, nu, "f"))
        width = scale
        while True:
            res = optimize.minimize_scalar(f, bounds=(nu0 - width, nu0 + width), method="bounded",
                                           options=dict(xatol=1e-12))
            if abs(res.x - nu0) < 0.9 * width:
                break
            nu0, width = res.x, width * 2
        nu = res.x
        h = 1e-4 * max(1.0, abs(nu)) if not (self.fam.name == "lognormal" and self.arg == "sigma"
                                             and self.quantity == "param") else 1e-4 * scale
        for _ in range(5):
            fp, f0, fm = f(nu + h), f(nu), f(nu - h)
            g = (fp - fm) / (2 * h)
            H = (fp - 2 * f0 + fm) / h ** 2
            if H <= 0:
                break
            step = -g / H
            if f(nu + step) > f0:
                break
            nu += step
        return -f(nu), nu

    def value_mp(self, q, nu0):
        """mpmath route: Newton on the nuisance coordinate at MP_DPS digits."""
        with mpmath.workdps(MP_DPS):
            q = mpf(q) if not isinstance(q, mpmath.mpf) else q
            nu = mpf(nu0)
            f = lambda v: self.model.llm(self.theta(q, v, "m"))
            h = mpf("1e-14")
            for _ in range(60):
                fp, f0, fm = f(nu + h), f(nu), f(nu - h)
                g = (fp - fm) / (2 * h)
                H = (fp - 2 * f0 + fm) / h ** 2
                step = -g / H
                nu += step
                if abs(step) < mpf("1e-30"):
                    break
            return f(nu), nu


def lr_bound_pair(prof, qhat, nuhat, lmax, crit, transform, scale):
    """Both crossings of the profile with lmax - crit/2 (float route), then
    the mpmath refinement.  transform = (to_v, from_v): a monotone map of
    the quantity onto the real line used for bracketing."""
    to_v, from_v = transform
    target = lmax - crit / 2
    vhat = to_v(qhat)
    cache = {}

    def h(v):
        q = from_v(v)
        val, nu = prof.value(q, cache.get("nu", nuhat), scale)
        cache["nu"] = nu
        cache[v] = nu
        return val - target

    out = []
    for direction in (-1, 1):
        cache["nu"] = nuhat
        step = 0.05
        v_in, v_out = vhat, vhat + direction * step
        tries = 0
        while h(v_out) > 0:
            tries += 1
            if tries > 60:
                raise RuntimeError("no crossing of the profile log-likelihood found")
            v_in = v_out
            step *= 1.6
            v_out = vhat + direction * step
        cache["nu"] = nuhat
        v = optimize.brentq(h, min(v_in, v_out), max(v_in, v_out), xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=500)
        out.append((from_v(v), cache.get(v, cache["nu"])))
    return out


def mp_refine_bound(prof, q, nu, lmax_mp, crit, qscale):
    """Solve profile_mp(q) = lmax_mp - crit/2 by the secant method in mpmath,
    starting from the float bound."""
    with mpmath.workdps(MP_DPS):
        target = lmax_mp - mpf(crit) / 2
        q0 = mpf(q)
        q1 = q0 * (1 + mpf("1e-9")) if qscale is None else q0 + mpf("1e-9") * qscale
        f0, nu0 = prof.value_mp(q0, nu)
        f1, nu1 = prof.value_mp(q1, nu0)
        f0 -= target
        f1 -= target
        for _ in range(40):
            if f1 == f0:
                break
            q2 = q1 - f1 * (q1 - q0) / (f1 - f0)
            q0, f0 = q1, f1
            q1 = q2
            val, nu1 = prof.value_mp(q1, nu1)
            f1 = val - target
            if abs(q1 - q0) < mpf("1e-30") * (abs(q1) if qscale is None else qscale):
                break
        return q1


def build_lr_bounds():
    cases = []
    worst = dict(lr_float_vs_mp=0.0, fisher_float_vs_mp=0.0, crit_vs_mp=0.0)
    for name, famname, true, n, cens, seed, t0 in lr_specs():
        fam = FAMILIES[famname]
        s = seed
        while True:
            rows = simulate_simple(fam, true, n, cens, ("sig", 4), np.random.default_rng(s))
            if acceptable(rows, fam) and kind_counts(rows)["exact"] >= 5:
                break
            s += 1000
        model = FamilyModel(fam, rows)
        fit = fit_model(model, list(true))
        th = fit["params"]
        cov = fit["cov"]
        lmax = model.llf(th)
        with mpmath.workdps(MP_DPS):
            lmax_mp = model.llm([mpf(x) for x in th])
        bounds = []
        p_b = 0.1
        quantities = [("b_life", p_b), ("reliability", t0)] + [("param", pn) for pn in fam.params]
        for conf in (0.9, 0.95):
            crit = float(chi2.ppf(conf, 1))
            zc = float(norm.ppf(0.5 + conf / 2))
            with mpmath.workdps(40):
                zm = mpmath.sqrt(2) * mpmath.erfinv(mpf(conf))
                worst["crit_vs_mp"] = max(worst["crit_vs_mp"], rel(crit, float(zm ** 2)),
                                          rel(zc, float(zm)))
            for Q, arg in quantities:
                prof = Profile(fam, model, Q, arg)
                # point estimate, nuisance at the MLE, transform for bracketing
                if famname == "weibull":
                    beta, eta = th
                    if Q == "b_life":
                        qhat = eta * (-math.log1p(-arg)) ** (1 / beta)
                    elif Q == "reliability":
                        qhat = math.exp(-(arg / eta) ** beta)
                    else:
                        qhat = th[fam.params.index(arg)]
                else:
                    mu, sigma = th
                    if Q == "b_life":
                        qhat = math.exp(mu + sigma * float(norm.ppf(arg)))
                    elif Q == "reliability":
                        qhat = float(norm.sf((math.log(arg) - mu) / sigma))
                    else:
                        qhat = th[fam.params.index(arg)]
                nuhat = prof.nu_of(th)
                if Q == "reliability":
                    tr = (lambda q: math.log(-math.log(q)), lambda v: math.exp(-math.exp(v)))
                    qscale = None
                elif Q == "param" and arg == "mu":
                    tr = (lambda q, s=th[1]: q / s, lambda v, s=th[1]: v * s)
                    qscale = th[1]
                else:
                    tr = (math.log, math.exp)
                    qscale = None
                nscale = 0.5 if not (famname == "lognormal" and Q == "param" and arg == "sigma") else th[1]
                pair = lr_bound_pair(prof, qhat, nuhat, lmax, crit, tr, nscale)
                lr = []
                for qf, nuf in pair:
                    # the quantity recomputed from the profile's parameters with scipy,
                    # and the log-likelihood there against the target
                    tq = prof.theta(qf, nuf, "f")
                    dq = fam.sp(tq)
                    if Q == "b_life":
                        q_again = float(dq.ppf(arg))
                    elif Q == "reliability":
                        q_again = float(dq.sf(arg))
                    else:
                        q_again = tq[fam.params.index(arg)]
                    worst["quantity_recomputed"] = max(worst.get("quantity_recomputed", 0.0),
                                                       abs(q_again - qf) / (abs(qf) if qscale is None
                                                                            else qscale))
                    worst["loglik_at_bound_minus_target"] = max(
                        worst.get("loglik_at_bound_minus_target", 0.0),
                        abs(model.llf(tq) - (lmax - crit / 2)))
                    qm = mp_refine_bound(prof, qf, nuf, lmax_mp, crit, qscale)
                    d = abs(qf - float(qm)) / (abs(float(qm)) if qscale is None else qscale)
                    worst["lr_float_vs_mp"] = max(worst["lr_float_vs_mp"], d)
                    lr.append(float(qm))
                lo, hi = sorted(lr)
                entry = {"quantity": Q}
                if Q == "b_life":
                    entry["p"] = arg
                elif Q == "reliability":
                    entry["t"] = arg
                else:
                    entry["param"] = arg
                base = dict(entry)
                bounds.append(dict(base, conf=conf, sides=2, method="lr", estimate=qhat,
                                   lower=lo, upper=hi))
                fl, fh, fl_f, fh_f = fisher_bounds(famname, th, cov, Q, arg, zc)
                worst["fisher_float_vs_mp"] = max(worst["fisher_float_vs_mp"], rel(fl_f, fl),
                                                  rel(fh_f, fh))
                bounds.append(dict(base, conf=conf, sides=2, method="fisher", estimate=qhat,
                                   lower=fl, upper=fh))
        cases.append({"name": name, "family": famname, "seed": s, "true": dict(zip(fam.params, true)),
                      "rows": rows, "mle": dict(zip(fam.params, th)), "loglik": lmax,
                      "cov_params": list(fam.params), "cov": cov, "bounds": bounds})
        print("  %-26s n=%d  %s" % (name, n, " ".join("%s=%.6g" % (p, v) for p, v in zip(fam.params, th))),
              flush=True)
    defs = {
        "rows": ROW_FORMAT + "; exact and right-censored rows only",
        "mle": "maximum-likelihood estimate as in fits_mle.json; cov = inverse of the observed "
               "information (negative Hessian of the log-likelihood in (shape, scale) or (mu, sigma)) "
               "at the MLE, from a 50-digit mpmath finite-difference Hessian",
        "b_life": "t_p with F(t_p) = p; weibull t_p = scale (-ln(1-p))^(1/shape), lognormal t_p = "
                  "exp(mu + sigma Phi^-1(p)); p = 0.1 (B10 life)",
        "reliability": "R(t) = S(t) at the age t",
        "lr": "two-sided likelihood-ratio (profile likelihood) bounds at level conf: the two "
              "crossings of the profile log-likelihood (the log-likelihood maximised over the "
              "other parameter with the quantity fixed) with loglik_max - chi2.ppf(conf, 1)/2. "
              "Float route: scipy minimize_scalar + Newton for the profile, brentq for the "
              "crossing; written: the crossing re-solved at 50 digits with mpmath (secant on the "
              "mpmath profile, nuisance by Newton), chi2.ppf(conf, 1) taken as scipy's double.",
        "fisher": "two-sided Fisher-matrix (Wald) bounds, z = scipy.stats.norm.ppf(0.5 + conf/2), "
                  "cov as above. Positive parameters (shape, scale, sigma): theta exp(-+z se/theta), "
                  "se = sqrt(var theta). Lognormal mu (any sign): mu -+ z se. b_life: delta method "
                  "on ln t_p, var(ln t_p) = g' cov g with g = gradient of ln t_p in the parameters "
                  "(weibull: g = (-ln(-ln(1-p))/shape^2, 1/scale); lognormal: g = (1, Phi^-1(p))); "
                  "bounds t_p exp(-+z sd). reliability: delta method on u = ln(-ln R(t)) "
                  "(weibull: u = shape (ln t - ln scale), g = (ln t - ln scale, -shape/scale); "
                  "lognormal: w = (ln t - mu)/sigma, u = ln(-ln(1 - Phi(w))), du/dw = "
                  "phi(w) / ((1 - Phi(w)) (-ln(1 - Phi(w)))), g = du/dw (-1/sigma, -w/sigma)); "
                  "u -+ z sd, lower R = exp(-exp(u + z sd)), upper R = exp(-exp(u - z sd)). "
                  "Evaluated at 40 digits from the double MLE and cov; a float evaluation agrees.",
        "estimate": "the quantity at the MLE",
    }
    return {"generator": GENERATOR, "libraries": LIBRARIES, "definitions": defs, "cases": cases}, worst


def fisher_bounds(famname, th, cov, Q, arg, z):
    """Returns (lower, upper) at 40 digits and the same in float."""
    res = []
    for lib in ("m", "f"):
        if lib == "m":
            ctx = mpmath.workdps(40)
            ctx.__enter__()
            P = [mpf(x) for x in th]
            C = [[mpf(x) for x in row] for row in cov]
            zz = mpf(z)
            log, exp, sqrt = mpmath.log, mpmath.exp, mpmath.sqrt
            Phi = mpmath.ncdf
            phi = lambda x: mpmath.npdf(x)
            log1p = mpmath.log1p
            ppf = lambda p: mpmath.sqrt(2) * mpmath.erfinv(2 * mpf(p) - 1)
            A = mpf(arg) if not isinstance(arg, str) else arg
        else:
            P, C, zz = list(th), cov, z
            log, exp, sqrt = math.log, math.exp, math.sqrt
            Phi = lambda x: float(norm.cdf(x))
            phi = lambda x: float(norm.pdf(x))
            log1p = math.log1p
            ppf = lambda p: float(norm.ppf(p))
            A = arg
        quad = lambda g: sum(g[i] * C[i][j] * g[j] for i in range(2) for j in range(2))
        if Q == "param":
            i = ["shape", "scale"].index(arg) if famname == "weibull" else ["mu", "sigma"].index(arg)
            v, se = P[i], sqrt(C[i][i])
            if famname == "lognormal" and arg == "mu":
                lo, hi = v - zz * se, v + zz * se
            else:
                lo, hi = v * exp(-zz * se / v), v * exp(zz * se / v)
        elif Q == "b_life":
            if famname == "weibull":
                b, e = P
                c = log(-log1p(-A))
                ltp = log(e) + c / b
                g = [-c / b ** 2, 1 / e]
            else:
                mu, s = P
                zp = ppf(A)
                ltp = mu + s * zp
                g = [1, zp]
            sd = sqrt(quad(g))
            lo, hi = exp(ltp - zz * sd), exp(ltp + zz * sd)
        else:
            if famname == "weibull":
                b, e = P
                u = b * (log(A) - log(e))
                g = [log(A) - log(e), -b / e]
            else:
                mu, s = P
                w = (log(A) - mu) / s
                Sw = 1 - Phi(w)
                u = log(-log(Sw))
                dudw = phi(w) / (Sw * (-log(Sw)))
                g = [dudw * (-1 / s), dudw * (-w / s)]
            sd = sqrt(quad(g))
            lo, hi = exp(-exp(u + zz * sd)), exp(-exp(u - zz * sd))
        res.append((float(lo), float(hi)))
        if lib == "m":
            ctx.__exit__(None, None, None)
    return res[0][0], res[0][1], res[1][0], res[1][1]


# ---------------------------------------------------------------------------


def main():
    t_start = time.time()
    print("lifedata breadth reference generator")
    print("  python %s, numpy %s, scipy %s, lifelines %s, mpmath %s" % (
        LIBRARIES["python"], LIBRARIES["numpy"], LIBRARIES["scipy"], LIBRARIES["lifelines"],
        LIBRARIES["mpmath"]))
    os.makedirs(OUT_DIR, exist_ok=True)
    # Extreme tails legitimately underflow. A fixed numpy error state also keeps
    # the recorded warnings independent of which files are written in one run
    # (lifelines changes the global state when its Kaplan-Meier fitter runs).
    np.seterr(all="ignore")
    only = set(sys.argv[1:])
    want = lambda k: not only or k in only
    summary = {}

    if want("median_ranks"):
        print("median_ranks.json:")
        mr, s = build_median_ranks()
        size = write_json("median_ranks.json", mr)
        print("  %d bytes; betaincinv vs 40-digit mpmath: %.2g; Johnson float vs exact fraction: %.2g"
              % (size, s["betaincinv_vs_mp"], s["johnson_float_vs_fraction"]))
        summary["median_ranks"] = s

    if want("known_shape"):
        print("known_shape.json:")
        ks, s = build_known_shape()
        size = write_json("known_shape.json", ks)
        print("  %d cases, %d bytes; vs 40-digit mpmath: %.2g; r=0 identity: %.2g"
              % (len(ks["cases"]), size, s["vs_mp"], s["r0_identity"]))
        summary["known_shape"] = s

    if want("rank_regression"):
        print("rank_regression.json:")
        rr, s = build_rank_regression()
        size = write_json("rank_regression.json", rr)
        print("  %d cases, %d bytes; numpy vs 40-digit mpmath: params %.2g, r %.2g"
              % (s["n_cases"], size, s["params_np_vs_mp"], s["r_np_vs_mp"]))
        summary["rank_regression"] = s

    if want("kaplan_meier"):
        print("kaplan_meier.json:")
        km, s = build_kaplan_meier()
        size = write_json("kaplan_meier.json", km)
        print("  %d cases, %d bytes; lifelines vs numpy: survival %.2g, at_risk/failures max abs "
              "diff %d, Greenwood sum %.2g, log-log interval %.2g"
              % (len(km["cases"]), size, s["survival"], s["at_risk"], s["greenwood_sum"],
                 s["loglog_own_vs_lifelines"]))
        summary["kaplan_meier"] = s

    if want("lr_bounds"):
        print("lr_bounds.json:")
        lb, s = build_lr_bounds()
        size = write_json("lr_bounds.json", lb)
        print("  %d cases, %d bytes; LR bounds float vs 50-digit: %.2g; Fisher float vs 40-digit: "
              "%.2g; scipy chi2/z vs mpmath %.2g"
              % (len(lb["cases"]), size, s["lr_float_vs_mp"], s["fisher_float_vs_mp"],
                 s["crit_vs_mp"]))
        print("  at the float LR bounds: quantity recomputed with scipy ppf/sf from the profile's "
              "parameters (rel) %.2g; |loglik - target| %.2g"
              % (s["quantity_recomputed"], s["loglik_at_bound_minus_target"]))
        summary["lr_bounds"] = s

    if want("group_tests"):
        print("group_tests.json:")
        gt, s = build_group_tests()
        size = write_json("group_tests.json", gt)
        print("  %d cases, %d bytes; route A vs mp (rel, natural units) %.2g; max |grad|/n %.2g; "
              "p vs mpmath %.2g; statistics from float logliks vs 50-digit (abs) %.2g"
              % (len(gt["cases"]), size, s["routeA"], s["grad_rel"], s["p_vs_mp"],
                 s["stat_float_vs_mp"]))
        summary["group_tests"] = s

    if want("fits_mle"):
        print("fits_mle.json:")
        fm, stats, same = build_fits()
        size = write_json("fits_mle.json", fm)
        print("  %d cases, %d bytes" % (len(fm["cases"]), size))
        agg = lambda key: max((s[key] for _, s in stats if key in s), default=float("nan"))
        print("  route A (scipy float) vs reported (50-digit Newton), max rel diff in natural units: %.2g"
              % agg("routeA"))
        print("  max |grad| (natural-unit scaled) at reported optimum: %.2g; per unit of n: %.2g"
              % (agg("grad"), agg("grad_rel")))
        print("  scipy loglik vs mpmath loglik at optimum (rel): %.2g" % agg("ll_mp_vs_scipy"))
        print("  scipy loglik at route A minus at reported (should be <= ~0): %.2g" % agg("llA_minus"))
        print("  covariance: float central differences vs mpmath (in sd units): %.2g" % agg("cov_check"))
        print("  loglik convention: ours vs scipy _penalized_nnlf(CensoredData) - entry terms (rel): %.2g"
              % agg("nnlf_check"))
        print("  grouped vs expanded identical: %s" % same)
        print("  lifelines log_likelihood_ vs our loglik at lifelines' estimate (rel): %.2g"
              % agg("lifelines_ll_same_point"))
        print("  lifelines parameters vs written (rel, natural units): %.2g; CensoredData fit: %.2g"
              % (agg("lifelines"), agg("cd")))
        for n_, s in stats:
            extra = ""
            if "lifelines" in s:
                extra += "  lifelines %.1e (ll %.1e)" % (s["lifelines"], s["lifelines_ll"])
            if "cd" in s:
                extra += "  censoreddata %.1e (ll short by %.1e)" % (s["cd"], s["cd_ll"])
            print("    %-34s%s" % (n_, extra))
        summary["fits_mle"] = stats
    print("done in %.0f s" % (time.time() - t_start))


if __name__ == "__main__":
    main()

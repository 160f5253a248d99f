//! Shared numerics for the families: adaptive quadrature, the standard
//! normal in both tails, the regularised incomplete gamma function in logs,
//! and a cumulative-hazard increment that does not cancel.
//!
//! Each piece is hand-written only where the project's crates fall short, and
//! says why beside it. statrs still supplies ln Gamma (small arguments) and
//! the normal quantile.

use statrs::function::gamma::ln_gamma;
use std::f64::consts::PI;

// ---------------------------------------------------------------------------
// Adaptive Gauss-Kronrod quadrature
// ---------------------------------------------------------------------------

// Hand-written: none of the project's crates (statrs, argmin) integrates a
// function numerically, and the log-logistic has no elementary integral of its
// reliability. The rule is the classical 7-point Gauss / 15-point Kronrod pair
// on [-1, 1]. The nodes and weights below were written from memory (they are
// the values tabulated with QUADPACK); the unit tests at the end of this file
// check them by exactness: the Kronrod rule integrates every polynomial of
// degree <= 22 and the Gauss rule every polynomial of degree <= 13, which
// fixes all of them.

/// Kronrod abscissae (positive half, descending; 0 last). Odd indices are
/// the Gauss nodes.
const XGK: [f64; 8] = [
    0.991_455_371_120_812_6,
    0.949_107_912_342_758_5,
    0.864_864_423_359_769_1,
    0.741_531_185_599_394_4,
    0.586_087_235_467_691_1,
    0.405_845_151_377_397_2,
    0.207_784_955_007_898_5,
    0.0,
];
/// Kronrod weights, matching [`XGK`].
const WGK: [f64; 8] = [
    0.022_935_322_010_529_225,
    0.063_092_092_629_978_55,
    0.104_790_010_322_250_18,
    0.140_653_259_715_525_92,
    0.169_004_726_639_267_9,
    0.190_350_578_064_785_4,
    0.204_432_940_075_298_9,
    0.209_482_141_084_727_83,
];
/// Gauss weights of the nodes XGK[1], XGK[3], XGK[5], XGK[7].
const WG: [f64; 4] = [
    0.129_484_966_168_869_7,
    0.279_705_391_489_276_7,
    0.381_830_050_505_118_9,
    0.417_959_183_673_469_4,
];

/// Most interval bisections one integral may use.
const MAX_SPLITS: usize = 2000;

/// One 15-point Kronrod estimate on [a, b] and |Kronrod - Gauss| as its error.
fn gk15<F: Fn(f64) -> f64>(f: &F, a: f64, b: f64) -> (f64, f64) {
    let c = 0.5 * (a + b);
    let h = 0.5 * (b - a);
    let fc = f(c);
    let mut kronrod = WGK[7] * fc;
    let mut gauss = WG[3] * fc;
    for j in 0..7 {
        let dx = h * XGK[j];
        let pair = f(c - dx) + f(c + dx);
        kronrod += WGK[j] * pair;
        if j % 2 == 1 {
            gauss += WG[j / 2] * pair;
        }
    }
    (kronrod * h, ((kronrod - gauss) * h).abs())
}

/// Integral of `f` over the finite interval [a, b] by globally adaptive
/// Gauss-Kronrod quadrature: the piece with the largest error estimate is
/// halved until the summed estimate is below `rel_tol` times the integral.
/// |Kronrod - Gauss| overstates the error of the Kronrod value for smooth
/// integrands, so the result is usually far better than `rel_tol`.
pub fn integrate<F: Fn(f64) -> f64>(f: F, a: f64, b: f64, rel_tol: f64) -> f64 {
    integrate_with_error(f, a, b, rel_tol).0
}

/// [`integrate`] with its summed error estimate. Splitting stops early when
/// 100 splits in a row have not halved the error estimate (an integrand too
/// rough or too noisy for the tolerance): measured while fuzzing, a gamma
/// hazard of huge shape kept an error of 1e-3 after all 2000 splits, and
/// such calls made one fit take 77 s.
pub fn integrate_with_error<F: Fn(f64) -> f64>(f: F, a: f64, b: f64, rel_tol: f64) -> (f64, f64) {
    if a == b {
        return (0.0, 0.0);
    }
    let (v, e) = gk15(&f, a, b);
    let mut pieces = vec![(a, b, v, e)];
    let mut best = e;
    let mut stalled = 0;
    for _ in 0..MAX_SPLITS {
        let total: f64 = pieces.iter().map(|p| p.2).sum();
        let err: f64 = pieces.iter().map(|p| p.3).sum();
        // Also stops on NaN, which then shows in the result.
        if !(err > rel_tol * total.abs() && err > f64::MIN_POSITIVE) {
            break;
        }
        if err < 0.5 * best {
            best = err;
            stalled = 0;
        } else {
            stalled += 1;
            if stalled > 100 {
                break;
            }
        }
        let worst = (0..pieces.len())
            .max_by(|&i, &j| pieces[i].3.total_cmp(&pieces[j].3))
            .unwrap_or(0);
        let (lo, hi, _, _) = pieces[worst];
        let mid = 0.5 * (lo + hi);
        if !(lo < mid && mid < hi) {
            break; // no room left between two doubles
        }
        let (vl, el) = gk15(&f, lo, mid);
        let (vr, er) = gk15(&f, mid, hi);
        pieces[worst] = (lo, mid, vl, el);
        pieces.push((mid, hi, vr, er));
    }
    (
        pieces.iter().map(|p| p.2).sum(),
        pieces.iter().map(|p| p.3).sum(),
    )
}

/// A difference `hi - lo` of two values known to about machine precision
/// loses digits when it is small against them; beyond this ratio (two
/// digits lost) the families integrate instead.
pub const CANCELLATION: f64 = 100.0;

/// H(age + horizon) - H(age), integrating the hazard over the horizon where
/// the plain difference would cancel (short horizons, or ages far in the
/// upper tail where H is large). The integral runs over the offset s in
/// [0, horizon] of h(age + s), so the horizon enters exactly rather than as
/// the rounded difference (age + horizon) - age. Measured need, conditional
/// failure probabilities of `fixtures/reference/families.json` (horizons
/// down to 1e-6 of the median life) against 50-digit values: the plain
/// difference is off by up to 4.1e-7 (lognormal), 4.4e-10 (normal) and
/// 9.0e-3 (gamma, shape 1000); this form by at most 3.2e-14.
pub fn cum_hazard_increment<H, Z>(cum_hazard: H, hazard: Z, age: f64, horizon: f64) -> f64
where
    H: Fn(f64) -> f64,
    Z: Fn(f64) -> f64,
{
    let (h1, h2) = (cum_hazard(age), cum_hazard(age + horizon));
    let diff = h2 - h1;
    if diff.is_finite() && diff > 0.0 && h1.abs() + h2.abs() > CANCELLATION * diff {
        let (v, err) = integrate_with_error(|s| hazard(age + s), 0.0, horizon, 1e-15);
        // The difference is good to a few ulps of H; keep the integral only
        // when its own error estimate is smaller than that.
        if err <= 4.0 * f64::EPSILON * (h1.abs() + h2.abs()) {
            v
        } else {
            diff
        }
    } else {
        diff
    }
}

// ---------------------------------------------------------------------------
// Standard normal
// ---------------------------------------------------------------------------

// Hand-written on top of the incomplete gamma function below because statrs'
// erfc (0.18) is only good to ~1e-10 relative for arguments >= 0.5,
// measured against 50-digit mpmath: 9.3e-11 at 0.6, 4.2e-11 at 2, 7.9e-11 at
// 3.36, 2.5e-11 at 10. The cause: its rational approximations are fitted
// around single-precision constants (0.3440242112 and so on), which statrs
// writes as the ten-digit decimals; the difference between the two, times
// e^-x^2 / x, matches the measured errors to two digits. That error reaches every normal and lognormal
// probability, and `dist::ln_norm_sf`, which is built on it. Here
// 1 - Phi(z) = Q(1/2, z^2/2) / 2 for z >= 0 and Phi(z) = Q(1/2, z^2/2) / 2
// for z <= 0, with Q the regularised upper incomplete gamma function (a
// rearrangement of erfc(x) = Q(1/2, x^2)), formed in logs so that nothing
// underflows. statrs' inverse (erfc_inv, behind `dist::norm_ppf`) is not
// affected: measured within 2.3e-16 of mpmath from p = 1e-300 to 1 - 1e-15.

/// ln of the smaller tail of the standard normal, Phi(-|z|) = Q(1/2, z^2/2) / 2.
fn ln_norm_small_tail(z: f64) -> f64 {
    inc_gamma(0.5, 0.5 * z * z).ln_q - std::f64::consts::LN_2
}

/// ln(1 - Phi(z)) with full relative accuracy in both tails.
///
/// Written next to `dist::ln_norm_sf` because that one (statrs' erfc, the
/// log of a number near 1 below the median, a four-term asymptotic series
/// from z = 30) puts the cdf and sf of the normal and lognormal cases in
/// `fixtures/reference/families.json` off by up to 5.0e-5 relative (the
/// lower-tail cdf); this one by at most 2.7e-13.
pub fn ln_norm_sf(z: f64) -> f64 {
    if z.is_nan() {
        f64::NAN
    } else if z >= 0.0 {
        ln_norm_small_tail(z)
    } else {
        (-ln_norm_small_tail(z).exp()).ln_1p()
    }
}

/// ln Phi(z) with full relative accuracy in both tails.
pub fn ln_norm_cdf(z: f64) -> f64 {
    ln_norm_sf(-z)
}

/// Standard normal survival function 1 - Phi(z).
pub fn norm_sf(z: f64) -> f64 {
    ln_norm_sf(z).exp()
}

/// Standard normal cumulative distribution Phi(z).
pub fn norm_cdf(z: f64) -> f64 {
    ln_norm_cdf(z).exp()
}

/// Standard normal quantile Phi^-1(p): `dist::norm_ppf` (statrs), but NaN
/// instead of statrs' panic when p is outside [0, 1] or NaN.
pub fn norm_quantile(p: f64) -> f64 {
    if (0.0..=1.0).contains(&p) {
        super::norm_ppf(p)
    } else {
        f64::NAN
    }
}

/// Standard normal density phi(z).
pub fn norm_pdf(z: f64) -> f64 {
    (-0.5 * z * z).exp() / (2.0 * PI).sqrt()
}

/// Standard normal hazard phi(z) / (1 - Phi(z)) without forming the two
/// (underflowing) tails: for z >= 1 it is 2/z * [x^(1/2) e^-x / Gamma(1/2) / Q(1/2, x)]
/// with x = z^2/2, the bracket straight from the continued fraction; beyond
/// z = 1e8 it is z to double precision (z + 1/z - ...).
pub fn norm_hazard(z: f64) -> f64 {
    if z > 1e8 {
        z
    } else if z >= 1.0 {
        2.0 * inc_gamma(0.5, 0.5 * z * z).ln_prefix_over_q.exp() / z
    } else {
        norm_pdf(z) / norm_sf(z)
    }
}

// ---------------------------------------------------------------------------
// Regularised incomplete gamma function, in logs
// ---------------------------------------------------------------------------

// Hand-written because statrs' checked_gamma_lr / checked_gamma_ur fall short
// of 1e-12 where the gamma family needs them, measured against 50-digit
// mpmath: (1) their prefix x^a e^-x / Gamma(a) uses ln_gamma, whose absolute
// error (5e-13 at a = 1000, 1e-13 at a = 100) becomes the relative error of
// P and Q (9.7e-13 for P(1000, 1000)); (2) Q returns 0 once the prefix drops
// below ~1e-308, so ln R(t) and the hazard f/R are lost in the upper tail,
// where the likelihood of a suspension still needs them; (3) the hazard in
// the upper tail needs the continued fraction itself, not a ratio of two
// underflowing numbers. Below: the prefix via Stirling's series for a >= 10,
// the power series for P and the continued fraction for Q, all in logs.

/// ln(1 + d) - d without cancellation for small |d|.
fn ln_1p_minus(d: f64) -> f64 {
    if d.abs() < 0.5 {
        // ln(1 + d) = 2 atanh(s), s = d / (2 + d); 2s - d = -s d.
        let s = d / (2.0 + d);
        let s2 = s * s;
        let (mut power, mut k, mut sum) = (s * s2, 3.0, 0.0f64);
        loop {
            let term = power / k;
            sum += term;
            if term.abs() <= 1e-17 * sum.abs() {
                break;
            }
            power *= s2;
            k += 2.0;
        }
        2.0 * sum - s * d
    } else {
        d.ln_1p() - d
    }
}

/// ln Gamma(a) - [(a - 1/2) ln a - a + ln(2 pi)/2] for a >= 10: Stirling's
/// series, sum of B_2n / (2n (2n - 1) a^(2n-1)) with the Bernoulli numbers
/// B_2 .. B_16; the first omitted term is below 2e-18 at a = 10.
fn stirling_error(a: f64) -> f64 {
    const C: [f64; 8] = [
        1.0 / 12.0,
        -1.0 / 360.0,
        1.0 / 1260.0,
        -1.0 / 1680.0,
        1.0 / 1188.0,
        -691.0 / 360_360.0,
        1.0 / 156.0,
        -3617.0 / 122_400.0,
    ];
    let inv2 = 1.0 / (a * a);
    C.iter().rev().fold(0.0, |acc, c| acc * inv2 + c) / a
}

/// ln(x^a e^-x / Gamma(a)), the factor shared by the gamma density and both
/// incomplete gamma functions, accurate also for large `a` (where a ln x, x
/// and ln Gamma(a) are each large and nearly cancel).
pub fn ln_gamma_prefix(a: f64, x: f64) -> f64 {
    if x.is_nan() || a.is_nan() {
        f64::NAN
    } else if x <= 0.0 || x == f64::INFINITY {
        f64::NEG_INFINITY
    } else if a < 10.0 {
        a * x.ln() - x - ln_gamma(a)
    } else {
        a * ln_1p_minus((x - a) / a) + 0.5 * (a / (2.0 * PI)).ln() - stirling_error(a)
    }
}

/// The regularised incomplete gamma functions at one point, in logs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IncGamma {
    /// ln P(a, x), P the regularised lower incomplete gamma function.
    pub ln_p: f64,
    /// ln Q(a, x) = ln(1 - P(a, x)).
    pub ln_q: f64,
    /// ln(x^a e^-x / Gamma(a)), see [`ln_gamma_prefix`].
    pub ln_prefix: f64,
    /// ln(x^a e^-x / Gamma(a) / Q(a, x)): the standard gamma hazard times x,
    /// in logs, without forming the (possibly underflowing) Q.
    pub ln_prefix_over_q: f64,
}

/// Most terms of the series or the continued fraction. Near x = a the series
/// needs about 9 sqrt(a) terms, so this serves shapes up to about 1e8
/// (measured: P(1e8, 1e8) right, P(1e9, 1e9) truncated); beyond, the result
/// is NaN rather than a wrong number.
const MAX_TERMS: usize = 100_000;

/// All four fields NaN: arguments out of range, or a sum that did not converge.
const INC_GAMMA_NAN: IncGamma = IncGamma {
    ln_p: f64::NAN,
    ln_q: f64::NAN,
    ln_prefix: f64::NAN,
    ln_prefix_over_q: f64::NAN,
};

/// P(a, x) and Q(a, x) in logs for a > 0, x >= 0: the power series
/// P = x^a e^-x / Gamma(a + 1) * sum_n x^n / ((a+1)...(a+n)) where x < a + 1,
/// else the continued fraction (modified Lentz), which converges slowly
/// below that (84 terms at a = 1/2, x = 1, still 2.5e-15 short)
/// Q = x^a e^-x / Gamma(a) * 1/(x+1-a- 1(1-a)/(x+3-a- 2(2-a)/(x+5-a- ...))).
pub fn inc_gamma(a: f64, x: f64) -> IncGamma {
    if a.is_nan() || x.is_nan() || a <= 0.0 || a == f64::INFINITY {
        return INC_GAMMA_NAN;
    }
    if x <= 0.0 {
        return IncGamma {
            ln_p: f64::NEG_INFINITY,
            ln_q: 0.0,
            ln_prefix: f64::NEG_INFINITY,
            ln_prefix_over_q: f64::NEG_INFINITY,
        };
    }
    if x == f64::INFINITY {
        return IncGamma {
            ln_p: 0.0,
            ln_q: f64::NEG_INFINITY,
            ln_prefix: f64::NEG_INFINITY,
            ln_prefix_over_q: f64::INFINITY,
        };
    }
    let ln_prefix = ln_gamma_prefix(a, x);
    if x < a + 1.0 {
        let (mut term, mut sum, mut ap) = (1.0f64, 1.0f64, a);
        let mut converged = false;
        for _ in 0..MAX_TERMS {
            ap += 1.0;
            term *= x / ap;
            sum += term;
            if term <= 1e-17 * sum {
                converged = true;
                break;
            }
        }
        if !converged {
            return INC_GAMMA_NAN;
        }
        let ln_p = ln_prefix - a.ln() + sum.ln();
        let ln_q = (-ln_p.exp()).ln_1p();
        IncGamma {
            ln_p,
            ln_q,
            ln_prefix,
            ln_prefix_over_q: ln_prefix - ln_q,
        }
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        let mut converged = false;
        for i in 1..MAX_TERMS {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let delta = d * c;
            h *= delta;
            if (delta - 1.0).abs() <= f64::EPSILON {
                converged = true;
                break;
            }
        }
        if !converged {
            return INC_GAMMA_NAN;
        }
        let ln_q = ln_prefix + h.ln();
        IncGamma {
            ln_p: (-ln_q.exp()).ln_1p(),
            ln_q,
            ln_prefix,
            ln_prefix_over_q: -h.ln(),
        }
    }
}

/// The p-quantile of the standard gamma distribution (shape `a`, scale 1).
///
/// Hand-written because statrs' `Gamma::inverse_cdf` (0.18) is not usable
/// here, measured against 40-digit mpmath: NaN for shape 0.05 at every
/// p <= 0.5, for shape 0.5 at p <= 0.01 and for shape 1 at p <= 1e-9; 4.7e-3
/// relative off for shape 3 at p = 1e-9; 4.1e-12 off at p = 0.999999 and
/// 1e-3 at p = 1 - 1e-15 (Newton steps on the plain cdf, whose complement
/// has lost its digits there). Here: Newton's method in u = ln x on ln P
/// (p <= 1/2) or ln Q (p > 1/2), whose derivatives are x f / P and -x f / Q,
/// with a bracket that falls back to bisection if a step leaves it.
pub fn gamma_quantile(a: f64, p: f64) -> f64 {
    if p.is_nan() || a.is_nan() || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    if p == 0.0 {
        return 0.0;
    }
    if p == 1.0 {
        return f64::INFINITY;
    }
    let lower = p <= 0.5;
    let target = if lower { p.ln() } else { (-p).ln_1p() };
    // g(u) increases in u; g' > 0.
    let g = |u: f64| -> (f64, f64) {
        let ig = inc_gamma(a, u.exp());
        if lower {
            (ig.ln_p - target, (ig.ln_prefix - ig.ln_p).exp())
        } else {
            (target - ig.ln_q, ig.ln_prefix_over_q.exp())
        }
    };
    // Start: Wilson-Hilferty for a >= 1 where it is positive, else the
    // leading term of the series, P ~ x^a / Gamma(a + 1), or for the upper
    // tail of small shapes Q ~ e^-x.
    let z = norm_quantile(p);
    let wh = a * (1.0 - 1.0 / (9.0 * a) + z / (3.0 * a.sqrt())).powi(3);
    let mut u = if a >= 1.0 && wh > 0.0 {
        wh.ln()
    } else if lower {
        (p.ln() + ln_gamma(a + 1.0)) / a
    } else {
        (-target).max(1.0).ln()
    };
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    let mut last_step = f64::INFINITY;
    for _ in 0..200 {
        let (gu, slope) = g(u);
        if gu.is_nan() {
            return f64::NAN; // shape beyond the incomplete gamma's reach
        }
        if gu == 0.0 {
            break;
        }
        if gu < 0.0 {
            lo = u;
        } else {
            hi = u;
        }
        let mut next = u - gu / slope;
        if next == u {
            break; // converged to the last bit
        }
        if !(next.is_finite() && next > lo && next < hi) {
            next = if lo.is_finite() && hi.is_finite() {
                0.5 * (lo + hi)
            } else if lo.is_finite() {
                lo + 10.0
            } else {
                hi - 10.0
            };
        }
        let step = next - u;
        u = next;
        // Newton converges quadratically: once a step is below 1e-9 the next
        // one is below ~1e-17, so stop after it.
        if last_step.abs() < 1e-9 || step == 0.0 {
            break;
        }
        last_step = step;
    }
    u.exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An integrand too noisy for the tolerance stops splitting once the
    /// error estimate stalls, long before the split limit, and reports an
    /// error estimate that says so; a smooth one still converges.
    #[test]
    fn integration_stops_when_the_error_stalls() {
        let calls = std::cell::Cell::new(0u32);
        let noisy = |x: f64| {
            calls.set(calls.get() + 1);
            // Deterministic noise of relative size 1e-6 on a constant.
            let h = (x * 1e6).to_bits().wrapping_mul(0x9E37_79B9_7F4A_7C15);
            1.0 + 1e-6 * ((h >> 11) as f64 / (1u64 << 53) as f64 - 0.5)
        };
        let (v, err) = integrate_with_error(noisy, 0.0, 45.0, 1e-15);
        assert!((v - 45.0).abs() < 45.0 * 1e-6, "{v}");
        assert!(err > 1e-15 * 45.0, "{err}");
        assert!(calls.get() < 10_000, "{} evaluations", calls.get());
        let (v, err) = integrate_with_error(|x: f64| x.exp(), 0.0, 3.0, 1e-15);
        assert!((v - 3f64.exp_m1()).abs() <= 1e-15 * v, "{v}");
        assert!(err <= 1e-15 * v, "{err}");
    }

    /// Exact integral of x^k over [-1, 1].
    fn moment(k: i32) -> f64 {
        if k % 2 == 1 {
            0.0
        } else {
            2.0 / (k as f64 + 1.0)
        }
    }

    /// The Kronrod rule is exact to degree 22 and the Gauss rule to degree
    /// 13; both fail at the next even degree (which shows the test can fail).
    #[test]
    fn gauss_kronrod_constants_are_exact_to_their_degree() {
        for k in 0..=24 {
            let mut kr = WGK[7] * 0f64.powi(k);
            let mut ga = WG[3] * 0f64.powi(k);
            for j in 0..7 {
                let pair = XGK[j].powi(k) + (-XGK[j]).powi(k);
                kr += WGK[j] * pair;
                if j % 2 == 1 {
                    ga += WG[j / 2] * pair;
                }
            }
            let (ek, eg) = ((kr - moment(k)).abs(), (ga - moment(k)).abs());
            if k <= 22 {
                assert!(ek < 1e-15, "Kronrod degree {k}: error {ek:e}");
            } else if k == 24 {
                assert!(ek > 1e-12, "Kronrod unexpectedly exact at degree {k}");
            }
            if k <= 13 {
                assert!(eg < 1e-15, "Gauss degree {k}: error {eg:e}");
            } else if k == 14 {
                assert!(eg > 1e-6, "Gauss unexpectedly exact at degree {k}");
            }
        }
    }

    /// Closed-form integrals: a smooth one, a peaked one and one with an
    /// integrable endpoint singularity (adaptivity at work).
    #[test]
    fn adaptive_quadrature_meets_closed_forms() {
        type Case = (fn(f64) -> f64, f64, f64, f64);
        let cases: [Case; 3] = [
            (f64::exp, 0.0, 1.0, std::f64::consts::E - 1.0),
            (
                |x| 1.0 / (1e-4 + x * x),
                -1.0,
                1.0,
                2.0 * 100.0 * (100.0f64).atan(),
            ),
            (f64::sqrt, 0.0, 1.0, 2.0 / 3.0),
        ];
        for (f, a, b, want) in cases {
            let got = integrate(f, a, b, 1e-14);
            assert!(((got - want) / want).abs() < 1e-13, "{got} vs {want}");
        }
    }

    /// Stirling's branch of the gamma prefix joins the direct form at a = 10
    /// (statrs' ln_gamma is good to ~1e-14 absolute there).
    #[test]
    fn gamma_prefix_branches_agree() {
        for x in [0.5, 5.0, 10.0, 20.0, 80.0] {
            let direct = 10.0 * f64::ln(x) - x - ln_gamma(10.0);
            let stirling = ln_gamma_prefix(10.0, x);
            assert!((direct - stirling).abs() < 1e-13, "x {x}");
        }
    }

    /// P + Q = 1 on both sides of the series / continued-fraction switch, the
    /// quantile inverts P, and a shape beyond reach gives NaN, not a number.
    #[test]
    fn incomplete_gamma_is_consistent() {
        for a in [0.05, 0.7, 1.0, 3.0, 12.0, 400.0] {
            for x in [1e-3, 0.5, 0.999, 1.0, 2.0, a * 0.9, a, a * 1.1, a + 30.0] {
                let ig = inc_gamma(a, x);
                let sum = ig.ln_p.exp() + ig.ln_q.exp();
                assert!((sum - 1.0).abs() < 1e-14, "a {a} x {x}: P + Q = {sum}");
            }
            for p in [1e-12, 0.3, 0.5, 0.7, 1.0 - 1e-9] {
                let x = gamma_quantile(a, p);
                let ig = inc_gamma(a, x);
                let back = if p <= 0.5 {
                    ig.ln_p.exp()
                } else {
                    -ig.ln_q.exp_m1()
                };
                assert!(((back - p) / p).abs() < 1e-12, "a {a} p {p}: {back}");
            }
        }
        assert!(inc_gamma(1e9, 1e9).ln_p.is_nan());
        assert!(gamma_quantile(1e9, 0.5).is_nan());
        assert!(!inc_gamma(1e8, 1e8).ln_p.is_nan());
    }
}

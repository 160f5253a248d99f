//! Maximum likelihood for the two-parameter Weibull with right censoring.
//!
//! For a fixed shape beta the scale has the closed form
//! eta(beta) = (sum w t^beta / r)^(1/beta), leaving one equation in beta
//! (the profile score), which is strictly increasing in beta:
//!
//!   g(beta) = sum w t^beta ln t / sum w t^beta - 1/beta - mean_failures(ln t) = 0
//!
//! We solve it by Halley's method guarded by a bracket. This is hand-written
//! rather than taken from argmin's root finders for a measured reason: g, g'
//! and g'' come out of the same single pass over the distinct ages, and the
//! solver reaches full double precision in two to three such passes
//! from the start value below (the scale, log-likelihood and information
//! follow from the last pass), where a derivative-free bracketing solver
//! needs three to four times as many passes (each pass is O(distinct ages),
//! and fitting speed against SQLite's own aggregates is a project target).
//! Ages are shifted by the largest log-age so every t^beta lies in [0, 1]:
//! no overflow for shapes up to 20 and ages up to 1e9 and beyond.

use crate::error::{show_number, LifeError, LifeResult};
use crate::sample::AgeGroup;

/// A Weibull maximum likelihood estimate with its observed-information covariance.
#[derive(Debug, Clone, PartialEq)]
pub struct WeibullEstimate {
    /// Shape beta.
    pub shape: f64,
    /// Scale eta.
    pub scale: f64,
    /// Covariance of (shape, scale): the inverse of the observed information.
    pub cov: [[f64; 2]; 2],
    /// Passes over the distinct ages (for tests and benchmarks).
    pub iterations: u32,
    /// Log-likelihood at the estimate.
    pub loglik: f64,
}

/// Upper limit on the shape the solver will report; beyond it the data do
/// not determine a finite shape in any practical sense.
const MAX_SHAPE: f64 = 1e6;
/// Lower limit on the shape the solver searches.
const MIN_SHAPE: f64 = 1e-8;

/// Precomputed per-group quantities: weight, failures and shifted log-age.
struct Prepared {
    /// (total weight, shifted log-age u = ln t - c) for ages > 0.
    terms: Vec<(f64, f64)>,
    /// Shift c = ln(largest age).
    shift: f64,
    /// Smallest shifted log-age (the largest is 0).
    u_min: f64,
    /// Number of failures r.
    failures: f64,
    /// Mean shifted log-age of the failures.
    mean_fail_u: f64,
    /// Standard deviation of failure log-ages (for the start value).
    sd_fail_u: f64,
}

fn prepare(groups: &[AgeGroup]) -> LifeResult<Prepared> {
    let failures: f64 = groups.iter().map(|g| g.failures).sum();
    if failures == 0.0 {
        let n: f64 = groups.iter().map(|g| g.suspensions).sum();
        return Err(LifeError::NotEstimable(format!(
            "no failures among {n} lives: a Weibull fit needs at least one failure"
        )));
    }
    if let Some(g) = groups.iter().find(|g| g.failures > 0.0 && g.age == 0.0) {
        return Err(LifeError::NotEstimable(format!(
            "a Weibull fit needs failure ages > 0, got {} failure(s) at age 0",
            g.failures
        )));
    }
    let t_max = groups.iter().map(|g| g.age).fold(0.0, f64::max);
    let shift = t_max.ln();
    let mut terms = Vec::with_capacity(groups.len());
    let (mut sum_fu, mut sum_fu2) = (0.0, 0.0);
    let mut u_min = 0.0f64;
    let mut oldest_failure_only = true;
    for g in groups.iter().filter(|g| g.age > 0.0) {
        let u = g.age.ln() - shift;
        u_min = u_min.min(u);
        terms.push((g.failures + g.suspensions, u));
        if g.failures > 0.0 {
            sum_fu += g.failures * u;
            sum_fu2 += g.failures * u * u;
            if g.age < t_max {
                oldest_failure_only = false;
            }
        }
    }
    if oldest_failure_only {
        return Err(LifeError::NotEstimable(format!(
            "all {failures} failure(s) are at the largest age {} with no \
             younger failure, so nothing pins the Weibull shape; \
             more failures (or a known shape) are needed",
            show_number(t_max)
        )));
    }
    let mean_fail_u = sum_fu / failures;
    let var = (sum_fu2 / failures - mean_fail_u * mean_fail_u).max(0.0);
    Ok(Prepared {
        terms,
        shift,
        u_min,
        failures,
        mean_fail_u,
        sd_fail_u: var.sqrt(),
    })
}

/// One pass over the distinct ages at shape beta: the total weight
/// s0 = sum w x with x = exp(beta u), and the first three moments of u
/// under the weights w x, summed about a centre m close to their mean so
/// that the central moments lose no digits to cancellation.
struct Pass {
    s0: f64,
    /// Weighted mean of u.
    mean: f64,
    /// Weighted variance of u.
    var: f64,
    /// Weighted third central moment of u.
    mu3: f64,
}

fn pass(p: &Prepared, beta: f64, m: f64) -> Pass {
    let (mut s0, mut c1, mut c2, mut c3) = (0.0, 0.0, 0.0, 0.0);
    for &(w, u) in &p.terms {
        let wx = w * (beta * u).exp();
        let d = u - m;
        let wxd = wx * d;
        s0 += wx;
        c1 += wxd;
        c2 += wxd * d;
        c3 += wxd * d * d;
    }
    let d = c1 / s0;
    Pass {
        s0,
        mean: m + d,
        var: (c2 / s0 - d * d).max(0.0),
        mu3: c3 / s0 - 3.0 * d * (c2 / s0) + 2.0 * d * d * d,
    }
}

/// Fits a two-parameter Weibull by maximum likelihood to merged, right-censored data.
///
/// The profile score g(beta) = mean(u) - 1/beta - mean_failures(u), with
/// mean(u) weighted by w exp(beta u), has g' = var(u) + 1/beta^2 and
/// g'' = mu3(u) - 2/beta^3, all from one pass; Halley's step (cubic
/// convergence) inside a bracket kept from the sign of g, with Newton and
/// log-scale bisection as fallbacks. Once the step is tiny, the sums at the
/// root follow from the last pass by the cumulant series
/// ln s0(beta + d) = ln s0(beta) + d mean + d^2 var / 2 + d^3 mu3 / 6, so
/// no pass is spent only on confirming convergence, and the scale, the
/// log-likelihood and the observed information come from the same sums.
/// (Measured on the benchmark's 1 000-life groups: 2.5 passes per fit
/// against 6.6 for Newton with separate confirming and information passes.)
pub fn fit(groups: &[AgeGroup]) -> LifeResult<WeibullEstimate> {
    let p = prepare(groups)?;
    // Start: for complete Weibull data sd(ln t) = pi / (beta sqrt 6).
    let mut beta = if p.sd_fail_u > 0.0 {
        (std::f64::consts::PI / (6f64.sqrt() * p.sd_fail_u)).clamp(0.05, 50.0)
    } else {
        1.0
    };
    let (mut lo, mut hi) = (MIN_SHAPE, MAX_SHAPE);
    let mut iterations = 0u32;
    let (beta, ln_s0, mean, var) = loop {
        iterations += 1;
        // At the root mean(u) = mean_failures(u) + 1/beta: a centre close
        // to the mean the pass will find.
        let m = p.mean_fail_u + 1.0 / beta;
        let ps = pass(&p, beta, m);
        let g = ps.mean - 1.0 / beta - p.mean_fail_u;
        let dg = ps.var + 1.0 / (beta * beta);
        let d2g = ps.mu3 - 2.0 / (beta * beta * beta);
        if g < 0.0 {
            lo = lo.max(beta);
        } else if g > 0.0 {
            hi = hi.min(beta);
        }
        let inside = |b: f64| b.is_finite() && b > lo && b < hi;
        let halley = beta - 2.0 * g * dg / (2.0 * dg * dg - g * d2g);
        let newton = beta - g / dg;
        let (next, smooth) = if g == 0.0 {
            (beta, true)
        } else if inside(halley) {
            (halley, true)
        } else if inside(newton) {
            (newton, true)
        } else if hi >= MAX_SHAPE {
            ((beta * 4.0).min(MAX_SHAPE), false) // still looking for the upper end
        } else {
            ((lo * hi).sqrt(), false) // bisection on the log scale
        };
        let step = next - beta;
        // Largest |u - m| bounds every cumulant: the series' first omitted
        // term, step^4 * kappa_4 / 24, stays below 1e-24 relative.
        let spread = (m - p.u_min).abs().max(m.abs()).max(1e-300);
        if smooth && (step * spread).abs() <= 1e-6 {
            let ln_s0 = ps.s0.ln() + step * (ps.mean + step * (ps.var / 2.0 + step * ps.mu3 / 6.0));
            let mean = ps.mean + step * (ps.var + step * ps.mu3 / 2.0);
            let var = ps.var + step * ps.mu3;
            break (next, ln_s0, mean, var);
        }
        if hi - lo <= 4.0 * f64::EPSILON * beta {
            break (beta, ps.s0.ln(), ps.mean, ps.var);
        }
        beta = next;
        if iterations > 500 || lo >= MAX_SHAPE || beta >= MAX_SHAPE {
            return Err(LifeError::NoConvergence(format!(
                "the Weibull shape did not settle (bracket {} to {}); \
                 the data may not determine a finite shape",
                show_number(lo),
                show_number(hi)
            )));
        }
    };
    let r = p.failures;
    // c = ln(eta) - shift, from eta^beta = s0 / r on the shifted ages.
    let c = (ln_s0 - r.ln()) / beta;
    let ln_scale = p.shift + c;
    let scale = ln_scale.exp();
    if !(scale.is_finite() && scale > 0.0 && beta.is_finite() && beta < MAX_SHAPE) {
        return Err(LifeError::NoConvergence(format!(
            "the Weibull fit gave shape {} and scale {}, out of range",
            show_number(beta),
            show_number(scale)
        )));
    }
    // With l = ln(t/eta) = u - c and z = w (t/eta)^beta: sum z = r at the
    // estimate, sum z l = r (mean - c), sum z l^2 = r (var + (mean - c)^2).
    let a = r * (mean - c);
    let b = r * (var + (mean - c) * (mean - c));
    // Observed information = minus the Hessian of the log-likelihood.
    let i_bb = r / (beta * beta) + b;
    let i_ee = beta * beta * r / (scale * scale);
    let i_be = -beta * a / scale;
    let det = i_bb * i_ee - i_be * i_be;
    if !(det.is_finite() && det > 0.0 && i_bb > 0.0) {
        return Err(LifeError::NotEstimable(
            "the information matrix of the Weibull fit is singular; \
             the data do not determine both parameters"
                .to_string(),
        ));
    }
    let cov = [[i_ee / det, -i_be / det], [-i_be / det, i_bb / det]];
    // The log-likelihood in closed form:
    //   r ln(beta/eta) + (beta - 1) sum_f ln(t/eta) - sum w (t/eta)^beta,
    // with sum_f ln(t/eta) = r (mean_failures(u) - c) on the shifted
    // log-ages, so that only r ln(eta) carries the ages' magnitude.
    let loglik = r * (beta.ln() - ln_scale) + (beta - 1.0) * r * (p.mean_fail_u - c) - r;
    Ok(WeibullEstimate {
        shape: beta,
        scale,
        cov,
        iterations,
        loglik,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sample::Sample;

    /// Lives at the Weibull quantiles (i - 0.3)/(n + 0.4), rounded to
    /// `digits` significant digits (ties), suspended beyond `cut`.
    fn quantile_sample(shape: f64, scale: f64, n: usize, cut: f64, digits: i32) -> Sample {
        let mut s = Sample::new();
        for i in 1..=n {
            let p = (i as f64 - 0.3) / (n as f64 + 0.4);
            let t = scale * (-(-p).ln_1p()).powf(1.0 / shape);
            let m = 10f64.powi(digits - 1 - t.log10().floor() as i32);
            let t = (t * m).round() / m;
            if t <= cut {
                s.add(t, true).unwrap();
            } else {
                s.add(cut, false).unwrap();
            }
        }
        s
    }

    /// Robustness over the ranges the issue names: shapes 0.2-20, scales
    /// 1e-3-1e9, 95% suspended, heavy ties. At the estimate the score of the
    /// full log-likelihood must vanish (checked independently of the profile
    /// equation the solver uses), and rescaling all ages by k must rescale
    /// the scale by k and leave the shape unchanged.
    #[test]
    fn converges_across_shapes_scales_and_censoring() {
        for shape in [0.2, 0.5, 1.0, 3.0, 8.0, 20.0] {
            for scale in [1e-3, 1.0, 1e9] {
                let cut = scale * (-(-0.05f64).ln_1p()).powf(1.0 / shape); // 5% fail
                let s = quantile_sample(shape, scale, 400, cut, 3);
                assert!(s.suspensions() as f64 >= 0.94 * 400.0);
                let g = s.groups();
                let est = fit(&g).unwrap_or_else(|e| panic!("{shape} {scale}: {e}"));
                // Score of the log-likelihood in (ln beta, ln eta).
                let (b, e) = (est.shape, est.scale);
                let r: f64 = g.iter().map(|x| x.failures).sum();
                let (mut d_b, mut d_e) = (0.0, 0.0);
                for x in &g {
                    let l = (x.age / e).ln();
                    let z = (b * l).exp();
                    let w = x.failures + x.suspensions;
                    d_b += x.failures * (1.0 + b * l) - w * z * b * l;
                    d_e += w * z * b;
                }
                d_e -= r * b;
                assert!(
                    d_b.abs() < 1e-9 * r && d_e.abs() < 1e-9 * r,
                    "{shape} {scale}: {d_b} {d_e}"
                );
                assert!(
                    est.iterations < 60,
                    "{shape} {scale}: {} passes",
                    est.iterations
                );
                // Equivariance: ages times 1000.
                let rows: Vec<(f64, bool, u64)> = g
                    .iter()
                    .flat_map(|x| {
                        [
                            (x.age * 1000.0, true, x.failures as u64),
                            (x.age * 1000.0, false, x.suspensions as u64),
                        ]
                    })
                    .collect();
                let big = fit(&Sample::from_rows(&rows).unwrap().groups()).unwrap();
                assert!(((big.shape - b) / b).abs() < 1e-12, "{shape} {scale}");
                assert!(
                    ((big.scale / 1000.0 - e) / e).abs() < 1e-12,
                    "{shape} {scale}"
                );
            }
        }
    }
}

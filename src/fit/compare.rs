//! Choosing and comparing: which family fits best, and do groups differ.
//!
//! Ranking fits every family to the same data and orders them by AICc
//! (BIC alongside). Group comparison uses likelihood-ratio tests: one
//! distribution for all groups against one per group, and a common shape
//! (every parameter but the scale-like one shared) against separate fits.
//! Knows nothing of SQL.

use crate::dist::{Family, FAMILIES};
use crate::error::{LifeError, LifeResult};
use crate::fit::{self, mle, FitOptions};
use crate::model::Model;
use crate::sample::{Obs, Sample};
use statrs::function::gamma::checked_gamma_ur;

/// One family's entry in a ranking.
#[derive(Debug)]
pub struct Ranked {
    /// Family name.
    pub dist: &'static str,
    /// The fit, or the reason the family was refused.
    pub outcome: Result<Ranking, String>,
}

/// Information criteria of one fit.
#[derive(Debug)]
pub struct Ranking {
    /// The fitted model.
    pub model: Model,
    /// Number of estimated parameters.
    pub k: usize,
    /// Maximised log-likelihood.
    pub loglik: f64,
    /// Corrected Akaike information criterion (None when n <= k + 1).
    pub aicc: Option<f64>,
    /// Bayesian information criterion.
    pub bic: f64,
}

/// Fits every family to the sample and orders the fits by AICc (then BIC);
/// refused families come last with their reasons.
pub fn rank_families(sample: &Sample, base: &FitOptions, skipped: u64) -> Vec<Ranked> {
    let n = sample.len() as f64;
    let mut out: Vec<Ranked> = FAMILIES
        .iter()
        .map(|fam| {
            let opts = FitOptions {
                family: fam,
                fixed: vec![None; fam.k()],
                ..base.clone()
            };
            let outcome = fit::fit(sample, &opts, skipped)
                .map(|model| {
                    let k = fam.k();
                    let loglik = model.fit.as_ref().map_or(f64::NAN, |f| f.loglik);
                    let kf = k as f64;
                    let aic = -2.0 * loglik + 2.0 * kf;
                    let aicc =
                        (n - kf - 1.0 > 0.0).then(|| aic + 2.0 * kf * (kf + 1.0) / (n - kf - 1.0));
                    Ranking {
                        k,
                        loglik,
                        aicc,
                        bic: -2.0 * loglik + kf * n.ln(),
                        model,
                    }
                })
                .map_err(|e| e.to_string());
            Ranked {
                dist: fam.name,
                outcome,
            }
        })
        .collect();
    let key = |r: &Ranked| match &r.outcome {
        Ok(x) => (0, x.aicc.unwrap_or(f64::INFINITY), x.bic),
        Err(_) => (1, f64::INFINITY, f64::INFINITY),
    };
    out.sort_by(|a, b| {
        let (ka, kb) = (key(a), key(b));
        ka.0.cmp(&kb.0)
            .then(ka.1.total_cmp(&kb.1))
            .then(ka.2.total_cmp(&kb.2))
    });
    out
}

/// A likelihood-ratio test result.
#[derive(Debug, Clone, PartialEq)]
pub struct Test {
    /// Statistic 2 (l_full - l_reduced).
    pub statistic: f64,
    /// Degrees of freedom.
    pub df: f64,
    /// Upper-tail chi-square probability of the statistic.
    pub p_value: f64,
}

fn lr_test(full: f64, reduced: f64, df: f64) -> Test {
    let statistic = (2.0 * (full - reduced)).max(0.0);
    let p_value = if statistic == 0.0 {
        1.0
    } else {
        checked_gamma_ur(0.5 * df, 0.5 * statistic).unwrap_or(f64::NAN)
    };
    Test {
        statistic,
        df,
        p_value,
    }
}

/// Result of comparing groups.
#[derive(Debug)]
pub struct GroupComparison {
    /// Family compared under.
    pub family: &'static Family,
    /// Group names in order, with their separate fits.
    pub groups: Vec<(String, Model)>,
    /// Log-likelihood of one model for all groups.
    pub pooled_loglik: f64,
    /// Sum of the separate fits' log-likelihoods.
    pub separate_loglik: f64,
    /// Log-likelihood with a common shape and a scale per group.
    pub common_shape_loglik: f64,
    /// The common-shape fit: shared parameters with each group's scale-like one.
    pub common_shape_params: Vec<(String, Vec<f64>)>,
    /// One distribution for all groups vs one per group.
    pub same_distribution: Test,
    /// A common shape vs separate fits.
    pub common_shape: Test,
    /// Equal scales given a common shape.
    pub same_scale_given_common_shape: Test,
}

/// Likelihood-ratio comparison of two or more groups under one family.
pub fn compare_groups(
    groups: &[(String, Sample)],
    opts: &FitOptions,
) -> LifeResult<GroupComparison> {
    let fam = opts.family;
    if groups.len() < 2 {
        return Err(LifeError::NotEstimable(format!(
            "comparing groups needs at least two groups, got {}",
            groups.len()
        )));
    }
    if opts.fixed.iter().any(Option::is_some) {
        return Err(LifeError::BadOptions(
            "cannot fix parameters when comparing groups".into(),
        ));
    }
    let plain = FitOptions {
        keep_sample: false,
        ..opts.clone()
    };
    let mut pooled = Sample::new();
    let mut separate = Vec::with_capacity(groups.len());
    let mut separate_loglik = 0.0;
    for (name, s) in groups {
        for o in s.obs() {
            pooled.push(o)?;
        }
        let m = fit::fit(s, &plain, 0).map_err(|e| {
            LifeError::NotEstimable(format!("group '{name}' cannot be fitted on its own: {e}"))
        })?;
        separate_loglik += m.fit.as_ref().map_or(f64::NAN, |f| f.loglik);
        separate.push((name.clone(), m));
    }
    let pooled_model = fit::fit(&pooled, &plain, 0)?;
    let pooled_loglik = pooled_model.fit.as_ref().map_or(f64::NAN, |f| f.loglik);
    // Common shape: all parameters but the pinned (scale-like) one shared.
    let k = fam.k();
    let pinned = fam.pinned;
    let shared: Vec<usize> = (0..k).filter(|&i| i != pinned).collect();
    let obs: Vec<Vec<Obs>> = groups.iter().map(|(_, s)| s.obs()).collect();
    let start_all = fam.to_free(&pooled_model.dist.params());
    let mut x0: Vec<f64> = shared.iter().map(|&i| start_all[i]).collect();
    for (_, m) in &separate {
        x0.push(fam.to_free(&m.dist.params())[pinned]);
    }
    let split = |x: &[f64], g: usize| -> Vec<f64> {
        let mut free = start_all.clone();
        for (slot, &i) in shared.iter().enumerate() {
            free[i] = x[slot];
        }
        free[pinned] = x[shared.len() + g];
        fam.from_free(&free)
    };
    let neg = |x: &[f64]| -> f64 {
        let mut total = 0.0;
        for (g, o) in obs.iter().enumerate() {
            match (fam.build)(&split(x, g)) {
                Ok(d) => total -= mle::loglik(d.as_ref(), o),
                Err(_) => return f64::INFINITY,
            }
        }
        total
    };
    let x = mle::minimize(&neg, x0)?;
    let common_shape_loglik = -neg(&x);
    let common_shape_params = groups
        .iter()
        .enumerate()
        .map(|(g, (name, _))| (name.clone(), split(&x, g)))
        .collect();
    let ng = groups.len() as f64;
    Ok(GroupComparison {
        family: fam,
        groups: separate,
        pooled_loglik,
        separate_loglik,
        common_shape_loglik,
        common_shape_params,
        same_distribution: lr_test(separate_loglik, pooled_loglik, (ng - 1.0) * k as f64),
        common_shape: lr_test(
            separate_loglik,
            common_shape_loglik,
            (ng - 1.0) * (k as f64 - 1.0),
        ),
        same_scale_given_common_shape: lr_test(common_shape_loglik, pooled_loglik, ng - 1.0),
    })
}

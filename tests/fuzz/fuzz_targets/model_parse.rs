//! Model::parse on arbitrary text: never a panic; a model that parses
//! writes JSON that parses again to the same model, bit for bit, and its
//! readers stay in range (NaN, which SQL returns as NULL, allowed).
#![no_main]

use libfuzzer_sys::fuzz_target;
use lifedata::Model;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(m) = Model::parse(text) else {
        return;
    };
    let json = m.to_json();
    let again = Model::parse(&json)
        .unwrap_or_else(|e| panic!("{text}\nwrites {json}\nwhich does not read back: {e}"));
    assert_eq!(again.to_json(), json, "{text}: the written model changed");
    let bits = |p: Vec<f64>| p.into_iter().map(f64::to_bits).collect::<Vec<_>>();
    assert_eq!(bits(again.dist.params()), bits(m.dist.params()), "{text}");
    assert_eq!(
        again.fit.is_some(),
        m.fit.is_some(),
        "{text}: the fit summary was lost"
    );
    let d = m.dist.as_ref();
    // (A normal or a weibull3 with a negative location puts mass below age
    // 0, so its quantiles may be negative: no sign check.)
    for p in [0.0, 1e-300, 0.1, 0.5, 0.9, 0.999_999_999_999_999_9] {
        let _ = d.quantile(p);
    }
    for t in [0.0, 5e-324, 1e-300, 1.0, 1e3, 1e300, f64::MAX] {
        let (f, r) = (d.cdf(t), d.sf(t));
        assert!(
            f.is_nan() || (0.0..=1.0).contains(&f),
            "{text}: cdf({t}) = {f}"
        );
        assert!(
            r.is_nan() || (0.0..=1.0).contains(&r),
            "{text}: sf({t}) = {r}"
        );
        let c = d.cond_fail(t, 10.0);
        assert!(
            c.is_nan() || (0.0..=1.0).contains(&c),
            "{text}: cond_fail({t}, 10) = {c}"
        );
        let _ = (d.pdf(t), d.hazard(t), d.sf_integral(t));
    }
    let _ = d.mean();
});

//! Properties of fits and models that hold for any input (proptest).

use ogive::stats::fit::{Family, fit};
use ogive::stats::mixture::{Component, Mixture};
use ogive::value::model::Model;
use proptest::prelude::*;

/// The log-likelihood of `xs` under `model`, summed in log space.
fn loglik(model: &Model, xs: &[f64]) -> f64 {
    xs.iter().map(|&x| model.pdf(x).ln()).sum()
}

/// Positive samples with some spread: 5 to 60 values in (0.05, 50).
fn sample() -> impl Strategy<Value = Vec<f64>> {
    prop::collection::vec(0.05f64..50.0, 5..60).prop_filter("needs spread", |xs| {
        xs.iter().any(|&x| (x - xs[0]).abs() > 1e-3)
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// The maximum-likelihood estimate is a maximum: moving any parameter by 0.1% either
    /// way does not raise the log-likelihood (tolerance 1e-9 relative), and the reported
    /// log-likelihood is the sum of log densities at the estimate (1e-9 relative).
    #[test]
    fn fits_maximise_the_likelihood(xs in sample(), which in 0usize..6) {
        let family = Family::ALL[which];
        let f = fit(&xs, family).unwrap();
        let params = f.distribution.parameters();
        let best = Model::from(f.clone());
        let at_best = loglik(&best, &xs);
        prop_assert!((at_best - f.summary.loglik).abs() <= 1e-9 * f.summary.loglik.abs().max(1.0));
        for i in 0..params.len() {
            for factor in [0.999, 1.001] {
                let mut moved: Vec<f64> = params.iter().map(|p| p.1).collect();
                // The uniform's ends move outwards only: inwards the likelihood is 0.
                if family == Family::Uniform {
                    moved[i] += if i == 0 { -1e-3 } else { 1e-3 } * (moved[1] - moved[0]).abs();
                } else if matches!(family, Family::Normal | Family::LogNormal) && i == 0 {
                    // A location: move it by 0.1% of the scale.
                    moved[0] += (factor - 1.0) * params[1].1;
                } else {
                    moved[i] *= factor;
                }
                let json: serde_json::Map<String, serde_json::Value> = params
                    .iter()
                    .zip(&moved)
                    .map(|((name, _), v)| (name.to_string(), serde_json::json!(v)))
                    .collect();
                let other = Model::from_parameters(family.name(), &serde_json::Value::Object(json).to_string()).unwrap();
                let there = loglik(&other, &xs);
                prop_assert!(there <= at_best + 1e-9 * at_best.abs(), "{family} param {i}: {there} > {at_best}");
            }
        }
    }

    /// Model JSON survives serialisation exactly.
    #[test]
    fn model_json_round_trips(xs in sample(), which in 0usize..6) {
        let m = Model::from(fit(&xs, Family::ALL[which]).unwrap());
        let again = Model::parse(&m.to_json()).unwrap();
        prop_assert_eq!(again.to_json(), m.to_json());
        prop_assert_eq!(again, m);
    }

    /// A mixture's quantile inverts its cdf: cdf(quantile(p)) = p to 1e-12, and the cdf
    /// never decreases along a grid.
    #[test]
    fn mixture_quantile_inverts_cdf(
        parts in prop::collection::vec((0.05f64..1.0, -20.0f64..20.0, 0.05f64..5.0), 1..5),
        p in 1e-6f64..(1.0 - 1e-6),
    ) {
        let total: f64 = parts.iter().map(|c| c.0).sum();
        let comps: Vec<Component> = parts
            .iter()
            .map(|&(w, mean, sd)| Component { weight: w / total, mean, sd })
            .collect();
        let m = Mixture::new(comps).unwrap();
        let q = m.quantile(p).unwrap();
        prop_assert!((m.cdf(q) - p).abs() <= 1e-12, "cdf({q}) = {} vs {p}", m.cdf(q));
        let mut last = 0.0;
        for i in 0..200 {
            let c = m.cdf(-40.0 + 0.4 * f64::from(i));
            prop_assert!(c >= last);
            last = c;
        }
    }
}

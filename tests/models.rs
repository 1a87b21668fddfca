//! Model evaluation against scipy and scikit-learn: `tests/fixtures/model_references.json`,
//! written by `tests/fixtures/make_model_references.py` (the calls are recorded there and
//! in each entry's `fit_call` and `reference_calls`). The parameters are scipy's (and for
//! the mixture scikit-learn's) maximum-likelihood fits to the Old Faithful eruption
//! durations; the references are scipy's cdf, pdf, ppf, mean and std with them.
//!
//! The SQL functions that expose this evaluation (`dist_cdf` and the rest, shared with
//! empirical distributions) are cross-checked through the extension in
//! tests/python/test_model_algebra.py; here the `Model` API is checked directly.

use ogive::value::model::Model;
use serde_json::Value;

fn load() -> Vec<Value> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/model_references.json"
    );
    let text = std::fs::read_to_string(path).expect("model_references.json");
    let v: Value = serde_json::from_str(&text).expect("valid JSON");
    v["models"].as_array().expect("models").clone()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

fn model(entry: &Value) -> Model {
    let family = entry["family"].as_str().expect("family");
    Model::from_parameters(family, &entry["params"].to_string()).expect("valid parameters")
}

/// `|a - b| <= rel * |b| + abs`.
fn close(a: f64, b: f64, rel: f64, abs: f64) -> bool {
    a == b || (a - b).abs() <= rel * b.abs() + abs
}

#[test]
fn cdf_and_pdf_match_scipy() {
    // Tolerance: 1e-13 relative plus 1e-300 absolute, for cdf and pdf on the grid of each
    // entry (measured worst: 3.4e-14 for the cdf, 1.3e-14 for the pdf).
    for entry in load() {
        let m = model(&entry);
        let family = entry["family"].as_str().unwrap();
        let ts = numbers(&entry["t"]);
        for ((t, want_cdf), want_pdf) in ts
            .iter()
            .zip(numbers(&entry["cdf"]))
            .zip(numbers(&entry["pdf"]))
        {
            let (cdf, pdf) = (m.cdf(*t), m.pdf(*t));
            assert!(
                close(cdf, want_cdf, 1e-13, 1e-300),
                "{family} cdf({t}) = {cdf}, scipy {want_cdf}"
            );
            assert!(
                close(pdf, want_pdf, 1e-13, 1e-300),
                "{family} pdf({t}) = {pdf}, scipy {want_pdf}"
            );
        }
    }
}

#[test]
fn quantiles_mean_and_sd_match_scipy() {
    // Quantiles to 1e-11 relative (measured worst 1.4e-12); mean and sd to 1e-13 relative
    // (measured worst 2.3e-14).
    for entry in load() {
        let m = model(&entry);
        let family = entry["family"].as_str().unwrap();
        for (p, want) in numbers(&entry["p"]).iter().zip(numbers(&entry["quantile"])) {
            let q = m.quantile(*p).unwrap();
            assert!(
                close(q, want, 1e-11, 0.0),
                "{family} quantile({p}) = {q}, scipy {want}"
            );
        }
        let mean = m.mean().unwrap();
        let want = entry["mean"].as_f64().unwrap();
        assert!(
            close(mean, want, 1e-13, 0.0),
            "{family} mean {mean} vs {want}"
        );
        let sd = m.sd().unwrap();
        let want = entry["sd"].as_f64().unwrap();
        assert!(close(sd, want, 1e-13, 0.0), "{family} sd {sd} vs {want}");
    }
}

#[test]
fn quantile_of_cdf_returns_t() {
    // quantile(cdf(t)) = t to 1e-9 relative (1e-12 absolute), wherever the cdf is strictly
    // between 1e-9 and 1 - 1e-9 (beyond, the cdf is too flat in doubles for t to be
    // recoverable) and the density is positive.
    for entry in load() {
        let m = model(&entry);
        let family = entry["family"].as_str().unwrap();
        let ts = numbers(&entry["t"]);
        let dense: Vec<f64> = (0..=400)
            .map(|i| ts[0] + (ts[ts.len() - 1] - ts[0]) * f64::from(i) / 400.0)
            .chain(ts.iter().copied())
            .collect();
        for t in dense {
            let p = m.cdf(t);
            if !(1e-9..=1.0 - 1e-9).contains(&p) || m.pdf(t) <= 0.0 {
                continue;
            }
            let back = m.quantile(p).unwrap();
            assert!(
                close(back, t, 1e-9, 1e-12),
                "{family}: quantile(cdf({t})) = {back}"
            );
        }
    }
}

#[test]
fn mixture_components_match_argmax_of_scipy_densities() {
    for entry in load() {
        let Some(labels) = entry.get("component_index") else {
            continue;
        };
        let m = model(&entry);
        for (t, want) in numbers(&entry["t"]).iter().zip(numbers(labels)) {
            assert_eq!(m.component_index(*t), Some(want as usize), "t = {t}");
        }
    }
}

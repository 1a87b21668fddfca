//! Test helpers shared by the kernels' unit tests: the scipy/statsmodels reference values of
//! `tests/fixtures/compare.json` (made by `tests/fixtures/gen_compare.py`, each record naming
//! its call) and a relative comparison.

/// The parsed fixture file.
pub(crate) fn compare() -> serde_json::Value {
    serde_json::from_str(include_str!("../../tests/fixtures/compare.json")).unwrap()
}

/// A JSON array of numbers as a vector.
pub(crate) fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// `got` equals `want` to `rel` relative (of the larger magnitude).
pub(crate) fn rel_close(got: f64, want: f64, rel: f64) -> bool {
    got == want || (got - want).abs() <= rel * want.abs().max(got.abs())
}

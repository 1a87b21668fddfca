//! Fuzzes the empirical-distribution BLOB decoder: any bytes must give either an error or
//! a valid distribution, never a panic, and a BLOB that decodes must be canonical (written
//! back, it gives the same bytes) and answer every question without panicking.

#![no_main]

use libfuzzer_sys::fuzz_target;
use ogive::stats::histogram::{BinRule, histogram};
use ogive::stats::kde::{Bandwidth, Kde};
use ogive::stats::quantile::QuantileType;
use ogive::value::censored;
use ogive::value::empirical::{checksum, decode, encode};

fuzz_target!(|data: &[u8]| {
    exercise(data);
    // The same bytes with a correct checksum, so that the checks after it (length, order,
    // weights, total) see arbitrary input too.
    if data.len() >= 32 {
        let mut sealed = data.to_vec();
        let sum = checksum(&sealed);
        sealed[24..32].copy_from_slice(&sum.to_le_bytes());
        exercise(&sealed);
    }
});

fn exercise(bytes: &[u8]) {
    exercise_censored(bytes);
    // The same bytes read as the other version, so both decoders see every input.
    if bytes.len() > 5 {
        let mut other = bytes.to_vec();
        other[4] = if bytes[4] == 2 { 1 } else { 2 };
        other[5] = other[4];
        exercise_censored(&other);
    }
    let Ok(s) = decode(bytes) else { return };
    assert_eq!(encode(&s), bytes, "a valid BLOB must be canonical");
    assert!(!s.is_empty());
    for t in [f64::NEG_INFINITY, -1.0, 0.0, 1.0, f64::INFINITY] {
        let f = s.cdf(t).expect("non-empty");
        assert!((0.0..=1.0).contains(&f));
    }
    for ty in 1..=9 {
        let ty = QuantileType::new(ty).expect("1..=9");
        for p in [0.0, 0.25, 0.5, 0.999, 1.0] {
            let q = s.quantile(p, ty).expect("p in [0, 1]");
            assert!(q.is_none_or(|q| !q.is_nan()));
        }
    }
    let _ = s.profile();
    let steps = s.steps();
    assert_eq!(steps.last().map(|&(_, f)| f), Some(1.0));
    for rule in [
        BinRule::Sturges,
        BinRule::Scott,
        BinRule::FreedmanDiaconis,
        BinRule::Sqrt,
        BinRule::Count(7),
    ] {
        if let Ok(bins) = histogram(&s, rule) {
            assert!(bins.iter().all(|b| b.lo < b.hi && b.count >= 0.0));
        }
    }
    for bw in [
        Bandwidth::Scott,
        Bandwidth::Silverman,
        Bandwidth::Fixed(1.0),
    ] {
        if let Some(k) = Kde::new(&s, bw) {
            assert!(k.density(0.0) >= 0.0);
        }
    }
}

/// A censored-estimate BLOB: an error or a canonical estimate that answers without panics.
fn exercise_censored(bytes: &[u8]) {
    let Ok(e) = censored::decode(bytes) else { return };
    assert_eq!(censored::encode(&e), bytes, "a valid BLOB must be canonical");
    for t in [f64::NEG_INFINITY, -1.0, 0.0, 1.0, f64::INFINITY] {
        assert!(e.cdf(t).is_none_or(|f| (0.0..=1.0).contains(&f)));
        let _ = e.band(t, 0.05);
    }
    for p in [0.0, 0.25, 0.5, 0.999, 1.0] {
        let q = e.quantile(p).expect("p in [0, 1]");
        assert!(q.is_none_or(|q| !q.is_nan()));
    }
    let k = e.ks_distance(|t| 1.0 / (1.0 + (-t).exp()));
    assert!((0.0..=1.0).contains(&k.d));
}

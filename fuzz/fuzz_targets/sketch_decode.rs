//! The quantile-sketch BLOB decoder on arbitrary bytes: it must return an error or a
//! sketch, never panic, hang or allocate without bound; a sketch it accepts must
//! re-encode to the same bytes, save that each level above 0 comes back ascending (an
//! older ogive's BLOB may hold those in any order: docs/sketch-format.md), and answer
//! queries and merges without panicking.
//!
//! Random bytes rarely carry a valid trailing hash, so each input is also tried with its
//! hash rewritten, which lets the fuzzer reach the structural checks behind it. And to
//! start from real sketches, the input's bytes are also read as values, sketched,
//! encoded, and the BLOB damaged at a place the input chooses (with and without a
//! rewritten hash).

#![no_main]

use libfuzzer_sys::fuzz_target;
use ogive::stats::sketch::QuantileSketch;
use ogive::value::sketch::{CHECKSUM_LEN, HEADER_LEN, decode, encode, fnv1a64};

/// The bytes this ogive writes for the sketch `bytes` decoded to: `bytes` with each level
/// above 0 sorted ascending (by `f64::total_cmp`, as the decoder sorts) and the hash
/// rewritten; `bytes` themselves when those levels were ascending already.
fn ascending(bytes: &[u8], s: &QuantileSketch) -> Vec<u8> {
    let levels = &s.state().levels;
    let mut out = bytes.to_vec();
    let mut at = HEADER_LEN + 4 * levels.len() + 8 * levels[0].len();
    for level in &levels[1..] {
        let end = at + 8 * level.len();
        let mut values: Vec<f64> = out[at..end]
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
            .collect();
        values.sort_by(f64::total_cmp);
        for (slot, x) in out[at..end].chunks_exact_mut(8).zip(values) {
            slot.copy_from_slice(&x.to_le_bytes());
        }
        at = end;
    }
    resealed(&out)
}

fn exercise(bytes: &[u8]) {
    if let Ok(s) = decode(bytes) {
        let again = encode(&s).expect("a decoded sketch is not empty");
        assert_eq!(again, ascending(bytes, &s));
        assert_eq!(
            decode(&again).as_ref(),
            Ok(&s),
            "its own bytes decode to it"
        );
        let _ = s.quantiles(&[0.0, 0.25, 0.5, 1.0]);
        let _ = s.cdf(0.0);
        let _ = s.instance_error_bound();
        let mut t = s.clone();
        let _ = t.merge(&s);
        let _ = t.insert(1.0);
        let _ = encode(&t).map(|b| decode(&b).expect("a sketch ogive wrote must decode"));
    }
}

fn resealed(bytes: &[u8]) -> Vec<u8> {
    let mut out = bytes.to_vec();
    if out.len() >= CHECKSUM_LEN {
        let body = out.len() - CHECKSUM_LEN;
        let hash = fnv1a64(&out[..body]);
        out[body..].copy_from_slice(&hash.to_le_bytes());
    }
    out
}

fuzz_target!(|data: &[u8]| {
    exercise(data);
    exercise(&resealed(data));
    if data.len() >= 10 {
        let mut s = QuantileSketch::with_k(8 + u32::from(data[0] % 64));
        for chunk in data[2..].chunks_exact(8) {
            let mut v = [0u8; 8];
            v.copy_from_slice(chunk);
            let _ = s.insert(f64::from_le_bytes(v));
        }
        if let Some(mut blob) = encode(&s) {
            assert!(decode(&blob).is_ok(), "a fresh sketch must decode");
            let at = usize::from(data[1]) * 7 % blob.len();
            blob[at] ^= data[0] | 1;
            assert!(decode(&blob).is_err(), "a one-byte change must be caught");
            exercise(&resealed(&blob));
        }
    }
});

//! The BLOB of a quantile sketch, as `quantile_sketch` and `sketch_merge` return it and
//! `sketch_merge`, `sketch_quantile` and `sketch_cdf` read it. The layout is documented
//! for other engines in `docs/sketch-format.md`; in short (all little-endian):
//!
//! | offset | size | field |
//! |---|---|---|
//! | 0 | 4 | magic `OGQS` |
//! | 4 | 1 | version, 1 |
//! | 5 | 1 | flags, 0 |
//! | 6 | 2 | `L`, the number of levels (u16, 1..=64) |
//! | 8 | 4 | `k`, the capacity parameter (u32) |
//! | 12 | 4 | reserved, 0 |
//! | 16 | 8 | `n`, values summarised (u64, >= 1) |
//! | 24 | 8 | minimum (f64) |
//! | 32 | 8 | maximum (f64) |
//! | 40 | 8 | `S`, sum of `4^h` over all compactions (f64) |
//! | 48 | 8 | coin generator state (u64) |
//! | 56 | 4 L | number of values on each level, level 0 first (u32 each) |
//! | 56 + 4 L | 8 m | the values (f64), level 0 first; a value on level `h` stands for `2^h` |
//! | end - 8 | 8 | FNV-1a 64-bit hash of every byte before it |
//!
//! Decoding checks the length, the magic, the version, the hash, and then every
//! invariant a sketch keeps ([`QuantileSketch::from_state`]), so a damaged, truncated or
//! foreign BLOB is an error, never a wrong answer.

use crate::stats::sketch::{MAX_LEVELS, QuantileSketch, SketchError, SketchState};

/// The first four bytes of every sketch BLOB.
pub const MAGIC: [u8; 4] = *b"OGQS";
/// The layout version this code writes and reads.
pub const VERSION: u8 = 1;
/// Bytes before the level lengths.
pub const HEADER_LEN: usize = 56;
/// Bytes of the trailing hash.
pub const CHECKSUM_LEN: usize = 8;

/// FNV-1a, 64-bit (Fowler, Noll and Vo; offset basis 0xcbf29ce484222325, prime
/// 0x100000001b3): a hash any engine can recompute in a few lines.
///
/// # Example
/// ```
/// // The published test vector for FNV-1a 64 of "a".
/// assert_eq!(ogive::value::sketch::fnv1a64(b"a"), 0xaf63dc4c8601ec8c);
/// ```
pub fn fnv1a64(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3)
    })
}

/// The BLOB of a sketch; `None` for an empty sketch (SQL shows it as NULL).
///
/// # Example
/// ```
/// use ogive::stats::sketch::QuantileSketch;
/// use ogive::value::sketch::{decode, encode};
/// let mut s = QuantileSketch::new(0.01).unwrap();
/// for x in [3.0, 1.0, 2.0] {
///     s.insert(x).unwrap();
/// }
/// let blob = encode(&s).unwrap();
/// assert_eq!(blob.len(), 56 + 4 + 3 * 8 + 8);
/// assert_eq!(decode(&blob).unwrap(), s);
/// ```
pub fn encode(sketch: &QuantileSketch) -> Option<Vec<u8>> {
    let s = sketch.state();
    if s.n == 0 {
        return None;
    }
    let levels = &s.levels;
    let mut out = Vec::with_capacity(HEADER_LEN + 4 * levels.len() + 8 * sketch.retained() + 8);
    out.extend_from_slice(&MAGIC);
    out.push(VERSION);
    out.push(0);
    out.extend_from_slice(&(levels.len() as u16).to_le_bytes());
    out.extend_from_slice(&s.k.to_le_bytes());
    out.extend_from_slice(&0u32.to_le_bytes());
    out.extend_from_slice(&s.n.to_le_bytes());
    out.extend_from_slice(&s.min.to_le_bytes());
    out.extend_from_slice(&s.max.to_le_bytes());
    out.extend_from_slice(&s.variance.to_le_bytes());
    out.extend_from_slice(&s.rng.to_le_bytes());
    for level in levels {
        out.extend_from_slice(&(level.len() as u32).to_le_bytes());
    }
    for &x in levels.iter().flatten() {
        out.extend_from_slice(&x.to_le_bytes());
    }
    let hash = fnv1a64(&out);
    out.extend_from_slice(&hash.to_le_bytes());
    Some(out)
}

/// Reads `N` bytes at `at`; the caller has checked the length.
fn array<const N: usize>(b: &[u8], at: usize) -> [u8; N] {
    let mut a = [0u8; N];
    a.copy_from_slice(&b[at..at + N]);
    a
}

/// Reads a sketch BLOB.
///
/// # Errors
/// [`SketchError::Corrupt`] saying what is wrong: too short, not a sketch (magic), an
/// unknown version, a hash mismatch (altered bytes), lengths that do not add up, or a
/// state no sketch can be in.
pub fn decode(b: &[u8]) -> Result<QuantileSketch, SketchError> {
    let bad = |why: String| Err(SketchError::Corrupt(why));
    if b.len() < HEADER_LEN + 4 + CHECKSUM_LEN {
        return bad(format!(
            "{} bytes is too short; a sketch has at least {}",
            b.len(),
            HEADER_LEN + 4 + CHECKSUM_LEN
        ));
    }
    if b[..4] != MAGIC {
        return bad("it does not start with the sketch marker OGQS".into());
    }
    if b[4] != VERSION {
        return bad(format!(
            "layout version {} is not one this ogive reads (it reads {VERSION})",
            b[4]
        ));
    }
    let body = b.len() - CHECKSUM_LEN;
    if fnv1a64(&b[..body]) != u64::from_le_bytes(array(b, body)) {
        return bad("its checksum does not match: the bytes were altered or cut".into());
    }
    if b[5] != 0 || array::<4>(b, 12) != [0; 4] {
        return bad("reserved bytes are not zero".into());
    }
    let levels = usize::from(u16::from_le_bytes(array(b, 6)));
    if levels == 0 || levels > MAX_LEVELS {
        return bad(format!("{levels} levels, expected 1 to {MAX_LEVELS}"));
    }
    let values_at = HEADER_LEN + 4 * levels;
    if values_at > body {
        return bad("it is cut short inside the level table".into());
    }
    let lengths: Vec<usize> = (0..levels)
        .map(|h| u32::from_le_bytes(array(b, HEADER_LEN + 4 * h)) as usize)
        .collect();
    let count: usize = lengths.iter().sum();
    if !(body - values_at).is_multiple_of(8) || (body - values_at) / 8 != count {
        return bad(format!(
            "its level table lists {count} values but {} bytes follow",
            body - values_at
        ));
    }
    let mut at = values_at;
    let level_values = lengths
        .iter()
        .map(|&len| {
            let level: Vec<f64> = (0..len)
                .map(|i| f64::from_le_bytes(array(b, at + 8 * i)))
                .collect();
            at += 8 * len;
            level
        })
        .collect();
    QuantileSketch::from_state(SketchState {
        k: u32::from_le_bytes(array(b, 8)),
        n: u64::from_le_bytes(array(b, 16)),
        min: f64::from_le_bytes(array(b, 24)),
        max: f64::from_le_bytes(array(b, 32)),
        variance: f64::from_le_bytes(array(b, 40)),
        rng: u64::from_le_bytes(array(b, 48)),
        levels: level_values,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn sample() -> QuantileSketch {
        let mut s = QuantileSketch::with_k(16);
        for i in 0..1000 {
            s.insert(f64::from((i * 37) % 101)).unwrap();
        }
        s
    }

    /// Rewrites the trailing hash so that a deliberate change reaches the later checks.
    fn reseal(b: &mut [u8]) {
        let body = b.len() - CHECKSUM_LEN;
        let h = fnv1a64(&b[..body]);
        b[body..].copy_from_slice(&h.to_le_bytes());
    }

    fn reason(b: &[u8]) -> String {
        match decode(b) {
            Err(SketchError::Corrupt(why)) => why,
            other => panic!("expected a corrupt-BLOB error, got {other:?}"),
        }
    }

    #[test]
    fn round_trip_is_byte_exact() {
        let s = sample();
        let b = encode(&s).unwrap();
        let back = decode(&b).unwrap();
        assert_eq!(back, s);
        assert_eq!(encode(&back).unwrap(), b);
        assert_eq!(encode(&QuantileSketch::with_k(16)), None);
    }

    #[test]
    fn damage_is_named() {
        let good = encode(&sample()).unwrap();
        assert!(reason(&good[..10]).contains("too short"));
        let mut b = good.clone();
        b[0] = b'X';
        assert!(reason(&b).contains("sketch marker"));
        let mut b = good.clone();
        b[4] = 9;
        assert!(reason(&b).contains("version 9"));
        let mut b = good.clone();
        let last_value = b.len() - CHECKSUM_LEN - 1;
        b[last_value] ^= 0x40;
        assert!(reason(&b).contains("checksum"));
        assert!(reason(&good[..good.len() - 8]).contains("checksum"));
        // Altered and resealed: caught by the invariants.
        let mut b = good.clone();
        b[16] ^= 1; // n
        reseal(&mut b);
        assert!(reason(&b).contains("stand for"));
        let mut b = good.clone();
        b[6] = 0; // zero levels
        b[7] = 0;
        reseal(&mut b);
        assert!(reason(&b).contains("0 levels"));
        let mut b = good;
        b[HEADER_LEN] ^= 1; // a level length
        reseal(&mut b);
        assert!(reason(&b).contains("lists"));
    }

    /// A BLOB of an older ogive may hold an upper level in any order (docs/sketch-format.md):
    /// it decodes, and re-encodes to the bytes this version writes, with the level ascending.
    /// (Found by fuzz/fuzz_targets/sketch_decode.rs, whose round trip once asked for the
    /// input's own bytes back.)
    #[test]
    fn an_unsorted_upper_level_reencodes_ascending() {
        let s = sample();
        let good = encode(&s).unwrap();
        let levels = &s.state().levels;
        assert!(
            levels.len() >= 2 && levels[1].len() >= 2,
            "sample has a level 1"
        );
        let level1 = HEADER_LEN + 4 * levels.len() + 8 * levels[0].len();
        assert!(levels[1][0] < levels[1][1], "two distinct values to swap");
        let mut old = good.clone();
        old[level1..level1 + 16].rotate_left(8);
        reseal(&mut old);
        assert_ne!(old, good);
        let back = decode(&old).unwrap();
        assert_eq!(back, s);
        assert_eq!(encode(&back).unwrap(), good);
    }

    proptest! {
        /// Any bytes at all: decoding returns an error or a sketch that re-encodes to the
        /// same bytes (random bytes never hold an upper level out of order with a valid
        /// hash; the test above covers that case); it never panics.
        #[test]
        fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..200)) {
            if let Ok(s) = decode(&bytes) {
                prop_assert_eq!(encode(&s).unwrap(), bytes);
            }
        }

        /// Small sketches survive any single-byte change only if it is caught or harmless.
        #[test]
        fn single_byte_changes_are_caught(at in 0usize..2000, bit in 0u8..8) {
            let good = encode(&sample()).unwrap();
            let mut b = good.clone();
            let at = at % b.len();
            b[at] ^= 1 << bit;
            prop_assert!(decode(&b).is_err());
        }
    }
}

//! The empirical-distribution BLOB: how a [`Sample`] is stored in a table.
//!
//! The layout (all numbers little-endian; docs/empirical-blob.md has the full story):
//!
//! | offset | size | field |
//! |---|---|---|
//! | 0 | 4 | magic `89 4F 47 56` (`0x89` then `OGV`) |
//! | 4 | 1 | format version, 1 |
//! | 5 | 1 | kind, 1 = empirical distribution |
//! | 6 | 2 | flags (u16); bit 0 set = weighted; other bits 0 |
//! | 8 | 8 | n (u64), the number of stored values, at least 1 |
//! | 16 | 8 | total weight (f64): n when unweighted, else the compensated sum of the weights |
//! | 24 | 8 | checksum (u64) of every other 8-byte word, see [`checksum`] |
//! | 32 | 8 n | the values (f64), ascending by IEEE total order, no NaN |
//! | 32 + 8 n | 8 n | weighted only: the weights (f64), finite and > 0; equal values ordered by weight |
//!
//! [`decode`] checks every field, so a truncated, corrupted, foreign or newer value is a
//! [`BlobError`], never a wrong answer: the length must be exactly what n and the flags
//! say, the checksum must match (a change to any single 8-byte word is always caught),
//! the values must be in order, and the stored total weight must equal the one
//! recomputed from the values and weights, bit for bit.
//!
//! Version 3, kind 3 is the same value from a series (`dist_series`): the same header with
//! version 3 and kind 3, one more word at offset 32, the effective sample size n_eff
//! (f64, `0 < n_eff <= total weight`, at least `min(1, total weight)`), then the values
//! (and weights) from offset 40. [`encode_series`] and [`decode_series`] read and write it;
//! version 1 is written and read exactly as before.

use std::fmt;

use crate::stats::StatsError;
use crate::stats::grow::OutOfMemory;
use crate::stats::sample::Sample;

/// The first four bytes of every ogive distribution BLOB. The high first byte, as in PNG,
/// keeps it from ever being mistaken for text.
pub const MAGIC: [u8; 4] = [0x89, b'O', b'G', b'V'];
/// The format version this build writes and reads.
pub const VERSION: u8 = 1;
/// The kind byte of an empirical distribution.
pub const KIND_EMPIRICAL: u8 = 1;
/// The format version of an empirical distribution that carries an effective size.
pub const VERSION_SERIES: u8 = 3;
/// The kind byte of an empirical distribution of a series.
pub const KIND_SERIES: u8 = 3;
/// The header of a series value: the version-1 header and n_eff.
pub const SERIES_HEADER_LEN: usize = 40;
/// Flag bit: the BLOB carries weights.
pub const FLAG_WEIGHTED: u16 = 1;
/// The size of the header in bytes.
pub const HEADER_LEN: usize = 32;
/// Where the checksum sits.
const CHECKSUM_AT: usize = 24;
/// The FNV-1a 64-bit offset basis and prime (Fowler, Noll and Vo), used on whole words.
const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

/// Why a BLOB is not a valid empirical distribution.
#[derive(Debug, Clone, PartialEq)]
pub enum BlobError {
    /// Too short for the header, or the magic or kind bytes are not ogive's.
    BadHeader,
    /// A format version this build does not read.
    WrongVersion(u8),
    /// Flag bits this build does not know.
    UnknownFlags(u16),
    /// n is zero: ogive never stores an empty distribution (an empty group is NULL).
    Empty,
    /// The BLOB's length is not what n and the flags require.
    LengthMismatch { n: u64, expected: u128, got: usize },
    /// The stored checksum differs from the one computed over the BLOB.
    Checksum,
    /// The stored parts break an invariant (order, NaN, weights).
    Parts(StatsError),
    /// The stored total weight differs from the recomputed one.
    BadTotal { stored: f64, computed: f64 },
    /// A censored estimate's readings table breaks an invariant (order, empty rows,
    /// infinite values, too many readings, or no estimate possible).
    Readings(crate::stats::censored::CensoredError),
    /// A censored estimate whose stored estimate is not the one its readings give.
    EstimateMismatch,
    /// A series value whose effective size is not finite, not positive, above the total
    /// weight, or below `min(1, total weight)`.
    BadEffectiveSize { n_eff: f64, total: f64 },
}

impl fmt::Display for BlobError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BlobError::BadHeader => write!(f, "bad header"),
            BlobError::WrongVersion(v) => {
                write!(
                    f,
                    "format version {v}; this ogive reads versions {VERSION} (empirical), 2 \
                     (censored) and 3 (series)"
                )
            }
            BlobError::UnknownFlags(flags) => write!(f, "unknown flags {flags:#06x}"),
            BlobError::Empty => write!(f, "it holds no values"),
            BlobError::LengthMismatch { n, expected, got } => write!(
                f,
                "truncated or corrupted: n = {n} needs {expected} bytes, the BLOB has {got}"
            ),
            BlobError::Checksum => write!(
                f,
                "checksum mismatch: the BLOB was changed after ogive wrote it"
            ),
            BlobError::Parts(StatsError::NotSorted { index }) => {
                write!(f, "values are not sorted (at value {index})")
            }
            BlobError::Parts(StatsError::NotANumber) => write!(f, "a value is NaN"),
            BlobError::Parts(StatsError::BadWeight(w)) => {
                write!(f, "a weight is not finite and > 0 ({w})")
            }
            BlobError::Parts(StatsError::WeightOverflow) => {
                write!(f, "the weights sum to more than the largest double")
            }
            BlobError::Parts(e) => e.fmt(f),
            BlobError::BadTotal { stored, computed } => write!(
                f,
                "total weight {stored} does not match the weights, which sum to {computed}"
            ),
            BlobError::Readings(e) => write!(f, "its readings table is invalid: {e}"),
            BlobError::EstimateMismatch => write!(
                f,
                "the stored estimate is not the one its readings give: the BLOB was changed \
                 after dist_censored wrote it"
            ),
            BlobError::BadEffectiveSize { n_eff, total } => write!(
                f,
                "its effective size {n_eff} is not between min(1, total weight) and the total \
                 weight {total}"
            ),
        }
    }
}

impl std::error::Error for BlobError {}

/// Whether bytes start like an ogive distribution BLOB of any version.
///
/// # Example
/// ```
/// use ogive::value::empirical::{encode, looks_like_ogive};
/// use ogive::stats::sample::Sample;
/// assert!(looks_like_ogive(&encode(&Sample::from_values(vec![1.0]).unwrap())));
/// assert!(!looks_like_ogive(b"hello"));
/// ```
pub fn looks_like_ogive(bytes: &[u8]) -> bool {
    bytes.starts_with(&MAGIC)
}

/// The checksum of a BLOB: FNV-1a applied to 64-bit words instead of bytes. Starting
/// from `h = 0xcbf29ce484222325`, for each 8-byte little-endian word `w` of the BLOB
/// except the checksum's own (bytes 24..32), `h = (h xor w) * 0x100000001b3` modulo 2^64.
/// Each step is a bijection of `h`, so changing any one word always changes the result.
/// A trailing part shorter than 8 bytes is padded with zeros.
///
/// # Example
/// ```
/// use ogive::value::empirical::{checksum, encode};
/// use ogive::stats::sample::Sample;
/// let blob = encode(&Sample::from_values(vec![1.0]).unwrap());
/// assert_eq!(checksum(&blob).to_le_bytes(), blob[24..32]);
/// ```
pub fn checksum(bytes: &[u8]) -> u64 {
    let mut h = FNV_OFFSET;
    for (i, chunk) in bytes.chunks(8).enumerate() {
        if i * 8 == CHECKSUM_AT {
            continue;
        }
        let mut w = [0u8; 8];
        w[..chunk.len()].copy_from_slice(chunk);
        h = (h ^ u64::from_le_bytes(w)).wrapping_mul(FNV_PRIME);
    }
    h
}

/// Writes a sample as a BLOB. An empty sample gives a header with n = 0, which [`decode`]
/// refuses; the adapters return NULL instead of encoding one.
///
/// # Example
/// ```
/// use ogive::value::empirical::{decode, encode, HEADER_LEN};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![2.0, 1.0]).unwrap();
/// let blob = encode(&s);
/// assert_eq!(blob.len(), HEADER_LEN + 2 * 8);
/// assert_eq!(decode(&blob).unwrap(), s);
/// ```
pub fn encode(s: &Sample) -> Vec<u8> {
    let mut out = Vec::with_capacity(encoded_len(s, None));
    write(s, None, &mut out);
    out
}

/// [`encode`] without aborting when the BLOB's buffer cannot be had (the SQL functions'
/// path: a finalizer must not take the host down).
///
/// # Errors
/// [`OutOfMemory`] when the BLOB does not fit in memory.
///
/// # Example
/// ```
/// use ogive::value::empirical::{encode, try_encode};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![2.0, 1.0]).unwrap();
/// assert_eq!(try_encode(&s)?, encode(&s));
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn try_encode(s: &Sample) -> Result<Vec<u8>, OutOfMemory> {
    try_write(s, None)
}

/// [`encode_series`] without aborting when the BLOB's buffer cannot be had.
///
/// # Errors
/// [`OutOfMemory`] when the BLOB does not fit in memory.
///
/// # Example
/// ```
/// use ogive::value::empirical::{encode_series, try_encode_series};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![2.0, 1.0]).unwrap();
/// assert_eq!(try_encode_series(&s, 1.5)?, encode_series(&s, 1.5));
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn try_encode_series(s: &Sample, n_eff: f64) -> Result<Vec<u8>, OutOfMemory> {
    try_write(s, Some(n_eff))
}

/// Reserves the BLOB's bytes fallibly, then writes it.
fn try_write(s: &Sample, n_eff: Option<f64>) -> Result<Vec<u8>, OutOfMemory> {
    let mut out = Vec::new();
    out.try_reserve_exact(encoded_len(s, n_eff))
        .map_err(|_| OutOfMemory { held: s.len() })?;
    write(s, n_eff, &mut out);
    Ok(out)
}

/// The length of the BLOB of `s`.
fn encoded_len(s: &Sample, n_eff: Option<f64>) -> usize {
    let header = if n_eff.is_some() {
        SERIES_HEADER_LEN
    } else {
        HEADER_LEN
    };
    let per = 8 * (1 + usize::from(s.is_weighted()));
    header.saturating_add(per.saturating_mul(s.len()))
}

/// Writes a sample of a series with its effective size as a version-3 BLOB (kind 3). The
/// caller keeps `n_eff` within `[min(1, total weight), total weight]`, which
/// [`decode_series`] checks.
///
/// # Example
/// ```
/// use ogive::value::empirical::{decode_series, encode_series, SERIES_HEADER_LEN};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![2.0, 1.0, 4.0]).unwrap();
/// let blob = encode_series(&s, 1.5);
/// assert_eq!(blob.len(), SERIES_HEADER_LEN + 3 * 8);
/// assert_eq!(decode_series(&blob).unwrap(), (s, 1.5));
/// ```
pub fn encode_series(s: &Sample, n_eff: f64) -> Vec<u8> {
    let mut out = Vec::with_capacity(encoded_len(s, Some(n_eff)));
    write(s, Some(n_eff), &mut out);
    out
}

/// Writes version 1, or version 3 when an effective size is given, into `out`, which has
/// room for [`encoded_len`] bytes (so nothing here allocates).
fn write(s: &Sample, n_eff: Option<f64>, out: &mut Vec<u8>) {
    let weights = s.weights();
    let n = s.len();
    out.extend_from_slice(&MAGIC);
    if n_eff.is_some() {
        out.push(VERSION_SERIES);
        out.push(KIND_SERIES);
    } else {
        out.push(VERSION);
        out.push(KIND_EMPIRICAL);
    }
    let flags = if weights.is_some() { FLAG_WEIGHTED } else { 0 };
    out.extend_from_slice(&flags.to_le_bytes());
    out.extend_from_slice(&(n as u64).to_le_bytes());
    out.extend_from_slice(&s.total_weight().to_le_bytes());
    out.extend_from_slice(&[0; 8]);
    if let Some(e) = n_eff {
        out.extend_from_slice(&e.to_le_bytes());
    }
    for &x in s.values() {
        out.extend_from_slice(&x.to_le_bytes());
    }
    for &w in weights.unwrap_or(&[]) {
        out.extend_from_slice(&w.to_le_bytes());
    }
    let sum = checksum(out);
    out[CHECKSUM_AT..HEADER_LEN].copy_from_slice(&sum.to_le_bytes());
}

/// Reads 8 bytes at `at` as a little-endian array; the caller has checked the length.
fn word(bytes: &[u8], at: usize) -> [u8; 8] {
    let mut w = [0u8; 8];
    w.copy_from_slice(&bytes[at..at + 8]);
    w
}

/// Reads `count` f64 values starting at byte `at`; out of memory as
/// [`BlobError::Parts`] of [`StatsError::OutOfMemory`].
fn floats(bytes: &[u8], at: usize, count: usize) -> Result<Vec<f64>, BlobError> {
    let mut out = Vec::new();
    out.try_reserve_exact(count)
        .map_err(|_| BlobError::Parts(StatsError::OutOfMemory { held: count }))?;
    out.extend(
        bytes[at..at + 8 * count]
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes([c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]])),
    );
    Ok(out)
}

/// Reads and checks a BLOB.
///
/// # Errors
/// A [`BlobError`] naming the first problem found: the header, the version, the flags,
/// the length, the order of the values, a weight, or the total weight.
///
/// # Example
/// ```
/// use ogive::value::empirical::{decode, BlobError};
/// assert_eq!(decode(b"not a distribution"), Err(BlobError::BadHeader));
/// ```
pub fn decode(bytes: &[u8]) -> Result<Sample, BlobError> {
    read(bytes, false).map(|(s, _)| s)
}

/// Reads and checks a version-3 BLOB: an empirical distribution of a series and its
/// effective size.
///
/// # Errors
/// As [`decode`], and [`BlobError::BadEffectiveSize`] for an effective size out of range.
///
/// # Example
/// ```
/// use ogive::value::empirical::{decode_series, encode, BlobError};
/// use ogive::stats::sample::Sample;
/// let plain = encode(&Sample::from_values(vec![1.0]).unwrap());
/// assert_eq!(decode_series(&plain), Err(BlobError::WrongVersion(1)));
/// ```
pub fn decode_series(bytes: &[u8]) -> Result<(Sample, f64), BlobError> {
    read(bytes, true).map(|(s, e)| (s, e.unwrap_or(f64::NAN)))
}

/// Reads version 1 (`series` false) or version 3.
fn read(bytes: &[u8], series: bool) -> Result<(Sample, Option<f64>), BlobError> {
    let (version, kind, header) = if series {
        (VERSION_SERIES, KIND_SERIES, SERIES_HEADER_LEN)
    } else {
        (VERSION, KIND_EMPIRICAL, HEADER_LEN)
    };
    if bytes.len() < HEADER_LEN || !looks_like_ogive(bytes) {
        return Err(BlobError::BadHeader);
    }
    if bytes[4] != version {
        return Err(BlobError::WrongVersion(bytes[4]));
    }
    if bytes[5] != kind {
        return Err(BlobError::BadHeader);
    }
    let flags = u16::from_le_bytes([bytes[6], bytes[7]]);
    if flags & !FLAG_WEIGHTED != 0 {
        return Err(BlobError::UnknownFlags(flags));
    }
    let weighted = flags & FLAG_WEIGHTED != 0;
    let n = u64::from_le_bytes(word(bytes, 8));
    let stored_total = f64::from_le_bytes(word(bytes, 16));
    if n == 0 {
        return Err(BlobError::Empty);
    }
    let per_value: u128 = if weighted { 16 } else { 8 };
    let expected = header as u128 + per_value * u128::from(n);
    if expected != bytes.len() as u128 {
        return Err(BlobError::LengthMismatch {
            n,
            expected,
            got: bytes.len(),
        });
    }
    if checksum(bytes) != u64::from_le_bytes(word(bytes, CHECKSUM_AT)) {
        return Err(BlobError::Checksum);
    }
    // The length matched a real slice, so n fits in usize.
    let n = n as usize;
    let values = floats(bytes, header, n)?;
    let weights = if weighted {
        Some(floats(bytes, header + 8 * n, n)?)
    } else {
        None
    };
    let sample = Sample::from_sorted(values, weights).map_err(BlobError::Parts)?;
    let computed = sample.total_weight();
    if computed.to_bits() != stored_total.to_bits() {
        return Err(BlobError::BadTotal {
            stored: stored_total,
            computed,
        });
    }
    if !series {
        return Ok((sample, None));
    }
    let n_eff = f64::from_le_bytes(word(bytes, HEADER_LEN));
    if !(n_eff > 0.0 && n_eff <= computed && n_eff >= computed.min(1.0)) {
        return Err(BlobError::BadEffectiveSize {
            n_eff,
            total: computed,
        });
    }
    Ok((sample, Some(n_eff)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rewrites the checksum after a deliberate change, to reach the later checks.
    fn reseal(mut b: Vec<u8>) -> Vec<u8> {
        let sum = checksum(&b);
        b[24..32].copy_from_slice(&sum.to_le_bytes());
        b
    }

    fn weighted() -> Vec<u8> {
        encode(&Sample::from_pairs(vec![(1.0, 0.5), (3.0, 2.0), (2.0, 1.0)]).unwrap())
    }

    #[test]
    fn round_trips_and_layout() {
        let s = Sample::from_values(vec![3.0, -1.0, 2.0]).unwrap();
        let b = encode(&s);
        // Layout by hand from the table in the module docs.
        assert_eq!(&b[..8], &[0x89, b'O', b'G', b'V', 1, 1, 0, 0]);
        assert_eq!(&b[8..16], &3u64.to_le_bytes());
        assert_eq!(&b[16..24], &3.0f64.to_le_bytes());
        assert_eq!(&b[32..40], &(-1.0f64).to_le_bytes());
        assert_eq!(decode(&b), Ok(s));
        let w = weighted();
        assert_eq!(w.len(), 32 + 16 * 3);
        assert_eq!(&w[6..8], &[1, 0]);
        assert_eq!(&w[16..24], &3.5f64.to_le_bytes());
        assert_eq!(&w[56..64], &0.5f64.to_le_bytes());
        assert!(decode(&w).unwrap().is_weighted());
    }

    #[test]
    fn every_corruption_is_named() {
        let good = weighted();
        // Overwrites bytes and reseals, so that the check under test is the one that fires.
        let with = |at: usize, bytes: &[u8]| {
            let mut b = good.clone();
            b[at..at + bytes.len()].copy_from_slice(bytes);
            decode(&reseal(b))
        };
        assert_eq!(decode(&good[..10]), Err(BlobError::BadHeader));
        assert_eq!(with(0, b"XOGV"), Err(BlobError::BadHeader));
        assert_eq!(with(4, &[2]), Err(BlobError::WrongVersion(2)));
        assert_eq!(with(5, &[7]), Err(BlobError::BadHeader));
        assert_eq!(with(6, &[3, 0]), Err(BlobError::UnknownFlags(3)));
        assert_eq!(with(8, &0u64.to_le_bytes()), Err(BlobError::Empty));
        assert!(matches!(
            decode(&good[..good.len() - 1]),
            Err(BlobError::LengthMismatch { n: 3, got: 79, .. })
        ));
        assert!(matches!(
            with(8, &u64::MAX.to_le_bytes()),
            Err(BlobError::LengthMismatch { .. })
        ));
        // Swap the first two values: out of order at index 1.
        let mut swapped = good.clone();
        swapped[32..48].rotate_left(8);
        assert_eq!(decode(&swapped), Err(BlobError::Checksum));
        assert_eq!(
            decode(&reseal(swapped)),
            Err(BlobError::Parts(StatsError::NotSorted { index: 1 }))
        );
        assert_eq!(
            with(32, &f64::NAN.to_le_bytes()),
            Err(BlobError::Parts(StatsError::NotANumber))
        );
        assert_eq!(
            with(56, &(-0.5f64).to_le_bytes()),
            Err(BlobError::Parts(StatsError::BadWeight(-0.5)))
        );
        assert_eq!(
            with(16, &4.0f64.to_le_bytes()),
            Err(BlobError::BadTotal {
                stored: 4.0,
                computed: 3.5
            })
        );
        // The weighted flag on an unweighted BLOB: the length no longer matches.
        let mut plain = encode(&Sample::from_values(vec![1.0]).unwrap());
        plain[6] = 1;
        assert!(matches!(
            decode(&plain),
            Err(BlobError::LengthMismatch { .. })
        ));
    }

    #[test]
    fn any_single_bit_flip_is_caught() {
        // Exhaustive over the bits of a small BLOB: every flip is an error.
        let good = weighted();
        for bit in 0..good.len() * 8 {
            let mut b = good.clone();
            b[bit / 8] ^= 1 << (bit % 8);
            assert!(decode(&b).is_err(), "bit {bit}");
        }
    }

    #[test]
    fn series_blobs_round_trip_and_are_checked() {
        let s = Sample::from_values(vec![3.0, -1.0, 2.0]).unwrap();
        let b = encode_series(&s, 2.25);
        // Layout by hand: version 3, kind 3, the version-1 header words, n_eff at 32.
        assert_eq!(&b[..8], &[0x89, b'O', b'G', b'V', 3, 3, 0, 0]);
        assert_eq!(&b[16..24], &3.0f64.to_le_bytes());
        assert_eq!(&b[32..40], &2.25f64.to_le_bytes());
        assert_eq!(&b[40..48], &(-1.0f64).to_le_bytes());
        assert_eq!(decode_series(&b), Ok((s.clone(), 2.25)));
        assert_eq!(decode(&b), Err(BlobError::WrongVersion(3)));
        let with = |n_eff: f64| {
            let mut c = b.clone();
            c[32..40].copy_from_slice(&n_eff.to_le_bytes());
            decode_series(&reseal(c))
        };
        for bad in [0.0, 0.5, 3.5, f64::NAN, f64::INFINITY, -1.0] {
            assert!(
                matches!(with(bad), Err(BlobError::BadEffectiveSize { .. })),
                "{bad}"
            );
        }
        assert_eq!(with(1.0), Ok((s.clone(), 1.0)));
        // Weighted, total below 1: n_eff may be the total.
        let w = Sample::from_pairs(vec![(1.0, 0.25), (2.0, 0.5)]).unwrap();
        assert_eq!(decode_series(&encode_series(&w, 0.75)), Ok((w, 0.75)));
        for bit in 0..b.len() * 8 {
            let mut c = b.clone();
            c[bit / 8] ^= 1 << (bit % 8);
            assert!(decode_series(&c).is_err(), "bit {bit}");
        }
    }
}

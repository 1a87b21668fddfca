//! The censored-estimate BLOB: how a [`Censored`] estimate (`dist_censored`) is stored.
//!
//! Format version 2 of ogive's distribution BLOB, kind 2 (docs/empirical-blob.md has the
//! full story; empirical distributions are still written as version 1, kind 1, bit for
//! bit as before). All numbers little-endian:
//!
//! | offset | size | field |
//! |---|---|---|
//! | 0 | 4 | magic `89 4F 47 56` |
//! | 4 | 1 | format version, 2 |
//! | 5 | 1 | kind, 2 = censored estimate |
//! | 6 | 1 | method: 1 Kaplan-Meier, 2 its mirror (left-censoring), 3 Turnbull |
//! | 7 | 1 | converged: 1, or 0 when Turnbull's algorithm stopped at its pass cap |
//! | 8 | 8 | k (u64): rows of the readings table, at least 1 |
//! | 16 | 8 | m (u64): pieces of the estimate |
//! | 24 | 8 | checksum (u64), as for version 1 ([`checksum`]) |
//! | 32 | 8 | passes (u64): Turnbull's EM passes, 0 for the closed forms |
//! | 40 | 8 | n (u64): the number of readings |
//! | 48 | 32 k | readings table: value x (f64, strictly ascending, finite), then the counts of exact, left- and right-censored readings at x (u64 each) |
//! | 48 + 32 k | 32 m | pieces: lo (f64), hi (f64), the cdf at hi (f64), flags (u64; bit 0 set: lo excluded) |
//!
//! The table is what the estimate is made from; the pieces are the estimate, written so
//! that a reader in another language needs no statistics to use it. [`decode`] checks the
//! header, the length and the checksum, then rebuilds the estimate from the table and
//! refuses the BLOB unless the stored estimate is exactly (bit for bit) the rebuilt one.

use crate::stats::censored::{Censored, Method, Row};

use super::empirical::{BlobError, HEADER_LEN, MAGIC, checksum};

/// The format version of a censored estimate.
pub const VERSION: u8 = 2;
/// The kind byte of a censored estimate.
pub const KIND_CENSORED: u8 = 2;
/// The size of the header in bytes.
pub const CENSORED_HEADER_LEN: usize = 48;
/// Bytes per table row and per piece.
const RECORD: usize = 32;
/// Where the checksum sits (as in version 1).
const CHECKSUM_AT: usize = 24;

fn method_byte(m: Method) -> u8 {
    match m {
        Method::KaplanMeier => 1,
        Method::Mirror => 2,
        Method::Turnbull => 3,
    }
}

/// Writes an estimate as a BLOB.
///
/// # Example
/// ```
/// use ogive::stats::censored::{Censored, Code};
/// use ogive::value::censored::{decode, encode};
/// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Right)]).unwrap();
/// let blob = encode(&e);
/// assert_eq!((blob[4], blob[5], blob.len()), (2, 2, 48 + 32 * 2 + 32 * 2));
/// assert_eq!(decode(&blob).unwrap(), e);
/// ```
pub fn encode(e: &Censored) -> Vec<u8> {
    let rows = e.rows();
    let pieces = e.pieces();
    let mut out = Vec::with_capacity(CENSORED_HEADER_LEN + RECORD * (rows.len() + pieces.len()));
    out.extend_from_slice(&MAGIC);
    out.push(VERSION);
    out.push(KIND_CENSORED);
    out.push(method_byte(e.method()));
    out.push(u8::from(e.converged()));
    out.extend_from_slice(&(rows.len() as u64).to_le_bytes());
    out.extend_from_slice(&(pieces.len() as u64).to_le_bytes());
    out.extend_from_slice(&[0; 8]);
    out.extend_from_slice(&e.passes().to_le_bytes());
    out.extend_from_slice(&e.n().to_le_bytes());
    for r in rows {
        out.extend_from_slice(&r.x.to_le_bytes());
        out.extend_from_slice(&r.exact.to_le_bytes());
        out.extend_from_slice(&r.left.to_le_bytes());
        out.extend_from_slice(&r.right.to_le_bytes());
    }
    for p in pieces {
        out.extend_from_slice(&p.lo.to_le_bytes());
        out.extend_from_slice(&p.hi.to_le_bytes());
        out.extend_from_slice(&p.cdf.to_le_bytes());
        out.extend_from_slice(&u64::from(p.lo_open).to_le_bytes());
    }
    let sum = checksum(&out);
    out[CHECKSUM_AT..HEADER_LEN].copy_from_slice(&sum.to_le_bytes());
    out
}

/// Reads the little-endian u64 at `at`; the caller has checked the length.
fn u64_at(bytes: &[u8], at: usize) -> u64 {
    let mut w = [0u8; 8];
    w.copy_from_slice(&bytes[at..at + 8]);
    u64::from_le_bytes(w)
}

/// Reads and checks a censored-estimate BLOB.
///
/// # Errors
/// A [`BlobError`] naming the first problem: the header, the version, the length, the
/// checksum, the readings table ([`BlobError::Readings`]), or a stored estimate that is
/// not the one its table gives ([`BlobError::EstimateMismatch`]).
///
/// # Example
/// ```
/// use ogive::value::{censored::decode, empirical::BlobError};
/// assert_eq!(decode(b"not a distribution"), Err(BlobError::BadHeader));
/// ```
pub fn decode(bytes: &[u8]) -> Result<Censored, BlobError> {
    if bytes.len() < CENSORED_HEADER_LEN || !bytes.starts_with(&MAGIC) {
        return Err(BlobError::BadHeader);
    }
    if bytes[4] != VERSION {
        return Err(BlobError::WrongVersion(bytes[4]));
    }
    if bytes[5] != KIND_CENSORED {
        return Err(BlobError::BadHeader);
    }
    let k = u64_at(bytes, 8);
    let m = u64_at(bytes, 16);
    if k == 0 {
        return Err(BlobError::Empty);
    }
    let expected = CENSORED_HEADER_LEN as u128 + RECORD as u128 * (u128::from(k) + u128::from(m));
    if expected != bytes.len() as u128 {
        return Err(BlobError::LengthMismatch {
            n: k,
            expected,
            got: bytes.len(),
        });
    }
    if checksum(bytes) != u64_at(bytes, CHECKSUM_AT) {
        return Err(BlobError::Checksum);
    }
    // The length matched a real slice, so k fits in usize.
    let rows: Vec<Row> = bytes[CENSORED_HEADER_LEN..CENSORED_HEADER_LEN + RECORD * k as usize]
        .chunks_exact(RECORD)
        .map(|c| Row {
            x: f64::from_bits(u64_at(c, 0)),
            exact: u64_at(c, 8),
            left: u64_at(c, 16),
            right: u64_at(c, 24),
        })
        .collect();
    let e = Censored::from_rows(rows).map_err(BlobError::Readings)?;
    if encode(&e) != bytes {
        return Err(BlobError::EstimateMismatch);
    }
    Ok(e)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::censored::{CensoredError, Code};

    fn reseal(mut b: Vec<u8>) -> Vec<u8> {
        let sum = checksum(&b);
        b[24..32].copy_from_slice(&sum.to_le_bytes());
        b
    }

    fn turnbull() -> Vec<u8> {
        let r = [
            (1.0, Code::Exact),
            (2.0, Code::Right),
            (3.0, Code::Left),
            (4.0, Code::Exact),
        ];
        encode(&Censored::from_readings(&r).unwrap())
    }

    #[test]
    fn round_trips_and_layout() {
        let b = turnbull();
        assert_eq!(&b[..8], &[0x89, b'O', b'G', b'V', 2, 2, 3, 1]);
        assert_eq!(&b[8..16], &4u64.to_le_bytes());
        assert_eq!(&b[40..48], &4u64.to_le_bytes());
        assert_eq!(&b[48..56], &1.0f64.to_le_bytes());
        assert_eq!(&b[56..64], &1u64.to_le_bytes());
        let e = decode(&b).unwrap();
        assert_eq!(encode(&e), b);
    }

    #[test]
    fn every_corruption_is_named() {
        let good = turnbull();
        let with = |at: usize, bytes: &[u8]| {
            let mut b = good.clone();
            b[at..at + bytes.len()].copy_from_slice(bytes);
            decode(&reseal(b))
        };
        assert_eq!(decode(&good[..40]), Err(BlobError::BadHeader));
        assert_eq!(with(4, &[3]), Err(BlobError::WrongVersion(3)));
        assert_eq!(with(5, &[1]), Err(BlobError::BadHeader));
        assert_eq!(with(8, &0u64.to_le_bytes()), Err(BlobError::Empty));
        assert!(matches!(
            decode(&good[..good.len() - 1]),
            Err(BlobError::LengthMismatch { .. })
        ));
        assert!(matches!(
            with(16, &u64::MAX.to_le_bytes()),
            Err(BlobError::LengthMismatch { .. })
        ));
        let mut flipped = good.clone();
        flipped[60] ^= 1;
        assert_eq!(decode(&flipped), Err(BlobError::Checksum));
        // Rows out of order, an empty row, an infinite value, a wrong estimate.
        assert_eq!(
            with(80, &0.5f64.to_le_bytes()),
            Err(BlobError::Readings(CensoredError::NotSorted { index: 1 }))
        );
        assert_eq!(
            with(56, &0u64.to_le_bytes()),
            Err(BlobError::Readings(CensoredError::EmptyRow { index: 0 }))
        );
        assert_eq!(
            with(48, &f64::NEG_INFINITY.to_le_bytes()),
            Err(BlobError::Readings(CensoredError::InfiniteReading(
                f64::NEG_INFINITY
            )))
        );
        assert_eq!(with(6, &[1]), Err(BlobError::EstimateMismatch));
        assert_eq!(with(7, &[0]), Err(BlobError::EstimateMismatch));
        let cdf_at = 48 + 32 * 4 + 16;
        assert_eq!(
            with(cdf_at, &0.3f64.to_le_bytes()),
            Err(BlobError::EstimateMismatch)
        );
    }

    #[test]
    fn any_single_bit_flip_is_caught() {
        let good = turnbull();
        for bit in 0..good.len() * 8 {
            let mut b = good.clone();
            b[bit / 8] ^= 1 << (bit % 8);
            assert!(decode(&b).is_err(), "bit {bit}");
        }
    }

    proptest::proptest! {
        #[test]
        fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(proptest::num::u8::ANY, 0..400)) {
            let mut b = bytes.clone();
            if b.len() >= 48 {
                b[..6].copy_from_slice(&[0x89, b'O', b'G', b'V', 2, 2]);
                let _ = decode(&reseal(b.clone()));
            }
            let _ = decode(&bytes);
        }
    }
}

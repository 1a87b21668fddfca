//! Counts of distinct doubles, kept while the values arrive.
//!
//! Readings rounded to a step take few distinct values: a million temperatures to 0.1
//! degC over a range of ten degrees are about a hundred grid values. A fit that works on
//! the distinct values with their counts (the binned fits of [`crate::stats::readings`],
//! EM for grouped data in [`crate::stats::mixture`]) needs only those, so an aggregate
//! can count each value as its row arrives instead of keeping every value and sorting
//! them all at the end.
//!
//! # Method
//!
//! An open-addressing hash table with linear probing (Peterson 1957, "Addressing for
//! random-access storage", IBM J. Res. Dev. 1; Knuth, *The Art of Computer Programming*
//! vol. 3, section 6.4, algorithm L) keyed by the value's IEEE bits, at most half full,
//! its size a power of two; the slot is the top bits of the key times an odd constant
//! (Fibonacci hashing, Knuth ibid.) after an xor of the high bits into the low ones. A
//! table of 2^16 slots (1 MiB) is as large as it grows: once it holds
//! [`MAX_DISTINCT`] values, a value not yet in it goes to a plain list instead, so data
//! with many distinct values cost a lookup and a push per row and the memory of today's
//! list, not a table far larger than the cache. [`Tally::distinct`] gives the distinct
//! values in increasing order with their counts: the table's entries sorted, the list
//! sorted, the two merged, and values that compare equal (`-0.0` and `0.0`) merged into
//! the first in [`f64::total_cmp`] order, exactly what sorting all the values and merging
//! their ties gives.
//!
//! Every allocation is fallible ([`crate::stats::grow`]): a table or list that cannot
//! grow gives [`OutOfMemory`].

use super::grow::{self, OutOfMemory};

/// At most this many distinct values are counted in the table; further new values are
/// listed one by one.
pub const MAX_DISTINCT: usize = 1 << 15;

/// The smallest table.
const MIN_SLOTS: usize = 16;

/// Counts of distinct doubles (see the [module documentation](self)).
///
/// # Example
/// ```
/// use ogive::stats::tally::Tally;
/// let mut t = Tally::default();
/// for x in [2.5, 1.0, 2.5, -0.0, 0.0] {
///     t.add(x, 1)?;
/// }
/// assert_eq!(t.total(), 5);
/// let (values, counts) = t.distinct()?;
/// assert_eq!(values, [-0.0, 1.0, 2.5]);
/// assert_eq!(counts, [2.0, 1.0, 2.0]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
#[derive(Debug, Clone, Default)]
pub struct Tally {
    /// The table: each slot a key (the value's bits) and its count, 0 when empty.
    slots: Vec<(u64, u64)>,
    /// Occupied slots.
    used: usize,
    /// `64 - log2(slots.len())`: the shift that takes a hash to a slot.
    shift: u32,
    /// Values that found the table full, one entry per value.
    listed: Vec<f64>,
    /// Values counted, in the table and the list.
    total: u64,
}

impl Tally {
    /// Counts `count` more copies of `x` (`count` 0 does nothing).
    ///
    /// # Errors
    /// [`OutOfMemory`] when the table or the list cannot grow; the tally is unchanged.
    #[inline]
    pub fn add(&mut self, x: f64, count: u64) -> Result<(), OutOfMemory> {
        if count == 0 {
            return Ok(());
        }
        let key = x.to_bits();
        if !self.slots.is_empty() {
            let mask = self.slots.len() - 1;
            let mut i = self.slot_of(key);
            loop {
                let (k, c) = &mut self.slots[i];
                if *c == 0 {
                    break;
                }
                if *k == key {
                    *c += count;
                    self.total += count;
                    return Ok(());
                }
                i = (i + 1) & mask;
            }
        }
        self.insert_new(key, count)
    }

    /// The slot a key's probe starts at.
    #[inline(always)]
    fn slot_of(&self, key: u64) -> usize {
        ((key ^ (key >> 32)).wrapping_mul(0x9e37_79b9_7f4a_7c15) >> self.shift) as usize
    }

    /// A value not in the table: into it (growing it when half full), or into the list
    /// once the table holds [`MAX_DISTINCT`] values.
    #[cold]
    fn insert_new(&mut self, key: u64, count: u64) -> Result<(), OutOfMemory> {
        if self.used >= MAX_DISTINCT {
            let x = f64::from_bits(key);
            let room = usize::try_from(count).map_err(|_| OutOfMemory { held: usize::MAX })?;
            grow::room(&mut self.listed, room)?;
            self.listed.extend(std::iter::repeat_n(x, room));
            self.total += count;
            return Ok(());
        }
        if 2 * (self.used + 1) > self.slots.len() {
            self.rehash(self.slots.len().max(MIN_SLOTS / 2) * 2)?;
        }
        let mask = self.slots.len() - 1;
        let mut i = self.slot_of(key);
        while self.slots[i].1 != 0 {
            i = (i + 1) & mask;
        }
        self.slots[i] = (key, count);
        self.used += 1;
        self.total += count;
        Ok(())
    }

    /// Moves the entries into a table of `size` slots (a power of two).
    fn rehash(&mut self, size: usize) -> Result<(), OutOfMemory> {
        let old = std::mem::replace(&mut self.slots, grow::filled(size, (0, 0))?);
        self.shift = 64 - size.trailing_zeros();
        let mask = size - 1;
        for (key, count) in old.into_iter().filter(|s| s.1 != 0) {
            let mut i = self.slot_of(key);
            while self.slots[i].1 != 0 {
                i = (i + 1) & mask;
            }
            self.slots[i] = (key, count);
        }
        Ok(())
    }

    /// Adds every count of `other`.
    ///
    /// # Errors
    /// [`OutOfMemory`] when the table or the list cannot grow.
    pub fn merge(&mut self, other: &Tally) -> Result<(), OutOfMemory> {
        for &(key, count) in other.slots.iter().filter(|s| s.1 != 0) {
            self.add(f64::from_bits(key), count)?;
        }
        for &x in &other.listed {
            self.add(x, 1)?;
        }
        Ok(())
    }

    /// How many values were counted.
    pub fn total(&self) -> u64 {
        self.total
    }

    /// Whether no value was counted.
    pub fn is_empty(&self) -> bool {
        self.total == 0
    }

    /// Calls `f` on every counted value and its count (a listed value with count 1), in
    /// no particular order.
    pub fn for_each(&self, mut f: impl FnMut(f64, u64)) {
        for &(key, count) in self.slots.iter().filter(|s| s.1 != 0) {
            f(f64::from_bits(key), count);
        }
        for &x in &self.listed {
            f(x, 1);
        }
    }

    /// The distinct values in increasing order ([`f64::total_cmp`]) and their counts;
    /// values that compare equal (`-0.0` and `0.0`) are merged into the first.
    ///
    /// # Errors
    /// [`OutOfMemory`] when the lists cannot be had.
    pub fn distinct(&self) -> Result<(Vec<f64>, Vec<f64>), OutOfMemory> {
        let mut entries: Vec<(f64, u64)> = Vec::new();
        grow::room(&mut entries, self.used)?;
        entries.extend(
            self.slots
                .iter()
                .filter(|s| s.1 != 0)
                .map(|&(key, count)| (f64::from_bits(key), count)),
        );
        entries.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        let listed = super::sorting::sorted_total(&self.listed);
        let capacity = entries.len() + listed.len();
        let (mut values, mut counts) = (Vec::new(), Vec::new());
        grow::room(&mut values, capacity)?;
        grow::room(&mut counts, capacity)?;
        let mut put = |x: f64, c: u64| match (values.last(), counts.last_mut()) {
            (Some(&last), Some(total)) if last == x => *total += c as f64,
            _ => {
                values.push(x);
                counts.push(c as f64);
            }
        };
        // A merge of the two sorted runs.
        let (mut a, mut b) = (entries.iter().peekable(), listed.iter().peekable());
        loop {
            match (a.peek(), b.peek()) {
                (Some(&&(x, c)), Some(&&y)) => {
                    if x.total_cmp(&y).is_le() {
                        put(x, c);
                        a.next();
                    } else {
                        put(y, 1);
                        b.next();
                    }
                }
                (Some(&&(x, c)), None) => {
                    put(x, c);
                    a.next();
                }
                (None, Some(&&y)) => {
                    put(y, 1);
                    b.next();
                }
                (None, None) => break,
            }
        }
        Ok((values, counts))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The reference: every value sorted by `total_cmp`, ties (`==`) merged into the
    /// first, as `mixture::Data::new` and `readings::distinct` do.
    fn sorted_and_merged(xs: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let mut s = xs.to_vec();
        s.sort_by(f64::total_cmp);
        let (mut v, mut c): (Vec<f64>, Vec<f64>) = (Vec::new(), Vec::new());
        for x in s {
            if v.last() == Some(&x) {
                *c.last_mut().unwrap() += 1.0;
            } else {
                v.push(x);
                c.push(1.0);
            }
        }
        (v, c)
    }

    fn bits(v: &[f64]) -> Vec<u64> {
        v.iter().map(|x| x.to_bits()).collect()
    }

    #[test]
    fn more_distinct_values_than_the_table_holds_go_to_the_list() {
        // 3 * MAX_DISTINCT distinct values, each twice, in an order that mixes values in
        // the table with values in the list.
        let m = 3 * MAX_DISTINCT;
        let xs: Vec<f64> = (0..2 * m)
            .map(|i| ((i * 7919) % m) as f64 * 0.25 - 100.0)
            .collect();
        let mut t = Tally::default();
        for &x in &xs {
            t.add(x, 1).unwrap();
        }
        assert!(!t.listed.is_empty() && t.used == MAX_DISTINCT);
        assert_eq!(t.total(), xs.len() as u64);
        let (v, c) = t.distinct().unwrap();
        let (rv, rc) = sorted_and_merged(&xs);
        assert_eq!(bits(&v), bits(&rv));
        assert_eq!(c, rc);
    }

    proptest! {
        // Values drawn from a small set (many ties), signed zeros and infinities among
        // them, added one by one, or split into two tallies that are then merged.
        #[test]
        fn distinct_equals_sorting_and_merging(
            picks in proptest::collection::vec(0usize..12, 0..300),
            split in 0usize..300,
        ) {
            let pool = [
                -0.0, 0.0, 1.5, -2.25, f64::INFINITY, f64::NEG_INFINITY, 1e-300,
                -1e300, 3.0, 0.1, 0.1 + 0.2, 0.3,
            ];
            let xs: Vec<f64> = picks.iter().map(|&i| pool[i]).collect();
            let mut one = Tally::default();
            for &x in &xs {
                one.add(x, 1).unwrap();
            }
            let cut = split.min(xs.len());
            let (mut a, mut b) = (Tally::default(), Tally::default());
            for &x in &xs[..cut] {
                a.add(x, 1).unwrap();
            }
            for &x in &xs[cut..] {
                b.add(x, 1).unwrap();
            }
            a.merge(&b).unwrap();
            let (rv, rc) = sorted_and_merged(&xs);
            for t in [&one, &a] {
                let (v, c) = t.distinct().unwrap();
                prop_assert_eq!(bits(&v), bits(&rv));
                prop_assert_eq!(&c, &rc);
                prop_assert_eq!(t.total(), xs.len() as u64);
            }
            let mut seen = 0;
            one.for_each(|_, c| seen += c);
            prop_assert_eq!(seen, xs.len() as u64);
        }
    }
}

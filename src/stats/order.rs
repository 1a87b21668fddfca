//! A multiset of numbers with order statistics: insert, remove, k-th smallest and rank,
//! each in O(log d) expected time for d distinct values. This is what makes `quantile`
//! and `ecdf` cheap as window functions: SQLite adds the row entering the frame and
//! removes the row leaving it, and each row's answer is one or two order-statistic
//! lookups, instead of a sort of the whole frame.
//!
//! # Method
//!
//! A treap (Seidel and Aragon, "Randomized search trees", *Algorithmica* 16, 464-497,
//! 1996): a binary search tree on the values (ordered by [`f64::total_cmp`]) that is also
//! a max-heap on random priorities, so its shape is that of a tree built by inserting the
//! values in random order and its expected depth is O(log d) whatever the insertion
//! order. Each node holds one distinct value, its multiplicity, and the number of values
//! in its subtree; the subtree counts turn a descent into a rank query ("order statistic
//! tree", Cormen, Leiserson, Rivest and Stein, *Introduction to Algorithms*, section 14.1).
//!
//! SQLite streams the rows of a frame, so the set of values is not known in advance and
//! ranks cannot be compressed beforehand (a Fenwick tree over ranks would need that).
//! The tree needs no such knowledge. Ties are held as multiplicities, so a value that
//! occurs a million times is one node, and removing "a 3.5" removes one copy; since
//! equal values are indistinguishable, the multiset (and every quantile of it) is exactly
//! that of the frame.
//!
//! Priorities come from a fixed-seed SplitMix64 generator, so the structure, and the
//! time it takes, are the same on every run.

use std::cmp::Ordering;

use super::rng::splitmix64;
use super::{StatsError, grow};

const NIL: u32 = u32::MAX;

#[derive(Debug, Clone, Copy)]
struct Node {
    key: f64,
    /// Copies of `key` in the multiset.
    count: u64,
    /// Values (with multiplicity) in the subtree rooted here.
    size: u64,
    priority: u64,
    left: u32,
    right: u32,
}

/// A multiset of `f64` (NaN excluded) with O(log d) insert, remove, k-th smallest and
/// rank.
///
/// # Example
/// ```
/// use ogive::stats::order::OrderStatistics;
/// let mut s = OrderStatistics::new();
/// for x in [5.0, 1.0, 3.0, 3.0] {
///     s.insert(x).unwrap();
/// }
/// assert_eq!(s.kth(0), Some(1.0));
/// assert_eq!(s.kth(2), Some(3.0));
/// assert_eq!(s.count_at_or_below(3.0), 3);
/// s.remove(3.0).unwrap();
/// assert_eq!(s.len(), 3);
/// assert_eq!(s.kth(2), Some(5.0));
/// ```
#[derive(Debug, Clone)]
pub struct OrderStatistics {
    nodes: Vec<Node>,
    free: Vec<u32>,
    root: u32,
    rng: u64,
}

impl Default for OrderStatistics {
    fn default() -> Self {
        Self::new()
    }
}

impl OrderStatistics {
    /// An empty multiset.
    pub fn new() -> Self {
        OrderStatistics {
            nodes: Vec::new(),
            free: Vec::new(),
            root: NIL,
            rng: 0x6F67_6976_6521_0001,
        }
    }

    /// A multiset holding `values`.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] if a value is NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::order::OrderStatistics;
    /// let s = OrderStatistics::from_values(&[2.0, 2.0, -1.0]).unwrap();
    /// assert_eq!((s.len(), s.distinct()), (3, 2));
    /// ```
    pub fn from_values(values: &[f64]) -> Result<Self, StatsError> {
        let mut s = Self::new();
        for &x in values {
            s.insert(x)?;
        }
        Ok(s)
    }

    /// The number of values, counting repeats.
    pub fn len(&self) -> u64 {
        self.size(self.root)
    }

    /// Whether the multiset is empty.
    pub fn is_empty(&self) -> bool {
        self.root == NIL
    }

    /// The number of distinct values (tree nodes).
    pub fn distinct(&self) -> usize {
        self.nodes.len() - self.free.len()
    }

    #[inline]
    fn size(&self, t: u32) -> u64 {
        if t == NIL {
            0
        } else {
            self.nodes[t as usize].size
        }
    }

    #[inline]
    fn node(&mut self, t: u32) -> &mut Node {
        &mut self.nodes[t as usize]
    }

    fn alloc(&mut self, key: f64) -> u32 {
        let priority = splitmix64(&mut self.rng);
        let node = Node {
            key,
            count: 1,
            size: 1,
            priority,
            left: NIL,
            right: NIL,
        };
        if let Some(i) = self.free.pop() {
            self.nodes[i as usize] = node;
            i
        } else {
            self.nodes.push(node);
            (self.nodes.len() - 1) as u32
        }
    }

    fn update(&mut self, t: u32) {
        let n = self.nodes[t as usize];
        let size = n.count + self.size(n.left) + self.size(n.right);
        self.node(t).size = size;
    }

    fn rotate_right(&mut self, t: u32) -> u32 {
        let l = self.nodes[t as usize].left;
        let lr = self.nodes[l as usize].right;
        self.node(t).left = lr;
        self.node(l).right = t;
        self.update(t);
        self.update(l);
        l
    }

    fn rotate_left(&mut self, t: u32) -> u32 {
        let r = self.nodes[t as usize].right;
        let rl = self.nodes[r as usize].left;
        self.node(t).right = rl;
        self.node(r).left = t;
        self.update(t);
        self.update(r);
        r
    }

    /// Adds one copy of `x`.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] if `x` is NaN; [`StatsError::OutOfMemory`] when the
    /// tree cannot grow (it is unchanged).
    pub fn insert(&mut self, x: f64) -> Result<(), StatsError> {
        if x.is_nan() {
            return Err(StatsError::NotANumber);
        }
        if self.free.is_empty() && self.nodes.len() == self.nodes.capacity() {
            self.make_room()?;
        }
        self.root = self.insert_at(self.root, x);
        Ok(())
    }

    /// Grows the arena (amortised doubling) and the free list with it, so that the free
    /// list never outgrows its capacity (it holds at most every node): neither `alloc`
    /// nor `remove` can then allocate.
    #[cold]
    #[inline(never)]
    fn make_room(&mut self) -> Result<(), StatsError> {
        let held = self.nodes.len();
        grow::room(&mut self.nodes, 1)?;
        let more = self.nodes.capacity() - self.free.len();
        self.free
            .try_reserve_exact(more)
            .map_err(|_| StatsError::OutOfMemory { held })
    }

    fn insert_at(&mut self, t: u32, x: f64) -> u32 {
        if t == NIL {
            return self.alloc(x);
        }
        let here = self.nodes[t as usize];
        match x.total_cmp(&here.key) {
            Ordering::Equal => {
                let n = self.node(t);
                n.count += 1;
                n.size += 1;
                t
            }
            Ordering::Less => {
                let l = self.insert_at(here.left, x);
                self.node(t).left = l;
                self.node(t).size += 1;
                if self.nodes[l as usize].priority > here.priority {
                    self.rotate_right(t)
                } else {
                    t
                }
            }
            Ordering::Greater => {
                let r = self.insert_at(here.right, x);
                self.node(t).right = r;
                self.node(t).size += 1;
                if self.nodes[r as usize].priority > here.priority {
                    self.rotate_left(t)
                } else {
                    t
                }
            }
        }
    }

    /// Removes one copy of `x`.
    ///
    /// # Errors
    /// [`NotPresent`], changing nothing, when `x` is not in the multiset (NaN never is).
    pub fn remove(&mut self, x: f64) -> Result<(), NotPresent> {
        if x.is_nan() {
            return Err(NotPresent(x));
        }
        self.root = self.remove_at(self.root, x)?;
        Ok(())
    }

    fn remove_at(&mut self, t: u32, x: f64) -> Result<u32, NotPresent> {
        if t == NIL {
            return Err(NotPresent(x));
        }
        let here = self.nodes[t as usize];
        match x.total_cmp(&here.key) {
            Ordering::Equal => {
                if here.count > 1 {
                    let n = self.node(t);
                    n.count -= 1;
                    n.size -= 1;
                    Ok(t)
                } else {
                    self.free.push(t);
                    Ok(self.join(here.left, here.right))
                }
            }
            Ordering::Less => {
                let l = self.remove_at(here.left, x)?;
                let n = self.node(t);
                n.left = l;
                n.size -= 1;
                Ok(t)
            }
            Ordering::Greater => {
                let r = self.remove_at(here.right, x)?;
                let n = self.node(t);
                n.right = r;
                n.size -= 1;
                Ok(t)
            }
        }
    }

    /// Joins two treaps whose keys are all smaller in `a` than in `b`.
    fn join(&mut self, a: u32, b: u32) -> u32 {
        if a == NIL {
            return b;
        }
        if b == NIL {
            return a;
        }
        if self.nodes[a as usize].priority > self.nodes[b as usize].priority {
            let ar = self.nodes[a as usize].right;
            let j = self.join(ar, b);
            self.node(a).right = j;
            self.update(a);
            a
        } else {
            let bl = self.nodes[b as usize].left;
            let j = self.join(a, bl);
            self.node(b).left = j;
            self.update(b);
            b
        }
    }

    /// The k-th smallest value (0-based, counting repeats), or `None` when `k >= len()`.
    pub fn kth(&self, mut k: u64) -> Option<f64> {
        let mut t = self.root;
        while t != NIL {
            let n = &self.nodes[t as usize];
            let below = self.size(n.left);
            if k < below {
                t = n.left;
            } else if k < below + n.count {
                return Some(n.key);
            } else {
                k -= below + n.count;
                t = n.right;
            }
        }
        None
    }

    /// How many values are `<= t` (in the order of [`f64::total_cmp`], so `-0.0 < 0.0`).
    pub fn count_at_or_below(&self, t: f64) -> u64 {
        let mut acc = 0;
        let mut at = self.root;
        while at != NIL {
            let n = &self.nodes[at as usize];
            if n.key.total_cmp(&t) == Ordering::Greater {
                at = n.left;
            } else {
                acc += self.size(n.left) + n.count;
                at = n.right;
            }
        }
        acc
    }

    /// Calls `f` on every value in ascending order, repeats included, stopping at the
    /// first error (O(n)). The walk's stack grows with the tree's depth (O(log n) expected
    /// for a treap), not with n.
    ///
    /// # Errors
    /// The first error of `f`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::order::OrderStatistics;
    /// let s = OrderStatistics::from_values(&[2.0, 2.0, -1.0]).unwrap();
    /// let mut seen = Vec::new();
    /// s.try_for_each(|x| { seen.push(x); Ok::<(), ()>(()) }).unwrap();
    /// assert_eq!(seen, [-1.0, 2.0, 2.0]);
    /// ```
    pub fn try_for_each<E>(&self, mut f: impl FnMut(f64) -> Result<(), E>) -> Result<(), E> {
        let mut stack: Vec<u32> = Vec::new();
        let mut t = self.root;
        while t != NIL || !stack.is_empty() {
            while t != NIL {
                stack.push(t);
                t = self.nodes[t as usize].left;
            }
            if let Some(top) = stack.pop() {
                let n = &self.nodes[top as usize];
                for _ in 0..n.count {
                    f(n.key)?;
                }
                t = n.right;
            }
        }
        Ok(())
    }

    /// The values in ascending order, repeats included (O(n); for tests and debugging).
    pub fn to_sorted_vec(&self) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.len() as usize);
        let _ = self.try_for_each(|x| {
            out.push(x);
            Ok::<(), ()>(())
        });
        out
    }

    /// Checks the tree's invariants (order, heap, counts) and returns its depth; for
    /// tests.
    #[cfg(test)]
    fn check(&self) -> usize {
        fn walk(
            s: &OrderStatistics,
            t: u32,
            lo: Option<f64>,
            hi: Option<f64>,
            depth: usize,
            deepest: &mut usize,
        ) -> u64 {
            if t == NIL {
                return 0;
            }
            *deepest = (*deepest).max(depth);
            let n = s.nodes[t as usize];
            assert!(n.count > 0);
            if let Some(lo) = lo {
                assert_eq!(lo.total_cmp(&n.key), Ordering::Less);
            }
            if let Some(hi) = hi {
                assert_eq!(n.key.total_cmp(&hi), Ordering::Less);
            }
            for c in [n.left, n.right] {
                if c != NIL {
                    assert!(s.nodes[c as usize].priority <= n.priority);
                }
            }
            let size = n.count
                + walk(s, n.left, lo, Some(n.key), depth + 1, deepest)
                + walk(s, n.right, Some(n.key), hi, depth + 1, deepest);
            assert_eq!(size, n.size);
            size
        }
        let mut deepest = 0;
        walk(self, self.root, None, None, 1, &mut deepest);
        deepest
    }
}

/// Returned by [`OrderStatistics::remove`] when the value is not in the multiset.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NotPresent(pub f64);

impl std::fmt::Display for NotPresent {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} is not in the multiset", self.0)
    }
}

impl std::error::Error for NotPresent {}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Reference by enumeration: the sorted vector of the same multiset.
    fn reference_kth(v: &[f64], k: usize) -> Option<f64> {
        let mut s = v.to_vec();
        s.sort_by(f64::total_cmp);
        s.get(k).copied()
    }

    #[test]
    fn ties_zeros_and_infinities() {
        let xs = [
            0.0,
            -0.0,
            3.0,
            3.0,
            3.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
            -0.0,
        ];
        let mut s = OrderStatistics::from_values(&xs).unwrap();
        s.check();
        let mut sorted = xs.to_vec();
        sorted.sort_by(f64::total_cmp);
        let got = s.to_sorted_vec();
        assert_eq!(
            got.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
            sorted.iter().map(|x| x.to_bits()).collect::<Vec<_>>()
        );
        assert_eq!(s.distinct(), 5);
        // -0.0 orders before 0.0: two values are <= -0.0 besides -inf.
        assert_eq!(s.count_at_or_below(-0.0), 3);
        assert_eq!(s.count_at_or_below(0.0), 4);
        assert_eq!(s.remove(7.0), Err(NotPresent(7.0)));
        assert!(s.remove(f64::NAN).is_err());
        assert_eq!(s.insert(f64::NAN), Err(StatsError::NotANumber));
        for x in xs {
            s.remove(x).unwrap();
            s.check();
        }
        assert_eq!(s.distinct(), 0);
        assert!(s.is_empty());
        assert_eq!(s.kth(0), None);
    }

    #[test]
    fn sliding_window_of_sorted_input_stays_shallow() {
        // Sorted input is the worst case for an unbalanced search tree (depth w); the
        // treap's expected depth is about 2 ln w = 14 for w = 1000 (Seidel and Aragon
        // 1996). The bound 40 leaves room for the maximum over the run; the seed is fixed,
        // so this is deterministic.
        let mut s = OrderStatistics::new();
        let w = 1000;
        let mut deepest = 0;
        for i in 0..50_000u32 {
            s.insert(f64::from(i)).unwrap();
            if i >= w {
                s.remove(f64::from(i - w)).unwrap();
            }
            if i % 997 == 0 {
                deepest = deepest.max(s.check());
            }
        }
        assert_eq!(s.len(), u64::from(w));
        assert_eq!(s.kth(0), Some(f64::from(50_000 - w)));
        assert!(deepest <= 40, "depth {deepest}");
    }

    proptest! {
        /// Random inserts and removals against a sorted vector (enumeration): every k-th
        /// value and every rank agree exactly.
        #[test]
        fn matches_sorted_vector(ops in proptest::collection::vec((0u8..3, -6i32..6), 1..300)) {
            let mut s = OrderStatistics::new();
            let mut v: Vec<f64> = Vec::new();
            for (op, x) in ops {
                let x = f64::from(x) / 2.0;
                if op == 0 && !v.is_empty() {
                    // Remove a value that is present.
                    let i = (x.to_bits() as usize) % v.len();
                    let y = v.swap_remove(i);
                    s.remove(y).unwrap();
                } else {
                    v.push(x);
                    s.insert(x).unwrap();
                }
            }
            s.check();
            prop_assert_eq!(s.len() as usize, v.len());
            for k in 0..=v.len() {
                prop_assert_eq!(s.kth(k as u64), reference_kth(&v, k));
            }
            for t in -7..7 {
                let t = f64::from(t) / 2.0 + 0.25;
                let want = v.iter().filter(|&&x| x <= t).count() as u64;
                prop_assert_eq!(s.count_at_or_below(t), want);
            }
        }
    }
}

//! Fallible growth of vectors: the one place where data-sized buffers grow.
//!
//! Rust aborts the process when an allocation fails, and a loadable extension must never
//! take its host down. Every buffer that grows with the data (a group's values, a merge,
//! a window's tree, a finalizer's copy) grows through these helpers, which reserve with
//! `try_reserve` (amortised doubling, as `Vec::push` does) and give [`OutOfMemory`]
//! instead. The kernels turn it into their own error's out-of-memory variant; the
//! engine adapters report it with their out-of-memory code.

/// Memory ran out while a buffer held `held` elements (for a new buffer: the number of
/// elements it was to hold).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OutOfMemory {
    /// How many elements the buffer held when it could not grow, or was to hold.
    pub held: usize,
}

/// Appends `x` to `xs`, doubling the capacity when full, without aborting.
///
/// # Errors
/// [`OutOfMemory`] when the larger buffer cannot be had; `xs` is unchanged.
///
/// # Example
/// ```
/// let mut xs = Vec::new();
/// ogive::stats::grow::push(&mut xs, 1.5)?;
/// assert_eq!(xs, [1.5]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
#[inline]
pub fn push<T>(xs: &mut Vec<T>, x: T) -> Result<(), OutOfMemory> {
    if xs.len() == xs.capacity() {
        grow(xs, 1)?;
    }
    xs.push(x);
    Ok(())
}

/// Appends a copy of every element of `more` to `xs` without aborting.
///
/// # Errors
/// [`OutOfMemory`] (holding the length the union would have had) when the larger buffer
/// cannot be had; `xs` is unchanged.
///
/// # Example
/// ```
/// let mut xs = vec![1, 2];
/// ogive::stats::grow::extend(&mut xs, &[3, 4])?;
/// assert_eq!(xs, [1, 2, 3, 4]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn extend<T: Clone>(xs: &mut Vec<T>, more: &[T]) -> Result<(), OutOfMemory> {
    if xs.capacity() - xs.len() < more.len() {
        let held = xs.len().saturating_add(more.len());
        grow(xs, more.len()).map_err(|_| OutOfMemory { held })?;
    }
    xs.extend_from_slice(more);
    Ok(())
}

/// `n` copies of `x` (`vec![x; n]`) without aborting.
///
/// # Errors
/// [`OutOfMemory`] when `n` elements do not fit.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::grow::filled(3, 1.0)?, [1.0; 3]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn filled<T: Clone>(n: usize, x: T) -> Result<Vec<T>, OutOfMemory> {
    let mut out = Vec::new();
    out.try_reserve_exact(n)
        .map_err(|_| OutOfMemory { held: n })?;
    out.resize(n, x);
    Ok(out)
}

/// `f` of every element of `xs`, collected without aborting.
///
/// # Errors
/// [`OutOfMemory`] when `xs.len()` results do not fit.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::grow::map(&[1.0, 4.0], |x: &f64| x.sqrt())?, [1.0, 2.0]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn map<T, U>(xs: &[T], f: impl FnMut(&T) -> U) -> Result<Vec<U>, OutOfMemory> {
    let mut out = Vec::new();
    out.try_reserve_exact(xs.len())
        .map_err(|_| OutOfMemory { held: xs.len() })?;
    out.extend(xs.iter().map(f));
    Ok(out)
}

/// Makes sure `xs` can take `more` further elements without reallocating, doubling the
/// capacity when it must grow.
///
/// # Errors
/// [`OutOfMemory`] when the larger buffer cannot be had; `xs` is unchanged.
///
/// # Example
/// ```
/// let mut xs: Vec<u8> = Vec::new();
/// ogive::stats::grow::room(&mut xs, 3)?;
/// assert!(xs.capacity() >= 3);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn room<T>(xs: &mut Vec<T>, more: usize) -> Result<(), OutOfMemory> {
    if xs.capacity() - xs.len() < more {
        grow(xs, more)?;
    }
    Ok(())
}

/// Makes room for `more` elements: at least double the capacity (amortised O(1) pushes).
#[cold]
#[inline(never)]
fn grow<T>(xs: &mut Vec<T>, more: usize) -> Result<(), OutOfMemory> {
    let held = xs.len();
    // Not the least that would do: growing by one near the limit would copy the whole
    // buffer on every push.
    let want = more.max(xs.capacity()).max(4);
    xs.try_reserve_exact(want).map_err(|_| OutOfMemory { held })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_buffer_too_large_for_the_address_space_is_an_error_not_an_abort() {
        // usize::MAX / 2 elements of 8 bytes exceed isize::MAX bytes: try_reserve refuses.
        let mut xs: Vec<f64> = vec![1.0];
        let huge = vec![(); usize::MAX / 2];
        let e = filled(usize::MAX / 2, 0.0f64).unwrap_err();
        assert_eq!(
            e,
            OutOfMemory {
                held: usize::MAX / 2
            }
        );
        let mut units: Vec<()> = Vec::new();
        extend(&mut units, &huge).unwrap();
        assert_eq!(units.len(), usize::MAX / 2);
        assert!(map(&huge, |_| 0u64).is_err());
        push(&mut xs, 2.0).unwrap();
        assert_eq!(xs, [1.0, 2.0]);
    }

    #[test]
    fn pushes_double_the_capacity() {
        let mut xs = Vec::new();
        let mut caps = Vec::new();
        for i in 0..100 {
            push(&mut xs, i).unwrap();
            if caps.last() != Some(&xs.capacity()) {
                caps.push(xs.capacity());
            }
        }
        assert_eq!(caps, [4, 8, 16, 32, 64, 128]);
        assert_eq!(xs, (0..100).collect::<Vec<_>>());
    }
}

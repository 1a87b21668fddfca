//! Equal-width histograms of an empirical distribution, with the usual bin-count rules.
//!
//! The bins span `[min, max]` of the values (`[v - 0.5, v + 0.5]` when all values equal
//! `v`) in equal widths. A rule proposes a bin width `b`; the number of bins is then
//! `ceil((max - min) / b)` (one bin when the width is 0). With `n` the number of values
//! (the total weight, with frequency weights), `r = max - min` and `s` the standard
//! deviation with divisor n:
//!
//! | rule | width | source |
//! |---|---|---|
//! | `sturges` | `r / (log2(n) + 1)` | H. A. Sturges, "The choice of a class interval", *JASA* 21(153), 65-66, 1926 |
//! | `scott` | `(24 sqrt(pi) / n)^(1/3) s` | D. W. Scott, "On optimal and data-based histograms", *Biometrika* 66(3), 605-610, 1979 |
//! | `fd` | `2 IQR n^(-1/3)` | D. Freedman and P. Diaconis, "On the histogram as a density estimator: L2 theory", *Z. Wahrscheinlichkeitstheorie verw. Gebiete* 57, 453-476, 1981 |
//! | `sqrt` | `r / sqrt(n)` | the square-root choice |
//!
//! The IQR uses type 7 quartiles. These are the formulas, and the order of arithmetic, of
//! `numpy.histogram_bin_edges`, whose edges the tests reproduce, with one change for
//! reading: linspace's arithmetic often lands a unit in the last place beside a short
//! decimal (`88.17999999999999` for 88.18), so an interior edge moves to the shortest
//! decimal of at most [`SNAP_DIGITS`] significant digits within [`SNAP_ULPS`] units in the
//! last place of linspace's terms, when no value lies between the two. Counts are then
//! numpy's exactly and edges within a few units in the last place. A bin holds the values
//! in `[lo, hi)`, the last bin also its right edge; `density` is `count / (width * n)`, so
//! the bars integrate to 1.

use std::f64::consts::PI;

use super::StatsError;
use super::grid::linspace;
use super::moments::Moments;
use super::quantile::QuantileType;
use super::sample::Sample;
use super::sum::NeumaierSum;

/// The most bins a histogram may have.
pub const MAX_BINS: i64 = 1_000_000;

/// How the number of bins is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinRule {
    /// Sturges (1926).
    Sturges,
    /// Scott (1979).
    Scott,
    /// Freedman and Diaconis (1981).
    FreedmanDiaconis,
    /// The square root of n.
    Sqrt,
    /// A fixed number of bins, from 1 to [`MAX_BINS`].
    Count(usize),
}

impl BinRule {
    /// Reads a rule name: `sturges`, `scott`, `fd` or `sqrt` (any case, spaces around
    /// ignored).
    ///
    /// # Errors
    /// [`StatsError::UnknownBinRule`] for any other name.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::histogram::BinRule;
    /// assert_eq!(BinRule::parse("FD"), Ok(BinRule::FreedmanDiaconis));
    /// assert!(BinRule::parse("auto").is_err());
    /// ```
    pub fn parse(name: &str) -> Result<BinRule, StatsError> {
        let name = name.trim();
        [
            ("sturges", BinRule::Sturges),
            ("scott", BinRule::Scott),
            ("fd", BinRule::FreedmanDiaconis),
            ("sqrt", BinRule::Sqrt),
        ]
        .into_iter()
        .find(|(known, _)| name.eq_ignore_ascii_case(known))
        .map(|(_, rule)| rule)
        .ok_or_else(|| StatsError::UnknownBinRule(name.to_string()))
    }

    /// A fixed number of bins.
    ///
    /// # Errors
    /// [`StatsError::BadBinCount`] unless `1 <= bins <= MAX_BINS`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::histogram::BinRule;
    /// assert_eq!(BinRule::count(10), Ok(BinRule::Count(10)));
    /// assert!(BinRule::count(0).is_err());
    /// ```
    pub fn count(bins: i64) -> Result<BinRule, StatsError> {
        if (1..=MAX_BINS).contains(&bins) {
            Ok(BinRule::Count(bins as usize))
        } else {
            Err(StatsError::BadBinCount(bins))
        }
    }

    /// The rule's name as `parse` reads it (`count` for a fixed number).
    pub fn name(self) -> &'static str {
        match self {
            BinRule::Sturges => "sturges",
            BinRule::Scott => "scott",
            BinRule::FreedmanDiaconis => "fd",
            BinRule::Sqrt => "sqrt",
            BinRule::Count(_) => "count",
        }
    }
}

/// One bar of a histogram.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bin {
    /// Left edge (included).
    pub lo: f64,
    /// Right edge (excluded, but for the last bin).
    pub hi: f64,
    /// The number of values in the bin (their total weight, when weighted).
    pub count: f64,
    /// `count / (hi - lo) / n`: the bars integrate to 1.
    pub density: f64,
}

/// The bin width a rule proposes for `n` values spanning `range`.
fn rule_width(sample: &Sample, rule: BinRule, n: f64, range: f64) -> Result<f64, StatsError> {
    Ok(match rule {
        BinRule::Sturges => range / (n.log2() + 1.0),
        BinRule::Sqrt => range / n.sqrt(),
        BinRule::Scott => {
            let s = Moments::of(sample.values(), sample.weights())
                .ok_or(StatsError::InfiniteValues)?
                .population_sd();
            (24.0 * PI.sqrt() / n).powf(1.0 / 3.0) * s
        }
        BinRule::FreedmanDiaconis => {
            let q = |p| {
                sample
                    .quantile(p, QuantileType::DEFAULT)
                    .map(|q| q.unwrap_or(f64::NAN))
            };
            let iqr = q(0.75)? - q(0.25)?;
            2.0 * iqr * n.powf(-1.0 / 3.0)
        }
        BinRule::Count(_) => 0.0,
    })
}

/// The bin edges of a sample under a rule: `bins + 1` increasing numbers. Empty for an
/// empty sample.
///
/// # Errors
/// [`StatsError::InfiniteValues`] when a value is infinite or the range overflows;
/// [`StatsError::TooManyBins`] when a rule asks for more than [`MAX_BINS`] bins;
/// [`StatsError::BinsTooNarrow`] when the bins would be narrower than the doubles allow.
///
/// # Example
/// ```
/// use ogive::stats::histogram::{bin_edges, BinRule};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![0.0, 1.0, 2.0, 4.0]).unwrap();
/// assert_eq!(bin_edges(&s, BinRule::Count(2)).unwrap(), vec![0.0, 2.0, 4.0]);
/// // sqrt: width 4 / sqrt(4) = 2, so ceil(4 / 2) = 2 bins.
/// assert_eq!(bin_edges(&s, BinRule::Sqrt).unwrap(), vec![0.0, 2.0, 4.0]);
/// ```
pub fn bin_edges(sample: &Sample, rule: BinRule) -> Result<Vec<f64>, StatsError> {
    let values = sample.values();
    let (Some(&min), Some(&max)) = (values.first(), values.last()) else {
        return Ok(Vec::new());
    };
    let range = max - min;
    if !range.is_finite() {
        return Err(StatsError::InfiniteValues);
    }
    let (first, last) = if min == max {
        (min - 0.5, max + 0.5)
    } else {
        (min, max)
    };
    let bins = match rule {
        BinRule::Count(k) => k,
        rule => {
            let width = rule_width(sample, rule, sample.total_weight(), range)?;
            if width > 0.0 {
                let bins = ((last - first) / width).ceil();
                if bins.is_nan() || bins > MAX_BINS as f64 {
                    return Err(StatsError::TooManyBins {
                        rule: rule.name(),
                        bins,
                    });
                }
                bins as usize
            } else {
                1
            }
        }
    };
    let mut edges = linspace(first, last, bins + 1);
    if edges.windows(2).any(|e| e[0] >= e[1]) {
        return Err(StatsError::BinsTooNarrow { bins });
    }
    for i in 1..bins {
        let (e, below, above) = (edges[i], edges[i - 1], edges[i + 1]);
        // linspace's error at this point: about an ulp of each of `first` and the offset.
        let tol = SNAP_ULPS / 2.0 * f64::EPSILON * (first.abs() + (e - first).abs());
        edges[i] = shortest_near(e, tol, |d| {
            // Still between its neighbours, and no value changes bin.
            let (a, b) = if d < e { (d, e) } else { (e, d) };
            below < d
                && d < above
                && values.partition_point(|&x| x < b) == values.partition_point(|&x| x < a)
        });
    }
    Ok(edges)
}

/// How far an interior bin edge may move to a shorter decimal, in units in the last place
/// of the terms of linspace's sum (`first` and `i * step`), whose own error is about one
/// of each.
pub const SNAP_ULPS: f64 = 4.0;

/// The most significant digits of a decimal an edge moves to: a longer one would read no
/// better than the edge itself.
pub const SNAP_DIGITS: i32 = 12;

/// Exact powers of ten, 1e0 to 1e22 (every one representable as a double).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// The double nearest the shortest decimal (1 to [`SNAP_DIGITS`] significant digits)
/// within `tol` of `e` that `ok` accepts; `e` itself when there is none.
///
/// A candidate with `k` decimals is `m / 10^k` (or `m * 10^-k`) for a whole `m` below
/// 10^12: both operands exact, so the one rounding of the division gives the double
/// nearest the decimal, the value Rust's own parser would give.
fn shortest_near(e: f64, tol: f64, ok: impl Fn(f64) -> bool) -> f64 {
    if e == 0.0 || !e.is_finite() {
        return e;
    }
    let magnitude = e.abs().log10().floor() as i32;
    for digits in 1..=SNAP_DIGITS {
        let k = digits - 1 - magnitude;
        let Some(&scale) = POW10.get(k.unsigned_abs() as usize) else {
            continue;
        };
        let d = if k >= 0 {
            (e * scale).round() / scale
        } else {
            (e / scale).round() * scale
        };
        if d != e && (d - e).abs() <= tol && ok(d) {
            return d;
        }
        if d == e {
            return e;
        }
    }
    e
}

/// The histogram of a sample under a rule. Empty for an empty sample.
///
/// # Errors
/// As [`bin_edges`].
///
/// # Example
/// ```
/// use ogive::stats::histogram::{histogram, BinRule};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![0.0, 1.0, 2.0, 4.0]).unwrap();
/// let h = histogram(&s, BinRule::Count(2)).unwrap();
/// assert_eq!((h[0].count, h[1].count), (2.0, 2.0)); // [0, 2) and [2, 4]
/// assert_eq!(h[0].density, 0.25); // 2 / 2 / 4
/// ```
pub fn histogram(sample: &Sample, rule: BinRule) -> Result<Vec<Bin>, StatsError> {
    let edges = bin_edges(sample, rule)?;
    let values = sample.values();
    let total = sample.total_weight();
    let bins = edges.len().saturating_sub(1);
    let mut out = Vec::with_capacity(bins);
    let mut start = 0;
    for (i, e) in edges.windows(2).enumerate() {
        let end = if i + 1 == bins {
            values.len()
        } else {
            start + values[start..].partition_point(|&x| x < e[1])
        };
        let count = match sample.weights() {
            None => (end - start) as f64,
            Some(w) => {
                let mut s = NeumaierSum::default();
                w[start..end].iter().for_each(|&w| s.add(w));
                s.value()
            }
        };
        out.push(Bin {
            lo: e[0],
            hi: e[1],
            count,
            density: count / (e[1] - e[0]) / total,
        });
        start = end;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edges_move_to_short_decimals_only_where_no_value_changes_bin() {
        // numpy.linspace(88.0, 88.3, 6)[3] is 88.17999999999999 (numpy 2.4.6); its
        // shortest neighbour 88.18 is 1 ulp away.
        let grid = linspace(88.0, 88.3, 6);
        assert_eq!(format!("{:?}", grid[3]), "88.17999999999999");
        let s = Sample::from_values(vec![88.0, 88.1, 88.3]).unwrap();
        let edges = bin_edges(&s, BinRule::Count(5)).unwrap();
        assert_eq!(format!("{:?}", edges[3]), "88.18");
        // A value at 88.17999999999999 would change bin: that edge stays numpy's.
        let s = Sample::from_values(vec![88.0, grid[3], 88.3]).unwrap();
        let edges = bin_edges(&s, BinRule::Count(5)).unwrap();
        assert_eq!(edges[3], grid[3]);
        // Edges with no short decimal nearby stay numpy's to the bit.
        let s = Sample::from_values(vec![0.0, 1.0 / 3.0, std::f64::consts::PI]).unwrap();
        assert_eq!(
            bin_edges(&s, BinRule::Count(7)).unwrap(),
            linspace(0.0, std::f64::consts::PI, 8)
        );
    }

    #[test]
    fn shortest_near_finds_the_shortest_accepted_decimal() {
        let t = 4.0 * f64::EPSILON * 100.0;
        assert_eq!(shortest_near(88.17999999999999, t, |_| true), 88.18);
        assert_eq!(shortest_near(0.30000000000000004, 1e-16, |_| true), 0.3);
        assert_eq!(shortest_near(1234567.0000000002, 1e-9, |_| true), 1234567.0);
        assert_eq!(shortest_near(-2.5e-8 - 1e-24, 1e-22, |_| true), -2.5e-8);
        // Refused candidates leave the value as it was.
        assert_eq!(
            shortest_near(88.17999999999999, t, |_| false),
            88.17999999999999
        );
        assert_eq!(shortest_near(0.0, 1.0, |_| true), 0.0);
    }

    #[test]
    fn rules_by_hand() {
        // x = 0..=15 (n = 16, range 15). Sturges: 15 / (4 + 1) = 3, so 5 bins. sqrt: 15 / 4,
        // so 4 bins. fd: IQR = 11.25 - 3.75 = 7.5 (type 7), width 2 * 7.5 / 16^(1/3) =
        // 5.95..., so 3 bins. scott: s = sqrt(21.25) (divisor n), width
        // (24 sqrt(pi) / 16)^(1/3) * 4.6098 = 6.4..., so 3 bins. Hand arithmetic.
        let s = Sample::from_values((0..16).map(f64::from).collect()).unwrap();
        let bins = |r| bin_edges(&s, r).unwrap().len() - 1;
        assert_eq!(bins(BinRule::Sturges), 5);
        assert_eq!(bins(BinRule::Sqrt), 4);
        assert_eq!(bins(BinRule::FreedmanDiaconis), 3);
        assert_eq!(bins(BinRule::Scott), 3);
    }

    #[test]
    fn constant_sample_gets_one_unit_bin() {
        let s = Sample::from_values(vec![3.0; 5]).unwrap();
        for rule in [BinRule::Sturges, BinRule::Scott, BinRule::FreedmanDiaconis] {
            let h = histogram(&s, rule).unwrap();
            assert_eq!(
                h,
                vec![Bin {
                    lo: 2.5,
                    hi: 3.5,
                    count: 5.0,
                    density: 1.0
                }]
            );
        }
    }

    #[test]
    fn counts_cover_every_value_once() {
        // Values on the edges go right, the maximum stays in the last bin.
        let s = Sample::from_pairs(vec![(0.0, 1.0), (1.0, 2.0), (2.0, 0.5), (2.0, 1.5)]).unwrap();
        let h = histogram(&s, BinRule::Count(2)).unwrap();
        assert_eq!((h[0].count, h[1].count), (1.0, 4.0));
        let total: f64 = h.iter().map(|b| b.density * (b.hi - b.lo)).sum();
        assert_eq!(total, 1.0);
    }

    #[test]
    fn refuses_what_cannot_be_drawn() {
        let inf = Sample::from_values(vec![0.0, f64::INFINITY]).unwrap();
        assert_eq!(
            bin_edges(&inf, BinRule::Sturges),
            Err(StatsError::InfiniteValues)
        );
        // Total weight 1e14: sqrt asks for ceil(sqrt(1e14)) = 1e7 bins.
        let heavy = Sample::from_pairs(vec![(0.0, 5e13), (1.0, 5e13)]).unwrap();
        assert_eq!(
            bin_edges(&heavy, BinRule::Sqrt),
            Err(StatsError::TooManyBins {
                rule: "sqrt",
                bins: 1e7
            })
        );
        let spike =
            Sample::from_values(vec![0.0; 1000].into_iter().chain([1e9]).collect()).unwrap();
        // IQR 0: fd proposes width 0, so one bin.
        assert_eq!(
            bin_edges(&spike, BinRule::FreedmanDiaconis).unwrap().len(),
            2
        );
        // One ulp between the ends cannot hold 10 bins.
        let tiny = Sample::from_values(vec![1.0, 1.0 + f64::EPSILON]).unwrap();
        assert_eq!(
            bin_edges(&tiny, BinRule::Count(10)),
            Err(StatsError::BinsTooNarrow { bins: 10 })
        );
    }
}

//! Kolmogorov-Smirnov tests: two samples, and one sample against a fully specified cdf.
//!
//! # Statistics
//!
//! For samples `x` (size `n1`, ECDF `F1`) and `y` (size `n2`, ECDF `F2`), with `N = n1 + n2`,
//! the one-sided statistics are `D+ = max(F1 - F2)` and `D- = max(F2 - F1)` over the pooled
//! values, and the two-sided one is `D = max(D+, D-)`. The alternatives keep scipy's meaning:
//! `greater` uses `D+` (the cdf of `x` lies above that of `y` somewhere, so `x` tends to be
//! smaller), `less` uses `D-`. Both ECDFs jump at whole multiples of `1/n1` and `1/n2`, so each
//! statistic is held exactly as an integer `h` with `D = h / (n1 n2)`; p-values compare these
//! integers, never rounded reals.
//!
//! # Exact p-values by lattice paths, conditional on ties
//!
//! Under the null hypothesis, given the pooled values, every choice of which `n1` of the `N`
//! pooled values form `x` is equally likely (a permutation distribution). Walk through the
//! pooled sorted values; a value from `x` is a step right, one from `y` a step up, so a split is
//! a lattice path from `(0, 0)` to `(n1, n2)` and at point `(i, j)` the difference
//! `F1 - F2 = (i n2 - j n1) / (n1 n2)`. The statistic is read only where the ECDFs are read:
//! at the end of each block of tied values. So `P(D >= d)` is the share of paths that touch the
//! boundary `|i n2 - j n1| >= h` at a block end (Hodges 1958 for the lattice-path view of the
//! Smirnov test; Schroer and Trenkler 1995 for counting only at the ends of tie blocks, which
//! makes the p-value exact conditional on the observed tie pattern). Without ties every point is
//! a block end and this is the classical exact distribution.
//!
//! The count is done stably, as probabilities instead of binomial coefficients: the path is a
//! walk that steps right from `(i, j)` with probability `(n1 - i) / (N - i - j)` and up
//! otherwise (drawing without replacement), every entry stays in `[0, 1]`, nothing overflows,
//! and the probability of first reaching the boundary is added up, term by positive term, with
//! a compensated sum. So small p-values keep their relative precision (no `1 - (1 - p)`
//! cancellation) and sizes of several thousand per sample work: the work is at most
//! `(n1 + 1)(n2 + 1)` cell updates and the memory `n1 + 1` numbers.
//!
//! # Asymptotic p-values
//!
//! Beyond [`AUTO_EXACT_CELLS`] (or on request) the p-value is asymptotic, with the effective
//! size `en = n1 n2 / (n1 + n2)`:
//!
//! - two-sided: Kolmogorov's limit with its finite-sample correction taken from the one-sample
//!   distribution: `P(D_m >= d)` for a one-sample statistic of size `m = round(en)` (ties to
//!   even), computed by [`kolmogorov_sf`] (Simard and L'Ecuyer 2011: exact Durbin matrix where
//!   it is accurate, the Pelz-Good (1976) expansion of the Kolmogorov limit in powers of
//!   `1/sqrt(m)` elsewhere). This is also what scipy's `ks_2samp(method='asymp')` computes.
//! - one-sided: Smirnov's limit `exp(-2 z^2)`, `z = sqrt(en) d`, with Hodges' (1958,
//!   eq. 5.3) small-sample correction: `exp(-2 z^2 - 2 z (m + 2 n) / (3 sqrt(m n (m + n))))`
//!   with `m >= n` the two sizes.
//! - with ties in the pooled sample: the limit for discrete data, the Brownian bridge observed
//!   only at the pooled ECDF's values at the distinct values (`ties.rs`, [`ties_2samp_p`];
//!   Schmid 1958, Noether 1963), reported as [`MethodUsed::AsymptoticTies`]. Without ties the
//!   formulas above are used unchanged; above [`MAX_TIE_POINTS`] distinct values too (then
//!   conservative: the sup over all of `[0, 1]` is at least the max over the values).
//!
//! # One sample
//!
//! Against a continuous cdf `F`, `D+ = max(i/n - F(x(i)))`, `D- = max(F(x(i)) - (i-1)/n)`.
//! The two-sided distribution of `D` is evaluated as Simard and L'Ecuyer (2011) recommend:
//! closed forms of Ruben and Gambino (1982) at the extremes, the Durbin (1968) matrix in the
//! formulation of Marsaglia, Tsang and Wang (2003) for small `n d^2`, the one-sided tail
//! doubled (Miller 1956; exact for `d >= 1/2`) in the upper tail, and the Pelz-Good (1976)
//! asymptotic series for large `n`. One-sided p-values use the exact Birnbaum-Tingey (1951)
//! formula for `P(D+ >= d)`. The p-values assume the cdf was fixed before seeing the data; with
//! parameters estimated from the same data they are too large (Lilliefors 1967): see
//! [`crate::stats::lilliefors`].
//!
//! Files: this one holds the shared vocabulary (alternatives, methods, errors);
//! `two_sample.rs` the two-sample test, `ties.rs` its large-sample p-value with ties,
//! `one_sample.rs` the one-sample test, and
//! `distribution.rs` the Kolmogorov and Smirnov distributions they refer to.

use std::fmt;

mod distribution;
mod one_sample;
mod ties;
mod two_sample;

pub use distribution::*;
pub use one_sample::*;
pub use ties::*;
pub use two_sample::*;

/// Two-sample sizes with `n1 * n2` up to this use the exact p-value under [`PMethod::Auto`]
/// (one hundred million lattice cells: about a second at most).
pub const AUTO_EXACT_CELLS: u64 = 100_000_000;

/// The largest `n1 * n2` for which [`PMethod::Exact`] is attempted in the two-sample test;
/// beyond it the exact count would take minutes and is refused.
pub const MAX_EXACT_CELLS: u64 = 4_000_000_000;

/// The largest Durbin matrix order (`2 ceil(n d) - 1`) tried for a forced exact one-sample
/// p-value.
pub const MAX_DURBIN_ORDER: usize = 1000;

/// What can go wrong in a test kernel.
#[derive(Debug, Clone, PartialEq)]
pub enum TestError {
    /// An alternative other than `two-sided`, `less` or `greater`.
    UnknownAlternative(String),
    /// A p-value method other than `auto`, `exact` or `asymp`.
    UnknownMethod(String),
    /// A NaN among the values.
    NotANumber,
    /// A slice that should be sorted ascending is not.
    NotSorted,
    /// A sample with too few values for the test.
    TooFewValues {
        /// How many the test needs in each sample.
        needed: usize,
        /// How many the smallest sample has.
        got: usize,
    },
    /// An exact p-value was requested for samples too large to count exactly.
    ExactTooLarge {
        /// What limits it, for the message.
        detail: String,
    },
    /// A weight that is negative, infinite or NaN, or a weight list of the wrong length
    /// (shown as NaN).
    BadWeight(f64),
    /// The data admit no model of the kind asked for (a constant sample, a negative value
    /// for an exponential model); says why.
    Degenerate(String),
    /// An observation point of the Brownian bridge outside `(0, 1)`.
    BadPoint(f64),
    /// More observation points of the Brownian bridge than the tied limit handles.
    TooManyPoints {
        /// How many were given.
        got: usize,
        /// The limit ([`MAX_TIE_POINTS`]).
        limit: usize,
    },
    /// The engine asked the running call to stop ([`crate::stats::cancel`]) during an
    /// exact p-value.
    Interrupted,
    /// The cdf returned something outside `[0, 1]` (or NaN).
    BadCdf {
        /// The argument.
        x: f64,
        /// What the cdf returned.
        value: f64,
    },
    /// Memory ran out ([`crate::stats::grow`]).
    OutOfMemory {
        /// How many elements the growing buffer held.
        held: usize,
    },
}

impl From<crate::stats::grow::OutOfMemory> for TestError {
    fn from(e: crate::stats::grow::OutOfMemory) -> TestError {
        TestError::OutOfMemory { held: e.held }
    }
}

impl fmt::Display for TestError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TestError::UnknownAlternative(s) => write!(
                f,
                "alternative must be 'two-sided', 'less' or 'greater', got '{}'",
                crate::stats::echo(s)
            ),
            TestError::UnknownMethod(s) => {
                write!(
                    f,
                    "method must be 'auto', 'exact' or 'asymp', got '{}'",
                    crate::stats::echo(s)
                )
            }
            TestError::NotANumber => write!(f, "values must not be NaN"),
            TestError::NotSorted => write!(f, "values must be sorted ascending"),
            TestError::TooFewValues { needed, got } => {
                write!(f, "each sample needs at least {needed} values, got {got}")
            }
            TestError::ExactTooLarge { detail } => write!(
                f,
                "the exact p-value is out of reach here ({detail}); use method 'asymp' or 'auto'"
            ),
            TestError::BadWeight(w) if w.is_nan() => {
                write!(f, "give one finite weight >= 0 per value")
            }
            TestError::BadWeight(w) => write!(f, "weights must be finite and >= 0, got {w}"),
            TestError::Degenerate(why) => write!(f, "{why}"),
            TestError::BadPoint(u) => write!(
                f,
                "the bridge's observation points must lie strictly between 0 and 1, got {u}"
            ),
            TestError::TooManyPoints { got, limit } => write!(
                f,
                "the bridge can be observed at no more than {limit} points, got {got}"
            ),
            TestError::Interrupted => f.write_str("interrupted"),
            TestError::BadCdf { x, value } => write!(
                f,
                "the cdf must return a probability in [0, 1], got {value} at {x}"
            ),
            TestError::OutOfMemory { held } => write!(
                f,
                "ran out of memory at {held} entries while comparing the samples; test a \
                 smaller subset (WHERE) or raise the memory limit"
            ),
        }
    }
}

impl std::error::Error for TestError {}

/// The alternative hypothesis, with scipy's meaning.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Alternative {
    /// The distributions differ: statistic `max |F1 - F2|`.
    #[default]
    TwoSided,
    /// The cdf of the first sample is below the second's somewhere (first sample tends to be
    /// larger): statistic `max(F2 - F1)`.
    Less,
    /// The cdf of the first sample is above the second's somewhere (first sample tends to be
    /// smaller): statistic `max(F1 - F2)`.
    Greater,
}

impl Alternative {
    /// Reads `two-sided` (also `two_sided`, `two.sided`), `less` or `greater`, ignoring case
    /// and surrounding spaces.
    ///
    /// # Errors
    /// [`TestError::UnknownAlternative`] for anything else.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::ks::Alternative;
    /// assert_eq!(Alternative::parse("Greater"), Ok(Alternative::Greater));
    /// assert!(Alternative::parse("bigger").is_err());
    /// ```
    pub fn parse(s: &str) -> Result<Self, TestError> {
        match s.trim().to_ascii_lowercase().as_str() {
            "two-sided" | "two_sided" | "two.sided" | "twosided" => Ok(Alternative::TwoSided),
            "less" => Ok(Alternative::Less),
            "greater" => Ok(Alternative::Greater),
            _ => Err(TestError::UnknownAlternative(s.to_string())),
        }
    }

    /// The name used in results: `two-sided`, `less` or `greater`.
    pub fn name(self) -> &'static str {
        match self {
            Alternative::TwoSided => "two-sided",
            Alternative::Less => "less",
            Alternative::Greater => "greater",
        }
    }
}

/// How to compute a p-value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PMethod {
    /// Exact where it is feasible, asymptotic beyond.
    #[default]
    Auto,
    /// Exact, or an error when it is out of reach.
    Exact,
    /// Asymptotic.
    Asymptotic,
}

impl PMethod {
    /// Reads `auto`, `exact`, or `asymp` (also `asymptotic`), ignoring case.
    ///
    /// # Errors
    /// [`TestError::UnknownMethod`] for anything else.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::ks::PMethod;
    /// assert_eq!(PMethod::parse("asymp"), Ok(PMethod::Asymptotic));
    /// ```
    pub fn parse(s: &str) -> Result<Self, TestError> {
        match s.trim().to_ascii_lowercase().as_str() {
            "auto" => Ok(PMethod::Auto),
            "exact" => Ok(PMethod::Exact),
            "asymp" | "asymptotic" => Ok(PMethod::Asymptotic),
            _ => Err(TestError::UnknownMethod(s.to_string())),
        }
    }
}

/// How a p-value was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MethodUsed {
    /// Exact (lattice-path count, or an exact evaluation of the one-sample distribution).
    Exact,
    /// An asymptotic formula.
    Asymptotic,
    /// The large-sample limit with ties: the Brownian bridge observed at the pooled sample's
    /// distinct values ([`ties_2samp_p`]).
    AsymptoticTies,
}

impl MethodUsed {
    /// `exact`, `asymptotic` or `asymptotic, ties`.
    pub fn name(self) -> &'static str {
        match self {
            MethodUsed::Exact => "exact",
            MethodUsed::Asymptotic => "asymptotic",
            MethodUsed::AsymptoticTies => "asymptotic, ties",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::fixtures::{compare as fixture, floats, rel_close};

    #[test]
    fn the_untied_shortcut_gives_the_test_of_the_full_statistic() {
        // Above AUTO_EXACT_CELLS, untied and tied: `ks_2samp` (which skips the block list
        // when there is no tie) must equal the test from the full statistic, field for
        // field (an invariant of the walk; the p-values themselves are checked against
        // scipy in tests/python).
        let mut rng = crate::stats::rng::Xoshiro256pp::new(21);
        let n = 12_000;
        let draw = |rng: &mut crate::stats::rng::Xoshiro256pp, shift: f64, round: bool| {
            let mut v: Vec<f64> = (0..n)
                .map(|_| {
                    let x = rng.normal() + shift;
                    if round { (x * 10.0).round() / 10.0 } else { x }
                })
                .collect();
            v.sort_by(f64::total_cmp);
            v
        };
        assert!((n * n) as u64 > AUTO_EXACT_CELLS);
        for round in [false, true] {
            let (x, y) = (draw(&mut rng, 0.0, round), draw(&mut rng, 0.05, round));
            for alternative in [
                Alternative::TwoSided,
                Alternative::Less,
                Alternative::Greater,
            ] {
                for method in [PMethod::Auto, PMethod::Asymptotic] {
                    let full = two_sample_statistic(&x, &y).unwrap();
                    assert_eq!(full.has_ties(), round);
                    assert_eq!(
                        ks_2samp(&x, &y, alternative, method).unwrap(),
                        ks_2samp_from_statistic(&full, alternative, method).unwrap(),
                        "ties {round}"
                    );
                }
            }
        }
    }

    /// Exhaustive enumeration of every split of the pooled sample: the share of splits whose
    /// statistic is at least the observed one. The reference for the exact p-value with ties.
    fn enumerate_p(x: &[f64], y: &[f64], alternative: Alternative) -> f64 {
        let mut pooled: Vec<f64> = x.iter().chain(y).copied().collect();
        pooled.sort_by(f64::total_cmp);
        let n = pooled.len();
        let n1 = x.len();
        let observed = two_sample_statistic(x, y).unwrap().numerator(alternative);
        let (mut hits, mut total) = (0u64, 0u64);
        for mask in 0u32..(1 << n) {
            if mask.count_ones() as usize != n1 {
                continue;
            }
            let (mut a, mut b) = (Vec::new(), Vec::new());
            for (k, &v) in pooled.iter().enumerate() {
                if mask >> k & 1 == 1 {
                    a.push(v);
                } else {
                    b.push(v);
                }
            }
            let s = two_sample_statistic(&a, &b).unwrap().numerator(alternative);
            total += 1;
            hits += u64::from(s >= observed);
        }
        hits as f64 / total as f64
    }

    struct Lcg(u64);
    impl Lcg {
        fn next(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    #[test]
    fn exact_with_ties_equals_enumeration() {
        // Reference: exhaustive enumeration of all C(n1 + n2, n1) splits (n1 + n2 <= 16),
        // written above; tolerance 1e-12 absolute, as the issue requires.
        let mut rng = Lcg(7);
        let alts = [
            Alternative::TwoSided,
            Alternative::Less,
            Alternative::Greater,
        ];
        let mut cases = 0;
        for &(n1, n2, levels) in &[
            (3, 4, 3),
            (5, 5, 4),
            (8, 8, 5),
            (6, 10, 3),
            (1, 9, 2),
            (7, 9, 6),
            (4, 12, 4),
            (2, 2, 1),
            (8, 7, 16),
        ] {
            for _ in 0..4 {
                let mut x: Vec<f64> = (0..n1)
                    .map(|_| (rng.next() * levels as f64).floor())
                    .collect();
                let mut y: Vec<f64> = (0..n2)
                    .map(|_| (rng.next() * levels as f64 + 0.7).floor())
                    .collect();
                x.sort_by(f64::total_cmp);
                y.sort_by(f64::total_cmp);
                for alt in alts {
                    let got = ks_2samp(&x, &y, alt, PMethod::Exact).unwrap();
                    let want = enumerate_p(&x, &y, alt);
                    assert!(
                        (got.p - want).abs() <= 1e-12,
                        "{x:?} {y:?} {alt:?}: {} vs {want}",
                        got.p
                    );
                    cases += 1;
                }
            }
        }
        assert_eq!(cases, 9 * 4 * 3);
    }

    #[test]
    fn exact_is_symmetric_under_swapping_samples() {
        // By definition D+ of (x, y) is D- of (y, x), so p-values swap; tolerance 1e-13.
        let x = [0.1, 0.5, 0.9, 1.3, 2.0, 2.0, 3.1];
        let y = [0.2, 0.3, 1.0, 1.1, 2.0, 4.0, 4.5, 5.0, 6.0];
        let a = ks_2samp(&x, &y, Alternative::Greater, PMethod::Exact).unwrap();
        let b = ks_2samp(&y, &x, Alternative::Less, PMethod::Exact).unwrap();
        assert!((a.p - b.p).abs() < 1e-13);
        let a = ks_2samp(&x, &y, Alternative::TwoSided, PMethod::Exact).unwrap();
        let b = ks_2samp(&y, &x, Alternative::TwoSided, PMethod::Exact).unwrap();
        assert!((a.p - b.p).abs() < 1e-13);
    }

    #[test]
    fn equal_sizes_match_the_closed_form() {
        // For n1 = n2 = n without ties, P(D+ >= h/n) = C(2n, n - h) / C(2n, n) (Gnedenko and
        // Korolyuk 1951, as in Hodges 1958); computed here as a product, tolerance 1e-13 rel.
        let n = 30usize;
        for h in 1..=n {
            let want: f64 = (0..h)
                .map(|j| (n - j) as f64 / (n + j + 1) as f64)
                .product();
            let got =
                exact_2samp_p(n, n, (h * n) as u64, &vec![1; 2 * n], Alternative::Greater).unwrap();
            assert!((got - want).abs() <= 1e-13 * want, "{h}: {got} vs {want}");
        }
    }

    #[test]
    fn marsaglia_tsang_wang_worked_example() {
        // Marsaglia, Tsang and Wang (2003), section 3: P(D_10 < 0.274) = 0.6284796154565043
        // (also scipy.stats.kstwo.cdf(0.274, 10)); tolerance 1e-14 absolute.
        assert!((durbin_cdf(10, 0.274, false).unwrap() - 0.6284796154565043).abs() < 1e-14);
        assert!((kolmogorov_cdf(10, 0.274) - 0.6284796154565043).abs() < 1e-14);
    }

    #[test]
    fn limit_series_agree_where_both_converge() {
        // The two classical series for Kolmogorov's limit must agree (same function,
        // Jacobi theta identity); tolerance 1e-14.
        for z in [0.8, 0.9, 1.0, 1.1, 1.2] {
            let small = 1.0 - kolmogorov_limit_cdf_small(z);
            let mut large = 0.0;
            for k in 1..50 {
                let kf = k as f64;
                large += 2.0 * (-1f64).powi(k - 1) * (-2.0 * kf * kf * z * z).exp();
            }
            assert!((small - large).abs() < 1e-14, "{z}");
        }
    }

    #[test]
    fn frexp_and_ldexp_round_trip() {
        for x in [1.0, 0.75, 3.0e-200, 7.0e250, 1.0e-310] {
            let (m, e) = frexp(x);
            assert!((0.5..1.0).contains(&m.abs()), "{x}");
            assert_eq!(ldexp(m, e), x);
        }
    }

    #[test]
    fn stirling_matches_direct_product() {
        // ln(n!/n^n) against a direct log-sum for n = 150; tolerance 1e-11 relative.
        let n = 150u64;
        let direct: f64 = (1..=n).map(|i| (i as f64 / n as f64).ln()).sum();
        assert!((ln_factorial_over_power(n) - direct).abs() < 1e-11 * direct.abs());
    }

    #[test]
    fn two_sample_matches_scipy_ks_2samp() {
        // scipy.stats.ks_2samp(x, y, alternative=A, method=M) for M in exact, asymp and all
        // three alternatives, on samples without ties; tolerance 1e-10 relative on p and
        // 1e-14 relative on d.
        let f = fixture();
        let mut checked = 0;
        for case in f["ks2"].as_array().unwrap() {
            let (x, y) = (floats(&case["x"]), floats(&case["y"]));
            for r in case["results"].as_array().unwrap() {
                let alt = Alternative::parse(r["alternative"].as_str().unwrap()).unwrap();
                let method = PMethod::parse(r["method"].as_str().unwrap()).unwrap();
                let got = ks_2samp(&x, &y, alt, method).unwrap();
                let (d, p) = (r["d"].as_f64().unwrap(), r["p"].as_f64().unwrap());
                assert!(rel_close(got.d, d, 1e-14), "d {} vs {d}", got.d);
                assert!(
                    rel_close(got.p, p, 1e-10),
                    "n1={} n2={} {alt:?} {method:?}: p {} vs {p}",
                    x.len(),
                    y.len(),
                    got.p
                );
                checked += 1;
            }
        }
        assert_eq!(checked, 33 * 6);
    }

    #[test]
    fn kolmogorov_distribution_matches_scipy_kstwo() {
        // scipy.stats.kstwo.cdf(d, n) and kstwo.sf(d, n) over every regime of Simard and
        // L'Ecuyer (n from 1 to 400000); tolerance 1e-10 relative on each of cdf and sf.
        let f = fixture();
        for case in f["kstwo"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            let (cdf, sf) = (case["cdf"].as_f64().unwrap(), case["sf"].as_f64().unwrap());
            let (gc, gs) = (kolmogorov_cdf(n, d), kolmogorov_sf(n, d));
            assert!(rel_close(gc, cdf, 1e-10), "cdf n={n} d={d}: {gc} vs {cdf}");
            assert!(rel_close(gs, sf, 1e-10), "sf n={n} d={d}: {gs} vs {sf}");
        }
    }

    #[test]
    fn forced_exact_one_sample_matches_scipy_where_scipy_is_exact() {
        // scipy.stats.kstwo.sf(d, n) for n <= 140, where scipy's evaluation is exact (Durbin,
        // Pomeranz, or the doubled one-sided tail); tolerance 1e-9 relative (the doubled tail
        // is Miller's approximation when d < 1/2 and n d^2 > 4).
        let f = fixture();
        for case in f["kstwo"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            if n > 140 {
                continue;
            }
            let sf = case["sf"].as_f64().unwrap();
            let got = kolmogorov_sf_exact(n, d).unwrap();
            assert!(rel_close(got, sf, 1e-9), "n={n} d={d}: {got} vs {sf}");
        }
    }

    #[test]
    fn smirnov_matches_scipy_ksone() {
        // scipy.stats.ksone.sf(d, n); tolerance 1e-11 relative.
        let f = fixture();
        for case in f["ksone"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            let want = case["sf"].as_f64().unwrap();
            let got = smirnov_sf(n, d);
            assert!(rel_close(got, want, 1e-11), "n={n} d={d}: {got} vs {want}");
        }
    }

    #[test]
    fn limit_matches_scipy_kstwobign() {
        // scipy.stats.kstwobign.sf(z); tolerance 1e-12 relative.
        let f = fixture();
        for case in f["kstwobign"].as_array().unwrap() {
            let z = case["z"].as_f64().unwrap();
            let want = case["sf"].as_f64().unwrap();
            let got = kolmogorov_limit_sf(z);
            assert!(rel_close(got, want, 1e-12), "z={z}: {got} vs {want}");
        }
    }

    #[test]
    fn one_sample_test_matches_scipy_ks_1samp() {
        // scipy.stats.ks_1samp(x, scipy.stats.expon(scale=1.0).cdf, alternative=A, method=M);
        // the cdf here is the same formula, -expm1(-x) for x >= 0. Tolerance 1e-10 relative
        // on p, 1e-13 relative on d.
        let f = fixture();
        for case in f["ks1"].as_array().unwrap() {
            let x = floats(&case["x"]);
            let cdf = |t: f64| if t <= 0.0 { 0.0 } else { -(-t).exp_m1() };
            for r in case["results"].as_array().unwrap() {
                let alt = Alternative::parse(r["alternative"].as_str().unwrap()).unwrap();
                // scipy's one-sided p-value is exact (ksone.sf) whatever the method.
                let method = match (r["method"].as_str().unwrap(), alt) {
                    ("asymp", Alternative::TwoSided) => PMethod::Asymptotic,
                    _ => PMethod::Auto,
                };
                let got = ks_1samp(&x, cdf, alt, method).unwrap();
                let (d, p) = (r["d"].as_f64().unwrap(), r["p"].as_f64().unwrap());
                assert!(rel_close(got.d, d, 1e-13), "d {} vs {d}", got.d);
                assert!(
                    rel_close(got.p, p, 1e-10),
                    "n={} {alt:?} {method:?}: {} vs {p}",
                    x.len(),
                    got.p
                );
            }
        }
    }

    fn sorted_draws(rng: &mut crate::stats::rng::Xoshiro256pp, n: usize, shift: f64) -> Vec<f64> {
        let mut v: Vec<f64> = (0..n).map(|_| rng.normal() + shift).collect();
        v.sort_by(f64::total_cmp);
        v
    }

    #[test]
    fn large_samples_exact_agrees_with_asymptotic() {
        // n1 = 3000, n2 = 2500 (the issue's size): the exact count must run (Auto picks it)
        // and agree with the asymptotic p-value to 1e-3 absolute (two-sided; see below for
        // one-sided); and neither may give 0 or 1 where the other is strictly between.
        // Reference: the asymptotic formulas of the module docs, checked against scipy above.
        let mut rng = crate::stats::rng::Xoshiro256pp::new(3000);
        for shift in [0.0, 0.03, 0.06, 0.1, 0.2, 0.6] {
            let x = sorted_draws(&mut rng, 3000, shift);
            let y = sorted_draws(&mut rng, 2500, 0.0);
            for alt in [
                Alternative::TwoSided,
                Alternative::Less,
                Alternative::Greater,
            ] {
                let e = ks_2samp(&x, &y, alt, PMethod::Auto).unwrap();
                let a = ks_2samp(&x, &y, alt, PMethod::Asymptotic).unwrap();
                assert_eq!(e.method, MethodUsed::Exact);
                // Hodges' one-sided approximation is itself off by up to 2.2e-3 at this size
                // (measured here; the exact value is checked by integer counting below), so
                // the one-sided comparison allows 3e-3.
                let tol = if alt == Alternative::TwoSided {
                    1e-3
                } else {
                    3e-3
                };
                assert!(
                    (e.p - a.p).abs() < tol,
                    "shift {shift} {alt:?}: exact {} asymptotic {}",
                    e.p,
                    a.p
                );
                let strictly_inside = |p: f64| p > 0.0 && p < 1.0;
                assert_eq!(
                    strictly_inside(e.p),
                    strictly_inside(a.p),
                    "{} {}",
                    e.p,
                    a.p
                );
            }
        }
    }

    #[test]
    fn large_exact_matches_integer_path_count() {
        // n1 = 3000, n2 = 2500, all three alternatives, p from 0.0013 to 0.64: the share of
        // boundary-touching paths counted in exact integer arithmetic by
        // tests/fixtures/gen_compare.py (count_outside); tolerance 1e-12 relative. (Its
        // two-sided values also equal scipy.stats.ks_2samp(..., method='exact'), which
        // cannot do the one-sided case at this size.)
        let f = fixture();
        for case in f["ks2_large"].as_array().unwrap() {
            let h = case["h"].as_u64().unwrap();
            let alt = Alternative::parse(case["alternative"].as_str().unwrap()).unwrap();
            let want = case["p"].as_f64().unwrap();
            let got = exact_2samp_p(3000, 2500, h, &[], alt).unwrap();
            assert!(
                rel_close(got, want, 1e-12),
                "h={h} {alt:?}: {got} vs {want}"
            );
        }
    }

    #[test]
    fn calibration_under_the_null() {
        // 2000 seeded tests with both samples from one distribution. The exact p-value is
        // discrete, so the check uses the randomised p-value P(D > d) + U P(D = d), which is
        // exactly uniform when the exact distribution is right (P(D > d) is the p-value at
        // numerator h + 1). Uniformity by the one-sample KS test of this module at the 0.001
        // level (its p-values are checked against scipy above). One run with continuous data,
        // one with heavy ties (values rounded to 0.5), where the conditional p-value must be
        // just as uniform. Also the plain p-value must not be anti-conservative: the share
        // with p <= alpha is at most alpha plus 3 binomial standard errors.
        let mut rng = crate::stats::rng::Xoshiro256pp::new(2000);
        for rounding in [0.0, 0.5] {
            let mut rand_p = Vec::with_capacity(2000);
            let mut plain = Vec::with_capacity(2000);
            for t in 0..2000 {
                let alt = [
                    Alternative::TwoSided,
                    Alternative::Less,
                    Alternative::Greater,
                ][t % 3];
                let round = |v: f64| {
                    if rounding > 0.0 {
                        (v / rounding).round() * rounding
                    } else {
                        v
                    }
                };
                let mut x: Vec<f64> = (0..37).map(|_| round(rng.normal())).collect();
                let mut y: Vec<f64> = (0..53).map(|_| round(rng.normal())).collect();
                x.sort_by(f64::total_cmp);
                y.sort_by(f64::total_cmp);
                let s = two_sample_statistic(&x, &y).unwrap();
                let h = s.numerator(alt);
                let p_ge = exact_2samp_p(37, 53, h, &s.blocks, alt).unwrap();
                let p_gt = exact_2samp_p(37, 53, h + 1, &s.blocks, alt).unwrap();
                rand_p.push(p_gt + rng.uniform() * (p_ge - p_gt));
                plain.push(p_ge);
            }
            rand_p.sort_by(f64::total_cmp);
            let r = ks_1samp(
                &rand_p,
                |u| u.clamp(0.0, 1.0),
                Alternative::TwoSided,
                PMethod::Auto,
            )
            .unwrap();
            assert!(r.p > 0.001, "rounding {rounding}: D = {}, p = {}", r.d, r.p);
            for alpha in [0.01, 0.05, 0.1] {
                let share = plain.iter().filter(|&&p| p <= alpha).count() as f64 / 2000.0;
                let se = (alpha * (1.0 - alpha) / 2000.0).sqrt();
                assert!(share <= alpha + 3.0 * se, "{alpha}: {share}");
            }
        }
    }

    #[test]
    fn statistic_rejects_bad_input() {
        assert_eq!(
            two_sample_statistic(&[2.0, 1.0], &[1.0]),
            Err(TestError::NotSorted)
        );
        assert_eq!(
            two_sample_statistic(&[], &[1.0]),
            Err(TestError::TooFewValues { needed: 1, got: 0 })
        );
        assert_eq!(
            two_sample_statistic(&[f64::NAN], &[1.0]),
            Err(TestError::NotANumber)
        );
        assert!(matches!(
            one_sample_statistic(&[0.5], |_| 1.5),
            Err(TestError::BadCdf { .. })
        ));
    }

    #[test]
    fn complete_separation_far_below_the_double_range_is_zero() {
        // Complete separation: only the two splits that put all of one sample first reach
        // D = 1, so p = 2 / C(n1 + n2, n1) by counting. For 700 + 700 that is about 1e-420,
        // far below f64::MIN_POSITIVE: expected exactly 0 rather than subnormal noise.
        let blocks = vec![1usize; 1400];
        let p = exact_2samp_p(700, 700, 700 * 700, &blocks, Alternative::TwoSided).unwrap();
        assert_eq!(p, 0.0);
        // And at 500 + 500 the value is still representable and positive: 2 / C(1000, 500)
        // = 3.7e-299 (log10 C(1000, 500) = 298.43..., from lgamma; tolerance 1e-6 relative).
        let blocks = vec![1usize; 1000];
        let p = exact_2samp_p(500, 500, 500 * 500, &blocks, Alternative::TwoSided).unwrap();
        let log10_c = (ln_choose(1000, 500)) / std::f64::consts::LN_10;
        let expected = 2.0 * 10f64.powf(-log10_c);
        assert!((p - expected).abs() <= 1e-6 * expected, "{p} vs {expected}");
    }

    fn ln_choose(n: u64, k: u64) -> f64 {
        (1..=k)
            .map(|i| ((n - k + i) as f64).ln() - (i as f64).ln())
            .sum()
    }
}

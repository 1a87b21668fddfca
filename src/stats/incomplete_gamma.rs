//! The regularised incomplete gamma function for a large shape, by Temme's uniform
//! asymptotic expansion.
//!
//! For a shape `a` in the thousands and beyond, the series and continued fraction behind
//! the usual evaluation of `P(a, x)` need `O(sqrt a)` terms and start from
//! `a ln x - x - ln Gamma(a)`, a difference of numbers of size `a` whose result is of
//! size one: at `a = 3.4e15` every digit cancels. Temme's expansion has neither problem.
//! With `lambda = x / a`, `mu = lambda - 1` and
//! `eta = sign(mu) sqrt(2 (mu - ln(1 + mu)))`,
//!
//! ```text
//! Q(a, x) = erfc(eta sqrt(a / 2)) / 2 + R,   P(a, x) = erfc(-eta sqrt(a / 2)) / 2 - R,
//! R = exp(-a eta^2 / 2) / sqrt(2 pi a) * sum_k c_k(eta) a^-k
//! ```
//!
//! (N. M. Temme, "The asymptotic expansion of the incomplete gamma functions", *SIAM J.
//! Math. Anal.* 10(4), 757-766, 1979; the form used by A. R. DiDonato and A. H. Morris,
//! "Computation of the incomplete gamma function ratios and their inverse", *ACM TOMS*
//! 12(4), 377-393, 1986, and by NIST's DLMF section 8.12). The coefficients satisfy
//! `c_0 = 1/mu - 1/eta` and `c_k = (1/eta) c_{k-1}'(eta) + (-1)^k g_k / mu`, `g_k` the
//! Stirling coefficients of `Gamma*(a)` (1/12, 1/288, -139/51840). Each `c_k` is regular
//! at `eta = 0`; near it the closed forms cancel, so they are evaluated here from their
//! Taylor series in `eta`, 25 terms each, for k = 0..3. The coefficients below were
//! derived for ogive by exact rational series arithmetic (series reversion of
//! `eta^2 / 2 = mu - ln(1 + mu)`, then the recursion); `tests/python/test_temme_coefficients.py`
//! derives them again and compares.
//!
//! Truncating after `c_3` leaves an error of about `|c_4| a^-4 / sqrt(2 pi a)`, below
//! 1e-17 for `a >= LARGE_SHAPE`. The Taylor series converge for `|eta| < 2 sqrt(pi)`;
//! beyond `|eta| = 1.1` (for `a >= 1000`) the smaller tail is below 1e-260 and the
//! exponential factor makes any truncation error irrelevant, and once `a eta^2 / 2`
//! passes 800 the smaller tail underflows and is returned as 0 without evaluating the
//! series.

/// The shape from which [`regularized`] and [`ln_density`] are used instead of the
/// series of `statrs` (whose error grows from 1e-12 at a = 1e3 to 1e-2 at a = 1e12).
pub const LARGE_SHAPE: f64 = 1000.0;

/// Taylor coefficients of Temme's `c_k(eta)`, lowest power first.
const C0: [f64; 25] = [
    -0.3333333333333333,
    0.08333333333333333,
    -0.014814814814814815,
    0.0011574074074074073,
    0.0003527336860670194,
    -0.0001787551440329218,
    3.919263178522438e-05,
    -2.185448510679992e-06,
    -1.85406221071516e-06,
    8.296711340953087e-07,
    -1.7665952736826078e-07,
    6.707853543401498e-09,
    1.0261809784240309e-08,
    -4.382036018453353e-09,
    9.14769958223679e-10,
    -2.5514193994946248e-11,
    -5.830772132550426e-11,
    2.4361948020667415e-11,
    -5.0276692801141755e-12,
    1.1004392031956135e-13,
    3.371763262400985e-13,
    -1.392388722418162e-13,
    2.8534893807047445e-14,
    -5.139111834242572e-16,
    -1.9752288294349442e-15,
];
const C1: [f64; 25] = [
    -0.001851851851851852,
    -0.003472222222222222,
    0.0026455026455026454,
    -0.0009902263374485596,
    0.00020576131687242798,
    -4.018775720164609e-07,
    -1.8098550334489977e-05,
    7.64916091608111e-06,
    -1.6120900894563446e-06,
    4.647127802807434e-09,
    1.378633446915721e-07,
    -5.752545603517705e-08,
    1.1951628599778148e-08,
    -1.7543241719747647e-11,
    -1.0091543710600413e-09,
    4.162792991842583e-10,
    -8.56390702649298e-11,
    6.067215101604758e-14,
    7.1624989648114856e-12,
    -2.933186643771437e-12,
    5.996696365683689e-13,
    -2.1671786527323313e-16,
    -4.978339972369262e-14,
    2.0291628823713425e-14,
    -4.13125571381061e-15,
];
const C2: [f64; 25] = [
    0.004133597883597883,
    -0.0026813271604938273,
    0.0007716049382716049,
    2.0093878600823047e-06,
    -0.0001073665322636516,
    5.2923448829120125e-05,
    -1.2760635188618728e-05,
    3.423578734096138e-08,
    1.3721957309062934e-06,
    -6.298992138380055e-07,
    1.4280614206064242e-07,
    -2.0477098421990866e-10,
    -1.409252991086752e-08,
    6.228974084922022e-09,
    -1.3670488396617114e-09,
    9.428356159014678e-13,
    1.2872252400089318e-10,
    -5.5645956134363323e-11,
    1.197593554636698e-11,
    -4.1689782251838634e-15,
    -1.0940640427884595e-12,
    4.662239946390136e-13,
    -9.905105763906907e-14,
    1.8931876768373515e-17,
    8.859221872591127e-15,
];
const C3: [f64; 25] = [
    0.0006494341563786008,
    0.00022947209362139917,
    -0.0004691894943952557,
    0.00026772063206283885,
    -7.561801671883977e-05,
    -2.396505113867297e-07,
    1.1082654115347302e-05,
    -5.6749528269915965e-06,
    1.4230900732435883e-06,
    -2.7861080291528143e-11,
    -1.6958404091930278e-07,
    8.099464905388083e-08,
    -1.9111168485973655e-08,
    2.3928620439808118e-12,
    2.0620131815488797e-09,
    -9.460496661855133e-10,
    2.1541049775774907e-10,
    -1.388823336813903e-14,
    -2.1894761681963938e-11,
    9.790998951171684e-12,
    -2.178219188018096e-12,
    6.208819573407901e-17,
    2.126978363279737e-13,
    -9.344688791517433e-14,
    2.045367122678285e-14,
];

/// Past this value of `a eta^2 / 2 = a (mu - ln(1 + mu))` the smaller tail is below
/// `exp(-800)`, which underflows a double.
const UNDERFLOW: f64 = 800.0;

/// `mu - ln(1 + mu)` for `mu > -1`, without the cancellation of the direct form near 0.
///
/// For `|mu| < 1/2` it uses `t = mu / (2 + mu)`, with which `ln(1 + mu) = 2 atanh t`
/// and `mu - ln(1 + mu) = mu t - 2 (t^3/3 + t^5/5 + ...)`; `|t| < 1/3`, so the series
/// needs at most 17 terms. Elsewhere the direct form loses at most a few bits.
///
/// # Example
/// ```
/// use ogive::stats::incomplete_gamma::mu_minus_ln1p;
/// // mpmath 1.4.1: x - mpmath.log1p(x) at x = 1e-10 is 4.999999999666667e-21.
/// assert!((mu_minus_ln1p(1e-10) - 4.999999999666667e-21).abs() < 1e-35);
/// assert_eq!(mu_minus_ln1p(0.0), 0.0);
/// ```
pub fn mu_minus_ln1p(mu: f64) -> f64 {
    if mu.abs() >= 0.5 {
        return mu - mu.ln_1p();
    }
    let t = mu / (2.0 + mu);
    let t2 = t * t;
    let mut power = t * t2;
    let mut tail = 0.0;
    for k in 1..40 {
        let term = power / f64::from(2 * k + 1);
        tail += term;
        if term.abs() <= 1e-17 * tail.abs() {
            break;
        }
        power *= t2;
    }
    mu * t - 2.0 * tail
}

/// `ln Gamma*(a) = ln Gamma(a) - (a - 1/2) ln a + a - ln(2 pi) / 2` for `a >= 10`, by the
/// Stirling series `1/(12 a) - 1/(360 a^3) + 1/(1260 a^5) - 1/(1680 a^7)` (Abramowitz and
/// Stegun 6.1.41).
fn ln_gamma_star(a: f64) -> f64 {
    let r = 1.0 / a;
    let r2 = r * r;
    r * (1.0 / 12.0 - r2 * (1.0 / 360.0 - r2 * (1.0 / 1260.0 - r2 / 1680.0)))
}

/// Horner evaluation of a Taylor series.
fn series(c: &[f64; 25], eta: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ck| acc * eta + ck)
}

/// `(P(a, x), Q(a, x))`, the regularised lower and upper incomplete gamma functions, for
/// a shape `a >= LARGE_SHAPE` (smaller shapes are accepted, with the truncation error of
/// the module documentation growing as `a^-4.5`). `x <= 0` gives `(0, 1)`, `x = +inf`
/// gives `(1, 0)`; NaN gives NaN. Both values are in `[0, 1]` and the smaller one carries
/// the relative accuracy (about 1e-14 where it is above 1e-250).
///
/// # Example
/// ```
/// use ogive::stats::incomplete_gamma::regularized;
/// // scipy 1.17.1: scipy.special.gammainc(1e4, 1e4) = 0.5013298083399552.
/// let (p, q) = regularized(1e4, 1e4);
/// assert!((p - 0.5013298083399552).abs() < 1e-15);
/// assert!((p + q - 1.0).abs() < 1e-15);
/// ```
pub fn regularized(a: f64, x: f64) -> (f64, f64) {
    if x.is_nan() || a.is_nan() {
        return (f64::NAN, f64::NAN);
    }
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    if x == f64::INFINITY {
        return (1.0, 0.0);
    }
    let mu = (x - a) / a;
    let d = mu_minus_ln1p(mu);
    let ad = a * d;
    if ad > UNDERFLOW {
        return if mu < 0.0 { (0.0, 1.0) } else { (1.0, 0.0) };
    }
    let eta = (2.0 * d).sqrt().copysign(mu);
    let s = ad.sqrt().copysign(mu); // eta sqrt(a / 2)
    let r = 1.0 / a;
    let sum =
        series(&C0, eta) + r * (series(&C1, eta) + r * (series(&C2, eta) + r * series(&C3, eta)));
    let rest = (-ad).exp() / (2.0 * std::f64::consts::PI * a).sqrt() * sum;
    if mu < 0.0 {
        let p = (0.5 * libm::erfc(-s) - rest).clamp(0.0, 1.0);
        (p, 1.0 - p)
    } else {
        let q = (0.5 * libm::erfc(s) + rest).clamp(0.0, 1.0);
        (1.0 - q, q)
    }
}

/// The natural log of the standard gamma density `x^(a-1) e^-x / Gamma(a)` for a large
/// shape, in the form `-a (mu - ln(1 + mu)) - ln(1 + mu) - ln(2 pi a) / 2 - ln Gamma*(a)`
/// with `mu = (x - a) / a`, in which no two terms of size `a` are subtracted (below
/// `x = a / 2`, as `a - x + (a - 1)(ln x - ln a)` minus the same constants). `x <= 0`
/// and `x = +inf` give `-inf`; `a` must be at least 10 for the Stirling series of
/// `ln Gamma*`.
///
/// # Example
/// ```
/// use ogive::stats::incomplete_gamma::ln_density;
/// // mpmath 1.4.1 at 60 digits: (a - 1) log(x) - x - loggamma(a) at a = x = 1e4 is
/// // -5.524117052526095 (scipy's logpdf, which takes that difference in doubles, is
/// // 1.5e-11 off here).
/// assert!((ln_density(1e4, 1e4) - -5.524117052526095).abs() < 1e-14);
/// ```
pub fn ln_density(a: f64, x: f64) -> f64 {
    if x.is_nan() || a.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 || x == f64::INFINITY {
        return f64::NEG_INFINITY;
    }
    let mu = (x - a) / a;
    let core = if mu > -0.5 {
        -a * mu_minus_ln1p(mu) - mu.ln_1p()
    } else {
        // Far below the mode 1 + mu rounds badly (to 0 for x < a 2^-53): the same
        // terms from ln x - ln a, which are of one size and do not cancel.
        (a - x) + (a - 1.0) * (x.ln() - a.ln())
    };
    core - 0.5 * (2.0 * std::f64::consts::PI * a).ln() - ln_gamma_star(a)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log1p_difference_matches_mpmath() {
        // Expected: mpmath 1.4.1 at 40 digits, float(x - mpmath.log1p(x)) for
        // x = mpmath.mpf(mu); tolerance 4e-16 relative, both sides of the switch at
        // |mu| = 1/2.
        for (mu, want) in [
            (0.25, 0.026856448685790246),
            (1e-10, 4.999999999666667e-21),
            (0.4999, 0.09450156078082328),
            (0.5, 0.09453489189183562),
            (-0.4999, 0.19304720055727906),
            (-0.5, 0.19314718055994531),
            (-0.9, 1.402585092994046),
            (3.0, 1.6137056388801094),
            (-1e-5, 5.0000333335833364e-11),
        ] {
            let got = mu_minus_ln1p(mu);
            assert!(((got - want) / want).abs() < 4e-16, "{mu}: {got} vs {want}");
        }
    }

    /// `(a, x, P, Q, ln density)` from mpmath 1.4.1 at 60 digits:
    /// `mpmath.gammainc(a, 0, x, regularized=True)`, `mpmath.gammainc(a, x, mpmath.inf,
    /// regularized=True)` and `(a - 1) * mpmath.log(x) - x - mpmath.loggamma(a)`, for
    /// `x = a + t sqrt(a)` with t from -38 to 38 (every third row of the generated grid).
    const MPMATH: [(f64, f64, f64, f64, f64); ROWS] = [
        (
            1000.0,
            367.5444679663242,
            1.9111043276888676e-162,
            1.0,
            -371.82742288636945,
        ),
        (
            1000.0,
            968.3772233983162,
            0.15861399679200125,
            0.8413860032079987,
            -4.851563353405248,
        ),
        (
            1000.0,
            1000.0,
            0.5042052441802155,
            0.4957947558197845,
            -4.372899506026297,
        ),
        (
            1000.0,
            1031.6227766016839,
            0.8413841884287209,
            0.15861581157127913,
            -4.8937354918972975,
        ),
        (
            1000.0,
            1632.4555320336758,
            1.0,
            2.9342616174517292e-64,
            -147.2331742679077,
        ),
        (
            3000.0,
            2561.8219539958673,
            1.8774974672456194e-17,
            1.0,
            -40.266958115850294,
        ),
        (
            3000.0,
            2994.5227744249482,
            0.46256484894745437,
            0.5374351510525456,
            -4.925328778402788,
        ),
        (
            3000.0,
            3000.0000547722557,
            0.502428288825249,
            0.497571711174751,
            -4.922150113065389,
        ),
        (
            3000.0,
            3164.3167672515497,
            0.9984263489902053,
            0.0015736510097947277,
            -9.317625324845144,
        ),
        (
            3000.0,
            5081.345718519631,
            1.0,
            4.743657846442231e-220,
            -505.9033032730359,
        ),
        (
            10000.0,
            9700.0,
            0.001234175584468492,
            0.9987658244155315,
            -10.085732692126845,
        ),
        (
            10000.0,
            9999.9999,
            0.5013294094010001,
            0.4986705905989999,
            -5.524117042526595,
        ),
        (
            10000.0,
            10010.0,
            0.54113746289251,
            0.45886253710749003,
            -5.5301132220238465,
        ),
        (
            10000.0,
            10800.0,
            0.9999999999999969,
            3.1098199621688446e-15,
            -35.990666732378976,
        ),
        (
            100000.0,
            93675.44467966324,
            3.932625047958639e-93,
            1.0,
            -215.46417489082765,
        ),
        (
            100000.0,
            99683.77223398317,
            0.1586548497379081,
            0.8413451502620919,
            -7.173291409691604,
        ),
        (
            100000.0,
            100000.0,
            0.5004205221103651,
            0.4995794778896348,
            -6.67540209902312,
        ),
        (
            100000.0,
            100316.22776601683,
            0.841345148448325,
            0.15865485155167505,
            -7.177507788337938,
        ),
        (
            100000.0,
            106324.55532033676,
            1.0,
            8.644924638428654e-86,
            -198.68476103970303,
        ),
    ];
    const ROWS: usize = 19;

    #[test]
    fn matches_mpmath_from_a_thousand_to_a_hundred_thousand() {
        // Tolerance: 3e-13 relative on the smaller of P and Q (down to 1e-250: the
        // exponential factor's own conditioning, a eta^2 / 2 up to 600 times 2^-53, is
        // 1.3e-13 there), 1e-15 on the other, and 2e-15 relative on the log density (its terms are up to
        // three times the result below x = a / 2).
        for &(a, x, p, q, ln_f) in &MPMATH {
            let (gp, gq) = regularized(a, x);
            let (small, got) = if p < q { (p, gp) } else { (q, gq) };
            assert!(
                ((got - small) / small).abs() < 3e-13,
                "a {a} x {x}: {got} vs {small}"
            );
            assert!((gp + gq - 1.0).abs() <= 1e-15, "a {a} x {x}: {gp} + {gq}");
            let lf = ln_density(a, x);
            assert!(
                ((lf - ln_f) / ln_f).abs() < 2e-15,
                "a {a} x {x}: {lf} vs {ln_f}"
            );
        }
    }

    #[test]
    fn huge_shapes_match_the_normal_limit() {
        // At a = 1e16 and 2^60 the skewness 2 / sqrt(a) is at most 2e-8, so P(a, a + t
        // sqrt a) is Phi(t) to within 1e-8 absolute (normal limit; Phi from mpmath 1.4.1,
        // mpmath.ncdf(t)), and the density times sqrt(a) is phi(t) to 1e-7 relative.
        // Both a are squares whose x = a + t sqrt(a) are exact doubles for these t.
        for a in [1e16, 2f64.powi(60)] {
            for (t, phi_cdf) in [
                (-3.0, 0.0013498980316300946),
                (-1.0, 0.15865525393145705),
                (0.0, 0.5),
                (0.5, 0.6914624612740131),
                (2.0, 0.9772498680518208),
            ] {
                let x = a + t * a.sqrt();
                let (p, _) = regularized(a, x);
                assert!((p - phi_cdf).abs() < 1e-8, "a {a} t {t}: {p} vs {phi_cdf}");
                let phi = (-0.5 * t * t).exp() / (2.0 * std::f64::consts::PI).sqrt();
                let f = ln_density(a, x).exp() * a.sqrt();
                assert!(((f - phi) / phi).abs() < 1e-7, "a {a} t {t}: {f} vs {phi}");
            }
        }
    }
}

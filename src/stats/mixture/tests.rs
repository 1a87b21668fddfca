//! Unit tests of the mixture fit.

use super::data::Data;
use super::em::exp_nonpositive;
use super::fit::fit_thinned;
use super::*;
use crate::stats::resolution::Resolution;
use crate::stats::rng::SplitMix64;
use statrs::distribution::{ContinuousCDF, Normal};

/// A deterministic stream of standard normal draws (Box-Muller on SplitMix64).
fn normals(seed: u64, n: usize) -> Vec<f64> {
    let mut rng = SplitMix64::new(seed);
    (0..n)
        .map(|_| {
            let u = 1.0 - rng.next_f64();
            let v = rng.next_f64();
            (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
        })
        .collect()
}

#[test]
fn one_component_is_the_normal_mle() {
    // With k = 1 EM must land on the closed form (mean, sd with divisor n) and its
    // log-likelihood, as stats::fit computes it; tolerance 1e-12 relative.
    let xs: Vec<f64> = normals(7, 500).iter().map(|z| 3.0 + 2.0 * z).collect();
    let m = fit_mixture(&xs, Some(1)).unwrap();
    let f = crate::stats::fit::fit(&xs, crate::stats::fit::Family::Normal).unwrap();
    let p = f.distribution.parameters();
    let c = m.mixture.components()[0];
    assert!((c.mean - p[0].1).abs() < 1e-12 * p[0].1.abs());
    assert!((c.sd - p[1].1).abs() < 1e-12 * p[1].1);
    assert!((m.summary.loglik - f.summary.loglik).abs() < 1e-12 * f.summary.loglik.abs());
    assert_eq!(c.weight, 1.0);
}

#[test]
fn ranking_on_thinned_values_loses_nothing() {
    // Two overlapping components, 8,000 values; starts ranked on 1,024 merged values
    // against the same fit with the starts ranked on all values (the reference).
    let z = normals(11, 8_000);
    let xs: Vec<f64> = z
        .iter()
        .enumerate()
        .map(|(i, &v)| if i % 3 == 0 { 2.5 + 0.7 * v } else { v })
        .collect();
    for k in [2, 3] {
        let thinned = fit_thinned(&xs, Some(k), 1024, Resolution::Exact).unwrap();
        let full = fit_thinned(&xs, Some(k), usize::MAX, Resolution::Exact).unwrap();
        assert!(thinned.converged && full.converged);
        // Tolerance: the resolution at which the method compares runs at all
        // (SELECTION_TOLERANCE, 1e-8 per value) times n; with k = 3 on two-component
        // data the likelihood is flat along a ridge and runs stop at slightly
        // different points of it.
        assert!(
            thinned.summary.loglik >= full.summary.loglik - SELECTION_TOLERANCE * 8_000.0,
            "k = {k}: {} < {}",
            thinned.summary.loglik,
            full.summary.loglik
        );
    }
}

#[test]
fn fast_exp_is_within_a_few_ulps_of_libm() {
    // Reference: Rust's f64::exp (the platform libm), over [-745, 0].
    let mut worst = 0.0f64;
    for i in 0..=200_000 {
        let x = -708.0 * f64::from(i) / 200_000.0;
        let (got, want) = (exp_nonpositive(x), x.exp());
        worst = worst.max(((got - want) / want).abs());
    }
    assert!(worst <= 4.0 * f64::EPSILON, "{worst:e}");
    assert_eq!(exp_nonpositive(0.0), 1.0);
    assert!(exp_nonpositive(f64::NEG_INFINITY) <= 1e-307);
}

#[test]
fn binning_is_exact() {
    // Repeating every value three times must give, from the same parameters, three
    // times the log-likelihood and the same EM update (EM with counts is EM on the
    // data). Tolerance 1e-12 relative: the two differ only by rounding.
    let base: Vec<f64> = normals(3, 200)
        .iter()
        .enumerate()
        .map(|(i, z)| if i % 3 == 0 { 6.0 + z } else { *z })
        .map(|v| (v * 10.0f64).round() / 10.0)
        .collect();
    let tripled: Vec<f64> = base.iter().flat_map(|&v| [v, v, v]).collect();
    let (a, b) = (
        Data::new(&base, Resolution::Exact).unwrap(),
        Data::new(&tripled, Resolution::Exact).unwrap(),
    );
    assert!(a.x.len() < base.len(), "the rounded data must have ties");
    assert!(a.x.iter().zip(&b.x).all(|(u, v)| (u - v).abs() < 1e-14));
    assert!(a.count.iter().zip(&b.count).all(|(u, v)| 3.0 * u == *v));
    let p = a.quantile_start(2).unwrap();
    let (la, na) = a.em_pass(&p).unwrap();
    let (lb, nb) = b.em_pass(&p).unwrap();
    assert!((3.0 * la - lb).abs() < 1e-12 * lb.abs());
    for j in 0..2 {
        assert!((na.weight[j] - nb.weight[j]).abs() < 1e-12);
        assert!((na.mean[j] - nb.mean[j]).abs() < 1e-12);
        assert!((na.var[j] - nb.var[j]).abs() < 1e-12 * na.var[j]);
    }
    // And the fitted mixtures agree to the convergence tolerance (1e-6 relative).
    let (fa, fb) = (
        fit_mixture(&base, Some(2)).unwrap(),
        fit_mixture(&tripled, Some(2)).unwrap(),
    );
    assert!((3.0 * fa.summary.loglik - fb.summary.loglik).abs() < 1e-9 * fb.summary.loglik.abs());
    for (x, y) in fa.mixture.components().iter().zip(fb.mixture.components()) {
        assert!((x.mean - y.mean).abs() < 1e-6 * (1.0 + x.mean.abs()));
        assert!((x.sd - y.sd).abs() < 1e-6 * x.sd);
    }
}

#[test]
fn deterministic_and_sorted() {
    // An idealised sample: normal quantiles at (i + 0.5) / n, so no two draws
    // crowd together by chance (a random sample may hold a close pair in a tail,
    // which a spurious narrow component fits: a true local maximum of the likelihood
    // that BIC can prefer).
    let grid = |n: usize, mean: f64, sd: f64| -> Vec<f64> {
        let d = Normal::new(mean, sd).unwrap();
        (0..n)
            .map(|i| d.inverse_cdf((i as f64 + 0.5) / n as f64))
            .collect()
    };
    let mut xs = grid(450, -3.0, 1.0);
    xs.extend(grid(150, 10.0, 0.5));
    let a = fit_mixture(&xs, None).unwrap();
    let b = fit_mixture(&xs, None).unwrap();
    assert_eq!(a, b);
    assert_eq!(a.mixture.components().len(), 2);
    assert!(a.mixture.components()[0].mean < a.mixture.components()[1].mean);
    assert_eq!(a.candidates.len(), MAX_BIC_K);
    let best = a
        .candidates
        .iter()
        .filter_map(|c| c.bic.map(|b| (c.k, b)))
        .min_by(|x, y| x.1.total_cmp(&y.1))
        .unwrap();
    assert_eq!(best.0, 2);
    assert!(a.converged);
}

#[cfg(target_arch = "x86_64")]
#[test]
fn avx2_pass_is_bit_identical() {
    // The AVX2 form of a pass against the portable one (SSE2 on x86-64), bit for bit:
    // merged data with and without ties (counts of 1 and above, which take different
    // branches), a thinned copy, and k from 1 to 5. Skipped where AVX2 is missing.
    if !std::arch::is_x86_feature_detected!("avx2") {
        return;
    }
    let xs: Vec<f64> = normals(13, 3_000)
        .iter()
        .enumerate()
        .map(|(i, &z)| match i % 3 {
            0 => 4.0 + 0.5 * z,
            1 => (z * 20.0).round() / 20.0,
            _ => z,
        })
        .collect();
    let data = Data::new(&xs, Resolution::Exact).unwrap();
    let thin = data.thinned(256).unwrap();
    assert!(data.count.iter().any(|&c| c > 1.0) && data.count.contains(&1.0));
    for d in [&data, &thin] {
        for k in 1..=5 {
            let mut p = d.quantile_start(k).unwrap();
            for _ in 0..5 {
                #[allow(unsafe_code)]
                // SAFETY: AVX2 was detected above.
                let fast = unsafe { d.em_pass_avx2(&p) }.unwrap();
                let plain = d.em_pass_portable(&p).unwrap();
                assert_eq!(fast.0.to_bits(), plain.0.to_bits());
                for j in 0..k {
                    for (a, b) in [
                        (fast.1.weight[j], plain.1.weight[j]),
                        (fast.1.mean[j], plain.1.mean[j]),
                        (fast.1.var[j], plain.1.var[j]),
                    ] {
                        assert_eq!(a.to_bits(), b.to_bits());
                    }
                }
                p = plain.1;
            }
        }
    }
}

#[test]
fn em_never_decreases_the_likelihood() {
    // The EM ascent property (Dempster, Laird and Rubin 1977, theorem 1), up to
    // rounding (1e-12 relative).
    let xs: Vec<f64> = normals(5, 400)
        .iter()
        .enumerate()
        .map(|(i, z)| if i % 2 == 0 { z + 1.0 } else { 2.0 * z })
        .collect();
    let data = Data::new(&xs, Resolution::Exact).unwrap();
    let mut p = data.quantile_start(3).unwrap();
    let mut last = f64::NEG_INFINITY;
    for _ in 0..200 {
        let (ll, next) = data.em_pass(&p).unwrap();
        assert!(ll >= last - 1e-12 * ll.abs(), "{ll} < {last}");
        last = ll;
        p = next;
    }
}

#[test]
fn bad_input_is_named() {
    assert_eq!(
        fit_mixture(&[1.0, 2.0], Some(0)),
        Err(MixtureError::BadK(0))
    );
    assert_eq!(
        fit_mixture(&[1.0, 2.0], Some(17)),
        Err(MixtureError::BadK(17))
    );
    assert_eq!(
        fit_mixture(&[2.0; 10], None),
        Err(MixtureError::AllEqual(2.0))
    );
    assert_eq!(
        fit_mixture(&[1.0, 2.0, 3.0, 4.0], Some(2)),
        Err(MixtureError::TooFewPoints {
            k: 2,
            need: 5,
            got: 4
        })
    );
    assert_eq!(
        fit_mixture(&[1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 2.0, 2.0], Some(3)),
        Err(MixtureError::TooFewDistinct { k: 3, distinct: 2 })
    );
    assert_eq!(
        fit_mixture(&[1.0, f64::NEG_INFINITY], None),
        Err(MixtureError::NotFinite(f64::NEG_INFINITY))
    );
    assert!(matches!(
        fit_mixture(&[], None),
        Err(MixtureError::TooFewPoints { got: 0, .. })
    ));
}

#[test]
fn validation_names_the_field() {
    let c = |weight, mean, sd| Component { weight, mean, sd };
    assert!(matches!(
        Mixture::new(vec![c(0.5, 0.0, 1.0), c(0.5, 1.0, 0.0)]),
        Err(MixtureError::BadComponent {
            index: 1,
            field: "sd",
            ..
        })
    ));
    assert_eq!(
        Mixture::new(vec![c(0.5, 0.0, 1.0), c(0.6, 1.0, 1.0)]),
        Err(MixtureError::WeightSum(1.1))
    );
}

#[test]
fn quantile_inverts_cdf() {
    // Round trip to 1e-12 relative, including a point in the gap between components
    // where the density is tiny.
    let m = Mixture::new(vec![
        Component {
            weight: 0.9,
            mean: 0.0,
            sd: 0.1,
        },
        Component {
            weight: 0.1,
            mean: 50.0,
            sd: 3.0,
        },
    ])
    .unwrap();
    // (Between about 0.8 and 30 the cdf equals 0.9 to double precision: there every
    // t is an equally good answer, so those points are not tested.)
    for t in [-0.3, 0.0, 0.05, 0.3, 40.0, 45.0, 50.0, 55.0] {
        let back = m.quantile(m.cdf(t)).unwrap();
        assert!((back - t).abs() <= 1e-12 * t.abs().max(1.0), "{t}: {back}");
    }
    assert_eq!(m.quantile(0.0), Ok(f64::NEG_INFINITY));
    assert!(m.quantile(-0.1).is_err());
}

#[test]
fn moments_by_hand() {
    // Exact: mean 0.5*0 + 0.5*2 = 1; variance 0.5*(1 + 1) + 0.5*(4 + 1) = 3.5.
    let m = Mixture::new(vec![
        Component {
            weight: 0.5,
            mean: 0.0,
            sd: 1.0,
        },
        Component {
            weight: 0.5,
            mean: 2.0,
            sd: 2.0,
        },
    ])
    .unwrap();
    assert_eq!(m.mean(), 1.0);
    assert!((m.sd() - 3.5f64.sqrt()).abs() < 1e-15);
}

#[test]
fn one_component_mean_is_the_compensated_mean() {
    // Exact arithmetic: (1e16 + 1 - 1e16 + 2) / 4 = 0.75 (the standardised EM mean
    // mapped back gave 1.5175). The sd with divisor n is sqrt(5e31 + 0.6875) =
    // 7071067811865475.244 (by hand; the 0.6875 moves it by 5e-17), tolerance 1e-15
    // relative.
    let f = fit_mixture(&[1e16, 1.0, -1e16, 2.0], Some(1)).unwrap();
    let c = f.mixture.components()[0];
    assert_eq!(c.mean, 0.75);
    assert!(
        (c.sd - 7071067811865475.244).abs() / c.sd < 1e-15,
        "{}",
        c.sd
    );
}

#[test]
fn runs_over_many_distinct_values_have_a_bounded_pass_budget() {
    // 4e8 point-component evaluations per run: 500 passes for two components over
    // 400,000 distinct values, never fewer than 100, and for small data far above the
    // 10,000-pass cap (which then governs).
    let many: Vec<f64> = (0..400_000).map(|i| f64::from(i) * 1e-3).collect();
    let data = Data::new(&many, Resolution::Exact).unwrap();
    assert_eq!(data.pass_budget(2), 500);
    assert_eq!(data.pass_budget(16), 100);
    let few = Data::new(&normals(5, 1000), Resolution::Exact).unwrap();
    assert!(few.pass_budget(6) > MAX_ITERATIONS);
}

#[test]
fn candidates_that_cannot_win_by_bic_are_skipped_only_when_they_lose() {
    // Readings to 0.1 of two regimes (2,000 values, weights 0.8 and 0.2): with k chosen
    // by BIC the saturated grouped log-likelihood rules out the larger k. Each skipped k,
    // fitted on its own, must indeed have a larger BIC than the winner (the bound is an
    // upper bound: Gibbs' inequality), and the winner must be the fit of its k given
    // directly, bit for bit.
    let xs: Vec<f64> = normals(23, 2_000)
        .iter()
        .enumerate()
        .map(|(i, &z)| {
            let x = if i % 5 == 0 { 5.0 + z } else { 3.0 + 0.3 * z };
            (x * 10.0).round() / 10.0
        })
        .collect();
    let step = Resolution::Step(0.1);
    let chosen = fit_mixture_rounded(&xs, None, step).unwrap();
    let skipped: Vec<usize> = chosen
        .candidates
        .iter()
        .filter(|c| c.bic.is_none())
        .map(|c| c.k)
        .collect();
    assert!(!skipped.is_empty(), "{:?}", chosen.candidates);
    let k = chosen.mixture.components().len();
    assert_eq!(
        fit_mixture_rounded(&xs, Some(k), step).unwrap().mixture,
        chosen.mixture
    );
    for k in skipped {
        let own = fit_mixture_rounded(&xs, Some(k), step).unwrap();
        assert!(own.summary.bic > chosen.summary.bic, "k = {k}");
    }
    // Exact values have no such bound: every candidate is fitted.
    let exact = fit_mixture(&xs, None).unwrap();
    assert!(exact.candidates.iter().all(|c| c.bic.is_some()));
}

//! Hand-drawn convergence shapes, missing evidence groups and replicate-order invariance.
//!
//! The shapes are drawn the way a reviewer reads a convergence plot (Sugihara et al. 2012:
//! causal skill rises with library size and levels off; a non-causal pair stays flat; Ye et
//! al. 2015: the best cross-map lag of a true driver is not positive).

use ensemble_features::{
    Cycle, Ensemble, FeatureGroup, LagProfile, PairContext, PairEvidence, SeasonalEvidence,
    available_groups, compute, index_of, schema, try_compute,
};
use proptest::prelude::*;

/// splitmix64 (Steele et al. 2014) feeding Box–Muller: seeded normals without a dependency.
struct Normals(u64);

impl Normals {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn next(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

const REPLICATES: usize = 40;

fn sizes() -> Vec<usize> {
    (0..12)
        .map(|k| 10f64.powf(1.0 + 2.0 * k as f64 / 11.0).round() as usize)
        .collect()
}

/// An ensemble whose mean follows `mean(x, u)` (x = L / L_max, u = log position in [0, 1])
/// and whose replicate SD follows `spread(L)`, clipped to the range of a correlation.
fn draw(seed: u64, mean: impl Fn(f64, f64) -> f64, spread: impl Fn(f64) -> f64) -> Ensemble {
    let sizes = sizes();
    let (lo, hi) = ((sizes[0] as f64).ln(), (sizes[11] as f64).ln());
    let mut rng = Normals(seed);
    let skills = sizes
        .iter()
        .map(|&l| {
            let lf = l as f64;
            let (x, u) = (lf / sizes[11] as f64, (lf.ln() - lo) / (hi - lo));
            (0..REPLICATES)
                .map(|_| (mean(x, u) + spread(lf) * rng.next()).clamp(-1.0, 1.0))
                .collect()
        })
        .collect();
    Ensemble {
        library_sizes: sizes,
        skills,
    }
}

fn rising() -> Ensemble {
    draw(
        1,
        |x, _| 0.8 - 0.7 * (-30.0 * x).exp(),
        |l| 0.15 * (10.0 / l).sqrt() + 0.01,
    )
}

fn crest_then_sag() -> Ensemble {
    draw(
        2,
        |_, u| {
            if u <= 0.25 {
                0.2 + 1.6 * u
            } else {
                0.6 - 0.3 * (u - 0.25) / 0.75
            }
        },
        |_| 0.03,
    )
}

fn flat_near_zero() -> Ensemble {
    draw(3, |_, _| 0.0, |_| 0.05)
}

fn wide_noisy() -> Ensemble {
    draw(4, |_, u| 0.3 + 0.1 * u, |_| 0.3)
}

fn row(forward: Ensemble) -> impl Fn(&str) -> f64 {
    let values = compute(&PairEvidence::curve_only(forward, None));
    move |name| values[index_of(name).expect("known feature")].expect("feature defined")
}

#[test]
fn rising_to_plateau() {
    let f = row(rising());
    assert!(f("skill_gain") > 0.3);
    assert!(f("slope_early") > 0.0 && f("slope_early") > f("slope_late"));
    assert!(f("slope_late") > -0.05);
    assert!(f("mk_z") > 2.0);
    assert!(f("kendall_tau") > 0.6);
    assert!(f("rising_share") > 0.9);
    assert!(f("overshoot") < 0.05);
    assert!(f("overshoot_position") > 0.7);
    assert!((0.7..0.9).contains(&f("fit_asymptote")));
    assert!(f("fit_r2") > 0.95);
    assert!(f("fit_headroom").abs() < 0.1);
    assert!(f("skill_final_mean") > 0.7 && f("skill_final_median") > 0.7);
    assert!(f("spread_log_ratio") < -1.0);
    assert!(f("spread_decay_slope") < 0.0);
    assert!(f("spread_sd_small") > f("spread_sd_mid") && f("spread_sd_mid") > f("spread_sd_large"));
    assert!(f("gain_over_spread") > 1.0);
    assert!(f("nan_share") == 0.0);
}

#[test]
fn early_crest_then_sag() {
    let f = row(crest_then_sag());
    assert!(f("overshoot") > 0.2);
    assert!((0.1..0.45).contains(&f("overshoot_position")));
    assert!(f("slope_early") > 0.0);
    assert!(f("slope_late") < 0.0);
    assert!(f("kendall_tau") < 0.0);
    // The exponential form cannot bend back down, so a sagging curve fits it worse.
    assert!(f("fit_r2") < row(rising())("fit_r2"));
}

#[test]
fn flat_near_zero_skill() {
    let f = row(flat_near_zero());
    assert!(f("skill_final_mean").abs() < 0.05);
    assert!(f("skill_gain").abs() < 0.1);
    assert!(f("fit_asymptote").abs() < 0.2);
    assert!(f("gain_over_spread").abs() < 1.0);
    assert!(f("mk_z").abs() < 2.5);
}

#[test]
fn wide_noisy_spread() {
    let f = row(wide_noisy());
    for name in ["spread_sd_small", "spread_sd_mid", "spread_sd_large"] {
        assert!(f(name) > 0.2, "{name}");
    }
    for name in ["spread_iqr_small", "spread_iqr_mid", "spread_iqr_large"] {
        assert!(f(name) > 0.25, "{name}");
    }
    assert!(f("spread_log_ratio").abs() < 0.5);
    assert!(f("gain_over_spread") < row(rising())("gain_over_spread"));
    assert!((0.3..0.9).contains(&f("rising_share")));
}

fn lag_profile() -> LagProfile {
    let lags: Vec<i32> = (-5..=5).collect();
    let skills = lags
        .iter()
        .map(|&l| 0.8 - 0.02 * f64::from((l + 2) * (l + 2)))
        .collect();
    LagProfile { lags, skills }
}

fn context() -> PairContext {
    PairContext {
        n_points: 1000,
        e_driver: 2,
        e_response: 3,
        tau_driver: 1,
        tau_response: 2,
        simplex_driver: 0.9,
        simplex_response: 0.5,
        correlation: -0.3,
        common_driver_skill: 0.2,
        response_skill_rank: 0.5,
        response_mean_skill: 0.4,
    }
}

fn seasonal() -> SeasonalEvidence {
    SeasonalEvidence {
        skills: vec![0.1, 0.2, 0.3, 0.4],
        driver: Cycle {
            period: 12.0,
            strength: 0.6,
        },
        response: Cycle {
            period: 6.0,
            strength: 0.3,
        },
    }
}

fn full_evidence() -> PairEvidence {
    let mut rng = Normals(9);
    PairEvidence {
        forward: rising(),
        reverse: Some(flat_near_zero()),
        lag: Some(lag_profile()),
        reverse_lag: Some(LagProfile {
            lags: (-5..=5).collect(),
            skills: (-5..=5)
                .map(|l| 0.3 - 0.01 * f64::from((l - 1) * (l - 1)))
                .collect(),
        }),
        surrogate_skills: Some((0..100).map(|_| 0.05 + 0.05 * rng.next()).collect()),
        seasonal: Some(seasonal()),
        context: Some(context()),
    }
}

#[test]
fn contrast_lag_surrogate_and_context_read_as_drawn() {
    let ev = full_evidence();
    let values = try_compute(&ev).unwrap();
    let f = |name: &str| values[index_of(name).unwrap()].unwrap();
    assert!(f("diff_skill_final_mean") > 0.5);
    assert!(f("diff_skill_gain") > 0.3);
    assert!(f("diff_kendall_tau") > 0.0);
    assert!(f("rev_skill_final_mean").abs() < 0.05);
    assert_eq!(f("lag_best"), -2.0);
    assert!((f("lag_best_scaled") + 0.4).abs() < 1e-12);
    assert!((f("lag_best_skill") - 0.8).abs() < 1e-12);
    assert!((f("lag_gap") - 0.08).abs() < 1e-12);
    assert_eq!(f("surrogate_percentile"), 1.0);
    assert_eq!(f("surrogate_z"), 10.0);
    assert!((f("surrogate_p") - 1.0 / 101.0).abs() < 1e-12);
    assert!((f("log10_n_points") - 3.0).abs() < 1e-12);
    assert_eq!(f("abs_correlation"), 0.3);
    let real = f("skill_final_mean");
    assert!((f("skill_minus_abs_correlation") - (real - 0.3)).abs() < 1e-12);
    assert!((f("skill_over_simplex_response") - real / 0.5).abs() < 1e-12);
    // Reverse lag profile peaks at +1 of 5; the forward one at -2 of 5.
    assert!((f("rev_lag_best_scaled") - 0.2).abs() < 1e-12);
    assert!((f("rev_lag_gap") - 0.01).abs() < 1e-12);
    assert!((f("diff_lag_best_scaled") + 0.6).abs() < 1e-12);
    // Seasonal surrogates 0.1..0.4 all lie below the real skill.
    assert_eq!(f("seasonal_percentile"), 1.0);
    assert!((f("seasonal_p") - 0.2).abs() < 1e-12);
    assert!((f("seasonal_gap") - (real - 0.25)).abs() < 1e-12);
    assert_eq!(f("cycle_strength_driver"), 0.6);
    assert!((f("cycle_period_mismatch") - 2f64.ln()).abs() < 1e-12);
    assert_eq!(f("common_driver_skill"), 0.2);
    assert!((f("common_driver_margin") - (real - 0.2)).abs() < 1e-12);
}

/// Every subset of the optional evidence: features of a missing group are `None`, all others
/// (on this well-formed input) are defined.
#[test]
fn missing_groups_blank_exactly_their_features() {
    let full = full_evidence();
    for mask in 0u8..32 {
        let ev = PairEvidence {
            forward: full.forward.clone(),
            reverse: full.reverse.clone().filter(|_| mask & 1 != 0),
            lag: full.lag.clone().filter(|_| mask & 2 != 0),
            reverse_lag: full.reverse_lag.clone().filter(|_| mask & 1 != 0),
            surrogate_skills: full.surrogate_skills.clone().filter(|_| mask & 4 != 0),
            seasonal: full.seasonal.clone().filter(|_| mask & 16 != 0),
            context: full.context.filter(|_| mask & 8 != 0),
        };
        let groups = available_groups(&ev);
        let values = compute(&ev);
        for (def, value) in schema().iter().zip(&values) {
            // Lag features of the reverse direction need the reverse ensemble's lag profile too.
            let needs_reverse = def.name.starts_with("rev_lag") || def.name.starts_with("diff_lag");
            let present = groups.contains(&def.group)
                && (!needs_reverse || groups.contains(&FeatureGroup::Contrast));
            assert_eq!(
                value.is_some(),
                present,
                "mask {mask}: {} ({:?})",
                def.name,
                def.group
            );
        }
        assert_eq!(groups.len(), 1 + mask.count_ones() as usize);
        assert!(groups.contains(&FeatureGroup::Curve));
    }
}

#[test]
fn invalid_reverse_is_named_in_the_error() {
    let mut ev = full_evidence();
    ev.reverse = Some(Ensemble {
        library_sizes: vec![10],
        skills: vec![vec![0.1]],
    });
    let msg = try_compute(&ev).unwrap_err().to_string();
    assert!(msg.starts_with("reverse ensemble"), "{msg}");
}

fn ensemble_strategy() -> impl Strategy<Value = (Ensemble, Vec<usize>, Vec<Vec<usize>>)> {
    (3usize..8, 2usize..12).prop_flat_map(|(n, r)| {
        let skill = prop_oneof![9 => -1.0f64..1.0, 1 => Just(f64::NAN)];
        let perm: Vec<usize> = (0..r).collect();
        (
            prop::collection::vec(prop::collection::vec(skill, r), n),
            Just(perm.clone()).prop_shuffle(),
            prop::collection::vec(Just(perm).prop_shuffle(), n),
        )
            .prop_map(move |(skills, common, per_size)| {
                let library_sizes = (0..n).map(|i| 10 * (i + 1) * (i + 1)).collect();
                (
                    Ensemble {
                        library_sizes,
                        skills,
                    },
                    common,
                    per_size,
                )
            })
    })
}

fn reorder(e: &Ensemble, perms: &[Vec<usize>]) -> Ensemble {
    Ensemble {
        library_sizes: e.library_sizes.clone(),
        skills: e
            .skills
            .iter()
            .zip(perms)
            .map(|(row, p)| p.iter().map(|&i| row[i]).collect())
            .collect(),
    }
}

fn same(a: &[Option<f64>], b: &[Option<f64>], skip: Option<usize>) -> bool {
    a.iter()
        .zip(b)
        .enumerate()
        .all(|(i, (x, y))| Some(i) == skip || x.map(f64::to_bits) == y.map(f64::to_bits))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// Replicates are exchangeable draws of random libraries, so features must not depend on
    /// their order; `rising_share` pairs by index, so it is held only to a common reordering.
    #[test]
    fn features_are_invariant_to_replicate_order((e, common, per_size) in ensemble_strategy()) {
        let base = compute(&PairEvidence::curve_only(e.clone(), Some(e.clone())));
        let all_same = vec![common; e.library_sizes.len()];
        let shuffled = reorder(&e, &all_same);
        let got = compute(&PairEvidence::curve_only(shuffled.clone(), Some(shuffled)));
        prop_assert!(same(&base, &got, None));
        let independent = reorder(&e, &per_size);
        let got = compute(&PairEvidence::curve_only(independent.clone(), Some(independent)));
        prop_assert!(same(&base, &got, index_of("rising_share")));
    }
}

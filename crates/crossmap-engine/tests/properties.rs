//! Property tests (proptest): invariances every cross-map skill must have.

use crossmap_engine::{
    CrossMapParams, EmbeddingSettings, LibrarySizes, PairEnsemble, choose_embedding, cross_map_all,
    cross_map_with_library,
};
use proptest::prelude::*;

fn coupled_logistic(n: usize, x0: f64, y0: f64) -> (Vec<f64>, Vec<f64>) {
    let (mut x, mut y) = (vec![x0], vec![y0]);
    for t in 0..n - 1 {
        x.push(x[t] * (3.8 - 3.8 * x[t]));
        y.push(y[t] * (3.5 - 3.5 * y[t] - 0.1 * x[t]));
    }
    (x, y)
}

fn bits(p: &[PairEnsemble]) -> Vec<u64> {
    p.iter()
        .flat_map(|e| {
            e.skills
                .iter()
                .flatten()
                .chain(&e.lag_skills)
                .chain(&e.surrogate_skills)
                .map(|v| v.to_bits())
                .collect::<Vec<_>>()
        })
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(12))]

    /// Pearson r and Euclidean neighbour ranks are unchanged by affine maps (a != 0), so the
    /// skill is too (Sugihara et al. 2012 use the correlation for this reason).
    #[test]
    fn skill_is_invariant_to_affine_rescaling(
        x0 in 0.1f64..0.9, a in prop_oneof![-20.0f64..-0.05, 0.05f64..20.0], b in -100.0f64..100.0,
        c in prop_oneof![-20.0f64..-0.05, 0.05f64..20.0], d in -100.0f64..100.0,
    ) {
        let (x, y) = coupled_logistic(200, x0, 0.3);
        let lib: Vec<usize> = (1..200).step_by(3).collect();
        let base = cross_map_with_library(&y, &x, 2, 1, 1, &lib, 0).unwrap().skill;
        let ys: Vec<f64> = y.iter().map(|v| a * v + b).collect();
        let xs: Vec<f64> = x.iter().map(|v| c * v + d).collect();
        let scaled = cross_map_with_library(&ys, &xs, 2, 1, 1, &lib, 0).unwrap().skill;
        prop_assert!((base - scaled).abs() < 1e-7, "{base} vs {scaled}");
    }

    /// Keyed generators: the same ensembles, bit for bit, on 1 and 2 threads.
    #[test]
    fn identical_results_for_one_and_two_threads(x0 in 0.1f64..0.9, seed in any::<u64>()) {
        let (x, y) = coupled_logistic(150, x0, 0.25);
        let z: Vec<f64> = x.iter().zip(&y).map(|(a, b)| a * 0.5 + b * b).collect();
        let series = vec![x, y, z];
        let s = EmbeddingSettings { tau: Some(1), max_e: 4, ..Default::default() };
        let emb: Vec<_> = series.iter().map(|v| choose_embedding(v, &s).unwrap()).collect();
        let params = CrossMapParams::default()
            .with_library_sizes(LibrarySizes::Auto { count: 5 })
            .with_replicates(6)
            .with_surrogates(3, None)
            .with_seed(seed)
            .validate(150, &emb)
            .unwrap();
        let run = |threads| {
            rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap()
                .install(|| cross_map_all(&series, &emb, &params, &|_| {}))
        };
        prop_assert_eq!(bits(&run(1)), bits(&run(2)));
    }

    /// Destroying the time order of the driver destroys any cross-map relation: skill near zero
    /// (common practice as a null check). Estimates share neighbours, so single null skills
    /// spread wider than 1/sqrt(n) (up to about 0.26 seen at n = 400); the mean over 20
    /// independent shuffles must be within 0.1 of zero.
    #[test]
    fn shuffled_driver_gives_near_zero_skill(x0 in 0.1f64..0.9, seed in any::<u64>()) {
        let n = 400;
        let (x, y) = coupled_logistic(n, x0, 0.3);
        // Fisher-Yates driven by SplitMix64 (Steele, Lea & Flood 2014): a well-mixed stream
        // for every seed, so each shuffle is a genuinely random permutation.
        let mut state = seed;
        let mut next = || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^ (z >> 31)
        };
        let lib: Vec<usize> = (1..n).collect();
        let mut skills = Vec::new();
        for _ in 0..20 {
            let mut shuffled = x.clone();
            for i in (1..n).rev() {
                let j = (next() % (i as u64 + 1)) as usize;
                shuffled.swap(i, j);
            }
            skills.push(cross_map_with_library(&y, &shuffled, 2, 1, 1, &lib, 0).unwrap().skill);
        }
        let mean = skills.iter().sum::<f64>() / skills.len() as f64;
        prop_assert!(mean.abs() < 0.1, "mean skill {mean} of {skills:?}");
    }
}

//! Checks against known behaviour of dynamical systems: one-way coupled logistic maps
//! (Sugihara et al. 2012) and the Lorenz (1963) system (Sugihara & May 1990).

use crossmap_engine::{
    CrossMapParams, Embedding, EmbeddingSettings, LibrarySizes, PairEnsemble, choose_embedding,
    cross_map_all, simplex_forecast,
};

/// Coupled logistic maps of Sugihara et al. (2012), r_x = 3.8, r_y = 3.5, with coupling only from
/// X to Y (beta_yx = 0.1, beta_xy = 0; coefficients from memory).
fn coupled_logistic(n: usize) -> (Vec<f64>, Vec<f64>) {
    let (mut x, mut y) = (vec![0.4], vec![0.2]);
    for t in 0..n - 1 {
        x.push(x[t] * (3.8 - 3.8 * x[t]));
        y.push(y[t] * (3.5 - 3.5 * y[t] - 0.1 * x[t]));
    }
    (x, y)
}

fn mean(v: &[f64]) -> f64 {
    v.iter().sum::<f64>() / v.len() as f64
}

/// Every series embedded with dimension `e` and delay 1 (simplex skill still computed).
fn fixed_embeddings(series: &[Vec<f64>], e: usize) -> Vec<Embedding> {
    let settings = EmbeddingSettings {
        e: Some(e),
        tau: Some(1),
        ..Default::default()
    };
    series
        .iter()
        .map(|s| choose_embedding(s, &settings).unwrap())
        .collect()
}

fn pair(pairs: &[PairEnsemble], driver: usize, response: usize) -> &PairEnsemble {
    pairs
        .iter()
        .find(|p| p.driver == driver && p.response == response)
        .unwrap()
}

#[test]
fn one_way_coupled_logistic_converges_only_in_the_true_direction() {
    let n = 500;
    let (x, y) = coupled_logistic(n);
    let series = vec![x, y];
    let emb = fixed_embeddings(&series, 2);
    let params = CrossMapParams::default()
        .with_library_sizes(LibrarySizes::Explicit(vec![5, 10, 20, 50, 100, 200, 400]))
        .with_replicates(30)
        .with_surrogates(19, None)
        .with_seed(7)
        .validate(n, &emb)
        .unwrap();
    let pairs = cross_map_all(&series, &emb, &params, &|_| {});
    let x_to_y = pair(&pairs, 0, 1);
    let y_to_x = pair(&pairs, 1, 0);
    let curve = |p: &PairEnsemble| p.skills.iter().map(|r| mean(r)).collect::<Vec<_>>();
    let (c_true, c_false) = (curve(x_to_y), curve(y_to_x));
    eprintln!(
        "X -> Y {c_true:.3?}\nY -> X {c_false:.3?}\nlags {:?} {:.3?}",
        x_to_y.lags, x_to_y.lag_skills
    );
    // Sugihara et al. (2012), Fig. 3: skill of the true direction rises with L to a high plateau.
    assert!(*c_true.last().unwrap() > 0.8, "X -> Y plateau {c_true:?}");
    assert!(
        c_true.last().unwrap() - c_true[0] > 0.2,
        "X -> Y does not rise: {c_true:?}"
    );
    // ... while the uncoupled direction stays low.
    assert!(*c_false.last().unwrap() < 0.4, "Y -> X {c_false:?}");
    // Ye et al. (2015): for true driving, the best cross-map lag is not positive.
    let best = x_to_y
        .lags
        .iter()
        .zip(&x_to_y.lag_skills)
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(l, _)| *l)
        .unwrap();
    assert!(best <= 0, "best lag {best}: {:?}", x_to_y.lag_skills);
    // Ebisuzaki (1997) surrogates of the driver keep its spectrum but not its coupling: the true
    // skill beats every one of 19 surrogates (a rank test at the 5% level).
    let real = mean(x_to_y.skills.last().unwrap());
    assert_eq!(x_to_y.surrogate_skills.len(), 19);
    assert!(
        x_to_y.surrogate_skills.iter().all(|&s| s < real),
        "{real} vs {:?}",
        x_to_y.surrogate_skills
    );
}

#[test]
fn progress_reports_finished_pairs() {
    let (x, y) = coupled_logistic(120);
    let z: Vec<f64> = x.iter().zip(&y).map(|(a, b)| a - b).collect();
    let series = vec![x, y, z];
    let emb = fixed_embeddings(&series, 2);
    let params = CrossMapParams::default()
        .with_replicates(3)
        .validate(120, &emb)
        .unwrap();
    let seen = std::sync::Mutex::new(Vec::new());
    let pairs = cross_map_all(&series, &emb, &params, &|done| {
        seen.lock().unwrap().push(done)
    });
    assert_eq!(pairs.len(), 6);
    assert_eq!(*seen.lock().unwrap(), vec![2, 4, 6]);
    assert!(
        pairs
            .iter()
            .all(|p| p.driver != p.response && p.skills.iter().all(|r| r.len() == 3))
    );
}

/// Lorenz (1963) system, sigma = 10, rho = 28, beta = 8/3, integrated by classical RK4.
fn lorenz_x(n: usize, dt: f64, every: usize) -> Vec<f64> {
    let f = |s: [f64; 3]| {
        [
            10.0 * (s[1] - s[0]),
            s[0] * (28.0 - s[2]) - s[1],
            s[0] * s[1] - 8.0 / 3.0 * s[2],
        ]
    };
    let add =
        |s: [f64; 3], k: [f64; 3], h: f64| [s[0] + h * k[0], s[1] + h * k[1], s[2] + h * k[2]];
    let mut s = [1.0, 1.0, 1.0];
    let mut out = Vec::with_capacity(n);
    for step in 0..(n * every + 2000) {
        let k1 = f(s);
        let k2 = f(add(s, k1, dt / 2.0));
        let k3 = f(add(s, k2, dt / 2.0));
        let k4 = f(add(s, k3, dt));
        for i in 0..3 {
            s[i] += dt / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
        }
        // Skip the first 2000 steps (transient onto the attractor).
        if step >= 2000 && (step - 2000) % every == 0 {
            out.push(s[0]);
        }
    }
    out
}

#[test]
fn lorenz_simplex_picks_a_small_dimension_and_skill_decays_with_horizon() {
    let x = lorenz_x(1000, 0.01, 5);
    let emb = choose_embedding(&x, &EmbeddingSettings::default()).unwrap();
    // Sugihara & May (1990) style choice; the Lorenz attractor (dimension ~2.06) embeds well in
    // E = 2..=4 with a reasonable delay (from memory).
    assert!(
        (2..=4).contains(&emb.e),
        "E = {}, tau = {}, skills {:?}",
        emb.e,
        emb.tau,
        emb.skill_by_e
    );
    assert!(emb.simplex_skill > 0.9);
    // Sugihara & May (1990): forecast skill of chaotic dynamics falls as the horizon grows.
    let w = crossmap_engine::default_theiler(emb.e, emb.tau);
    let skill = |h| simplex_forecast(&x, emb.e, emb.tau, h, w).unwrap().skill;
    let (s1, s10, s40) = (skill(1), skill(10), skill(40));
    eprintln!(
        "Lorenz E {} tau {} skills {:.4?}; horizon 1/10/40: {s1:.3} {s10:.3} {s40:.3}",
        emb.e, emb.tau, emb.skill_by_e
    );
    assert!(s1 > s10 && s10 > s40, "skills {s1} {s10} {s40}");
}

/// The design of Deyle et al. (2016; recalled from memory): an environmental driver X is a
/// 12-step seasonal cycle plus autocorrelated anomalies, and a chaotic Ricker population Y has
/// its growth rate forced by the bare season, so X and Y share only the rhythm (no causal link), yet X cross-maps
/// well from Y's states. The driver's cycle is found without being told (period 12), and the
/// seasonal surrogates, which keep that cycle and scramble the anomalies, reach nearly the
/// real skill: the rhythm alone explains it. When Y is forced by X itself, anomalies
/// included, the real skill stands further above its seasonal surrogates.
#[test]
fn seasonal_surrogates_absorb_a_shared_rhythm_but_not_a_real_coupling() {
    let n = 480;
    let mut h = 0x2545_f491_4f6c_dd1du64;
    let mut uniform = move || {
        h ^= h << 13;
        h ^= h >> 7;
        h ^= h << 17;
        (h >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    let mut anomaly = 0.0;
    let (season, x): (Vec<f64>, Vec<f64>) = (0..n + 100)
        .map(|t| {
            anomaly = 0.5 * anomaly + uniform();
            let s = (2.0 * std::f64::consts::PI * t as f64 / 12.0).sin();
            (s, s + anomaly)
        })
        .unzip();
    let run = |forcing: &[f64]| {
        let mut y = vec![0.5];
        for t in 0..n + 99 {
            y.push(y[t] * (3.0 * (1.0 + 0.2 * forcing[t]) * (1.0 - y[t])).exp());
        }
        let series = vec![x[100..].to_vec(), y[100..].to_vec()];
        let emb = fixed_embeddings(&series, 3);
        let params = CrossMapParams::default()
            .with_library_sizes(LibrarySizes::Auto { count: 4 })
            .with_replicates(5)
            .with_surrogates(39, None)
            .with_seed(3)
            .validate(n, &emb)
            .unwrap();
        let pairs = cross_map_all(&series, &emb, &params, &|_| {});
        let p = pair(&pairs, 0, 1).clone();
        let real = mean(p.skills.last().unwrap());
        (
            real,
            real - mean(&p.surrogate_skills),
            real - mean(&p.seasonal_surrogate_skills),
        )
    };
    let (real, phase, seasonal) = run(&season);
    eprintln!(
        "shared season: skill {real:.3}, excess over phase {phase:.3}, over seasonal {seasonal:.3}"
    );
    assert!(real > 0.3, "the shared rhythm should give skill: {real}");
    let found = crossmap_engine::detect_season(&x[100..]).unwrap();
    assert!((found.period - 12.0).abs() < 0.1, "{found:?}");
    assert!(
        phase.abs() < 0.15 && seasonal.abs() < 0.15,
        "{phase} {seasonal}"
    );
    let (real_forced, _, seasonal_forced) = run(&x);
    eprintln!("forced by X: skill {real_forced:.3}, excess over seasonal {seasonal_forced:.3}");
    assert!(
        seasonal_forced > seasonal,
        "{seasonal_forced} vs {seasonal}"
    );
}

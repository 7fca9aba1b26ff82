//! Synthetic view data for rendering tests: invented shapes, no scientific claims.
#![allow(dead_code)]

use review_report::{EmbeddingRow, PairView, ReportData, VerdictKind};

/// A small seeded generator (splitmix64, Steele et al. 2014) so samples are reproducible
/// without a dependency.
pub struct Gen(u64);

impl Gen {
    pub fn new(seed: u64) -> Self {
        Gen(seed)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Names with characters that must be escaped, for the small sample.
pub const TRICKY: [&str; 6] = [
    "temperature",
    "nitrate <NO3>",
    "algae & diatoms",
    "grazers \"zoo\"",
    "predator's count",
    "unrelated",
];

fn curve(g: &mut Gen, sizes: &[usize], top: f64, reps: usize) -> Vec<Vec<f64>> {
    sizes
        .iter()
        .map(|&l| {
            let centre = top * (1.0 - (-(l as f64) / 60.0).exp());
            let spread = 0.25 / (l as f64).sqrt();
            (0..reps)
                .map(|_| centre + spread * (2.0 * g.unit() - 1.0) * 1.7)
                .collect()
        })
        .collect()
}

/// A pair of invented shape: the verdict decides whether the forward curve climbs.
pub fn pair(
    g: &mut Gen,
    driver: &str,
    response: &str,
    verdict: VerdictKind,
    full: bool,
) -> PairView {
    let sizes = [15usize, 25, 40, 65, 100, 160, 250, 400];
    let (p, top_f, top_r) = match verdict {
        VerdictKind::Causal => (
            0.8 + 0.19 * g.unit(),
            0.55 + 0.35 * g.unit(),
            0.1 + 0.2 * g.unit(),
        ),
        VerdictKind::NonCausal => (
            0.02 + 0.25 * g.unit(),
            0.05 + 0.15 * g.unit(),
            0.1 + 0.6 * g.unit(),
        ),
        VerdictKind::Review => (
            0.35 + 0.3 * g.unit(),
            0.4 + 0.3 * g.unit(),
            0.4 + 0.3 * g.unit(),
        ),
    };
    let reps = if full { 30 } else { 8 };
    let forward = curve(g, &sizes, top_f, reps);
    let reverse = Some(curve(g, &sizes, top_r, reps));
    let lags: Vec<i32> = (-6..=4).collect();
    let peak = -((g.next_u64() % 4) as i32);
    let lag_skill = lags
        .iter()
        .map(|&l| top_f * (-((l - peak) as f64).powi(2) / 8.0).exp())
        .collect();
    let surrogate: Vec<f64> = (0..99).map(|_| 0.15 * (2.0 * g.unit() - 1.0)).collect();
    let reasons = match verdict {
        VerdictKind::Review => vec![
            (
                "both-converge".to_owned(),
                "skill rises in both directions, as under strong one-way forcing or a shared driver".to_owned(),
            ),
            (
                "near-even".to_owned(),
                "the probability is close to an even chance".to_owned(),
            ),
        ],
        _ => vec![],
    };
    PairView {
        driver: driver.to_owned(),
        response: response.to_owned(),
        p_causal: p,
        verdict,
        reasons,
        library_sizes: sizes.to_vec(),
        forward,
        reverse,
        reverse_library_sizes: None,
        decision: None,
        lag_profile: Some((lags, lag_skill)),
        surrogate_skills: Some(surrogate.clone()),
        seasonal_surrogate_skills: Some(surrogate.iter().map(|v| v + 0.1).collect()),
        key_features: vec![
            ("skill at largest library".to_owned(), Some(top_f)),
            (
                "gain from smallest to largest".to_owned(),
                Some(top_f * 0.8),
            ),
            ("best lag".to_owned(), Some(peak as f64)),
            ("surrogate exceedance".to_owned(), None),
        ],
        answer_key: None,
    }
}

/// A complete report over `names`, every ordered pair present except `skip` (driver, response).
pub fn report(names: &[String], seed: u64, skip: Option<(usize, usize)>) -> ReportData {
    let mut g = Gen::new(seed);
    let mut pairs = Vec::new();
    for (i, d) in names.iter().enumerate() {
        for (j, r) in names.iter().enumerate() {
            if i == j || skip == Some((i, j)) {
                continue;
            }
            let roll = g.unit();
            let verdict = if roll < 0.15 {
                VerdictKind::Review
            } else if roll < 0.4 {
                VerdictKind::Causal
            } else {
                VerdictKind::NonCausal
            };
            pairs.push(pair(&mut g, d, r, verdict, names.len() <= 10));
        }
    }
    let embeddings = names
        .iter()
        .enumerate()
        .map(|(i, v)| EmbeddingRow {
            cycle: (i == 0).then_some((12.0, 0.42)),
            season: i == 0,
            variable: v.clone(),
            e: 2 + i % 4,
            tau: 1 + i % 2,
            simplex_skill: 0.6 + 0.35 * g.unit(),
        })
        .collect();
    ReportData {
        title: "ccm-triage report — synthetic <sample>.csv".to_owned(),
        input_name: "synthetic <sample>.csv".to_owned(),
        input_sha256: Some("0f".repeat(32)),
        tool_version: "0.1.0".to_owned(),
        model_identity: "synthetic test model (sha256 ab12cd34)".to_owned(),
        params: vec![
            ("seed".to_owned(), seed.to_string()),
            ("replicates per size".to_owned(), "30".to_owned()),
            ("Theiler window".to_owned(), "5".to_owned()),
            ("surrogates".to_owned(), "99 phase-randomised".to_owned()),
        ],
        variables: names.to_vec(),
        embeddings,
        pairs,
        notes: vec![
            "3 missing cells in \"nitrate <NO3>\" were left out of the embeddings".to_owned(),
        ],
    }
}

pub fn small() -> ReportData {
    let names: Vec<String> = TRICKY.iter().map(|s| s.to_string()).collect();
    report(&names, 11, Some((5, 0)))
}

pub fn wide(n: usize) -> ReportData {
    let names: Vec<String> = (0..n)
        .map(|i| format!("station {:02} <{}>", i, i % 7))
        .collect();
    report(&names, 23, None)
}

//! End-to-end engine throughput on seeded coupled logistic data.
//!
//! `cargo run --release -p crossmap-engine --example throughput -- --vars 4 --points 1000
//!  [--sizes 10] [--replicates 100] [--surrogates 0] [--choose-embedding] [--seed 1]`

use crossmap_engine::{
    CrossMapParams, Embedding, EmbeddingSettings, LibrarySizes, choose_embedding, cross_map_all,
};
use std::time::Instant;

fn arg(args: &[String], name: &str, default: usize) -> usize {
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .map(|v| {
            v.parse()
                .unwrap_or_else(|_| panic!("{name} expects a whole number, got {v}"))
        })
        .unwrap_or(default)
}

/// Coupled logistic chain: variable i is driven by variable i-1; a splitmix-style hash of the
/// seed sets the initial states.
fn chain(vars: usize, points: usize, seed: u64) -> Vec<Vec<f64>> {
    let mut h = seed.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut s: Vec<Vec<f64>> = (0..vars)
        .map(|_| {
            h = (h ^ (h >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            h = (h ^ (h >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            vec![0.1 + 0.8 * ((h >> 11) as f64 / (1u64 << 53) as f64)]
        })
        .collect();
    for t in 0..points - 1 {
        for i in 0..vars {
            let r = 3.7 + 0.2 * (i as f64 / vars.max(2) as f64);
            let drive = if i > 0 { 0.1 * s[i - 1][t] } else { 0.0 };
            let v = s[i][t];
            s[i].push((v * (r - r * v - drive)).clamp(1e-9, 1.0 - 1e-9));
        }
    }
    s
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let vars = arg(&args, "--vars", 4);
    let points = arg(&args, "--points", 1000);
    let sizes = arg(&args, "--sizes", 10);
    let replicates = arg(&args, "--replicates", 100);
    let surrogates = arg(&args, "--surrogates", 0);
    let seed = arg(&args, "--seed", 1) as u64;
    let choose = args.iter().any(|a| a == "--choose-embedding");
    let series = chain(vars, points, seed);
    let start = Instant::now();
    let embeddings: Vec<Embedding> = if choose {
        series
            .iter()
            .map(|s| {
                choose_embedding(
                    s,
                    &EmbeddingSettings {
                        tau: Some(1),
                        ..Default::default()
                    },
                )
                .unwrap()
            })
            .collect()
    } else {
        (0..vars)
            .map(|_| Embedding {
                e: 2,
                tau: 1,
                simplex_skill: f64::NAN,
                skill_by_e: vec![],
                vectors_excluded: 0,
            })
            .collect()
    };
    let t_embed = start.elapsed();
    let params = CrossMapParams::default()
        .with_library_sizes(LibrarySizes::Auto { count: sizes })
        .with_replicates(replicates)
        .with_surrogates(surrogates, None)
        .with_seed(seed)
        .validate(points, &embeddings)
        .unwrap();
    let pairs = cross_map_all(&series, &embeddings, &params, &|_| {});
    let total = start.elapsed();
    let n_sizes = params.plans()[0].library_sizes.len();
    println!(
        "workload: {vars} variables x {points} points, {} ordered pairs, {n_sizes} library sizes x {replicates} replicates, {surrogates} surrogates, E {}",
        pairs.len(),
        if choose {
            "chosen by simplex (tau = 1)"
        } else {
            "= 2, tau = 1"
        }
    );
    println!(
        "threads: {}; embedding {:.3} s; total {:.3} s; {:.1} pairs/s",
        rayon::current_num_threads(),
        t_embed.as_secs_f64(),
        total.as_secs_f64(),
        pairs.len() as f64 / total.as_secs_f64()
    );
}

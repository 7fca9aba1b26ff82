//! The engine's half of the side-by-side benchmark against the numpy + scipy reference
//! (`benches/reference/`, driven by `benches/reference/side_by_side.py`).
//!
//! Reads a table written by the driver (one header line of names, then one row per time step,
//! comma-separated), runs the ensembles of every ordered pair at lag 0 only, without surrogates
//! (exactly the work the reference does: E+1 neighbours, weights `exp(-d_i/d_1)`, Theiler window
//! `tau (E - 1)`, random libraries without replacement at log-spaced sizes) and prints one JSON
//! line: the CPU time per run, the library sizes of each response and the skill of every pair
//! at the full library.
//!
//! ```text
//! cargo run --release -p crossmap-engine --example side_by_side -- --input table.csv --e 3 \
//!     [--sizes 10] [--replicates 100] [--seed 1] [--threads 1] [--min-cpu 0.5]
//! ```
//!
//! CPU time is the on-CPU time of every thread of the process (Linux `schedstat`), read before
//! and after the computation; reading the table is not counted. The work is repeated until it
//! has used at least `--min-cpu` seconds and the mean per run is reported.

use crossmap_engine::{CrossMapParams, Embedding, LibrarySizes, cross_map_all};
use std::time::Instant;

fn arg<T: std::str::FromStr>(args: &[String], name: &str) -> Option<T> {
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .map(|v| {
            v.parse()
                .unwrap_or_else(|_| panic!("{name} expects a number, got {v}"))
        })
}

/// Nanoseconds on CPU summed over the threads of this process, or `None` off Linux.
fn cpu_ns() -> Option<u64> {
    let mut total = 0u64;
    for task in std::fs::read_dir("/proc/self/task").ok()? {
        let path = task.ok()?.path().join("schedstat");
        let text = std::fs::read_to_string(path).ok()?;
        total += text.split_whitespace().next()?.parse::<u64>().ok()?;
    }
    Some(total)
}

fn read_table(path: &str) -> Vec<Vec<f64>> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {path}: {e}"));
    let mut lines = text.lines();
    let width = lines.next().expect("a header line").split(',').count();
    let mut columns = vec![Vec::new(); width];
    for (row, line) in lines.enumerate() {
        let fields: Vec<&str> = line.split(',').collect();
        assert_eq!(
            fields.len(),
            width,
            "row {} has {} fields",
            row + 2,
            fields.len()
        );
        for (c, f) in columns.iter_mut().zip(fields) {
            c.push(f.trim().parse::<f64>().unwrap_or(f64::NAN));
        }
    }
    columns
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let input: String = arg(&args, "--input").expect("--input FILE is required");
    let e: usize = arg(&args, "--e").expect("--e is required");
    let sizes: usize = arg(&args, "--sizes").unwrap_or(10);
    let replicates: usize = arg(&args, "--replicates").unwrap_or(100);
    let seed: u64 = arg(&args, "--seed").unwrap_or(1);
    let threads: usize = arg(&args, "--threads").unwrap_or(1);
    let min_cpu: f64 = arg(&args, "--min-cpu").unwrap_or(0.5);
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build_global()
        .expect("thread pool");
    let series = read_table(&input);
    let n_points = series[0].len();
    let embeddings: Vec<Embedding> = series
        .iter()
        .map(|s| {
            let m = crossmap_engine::Manifold::new(s, e, 1).expect("embeddable series");
            Embedding {
                e,
                tau: 1,
                simplex_skill: f64::NAN,
                skill_by_e: vec![],
                vectors_excluded: m.vectors_excluded(),
            }
        })
        .collect();
    let params = CrossMapParams::default()
        .with_library_sizes(LibrarySizes::Auto { count: sizes })
        .with_replicates(replicates)
        .with_max_lag(Some(0))
        .with_seed(seed)
        .validate(n_points, &embeddings)
        .expect("valid parameters");
    let (mut runs, mut cpu, start) = (0u32, 0.0f64, Instant::now());
    let mut pairs;
    loop {
        let before = cpu_ns();
        let t0 = Instant::now();
        pairs = std::hint::black_box(cross_map_all(&series, &embeddings, &params, &|_| {}));
        cpu += match (before, cpu_ns()) {
            (Some(a), Some(b)) => (b - a) as f64 * 1e-9,
            _ => t0.elapsed().as_secs_f64(),
        };
        runs += 1;
        if cpu >= min_cpu || start.elapsed().as_secs_f64() > 60.0 {
            break;
        }
    }
    let full: Vec<serde_json::Value> = pairs
        .iter()
        .map(|p| {
            let last = p.skills.last().expect("at least one size");
            serde_json::json!([p.driver, p.response, last[0]])
        })
        .collect();
    let out = serde_json::json!({
        "engine": "crossmap-engine",
        "threads": rayon::current_num_threads(),
        "runs": runs,
        "cpu_seconds_per_run": cpu / f64::from(runs),
        "library_sizes": params.plans().iter().map(|p| p.library_sizes.clone()).collect::<Vec<_>>(),
        "theiler": params.plans().iter().map(|p| p.theiler).collect::<Vec<_>>(),
        "full_library_skills": full,
    });
    println!("{out}");
}

//! Criterion benchmarks: the neighbour kernel (exact scan vs sorted-list walk across library
//! sizes), the full-library search behind choosing E (exact scan vs k-d tree) and a whole
//! `cross_map_all` on 4 variables x 1000 points, 10 sizes x 100 replicates. The side-by-side
//! benchmark against a numpy + scipy reference is `reference/side_by_side.py` (see the README).

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use crossmap_engine::neighbours::{
    ExactScan, KdTree, Library, NeighbourIndex, SortedLists, walk_depth,
};
use crossmap_engine::{
    CrossMapParams, Embedding, LibrarySizes, Manifold, cross_map_all, draw_library,
    simplex_forecast,
};
use std::hint::black_box;

/// Seeded coupled logistic network: variable i is driven by variable i-1 (chain), r = 3.7..3.9.
fn chain(vars: usize, points: usize) -> Vec<Vec<f64>> {
    let mut s: Vec<Vec<f64>> = (0..vars)
        .map(|i| vec![0.2 + 0.6 * (i as f64 + 1.0) / (vars as f64 + 1.0)])
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

fn kernel(c: &mut Criterion) {
    let x = &chain(1, 1000)[0];
    let m = Manifold::new(x, 3, 1).unwrap();
    let n = m.len();
    let mut g = c.benchmark_group("neighbour_table_1000pts_E3");
    for l in [5usize, 20, 60, 200, 998] {
        let lib = draw_library(1, 0, l, 0, n);
        let scan = ExactScan::new(&m, 2);
        let lists = SortedLists::new(&m, 2, walk_depth(n, l, 3, 100));
        for (name, index) in [("scan", &scan as &dyn NeighbourIndex), ("walk", &lists)] {
            g.bench_with_input(BenchmarkId::new(name, l), &l, |b, _| {
                let mut out = Vec::new();
                b.iter(|| {
                    for q in 0..n {
                        index.nearest(q, &lib, 4, &|_| true, &mut out);
                        black_box(&out);
                    }
                })
            });
        }
    }
    g.finish();
    c.bench_function("sorted_lists_build_1000pts_E3", |b| {
        b.iter(|| black_box(SortedLists::new(&m, 2, walk_depth(n, 20, 3, 100))))
    });
}

/// The full-library search behind choosing E: exact scan against the k-d tree, and the simplex
/// forecast that uses the tree.
fn full_library(c: &mut Criterion) {
    let x = &chain(1, 4000)[0];
    let mut g = c.benchmark_group("full_library_4000pts");
    g.sample_size(10);
    for e in [2usize, 5, 8] {
        let m = Manifold::new(x, e, 1).unwrap();
        let all = Library::all(m.len());
        let w = e - 1;
        let (scan, tree) = (ExactScan::new(&m, w), KdTree::new(&m, w));
        for (name, index) in [("scan", &scan as &dyn NeighbourIndex), ("kdtree", &tree)] {
            g.bench_with_input(BenchmarkId::new(name, e), &e, |b, _| {
                let (mut rows, mut full) = (Vec::new(), Vec::new());
                b.iter(|| {
                    index.nearest_every(&all, e + 1, &mut rows, &mut full);
                    black_box(&rows);
                })
            });
        }
        g.bench_with_input(BenchmarkId::new("simplex_forecast", e), &e, |b, _| {
            b.iter(|| black_box(simplex_forecast(x, e, 1, 1, w).unwrap()))
        });
    }
    g.finish();
}

fn whole(c: &mut Criterion) {
    let series = chain(4, 1000);
    let emb: Vec<Embedding> = (0..4)
        .map(|_| Embedding {
            e: 2,
            tau: 1,
            simplex_skill: 1.0,
            skill_by_e: vec![],
            vectors_excluded: 0,
        })
        .collect();
    let params = CrossMapParams::default()
        .with_library_sizes(LibrarySizes::Auto { count: 10 })
        .with_replicates(100)
        .validate(1000, &emb)
        .unwrap();
    let mut g = c.benchmark_group("cross_map_all");
    g.sample_size(10);
    g.bench_function("4vars_1000pts_10sizes_100reps", |b| {
        b.iter(|| black_box(cross_map_all(&series, &emb, &params, &|_| {})))
    });
    g.finish();
}

criterion_group!(benches, kernel, full_library, whole);
criterion_main!(benches);

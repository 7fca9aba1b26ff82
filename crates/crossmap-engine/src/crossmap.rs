//! Cross mapping (Sugihara et al. 2012): neighbour tables per library, reused for every target.
//!
//! Direction: for driver -> response, neighbours come from the RESPONSE's delay embedding and the
//! DRIVER's values are estimated. Lag `l` (Ye et al. 2015) estimates `driver(t + l)` from the
//! response state at `t`; for true driving the best lag is expected at `l <= 0`, because the
//! response's state records the driver's past.

use crate::embed::{Embedding, Manifold};
use crate::neighbours::{
    ExactScan, Library, MULTI_MAX, Neighbour, NeighbourIndex, SortedLists, prefer_walk, walk_depth,
};
use crate::params::ValidParams;
use crate::seeds::{
    TAG_LIBRARY, TAG_SEASONAL, TAG_SURROGATE, keyed_rng, sample_without_replacement,
};
use crate::stats::{FinitePairs, finite_mean};
use crate::surrogate::{DriverBasis, SurrogateMaker};
use crate::{EngineError, PairEnsemble};
use rayon::prelude::*;

/// Simplex weights `w_i = exp(-d_i / d_1)`, normalised (Sugihara & May 1990).
///
/// Zero nearest distance (`d_1 == 0`): the limit of the rule as `d_1 -> 0+`, i.e. equal weight
/// on the neighbours at distance zero and none on the rest.
pub fn simplex_weights(neighbours: &[Neighbour], out: &mut Vec<f64>) {
    out.clear();
    let Some(first) = neighbours.first() else {
        return;
    };
    let d1 = first.dist;
    if d1 > 0.0 {
        out.extend(neighbours.iter().map(|n| (-n.dist / d1).exp()));
    } else {
        out.extend(
            neighbours
                .iter()
                .map(|n| if n.dist == 0.0 { 1.0 } else { 0.0 }),
        );
    }
    let s: f64 = out.iter().sum();
    out.iter_mut().for_each(|w| *w /= s);
}

/// [`simplex_weights`] into a slice of the same length as `neighbours` (non-empty), given
/// `exp_neg1 = exp(-1)`; bit-identical to it.
#[inline]
fn weights_into(neighbours: &[Neighbour], exp_neg1: f64, out: &mut [f64]) {
    let d1 = neighbours[0].dist;
    if d1 > 0.0 {
        // The ratios first (one loop of divisions, vectorised when the length is known), then
        // the exponentials.
        for (w, n) in out.iter_mut().zip(neighbours) {
            *w = -n.dist / d1;
        }
        for (w, n) in out.iter_mut().zip(neighbours) {
            *w = if n.dist == d1 { exp_neg1 } else { w.exp() };
        }
    } else {
        for (w, n) in out.iter_mut().zip(neighbours) {
            *w = if n.dist == 0.0 { 1.0 } else { 0.0 };
        }
    }
    let s: f64 = out.iter().sum();
    out.iter_mut().for_each(|w| *w /= s);
}

/// The estimate of `target(t + lag)` at query `q` from its `k` nearest library neighbours whose
/// target value exists (the slow path when a table neighbour's value is missing); `None` when
/// fewer than `k` such neighbours exist.
fn fallback_estimate(
    index: &dyn NeighbourIndex,
    library: &Library,
    q: usize,
    k: usize,
    target: &[f64],
    lag: i32,
    s: &mut Scratch,
) -> Option<f64> {
    let m = index.manifold();
    let accept = |p: usize| target_at(target, m.time(p), lag).is_some();
    index.nearest(q, library, k, &accept, &mut s.nb);
    if s.nb.len() < k {
        return None;
    }
    simplex_weights(&s.nb, &mut s.w);
    Some(
        s.nb.iter()
            .zip(&s.w)
            .map(|(nb, &w)| w * target_at(target, m.time(nb.pos as usize), lag).expect("accepted"))
            .sum(),
    )
}

/// The value of `target` at time `t + lag`, if inside the series and finite.
#[inline]
fn target_at(target: &[f64], t: usize, lag: i32) -> Option<f64> {
    let s = t as i64 + i64::from(lag);
    if s < 0 {
        return None;
    }
    target.get(s as usize).copied().filter(|v| v.is_finite())
}

/// E+1 neighbours and weights for every manifold position under one library.
#[derive(Debug, Clone)]
pub(crate) struct Table {
    k: usize,
    pos: Vec<u32>,
    weight: Vec<f64>,
    full: Vec<bool>,
}

#[derive(Default)]
pub(crate) struct Scratch {
    nb: Vec<Neighbour>,
    rows: Vec<Neighbour>,
    w: Vec<f64>,
    pairs: FinitePairs,
    acc: Vec<f64>,
    multi: Vec<FinitePairs>,
    /// Estimates of every target, one row per predicted position (the fused fast path).
    est_rows: Vec<f64>,
    /// Time of each row of `est_rows`.
    row_times: Vec<usize>,
    /// Per-target sums of the fast path: estimates, observations, then the centred products.
    sums: [Vec<f64>; 5],
}

/// Driver values laid out time-major (`vals[t * count + j]`), so one neighbour's values for every
/// driver sit together and the fused estimate loop reads them contiguously.
pub(crate) struct TimeMajor {
    count: usize,
    vals: Vec<f64>,
    /// Every value finite: the fused skills take their fast path.
    all_finite: bool,
}

impl TimeMajor {
    pub(crate) fn new(columns: &[&[f64]]) -> Self {
        let n = columns.first().map_or(0, |c| c.len());
        let count = columns.len();
        let mut vals = vec![0.0; n * count];
        for (j, c) in columns.iter().enumerate() {
            for (t, &v) in c.iter().enumerate() {
                vals[t * count + j] = if v.is_finite() { v } else { f64::NAN };
            }
        }
        let all_finite = vals.iter().all(|v| v.is_finite());
        Self {
            count,
            vals,
            all_finite,
        }
    }
}

impl Table {
    fn empty(k: usize) -> Self {
        Table {
            k,
            pos: Vec::new(),
            weight: Vec::new(),
            full: Vec::new(),
        }
    }

    pub(crate) fn build(
        index: &dyn NeighbourIndex,
        library: &Library,
        k: usize,
        s: &mut Scratch,
    ) -> Self {
        let mut t = Table::empty(k);
        t.rebuild(index, library, k, s);
        t
    }

    /// Fill this table for `library`, reusing its buffers; equal to [`Table::build`].
    pub(crate) fn rebuild(
        &mut self,
        index: &dyn NeighbourIndex,
        library: &Library,
        k: usize,
        s: &mut Scratch,
    ) {
        self.k = k;
        index.nearest_every(library, k, &mut s.rows, &mut self.full);
        self.fill(index.manifold().len(), &s.rows);
    }

    /// Positions and weights from neighbour rows (`self.full` already set for them).
    fn fill(&mut self, n: usize, rows: &[Neighbour]) {
        match self.k {
            2 => self.fill_k::<2>(n, rows),
            3 => self.fill_k::<3>(n, rows),
            4 => self.fill_k::<4>(n, rows),
            5 => self.fill_k::<5>(n, rows),
            6 => self.fill_k::<6>(n, rows),
            7 => self.fill_k::<7>(n, rows),
            8 => self.fill_k::<8>(n, rows),
            9 => self.fill_k::<9>(n, rows),
            _ => self.fill_k::<0>(n, rows),
        }
    }

    /// [`Table::fill`] with `k` fixed at compile time (`K`; 0: read it from the table), so the
    /// weight loops unroll and their divisions vectorise (each quotient is still one correctly
    /// rounded division: bit-identical).
    fn fill_k<const K: usize>(&mut self, n: usize, rows: &[Neighbour]) {
        let k = if K == 0 { self.k } else { K };
        debug_assert_eq!(k, self.k);
        // Entries of positions that are not full are never read, so stale values may stay.
        self.pos.resize(n * k, 0);
        self.weight.resize(n * k, 0.0);
        if k == 0 {
            return;
        }
        // exp(-d_i / d_1) is exactly exp(-1) whenever d_i == d_1 (always so for the first
        // neighbour): one call here instead of one per query, with identical bits.
        let exp_neg1 = std::hint::black_box(-1.0f64).exp();
        for (((row, w), pos), &full) in rows
            .chunks_exact(k)
            .zip(self.weight.chunks_exact_mut(k))
            .zip(self.pos.chunks_exact_mut(k))
            .zip(&self.full)
        {
            if !full {
                continue;
            }
            weights_into(row, exp_neg1, w);
            for (slot, nb) in pos.iter_mut().zip(row) {
                *slot = nb.pos;
            }
        }
    }

    /// Estimates of `target(t + lag)` per query position (NaN where unpredictable), written to
    /// `s.pairs` as aligned (estimate, observation) pairs; `per_query`, when given, receives the estimate by position.
    pub(crate) fn estimate(
        &self,
        index: &dyn NeighbourIndex,
        library: &Library,
        target: &[f64],
        lag: i32,
        s: &mut Scratch,
        mut per_query: Option<&mut [f64]>,
    ) {
        let m = index.manifold();
        let k = self.k;
        s.pairs.clear();
        for q in 0..m.len() {
            if !self.full[q] {
                continue;
            }
            let Some(obs) = target_at(target, m.time(q), lag) else {
                continue;
            };
            let mut est = 0.0;
            let mut ok = true;
            for j in 0..k {
                match target_at(target, m.time(self.pos[q * k + j] as usize), lag) {
                    Some(v) => est += self.weight[q * k + j] * v,
                    None => {
                        ok = false;
                        break;
                    }
                }
            }
            if !ok {
                // Rare path: a neighbour's target is missing or off the end, so take the next
                // neighbour instead (re-query with the target's validity as a filter).
                match fallback_estimate(index, library, q, k, target, lag, s) {
                    Some(e) => est = e,
                    None => continue,
                }
            }
            if let Some(pq) = per_query.as_deref_mut() {
                pq[q] = est;
            }
            s.pairs.push(est, obs);
        }
    }

    /// Lag-0 skill for several targets in one pass over the table; bit-identical to calling
    /// [`Table::skill`] per target (same summation order, same fallback for missing values).
    pub(crate) fn skills_fused(
        &self,
        index: &dyn NeighbourIndex,
        library: &Library,
        columns: &[&[f64]],
        tm: &TimeMajor,
        s: &mut Scratch,
    ) -> Vec<f64> {
        let m = index.manifold();
        let (k, dn) = (self.k, tm.count);
        if tm.all_finite
            && let Some(r) = self.skills_fast(m, tm, s)
        {
            return r;
        }
        s.multi.resize_with(dn, FinitePairs::default);
        s.multi.iter_mut().for_each(FinitePairs::clear);
        s.acc.clear();
        s.acc.resize(dn, 0.0);
        for q in 0..m.len() {
            if !self.full[q] {
                continue;
            }
            s.acc.iter_mut().for_each(|a| *a = 0.0);
            for j in 0..k {
                let w = self.weight[q * k + j];
                let t = m.time(self.pos[q * k + j] as usize);
                let row = &tm.vals[t * dn..(t + 1) * dn];
                for (a, &v) in s.acc.iter_mut().zip(row) {
                    *a += w * v;
                }
            }
            let t = m.time(q);
            for (d, &target) in columns.iter().enumerate() {
                let obs = tm.vals[t * dn + d];
                if !obs.is_finite() {
                    continue;
                }
                let mut est = s.acc[d];
                if !est.is_finite() {
                    // A neighbour's value is missing: take the next neighbour for this target.
                    match fallback_estimate(index, library, q, k, target, 0, s) {
                        Some(e) => est = e,
                        None => continue,
                    }
                }
                s.multi[d].push(est, obs);
            }
        }
        (0..dn).map(|d| s.multi[d].r()).collect()
    }

    /// [`Table::skills_fused`] when every target value is finite: the estimates of all
    /// targets are kept as rows, and Pearson's two passes run over the rows with one sum per
    /// target, so each target's sums are the same additions in the same order as
    /// [`FinitePairs`]' (bit-identical) while the loops run across targets. `None` when an
    /// estimate is not finite (then the general path decides).
    fn skills_fast(&self, m: &Manifold, tm: &TimeMajor, s: &mut Scratch) -> Option<Vec<f64>> {
        match tm.count {
            1 => self.skills_fast_n::<1>(m, tm, s),
            2 => self.skills_fast_n::<2>(m, tm, s),
            3 => self.skills_fast_n::<3>(m, tm, s),
            4 => self.skills_fast_n::<4>(m, tm, s),
            5 => self.skills_fast_n::<5>(m, tm, s),
            6 => self.skills_fast_n::<6>(m, tm, s),
            7 => self.skills_fast_n::<7>(m, tm, s),
            8 => self.skills_fast_n::<8>(m, tm, s),
            SURROGATE_BLOCK => self.skills_fast_n::<SURROGATE_BLOCK>(m, tm, s),
            _ => self.skills_fast_n::<0>(m, tm, s),
        }
    }

    /// [`Table::skills_fast`] with the number of targets fixed at compile time (`DN`; 0: read
    /// it from `tm`), so the loops across targets unroll and vectorise for the common counts.
    /// Each target's sums are the same additions in the same order for every `DN`.
    fn skills_fast_n<const DN: usize>(
        &self,
        m: &Manifold,
        tm: &TimeMajor,
        s: &mut Scratch,
    ) -> Option<Vec<f64>> {
        let k = self.k;
        let dn = if DN == 0 { tm.count } else { DN };
        debug_assert_eq!(dn, tm.count);
        let n = m.len();
        s.est_rows.clear();
        s.est_rows.resize(n * dn, 0.0);
        s.row_times.clear();
        let mut filled = 0;
        if k > 0 {
            for (q, ((ws, ps), _)) in self
                .weight
                .chunks_exact(k)
                .zip(self.pos.chunks_exact(k))
                .zip(&self.full)
                .enumerate()
                .take(n)
                .filter(|(_, (_, full))| **full)
            {
                let acc = &mut s.est_rows[filled * dn..(filled + 1) * dn];
                for (&w, &p) in ws.iter().zip(ps) {
                    let t = m.time(p as usize);
                    let row = &tm.vals[t * dn..(t + 1) * dn];
                    for (a, &v) in acc.iter_mut().zip(row) {
                        *a += w * v;
                    }
                }
                s.row_times.push(m.time(q));
                filled += 1;
            }
        }
        s.est_rows.truncate(filled * dn);
        if !s.est_rows.iter().all(|v| v.is_finite()) {
            return None;
        }
        let rows = s.row_times.len();
        if rows < 2 {
            return Some(vec![f64::NAN; dn]);
        }
        for v in s.sums.iter_mut() {
            v.clear();
            v.resize(dn, 0.0);
        }
        let [sa, sb, sxx, syy, sxy] = &mut s.sums;
        let (sa, sb) = (&mut sa[..dn], &mut sb[..dn]);
        let (sxx, syy, sxy) = (&mut sxx[..dn], &mut syy[..dn], &mut sxy[..dn]);
        for (est, &t) in s.est_rows.chunks_exact(dn).zip(&s.row_times) {
            let obs = &tm.vals[t * dn..(t + 1) * dn];
            for d in 0..dn {
                sa[d] += est[d];
                sb[d] += obs[d];
            }
        }
        let nf = rows as f64;
        sa.iter_mut().for_each(|v| *v /= nf);
        sb.iter_mut().for_each(|v| *v /= nf);
        for (est, &t) in s.est_rows.chunks_exact(dn).zip(&s.row_times) {
            let obs = &tm.vals[t * dn..(t + 1) * dn];
            for d in 0..dn {
                let (dx, dy) = (est[d] - sa[d], obs[d] - sb[d]);
                sxx[d] += dx * dx;
                syy[d] += dy * dy;
                sxy[d] += dx * dy;
            }
        }
        Some(
            (0..dn)
                .map(|d| {
                    if sxx[d] <= 0.0 || syy[d] <= 0.0 {
                        f64::NAN
                    } else {
                        (sxy[d] / (sxx[d].sqrt() * syy[d].sqrt())).clamp(-1.0, 1.0)
                    }
                })
                .collect(),
        )
    }

    pub(crate) fn skill(
        &self,
        index: &dyn NeighbourIndex,
        library: &Library,
        target: &[f64],
        lag: i32,
        s: &mut Scratch,
    ) -> f64 {
        self.estimate(index, library, target, lag, s, None);
        s.pairs.r()
    }
}

/// Buffers for one block of replicate tables built by one multi-library walk.
#[derive(Default)]
struct Multi {
    tables: Vec<Table>,
    rows: Vec<Vec<Neighbour>>,
    full: Vec<Vec<bool>>,
    masks: Vec<u64>,
}

impl Multi {
    /// Lag-0 skills of every target for each library, one row per library: the same as
    /// [`Table::rebuild`] then [`Table::skills_fused`] per library, bit for bit.
    fn run(
        &mut self,
        lists: &SortedLists,
        libs: &[Library],
        k: usize,
        columns: &[&[f64]],
        tm: &TimeMajor,
        s: &mut Scratch,
    ) -> Vec<Vec<f64>> {
        let nr = libs.len();
        self.rows.resize_with(nr, Vec::new);
        self.full.resize_with(nr, Vec::new);
        self.tables.resize_with(nr, || Table::empty(k));
        let refs: Vec<&Library> = libs.iter().collect();
        lists.nearest_every_multi(&refs, k, &mut self.rows, &mut self.full, &mut self.masks);
        let n = lists.manifold().len();
        (0..nr)
            .map(|r| {
                let table = &mut self.tables[r];
                table.k = k;
                std::mem::swap(&mut table.full, &mut self.full[r]);
                table.fill(n, &self.rows[r]);
                let skills = table.skills_fused(lists, &libs[r], columns, tm, s);
                std::mem::swap(&mut table.full, &mut self.full[r]);
                skills
            })
            .collect()
    }
}

/// Cross-map estimates with an explicit library (for checks against reference implementations).
#[derive(Debug, Clone, PartialEq)]
pub struct CrossMapEstimate {
    /// `estimates[t]`: estimate of `driver(t + lag)` from the response state at time `t`; NaN
    /// where the state is invalid or the point is unpredictable.
    pub estimates: Vec<f64>,
    /// Pearson r of estimates against observed driver values over all predictable points.
    pub skill: f64,
    /// Number of predictable points.
    pub predicted: usize,
}

/// Cross map `driver` from the `(e, tau)` embedding of `response` using exactly the library of
/// delay vectors at `library_times`; predictions for every valid response state.
pub fn cross_map_with_library(
    response: &[f64],
    driver: &[f64],
    e: usize,
    tau: usize,
    theiler: usize,
    library_times: &[usize],
    lag: i32,
) -> Result<CrossMapEstimate, EngineError> {
    if response.len() != driver.len() {
        return Err(EngineError::LengthMismatch {
            expected: response.len(),
            found: driver.len(),
        });
    }
    let m = Manifold::new(response, e, tau)?;
    let positions = library_times
        .iter()
        .map(|&t| {
            m.position(t)
                .map(|p| p as u32)
                .ok_or(EngineError::LibraryTimeInvalid { time: t })
        })
        .collect::<Result<Vec<u32>, _>>()?;
    let library = Library::from_positions(positions, m.len());
    Ok(estimate_with(
        &m,
        &library,
        &ExactScan::new(&m, theiler),
        driver,
        lag,
    ))
}

pub(crate) fn estimate_with(
    m: &Manifold,
    library: &Library,
    index: &dyn NeighbourIndex,
    target: &[f64],
    lag: i32,
) -> CrossMapEstimate {
    let mut s = Scratch::default();
    let table = Table::build(index, library, m.e() + 1, &mut s);
    let mut by_pos = vec![f64::NAN; m.len()];
    table.estimate(index, library, target, lag, &mut s, Some(&mut by_pos));
    let mut estimates = vec![f64::NAN; m.series_len()];
    for (p, v) in by_pos.into_iter().enumerate() {
        estimates[m.time(p)] = v;
    }
    CrossMapEstimate {
        estimates,
        skill: s.pairs.r(),
        predicted: s.pairs.len(),
    }
}

/// The random library for (seed, response, size, replicate): `size` positions drawn without
/// replacement. Keyed by the size's value (not its index), so adding sizes leaves others intact.
pub fn draw_library(
    seed: u64,
    response: usize,
    size: usize,
    replicate: usize,
    n: usize,
) -> Library {
    let mut rng = keyed_rng(&[
        TAG_LIBRARY,
        seed,
        response as u64,
        size as u64,
        replicate as u64,
    ]);
    Library::from_positions(sample_without_replacement(&mut rng, n, size), n)
}

/// Surrogate series per fused pass over a table.
const SURROGATE_BLOCK: usize = 16;

/// Every ordered pair whose response is `response`: one work unit (one manifold's tables).
///
/// Returns one [`PairEnsemble`] per driver `d != response`, in increasing `d`. Neighbour tables
/// are built once per (library size, replicate) and reused for every driver, lag and surrogate;
/// rayon runs across (size, replicate) items; every random draw is keyed, so results are
/// bit-identical for any thread count. Replicate convention: when a size equals the usable
/// length every replicate library is the whole manifold, so that table is built and scored once
/// and its skill is repeated for each of the R replicates (the ensemble keeps R members at every
/// size; their spread there is exactly zero).
///
/// # Panics
/// When `params` was not validated for these `series` and `embeddings`.
pub fn cross_map_response(
    series: &[Vec<f64>],
    embeddings: &[Embedding],
    response: usize,
    params: &ValidParams,
) -> Vec<PairEnsemble> {
    // ValidParams cannot be forged or changed, but it can be handed other series than it was
    // checked against: that is a caller's bug, so it stops here rather than mislabel.
    assert_eq!(series.len(), embeddings.len(), "one embedding per series");
    assert_eq!(
        params.plans.len(),
        series.len(),
        "params validated for another set of series"
    );
    assert!(
        series.iter().all(|s| s.len() == params.n_points),
        "series length differs from the validated one"
    );
    let plan = &params.plans[response];
    let raw = &params.raw;
    let emb = &embeddings[response];
    let m = Manifold::new(&series[response], emb.e, emb.tau).expect("validated embedding");
    let n = m.len();
    let k = emb.e + 1;
    let sizes = &plan.library_sizes;
    let drivers: Vec<usize> = (0..series.len()).filter(|&d| d != response).collect();
    let columns: Vec<&[f64]> = drivers.iter().map(|&d| series[d].as_slice()).collect();
    let time_major = TimeMajor::new(&columns);

    let walk_min = sizes
        .iter()
        .copied()
        .filter(|&l| prefer_walk(n, l, emb.e))
        .min();
    let lists = walk_min
        .map(|l| SortedLists::new(&m, plan.theiler, walk_depth(n, l, emb.e, raw.replicates)));
    let scan = ExactScan::new(&m, plan.theiler);
    let index_for = |l: usize| -> &dyn NeighbourIndex {
        match &lists {
            Some(lists) if prefer_walk(n, l, emb.e) => lists,
            _ => &scan,
        }
    };
    let distinct_reps = |l: usize| if l >= n { 1 } else { raw.replicates };

    // Every size but the largest: skill at lag 0 for each driver. A unit is one replicate
    // when scanning, and a block of up to MULTI_MAX replicates served by one walk per query
    // when walking; `unit_skills` holds one row per (size, replicate) either way.
    let last = sizes.len() - 1;
    let units: Vec<(usize, usize, usize)> = (0..last)
        .flat_map(|li| {
            let reps = distinct_reps(sizes[li]);
            let block = if lists.is_some() && prefer_walk(n, sizes[li], emb.e) {
                reps.div_ceil(reps.div_ceil(MULTI_MAX))
            } else {
                1
            };
            (0..reps)
                .step_by(block)
                .map(move |r| (li, r, (r + block).min(reps)))
        })
        .collect();
    let unit_skills: Vec<Vec<f64>> = units
        .par_iter()
        .map_init(
            || (Scratch::default(), Table::empty(k), Multi::default()),
            |(s, table, multi), &(li, r0, r1)| {
                let l = sizes[li];
                match &lists {
                    Some(lists) if prefer_walk(n, l, emb.e) => {
                        let libs: Vec<Library> = (r0..r1)
                            .map(|r| draw_library(raw.seed, response, l, r, n))
                            .collect();
                        multi.run(lists, &libs, k, &columns, &time_major, s)
                    }
                    _ => {
                        let lib = draw_library(raw.seed, response, l, r0, n);
                        table.rebuild(&scan, &lib, k, s);
                        vec![table.skills_fused(&scan, &lib, &columns, &time_major, s)]
                    }
                }
            },
        )
        .flatten()
        .collect();
    let unit_li: Vec<usize> = units
        .iter()
        .flat_map(|&(li, r0, r1)| std::iter::repeat_n(li, r1 - r0))
        .collect();

    // The largest size: tables kept for lags and surrogates.
    let l_max = sizes[last];
    let index = index_for(l_max);
    let tables: Vec<(Library, Table)> = (0..distinct_reps(l_max))
        .into_par_iter()
        .map_init(Scratch::default, |s, r| {
            let lib = draw_library(raw.seed, response, l_max, r, n);
            let table = Table::build(index, &lib, k, s);
            (lib, table)
        })
        .collect();
    let max_lag = plan.max_lag as i32;
    let lags: Vec<i32> = (-max_lag..=max_lag).collect();
    // lag_by_table[d_idx * tables + t][lag_idx]
    let lag_by_table: Vec<Vec<f64>> = (0..drivers.len() * tables.len())
        .into_par_iter()
        .map_init(Scratch::default, |s, u| {
            let (d, (lib, table)) = (drivers[u / tables.len()], &tables[u % tables.len()]);
            lags.iter()
                .map(|&lag| table.skill(index, lib, &series[d], lag, s))
                .collect()
        })
        .collect();
    // Surrogate drivers at the largest size, two kinds per driver: phase-randomised (index
    // j < surrogates) and seasonal (j >= surrogates), each keyed by (kind, driver, response, j).
    let (surrogate_skills, seasonal_skills): (Vec<f64>, Vec<f64>) = if raw.surrogates == 0 {
        (Vec::new(), Vec::new())
    } else {
        let maker = SurrogateMaker::new(params.n_points);
        // Each driver's cycle and spectra: prepared once per table when the caller attached
        // them to the parameters ([`ValidParams::with_surrogate_bases`]), else here.
        let local: Vec<DriverBasis>;
        let bases: Vec<&DriverBasis> = match params.surrogate_bases.as_deref() {
            Some(b) if b.fits(series, raw.period, raw.seasonal) => {
                drivers.iter().map(|&d| b.driver(d)).collect()
            }
            _ => {
                local = drivers
                    .par_iter()
                    .map(|&d| DriverBasis::new(&maker, &series[d], raw.period, raw.seasonal))
                    .collect();
                local.iter().collect()
            }
        };
        let per = 2 * raw.surrogates;
        let draw = |u: usize| {
            let (di, j) = (u / per, u % per);
            let d = drivers[di];
            let basis = bases[di];
            if j < raw.surrogates {
                let mut rng =
                    keyed_rng(&[TAG_SURROGATE, raw.seed, d as u64, response as u64, j as u64]);
                maker.draw(&basis.plain, &mut rng)
            } else {
                let j = (j - raw.surrogates) as u64;
                let mut rng = keyed_rng(&[TAG_SEASONAL, raw.seed, d as u64, response as u64, j]);
                // Without a cycle to keep, a seasonal surrogate is a phase-randomised one.
                match &basis.seasonal {
                    Some(seasonal) => maker.draw_seasonal(seasonal, &mut rng),
                    None => maker.draw(&basis.plain, &mut rng),
                }
            }
        };
        // Surrogates in blocks: each block's series are targets of one fused pass per table
        // (the same skills, bit for bit, as one pass per surrogate).
        let units: Vec<usize> = (0..drivers.len() * per).collect();
        let all: Vec<f64> = units
            .par_chunks(SURROGATE_BLOCK)
            .map_init(Scratch::default, |s, block| {
                let series_block: Vec<Vec<f64>> = block.iter().map(|&u| draw(u)).collect();
                let columns: Vec<&[f64]> = series_block.iter().map(Vec::as_slice).collect();
                let tm = TimeMajor::new(&columns);
                let per_table: Vec<Vec<f64>> = tables
                    .iter()
                    .map(|(lib, table)| table.skills_fused(index, lib, &columns, &tm, s))
                    .collect();
                (0..block.len())
                    .map(|i| finite_mean(&per_table.iter().map(|t| t[i]).collect::<Vec<_>>()))
                    .collect::<Vec<f64>>()
            })
            .flatten()
            .collect();
        let (mut plain, mut seasonal) = (Vec::new(), Vec::new());
        for chunk in all.chunks(per) {
            plain.extend_from_slice(&chunk[..raw.surrogates]);
            seasonal.extend_from_slice(&chunk[raw.surrogates..]);
        }
        (plain, seasonal)
    };

    let zero_lag = plan.max_lag;
    drivers
        .iter()
        .enumerate()
        .map(|(di, &driver)| {
            let mut skills: Vec<Vec<f64>> = Vec::with_capacity(sizes.len());
            let mut cursor = 0;
            for (li, &l) in sizes.iter().enumerate().take(last) {
                let reps = distinct_reps(l);
                let row: Vec<f64> = (0..raw.replicates)
                    .map(|r| unit_skills[cursor + if reps == 1 { 0 } else { r }][di])
                    .collect();
                debug_assert!(unit_li[cursor] == li);
                cursor += reps;
                skills.push(row);
            }
            let per_table = &lag_by_table[di * tables.len()..(di + 1) * tables.len()];
            skills.push(
                (0..raw.replicates)
                    .map(|r| per_table[r % per_table.len()][zero_lag])
                    .collect(),
            );
            let lag_skills = (0..lags.len())
                .map(|li| finite_mean(&per_table.iter().map(|row| row[li]).collect::<Vec<_>>()))
                .collect();
            let own = |v: &[f64]| {
                if raw.surrogates == 0 {
                    Vec::new()
                } else {
                    v[di * raw.surrogates..(di + 1) * raw.surrogates].to_vec()
                }
            };
            PairEnsemble {
                driver,
                response,
                library_sizes: sizes.clone(),
                skills,
                lags: lags.clone(),
                lag_skills,
                surrogate_skills: own(&surrogate_skills),
                seasonal_surrogate_skills: own(&seasonal_skills),
            }
        })
        .collect()
}

/// Every ordered pair: responses one after another (one manifold's tables in memory at a time),
/// each response's work spread over rayon. `progress` receives the number of finished pairs.
///
/// Output order: by response, then by driver.
pub fn cross_map_all(
    series: &[Vec<f64>],
    embeddings: &[Embedding],
    params: &ValidParams,
    progress: &(dyn Fn(usize) + Sync),
) -> Vec<PairEnsemble> {
    let prepared;
    let params = if params.raw.surrogates > 0 && params.surrogate_bases.is_none() {
        prepared = params.clone().with_surrogate_bases(series);
        &prepared
    } else {
        params
    };
    let mut out = Vec::with_capacity(series.len() * series.len().saturating_sub(1));
    for response in 0..series.len() {
        out.extend(cross_map_response(series, embeddings, response, params));
        progress(out.len());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::params::{CrossMapParams, LibrarySizes};
    use approx::assert_abs_diff_eq;

    fn nb(d: &[f64]) -> Vec<Neighbour> {
        d.iter()
            .enumerate()
            .map(|(i, &dist)| Neighbour {
                pos: i as u32,
                dist,
            })
            .collect()
    }

    #[test]
    fn weights_follow_exp_rule_and_zero_distance_limit() {
        let mut w = Vec::new();
        simplex_weights(&nb(&[1.0, 2.0, 3.0]), &mut w);
        // Sugihara & May (1990): w_i proportional to exp(-d_i / d_1).
        let raw = [(-1.0f64).exp(), (-2.0f64).exp(), (-3.0f64).exp()];
        let s: f64 = raw.iter().sum();
        for (a, b) in w.iter().zip(raw) {
            assert_abs_diff_eq!(*a, b / s, epsilon = 1e-15);
        }
        simplex_weights(&nb(&[0.0, 0.0, 0.5]), &mut w);
        assert_eq!(w, vec![0.5, 0.5, 0.0]);
    }

    /// The fused fast path (every value finite) against one [`Table::skill`] per target.
    #[test]
    fn fused_skills_equal_one_target_at_a_time_bit_for_bit() {
        let n = 500;
        let (mut x, mut y) = (vec![0.4], vec![0.2]);
        for t in 0..n - 1 {
            x.push(x[t] * (3.8 - 3.8 * x[t]));
            y.push(y[t] * (3.5 - 3.5 * y[t] - 0.1 * x[t]));
        }
        let z: Vec<f64> = x.iter().zip(&y).map(|(a, b)| a * b + 0.3 * a).collect();
        let m = Manifold::new(&y, 3, 1).unwrap();
        let scan = ExactScan::new(&m, 2);
        let columns: Vec<&[f64]> = vec![&x, &z, &y];
        let tm = TimeMajor::new(&columns);
        assert!(tm.all_finite);
        let mut s = Scratch::default();
        for l in [6usize, 40, m.len()] {
            let lib = draw_library(3, 1, l, 0, m.len());
            let table = Table::build(&scan, &lib, 4, &mut s);
            let fused = table.skills_fused(&scan, &lib, &columns, &tm, &mut s);
            for (c, f) in columns.iter().zip(&fused) {
                let one = table.skill(&scan, &lib, c, 0, &mut s);
                assert_eq!(one.to_bits(), f.to_bits(), "L={l}");
            }
        }
    }

    #[test]
    fn automatic_index_choice_matches_exact_scan_per_library() {
        let n = 600;
        let (mut x, mut y) = (vec![0.4], vec![0.2]);
        for t in 0..n - 1 {
            x.push(x[t] * (3.8 - 3.8 * x[t]));
            y.push(y[t] * (3.5 - 3.5 * y[t] - 0.1 * x[t]));
        }
        y[100] = f64::NAN;
        x[300] = f64::NAN;
        let series = vec![x, y];
        let emb: Vec<Embedding> = (0..2)
            .map(|_| Embedding {
                e: 3,
                tau: 1,
                simplex_skill: 1.0,
                skill_by_e: vec![],
                vectors_excluded: 3,
            })
            .collect();
        let params = CrossMapParams::default()
            .with_library_sizes(LibrarySizes::Explicit(vec![5, 30, 200, 595]))
            .with_replicates(3)
            .validate(n, &emb)
            .unwrap();
        let m = Manifold::new(&series[1], 3, 1).unwrap();
        assert!(prefer_walk(m.len(), 200, 3) && !prefer_walk(m.len(), 5, 3));
        let out = cross_map_response(&series, &emb, 1, &params);
        let scan = ExactScan::new(&m, params.plans[1].theiler);
        for (li, &l) in params.plans[1].library_sizes.iter().enumerate() {
            for r in 0..3 {
                let lib = draw_library(0, 1, l, if l >= m.len() { 0 } else { r }, m.len());
                let want = estimate_with(&m, &lib, &scan, &series[0], 0).skill;
                assert_eq!(
                    out[0].skills[li][r].to_bits(),
                    want.to_bits(),
                    "L={l} r={r}"
                );
            }
        }
        assert_eq!(out[0].lags.len(), out[0].lag_skills.len());
        let zero = out[0].lags.iter().position(|&l| l == 0).unwrap();
        assert_abs_diff_eq!(
            out[0].lag_skills[zero],
            out[0].skills[3][0],
            epsilon = 1e-15
        );
    }
}

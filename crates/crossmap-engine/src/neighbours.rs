//! Nearest-neighbour search on a delay manifold: an exact scan and pre-sorted candidate lists.
//!
//! Order rule (both implementations): candidates are ranked by (squared distance, position), so
//! ties go to the earlier delay vector and results never depend on the implementation or on
//! threads. Excluded always: the query itself and every vector whose time lies within the Theiler
//! window, `|t - t_query| <= window` (Theiler 1986).

use crate::embed::{Manifold, sq_dist};
mod kdtree;
pub use kdtree::KdTree;
use rayon::prelude::*;

/// One neighbour: its manifold position and Euclidean distance to the query.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Neighbour {
    /// Position in the manifold.
    pub pos: u32,
    /// Euclidean distance to the query.
    pub dist: f64,
}

/// A library: the subset of manifold positions neighbours may come from.
#[derive(Debug, Clone, PartialEq)]
pub struct Library {
    members: Vec<u32>,
    /// One flag per manifold position (membership test: one load, no shift).
    flags: Vec<bool>,
}

impl Library {
    /// Library of the given positions (duplicates removed) in a manifold of `n` positions.
    ///
    /// # Panics
    /// When a position is `>= n`.
    pub fn from_positions(mut positions: Vec<u32>, n: usize) -> Self {
        positions.sort_unstable();
        positions.dedup();
        let mut flags = vec![false; n];
        for &p in &positions {
            assert!(
                (p as usize) < n,
                "library position {p} outside manifold of {n}"
            );
            flags[p as usize] = true;
        }
        Self {
            members: positions,
            flags,
        }
    }

    /// Every position of a manifold of `n` positions.
    pub fn all(n: usize) -> Self {
        Self::from_positions((0..n as u32).collect(), n)
    }

    /// Members in increasing order.
    pub fn members(&self) -> &[u32] {
        &self.members
    }

    /// Number of members.
    pub fn len(&self) -> usize {
        self.members.len()
    }

    /// True when empty.
    pub fn is_empty(&self) -> bool {
        self.members.is_empty()
    }

    /// Membership flag per manifold position.
    #[inline]
    fn flags(&self) -> &[bool] {
        &self.flags
    }

    /// Membership test.
    #[inline]
    pub fn contains(&self, p: usize) -> bool {
        self.flags[p]
    }
}

/// A nearest-neighbour index over one manifold with a fixed Theiler window.
pub trait NeighbourIndex: Sync {
    /// The indexed manifold.
    fn manifold(&self) -> &Manifold;

    /// Theiler window in time steps.
    fn theiler(&self) -> usize;

    /// Fill `out` with up to `k` library members nearest to position `q`, outside the Theiler
    /// window and accepted by `accept`, in (distance, position) order.
    fn nearest(
        &self,
        q: usize,
        library: &Library,
        k: usize,
        accept: &dyn Fn(usize) -> bool,
        out: &mut Vec<Neighbour>,
    );

    /// [`NeighbourIndex::nearest`] with every library member acceptable (the table-building
    /// hot path; implementations may specialise it).
    fn nearest_all(&self, q: usize, library: &Library, k: usize, out: &mut Vec<Neighbour>) {
        self.nearest(q, library, k, &|_| true, out);
    }

    /// [`NeighbourIndex::nearest_all`] for every position at once: `rows[q * k..(q + 1) * k]`
    /// receives the neighbours of `q` and `full[q]` is true when `k` were found (rows of other
    /// positions are left unspecified). Results equal the per-query calls exactly; implementations
    /// may amortise per-library work across queries.
    fn nearest_every(
        &self,
        library: &Library,
        k: usize,
        rows: &mut Vec<Neighbour>,
        full: &mut Vec<bool>,
    ) {
        default_nearest_every(self, library, k, rows, full);
    }
}

/// [`NeighbourIndex::nearest_every`] by one [`NeighbourIndex::nearest_all`] call per position.
fn default_nearest_every<I: NeighbourIndex + ?Sized>(
    index: &I,
    library: &Library,
    k: usize,
    rows: &mut Vec<Neighbour>,
    full: &mut Vec<bool>,
) {
    let n = index.manifold().len();
    size_rows(n, k, rows, full);
    let mut out = Vec::with_capacity(k);
    for q in 0..n {
        index.nearest_all(q, library, k, &mut out);
        full[q] = out.len() == k && k > 0;
        if full[q] {
            rows[q * k..(q + 1) * k].copy_from_slice(&out);
        }
    }
}

/// Size the outputs of [`NeighbourIndex::nearest_every`] without clearing them: every `full[q]`
/// is rewritten, and rows of positions that are not full are never read.
pub(crate) fn size_rows(n: usize, k: usize, rows: &mut Vec<Neighbour>, full: &mut Vec<bool>) {
    rows.resize(n * k, Neighbour { pos: 0, dist: 0.0 });
    full.resize(n, false);
}

/// Exact scan over the library members: O(L E) per query; best for small libraries.
#[derive(Debug, Clone, Copy)]
pub struct ExactScan<'m> {
    manifold: &'m Manifold,
    theiler: usize,
}

impl<'m> ExactScan<'m> {
    /// Index `manifold` with Theiler window `theiler`.
    pub fn new(manifold: &'m Manifold, theiler: usize) -> Self {
        Self { manifold, theiler }
    }
}

/// Squared distance, or `None` as soon as a partial sum exceeds `bound` (terms are non-negative,
/// so the full sum would too); otherwise bit-identical to [`sq_dist`].
#[inline]
fn sq_dist_bounded(a: &[f64], b: &[f64], bound: f64) -> Option<f64> {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        let d = x - y;
        s += d * d;
        if s > bound {
            return None;
        }
    }
    Some(s)
}

#[inline]
fn outside_window(tq: usize, tp: usize, w: usize) -> bool {
    tq.abs_diff(tp) > w
}

/// Keep the `k` smallest (d2, pos) pairs seen, sorted; `dist` holds the squared distance while
/// scanning. Insertion by adjacent swaps: k is small, so this beats a binary search and memmove.
#[inline]
fn offer(best: &mut Vec<Neighbour>, k: usize, d2: f64, p: u32) {
    let cand = Neighbour { pos: p, dist: d2 };
    if best.len() == k {
        best[k - 1] = cand;
    } else {
        best.push(cand);
    }
    let mut i = best.len() - 1;
    while i > 0 && (best[i - 1].dist, best[i - 1].pos) > (d2, p) {
        best.swap(i - 1, i);
        i -= 1;
    }
}

#[inline]
fn scan_into<A: Fn(usize) -> bool + ?Sized>(
    m: &Manifold,
    w: usize,
    q: usize,
    candidates: &[u32],
    k: usize,
    accept: &A,
    out: &mut Vec<Neighbour>,
) {
    out.clear();
    if k == 0 {
        return;
    }
    let tq = m.time(q);
    let qp = m.point(q);
    for &p in candidates {
        let pu = p as usize;
        if !outside_window(tq, m.time(pu), w) {
            continue;
        }
        let d2 = if out.len() == k {
            let worst = (out[k - 1].dist, out[k - 1].pos);
            // Early abandonment: a partial sum already above the k-th best cannot enter.
            match sq_dist_bounded(qp, m.point(pu), worst.0) {
                Some(d2) if (d2, p) < worst => d2,
                _ => continue,
            }
        } else {
            sq_dist(qp, m.point(pu))
        };
        if accept(pu) {
            offer(out, k, d2, p);
        }
    }
    out.iter_mut().for_each(|n| n.dist = n.dist.sqrt());
}

/// Largest k served by the fixed-size candidate lists of [`scan_every`].
const K_MAX: usize = 16;

/// Every query against one library with the members' coordinates gathered contiguously. `E` is
/// the embedding dimension fixed at compile time (0: read it from the manifold), so the distance
/// loop unrolls for the common small dimensions.
///
/// Members are sorted by position, hence by time, so the Theiler window of a query is one
/// contiguous run of members, found by two cursors that only move forward as the queries' times
/// increase; the scan runs over the members before and after it without a per-candidate test.
/// Candidates arrive in increasing position, so the (distance, position) rule reduces to strict
/// `<` on the squared distance, and a full distance above the k-th best is rejected exactly as
/// the early-abandoning scan rejects it: results equal [`scan_into`]'s bit for bit.
///
/// `K` fixes k at compile time the same way (0: the argument), so the insertion into the k
/// best unrolls and its bound stays in a register.
fn scan_every<const E: usize, const K: usize>(
    m: &Manifold,
    w: usize,
    library: &Library,
    k: usize,
    rows: &mut [Neighbour],
    full: &mut [bool],
) {
    let e = if E == 0 { m.e() } else { E };
    debug_assert_eq!(e, m.e());
    let k = if K == 0 { k } else { K };
    let members = library.members();
    let times: Vec<usize> = members.iter().map(|&p| m.time(p as usize)).collect();
    let mut coords = Vec::with_capacity(members.len() * e);
    for &p in members {
        coords.extend_from_slice(m.point(p as usize));
    }
    debug_assert!(k > 0 && k <= K_MAX);
    // The k best (squared distance, position) pairs so far, sorted; candidates arrive in
    // increasing position, so a candidate only displaces strictly larger distances.
    let (mut bd, mut bp) = ([0.0f64; K_MAX], [0u32; K_MAX]);
    let (mut lo, mut hi) = (0usize, 0usize);
    for q in 0..m.len() {
        let tq = m.time(q);
        // lo: first member with time >= tq - w; hi: first member with time > tq + w.
        while lo < times.len() && times[lo] + w < tq {
            lo += 1;
        }
        hi = hi.max(lo);
        while hi < times.len() && times[hi] <= tq + w {
            hi += 1;
        }
        let qp = m.point(q);
        // `worst`: the k-th best once `cnt == k`, +inf before; while filling anything enters
        // (even +inf).
        let (mut cnt, mut worst) = (0usize, f64::INFINITY);
        for range in [0..lo, hi..members.len()] {
            let cs = &coords[range.start * e..range.end * e];
            for (c, &p) in cs.chunks_exact(e).zip(&members[range]) {
                let mut d2 = 0.0;
                for j in 0..e {
                    let d = qp[j] - c[j];
                    d2 += d * d;
                }
                if !(d2 < worst || cnt < k) {
                    continue;
                }
                let mut at = if cnt < k {
                    cnt += 1;
                    cnt - 1
                } else {
                    k - 1
                };
                while at > 0 && bd[at - 1] > d2 {
                    bd[at] = bd[at - 1];
                    bp[at] = bp[at - 1];
                    at -= 1;
                }
                bd[at] = d2;
                bp[at] = p;
                if cnt == k {
                    worst = bd[k - 1];
                }
            }
        }
        full[q] = cnt == k;
        if full[q] {
            for (slot, (&d2, &p)) in rows[q * k..(q + 1) * k].iter_mut().zip(bd.iter().zip(&bp)) {
                *slot = Neighbour {
                    pos: p,
                    dist: d2.sqrt(),
                };
            }
        }
    }
}

fn scan_every_dispatch(
    m: &Manifold,
    w: usize,
    library: &Library,
    k: usize,
    rows: &mut [Neighbour],
    full: &mut [bool],
) {
    // k = E + 1 is the table-building case; other k (the tests) take the general form.
    match (m.e(), k) {
        (1, 2) => scan_every::<1, 2>(m, w, library, k, rows, full),
        (2, 3) => scan_every::<2, 3>(m, w, library, k, rows, full),
        (3, 4) => scan_every::<3, 4>(m, w, library, k, rows, full),
        (4, 5) => scan_every::<4, 5>(m, w, library, k, rows, full),
        (5, 6) => scan_every::<5, 6>(m, w, library, k, rows, full),
        (6, 7) => scan_every::<6, 7>(m, w, library, k, rows, full),
        (e, k) if e > 6 && k == e + 1 && k <= 11 => match k {
            8 => scan_every::<0, 8>(m, w, library, k, rows, full),
            9 => scan_every::<0, 9>(m, w, library, k, rows, full),
            10 => scan_every::<0, 10>(m, w, library, k, rows, full),
            _ => scan_every::<0, 11>(m, w, library, k, rows, full),
        },
        _ => scan_every::<0, 0>(m, w, library, k, rows, full),
    }
}

impl NeighbourIndex for ExactScan<'_> {
    fn manifold(&self) -> &Manifold {
        self.manifold
    }

    fn theiler(&self) -> usize {
        self.theiler
    }

    fn nearest_every(
        &self,
        library: &Library,
        k: usize,
        rows: &mut Vec<Neighbour>,
        full: &mut Vec<bool>,
    ) {
        if k == 0 || k > K_MAX {
            return default_nearest_every(self, library, k, rows, full);
        }
        size_rows(self.manifold.len(), k, rows, full);
        scan_every_dispatch(self.manifold, self.theiler, library, k, rows, full);
    }

    fn nearest(
        &self,
        q: usize,
        library: &Library,
        k: usize,
        accept: &dyn Fn(usize) -> bool,
        out: &mut Vec<Neighbour>,
    ) {
        scan_into(
            self.manifold,
            self.theiler,
            q,
            library.members(),
            k,
            accept,
            out,
        );
    }
}

/// Per query, the `depth` nearest admissible positions of the whole manifold, sorted once.
///
/// A random library is then a membership mask: a query walks its list until it has k members,
/// about `k N / L` steps, independent of E. When a list runs out before k members are found the
/// query falls back to an exact scan, so results equal [`ExactScan`]'s exactly.
#[derive(Debug, Clone)]
pub struct SortedLists<'m> {
    manifold: &'m Manifold,
    theiler: usize,
    depth: usize,
    lens: Vec<u32>,
    lists: Vec<u32>,
    /// Euclidean distance of each list entry to its query, computed as the scan computes it
    /// (same bits), so the walks never recompute one.
    dists: Vec<f64>,
}

impl<'m> SortedLists<'m> {
    /// Sort, per query, the `depth` nearest positions outside the Theiler window (rayon across
    /// queries). Memory: `4 * depth * N` bytes.
    pub fn new(manifold: &'m Manifold, theiler: usize, depth: usize) -> Self {
        let n = manifold.len();
        let depth = depth.clamp(1, n.max(1));
        let mut lists = vec![0u32; n * depth];
        let mut dists = vec![0.0f64; n * depth];
        let rows = lists.par_chunks_mut(depth).zip(dists.par_chunks_mut(depth));
        let lens: Vec<u32> = if tree_sorts(n, depth) {
            let tree = KdTree::new(manifold, theiler);
            rows.enumerate()
                .map_init(
                    || (std::collections::BinaryHeap::new(), Vec::new()),
                    |(heap, stack), (q, (row, drow))| {
                        tree.sorted_row(q, depth, row, drow, heap, stack) as u32
                    },
                )
                .collect()
        } else {
            let e = manifold.e();
            let mut columns = vec![0.0; n * e];
            let times: Vec<u32> = (0..n).map(|p| manifold.time(p) as u32).collect();
            for p in 0..n {
                for (j, &c) in manifold.point(p).iter().enumerate() {
                    columns[j * n + p] = c;
                }
            }
            rows.enumerate()
                .map_init(SortScratch::default, |sc, (q, (row, drow))| {
                    sc.sorted_row(manifold, &columns, &times, theiler, q, depth, row, drow)
                })
                .collect()
        };
        Self {
            manifold,
            theiler,
            depth,
            lens,
            lists,
            dists,
        }
    }

    /// List depth per query.
    pub fn depth(&self) -> usize {
        self.depth
    }

    /// The sorted list of `q` and its distances.
    #[inline]
    fn row(&self, q: usize) -> (&[u32], &[f64]) {
        let range = q * self.depth..q * self.depth + self.lens[q] as usize;
        (&self.lists[range.clone()], &self.dists[range])
    }

    /// True when the lists hold every admissible candidate (no fallback ever needed).
    fn complete(&self, q: usize) -> bool {
        (self.lens[q] as usize) < self.depth || self.depth >= self.manifold.len()
    }
}

impl SortedLists<'_> {
    #[inline]
    fn walk<A: Fn(usize) -> bool + ?Sized>(
        &self,
        q: usize,
        library: &Library,
        k: usize,
        accept: &A,
        out: &mut Vec<Neighbour>,
    ) {
        out.clear();
        if k == 0 {
            return;
        }
        let (row, drow) = self.row(q);
        for (&p, &dist) in row.iter().zip(drow) {
            let pu = p as usize;
            if library.contains(pu) && accept(pu) {
                out.push(Neighbour { pos: p, dist });
                if out.len() == k {
                    return;
                }
            }
        }
        if !self.complete(q) {
            scan_into(
                self.manifold,
                self.theiler,
                q,
                library.members(),
                k,
                accept,
                out,
            );
        }
    }
}

impl NeighbourIndex for SortedLists<'_> {
    fn manifold(&self) -> &Manifold {
        self.manifold
    }

    fn theiler(&self) -> usize {
        self.theiler
    }

    fn nearest(
        &self,
        q: usize,
        library: &Library,
        k: usize,
        accept: &dyn Fn(usize) -> bool,
        out: &mut Vec<Neighbour>,
    ) {
        self.walk(q, library, k, accept, out);
    }

    fn nearest_all(&self, q: usize, library: &Library, k: usize, out: &mut Vec<Neighbour>) {
        self.walk(q, library, k, &|_| true, out);
    }

    fn nearest_every(
        &self,
        library: &Library,
        k: usize,
        rows: &mut Vec<Neighbour>,
        full: &mut Vec<bool>,
    ) {
        let m = self.manifold;
        if k == 0 || k > K_MAX {
            return default_nearest_every(self, library, k, rows, full);
        }
        size_rows(m.len(), k, rows, full);
        let mut fallback = Vec::new();
        let flags = library.flags();
        let mut hits = [0u32; K_MAX];
        for (q, row_out) in rows.chunks_exact_mut(k).enumerate() {
            let (row, drow) = self.row(q);
            let mut cnt = 0;
            // Branch-free membership step: write every candidate, advance only past members
            // (random membership would otherwise mispredict about once per member found).
            for (i, &p) in row.iter().enumerate() {
                hits[cnt] = i as u32;
                cnt += usize::from(flags[p as usize]);
                if cnt == k {
                    break;
                }
            }
            for (slot, &i) in row_out.iter_mut().zip(&hits[..cnt]) {
                *slot = Neighbour {
                    pos: row[i as usize],
                    dist: drow[i as usize],
                };
            }
            if cnt < k && !self.complete(q) {
                scan_into(
                    m,
                    self.theiler,
                    q,
                    library.members(),
                    k,
                    &|_| true,
                    &mut fallback,
                );
                cnt = fallback.len();
                if cnt == k {
                    row_out.copy_from_slice(&fallback);
                }
            }
            full[q] = cnt == k;
        }
    }
}

/// Most replicate libraries one [`SortedLists::nearest_every_multi`] call serves (one bit each).
pub const MULTI_MAX: usize = 64;

impl SortedLists<'_> {
    /// [`NeighbourIndex::nearest_every`] for up to [`MULTI_MAX`] libraries at once: each query's
    /// list is walked once, and every step tests all libraries through one 64-bit membership
    /// mask (bit `r` set when the candidate belongs to `libraries[r]`). Library `r` receives its
    /// first `k` members in list order, the same neighbours as a walk of its own, and falls
    /// back to the same exact scan when the list runs out: `rows[r]` and `full[r]` equal
    /// `nearest_every(libraries[r], ..)`'s exactly. `masks` is scratch.
    ///
    /// # Panics
    /// When more than [`MULTI_MAX`] libraries are given or `rows`/`full` are shorter.
    pub fn nearest_every_multi(
        &self,
        libraries: &[&Library],
        k: usize,
        rows: &mut [Vec<Neighbour>],
        full: &mut [Vec<bool>],
        masks: &mut Vec<u64>,
    ) {
        let nr = libraries.len();
        assert!(nr <= MULTI_MAX, "at most {MULTI_MAX} libraries per walk");
        let (rows, full) = (&mut rows[..nr], &mut full[..nr]);
        if k == 0 || k > K_MAX {
            for ((lib, r), f) in libraries.iter().zip(rows.iter_mut()).zip(full.iter_mut()) {
                self.nearest_every(lib, k, r, f);
            }
            return;
        }
        let m = self.manifold;
        let n = m.len();
        for (r, f) in rows.iter_mut().zip(full.iter_mut()) {
            size_rows(n, k, r, f);
        }
        masks.clear();
        masks.resize(n, 0);
        for (r, lib) in libraries.iter().enumerate() {
            for &p in lib.members() {
                masks[p as usize] |= 1u64 << r;
            }
        }
        let all = if nr == 64 { u64::MAX } else { (1u64 << nr) - 1 };
        let mut cnt = [0u8; MULTI_MAX];
        let mut fallback = Vec::new();
        for q in 0..n {
            let (row, drow) = self.row(q);
            let mut active = all;
            cnt[..nr].fill(0);
            let base = q * k;
            for (&p, &dist) in row.iter().zip(drow) {
                let mut hit = masks[p as usize] & active;
                while hit != 0 {
                    let r = hit.trailing_zeros() as usize;
                    hit &= hit - 1;
                    let c = cnt[r] as usize;
                    rows[r][base + c] = Neighbour { pos: p, dist };
                    cnt[r] += 1;
                    if c + 1 == k {
                        active &= !(1u64 << r);
                    }
                }
                if active == 0 {
                    break;
                }
            }
            for (f, &c) in full.iter_mut().zip(&cnt[..nr]) {
                f[q] = c as usize == k;
            }
            if active != 0 && !self.complete(q) {
                let mut rest = active;
                while rest != 0 {
                    let r = rest.trailing_zeros() as usize;
                    rest &= rest - 1;
                    scan_into(
                        m,
                        self.theiler,
                        q,
                        libraries[r].members(),
                        k,
                        &|_| true,
                        &mut fallback,
                    );
                    if fallback.len() == k {
                        rows[r][base..base + k].copy_from_slice(&fallback);
                        full[r][q] = true;
                    }
                }
            }
        }
    }
}

/// Buffers of one thread's list sorting by exact scan.
#[derive(Default)]
struct SortScratch {
    /// Squared distance's bits per position; `u64::MAX` inside the Theiler window (no squared
    /// distance has those bits: they would be a NaN).
    bits: Vec<u64>,
    /// The admissible bits, for the selection.
    select: Vec<u64>,
    /// Keys at or below the selected threshold.
    keys: Vec<u128>,
    /// Squared distances per position.
    acc: Vec<f64>,
}

impl SortScratch {
    /// The `depth` nearest positions of `q` outside the window in (distance, position) order,
    /// with their distances; returns the count. Key: the squared distance's bits above the
    /// position. Squared distances are non-negative (never -0.0 or NaN), so their bits order
    /// like their values and the integer order is exactly the (distance, position) rule. The
    /// `depth`-th smallest squared distance is selected first on the bits alone; the keys of
    /// every position at or below it (all of the answer, plus any ties at the threshold) are
    /// then sorted and the first `depth` kept.
    #[allow(clippy::too_many_arguments)]
    fn sorted_row(
        &mut self,
        m: &Manifold,
        columns: &[f64],
        times: &[u32],
        theiler: usize,
        q: usize,
        depth: usize,
        row: &mut [u32],
        drow: &mut [f64],
    ) -> u32 {
        let n = m.len();
        let e = m.e();
        let tq = m.time(q);
        let qp = m.point(q);
        // Distances to every position, one coordinate at a time over the columns: each
        // position's sum runs in coordinate order from 0.0, the same additions as `sq_dist`
        // (bit-identical), while the loop over positions vectorises.
        self.acc.clear();
        self.acc.resize(n, 0.0);
        for (j, &qj) in qp.iter().enumerate() {
            for (a, &c) in self.acc.iter_mut().zip(&columns[j * n..(j + 1) * n]) {
                let d = qj - c;
                *a += d * d;
            }
        }
        debug_assert_eq!(columns.len(), n * e);
        // Positions are in time order, so the Theiler window is one run of positions.
        let lo = times.partition_point(|&t| (t as usize) + theiler < tq);
        let hi = times.partition_point(|&t| (t as usize) <= tq + theiler);
        self.bits.clear();
        self.bits.extend(self.acc.iter().map(|d| d.to_bits()));
        self.bits[lo..hi].fill(u64::MAX);
        self.select.clear();
        self.select.extend_from_slice(&self.bits[..lo]);
        self.select.extend_from_slice(&self.bits[hi..]);
        let keep = depth.min(self.select.len());
        if keep == 0 {
            return 0;
        }
        let threshold = if keep < self.select.len() {
            *self.select.select_nth_unstable(keep - 1).1
        } else {
            u64::MAX - 1
        };
        self.keys.clear();
        for (p, &b) in self.bits.iter().enumerate() {
            if b <= threshold {
                self.keys.push(u128::from(b) << 32 | p as u128);
            }
        }
        self.keys.sort_unstable();
        for ((slot, d), &key) in row.iter_mut().zip(drow.iter_mut()).zip(&self.keys[..keep]) {
            *slot = key as u32;
            *d = f64::from_bits((key >> 32) as u64).sqrt();
        }
        keep as u32
    }
}

/// Sort the lists with a k-d tree query per position (about `depth log N` work) rather than
/// a scan and partial sort of every candidate (about `N` work): when the lists are shallow.
fn tree_sorts(n: usize, depth: usize) -> bool {
    depth * TREE_SORT_RATIO < n
}

/// See [`tree_sorts`]: measured on the side-by-side benchmark's workloads.
const TREE_SORT_RATIO: usize = 8;

/// Walk or scan? The walk costs about `k N / L` cheap steps (a mask test; one walk serves a block
/// of replicates), the scan `L` candidates whose cost grows with E (distance, window test,
/// insertion into the k best): walk when `k L^2 > k N`, i.e. `L^2 > N`. Measured on the
/// side-by-side benchmark's workloads (E = 2, 3, 5, 8; 20 and 100 replicates): walking from
/// `c L^2 > k N` with `c = k` was as fast as or faster than any fixed `c` from 1 to 12 (the
/// previous rule, `c = 3`, took up to 24 % more CPU at E = 5 and 8).
pub fn prefer_walk(n: usize, l: usize, e: usize) -> bool {
    let k = e + 1;
    k * l * l > k * n
}

/// List depth for libraries of at least `l_min` members and `replicates` random libraries per
/// size: the expected walk length `k N / L` (up to 32 replicates and E up to 5) or twice it,
/// plus slack. A list that runs dry falls back to a scan of the library (same result), which
/// costs a few walks' steps, once per replicate and more at larger E; deeper lists cost more
/// to sort, once per manifold. Measured on the side-by-side benchmark's workloads (alternated
/// runs): with 20 replicates at E = 2, `k N / L + 16` took 12 % less CPU than `2 k N / L + 16`
/// at 4,000 points and about the same at 500-1,000; at E = 8 it took 6 % more, and with 100
/// replicates 10-20 % more. Both beat the earlier `4 k N / L + 32` by 6-11 % at 1,000 points.
pub fn walk_depth(n: usize, l_min: usize, e: usize, replicates: usize) -> usize {
    let k = e + 1;
    let factor = if replicates <= 32 && e <= 5 { 1 } else { 2 };
    (factor * k * n).div_ceil(l_min.max(1)) + 16
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::seeds::{keyed_rng, sample_without_replacement, unit};

    fn noisy_manifold(n: usize, e: usize, seed: u64) -> Manifold {
        let mut rng = keyed_rng(&[seed]);
        // Rounded values force exact distance ties, exercising the (distance, position) rule.
        let x: Vec<f64> = (0..n).map(|_| (unit(&mut rng) * 8.0).round()).collect();
        Manifold::new(&x, e, 1).unwrap()
    }

    #[test]
    fn walk_and_scan_agree_including_ties_and_fallbacks() {
        for (e, w) in [(1, 0), (2, 1), (3, 4)] {
            let m = noisy_manifold(300, e, e as u64);
            let scan = ExactScan::new(&m, w);
            // A shallow depth forces the fallback path for many queries and sorts with the
            // k-d tree; the deeper lists are sorted by the scan and selection.
            for depth in [12, 100] {
                let lists = SortedLists::new(&m, w, depth);
                assert_eq!(tree_sorts(m.len(), depth), depth == 12);
                for (rep, l) in [(0u64, 5usize), (1, 40), (2, m.len())] {
                    let mut rng = keyed_rng(&[rep]);
                    let lib = Library::from_positions(
                        sample_without_replacement(&mut rng, m.len(), l),
                        m.len(),
                    );
                    let accept = |p: usize| p % 7 != 3;
                    let (mut a, mut b) = (Vec::new(), Vec::new());
                    for q in 0..m.len() {
                        scan.nearest(q, &lib, e + 1, &accept, &mut a);
                        lists.nearest(q, &lib, e + 1, &accept, &mut b);
                        assert_eq!(a, b, "e={e} w={w} l={l} q={q}");
                        for nb in &a {
                            assert!(m.time(nb.pos as usize).abs_diff(m.time(q)) > w);
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn every_query_at_once_equals_one_query_at_a_time() {
        for (e, w) in [(1, 0), (2, 1), (3, 4), (7, 2)] {
            let m = noisy_manifold(300, e, 10 + e as u64);
            let scan = ExactScan::new(&m, w);
            let lists = SortedLists::new(&m, w, 12);
            for (rep, l) in [(0u64, 3usize), (1, 5), (2, 40), (3, m.len())] {
                let mut rng = keyed_rng(&[rep]);
                let lib = Library::from_positions(
                    sample_without_replacement(&mut rng, m.len(), l),
                    m.len(),
                );
                for k in [1, e + 1, 20] {
                    for index in [&scan as &dyn NeighbourIndex, &lists] {
                        let (mut rows, mut full) = (Vec::new(), Vec::new());
                        index.nearest_every(&lib, k, &mut rows, &mut full);
                        let mut one = Vec::new();
                        for q in 0..m.len() {
                            index.nearest_all(q, &lib, k, &mut one);
                            assert_eq!(full[q], one.len() == k, "e={e} l={l} k={k} q={q}");
                            if full[q] {
                                assert_eq!(&rows[q * k..(q + 1) * k], &one[..]);
                            }
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn one_walk_for_many_libraries_equals_one_walk_each() {
        for (e, w) in [(1, 0), (2, 1), (3, 4)] {
            let m = noisy_manifold(300, e, 20 + e as u64);
            // Shallow lists force fallbacks for some libraries and not others.
            let lists = SortedLists::new(&m, w, 12);
            for (l, count) in [(5usize, 3usize), (40, 64), (120, 17), (m.len(), 2)] {
                let libs: Vec<Library> = (0..count)
                    .map(|r| {
                        let mut rng = keyed_rng(&[r as u64, l as u64]);
                        Library::from_positions(
                            sample_without_replacement(&mut rng, m.len(), l),
                            m.len(),
                        )
                    })
                    .collect();
                let refs: Vec<&Library> = libs.iter().collect();
                for k in [1, e + 1, 20] {
                    let mut rows = vec![Vec::new(); count];
                    let mut full = vec![Vec::new(); count];
                    let mut masks = Vec::new();
                    lists.nearest_every_multi(&refs, k, &mut rows, &mut full, &mut masks);
                    for (r, lib) in libs.iter().enumerate() {
                        let (mut one, mut one_full) = (Vec::new(), Vec::new());
                        lists.nearest_every(lib, k, &mut one, &mut one_full);
                        assert_eq!(full[r], one_full, "e={e} l={l} k={k} r={r}");
                        for q in (0..m.len()).filter(|&q| one_full[q]) {
                            assert_eq!(rows[r][q * k..(q + 1) * k], one[q * k..(q + 1) * k]);
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn ties_break_by_position() {
        let x = [0.0, 1.0, 0.0, 1.0, 0.0, 1.0];
        let m = Manifold::new(&x, 1, 1).unwrap();
        let mut out = Vec::new();
        ExactScan::new(&m, 0).nearest(0, &Library::all(6), 3, &|_| true, &mut out);
        let pos: Vec<u32> = out.iter().map(|n| n.pos).collect();
        assert_eq!(pos, vec![2, 4, 1]);
    }
}

//! An exact k-d tree (Bentley 1975) over one manifold, for queries whose library is the whole
//! manifold or most of it: the simplex forecasts that choose E and the construction of the
//! pre-sorted neighbour lists.
//!
//! Results equal [`crate::neighbours::ExactScan`]'s bit for bit: candidates are ranked by the
//! key (squared distance's bits, position), the same (distance, position) rule, and every
//! distance is the engine's own coordinate-order sum. A node is skipped only when the squared
//! distance from the query to its bounding box, summed in the same coordinate order, is
//! *strictly* above the k-th best: rounding is monotone, so that bound never exceeds the
//! computed distance of any point in the box, and a point at an equal distance (which could win
//! on position) is never skipped.

use super::{Library, Neighbour, NeighbourIndex, size_rows};
use crate::embed::{Manifold, sq_dist};
use std::collections::BinaryHeap;

/// Points per leaf.
const LEAF: usize = 12;

#[derive(Debug, Clone)]
struct Node {
    /// Range of `order` held by this node.
    start: u32,
    end: u32,
    /// Children (0 for a leaf; the root is never a child).
    left: u32,
    right: u32,
}

/// Exact k-d tree over every position of a manifold, with a Theiler window.
#[derive(Debug, Clone)]
pub struct KdTree<'m> {
    manifold: &'m Manifold,
    theiler: usize,
    /// Positions, permuted so each node's points are one run.
    order: Vec<u32>,
    /// Coordinates in `order`, contiguous per point.
    coords: Vec<f64>,
    nodes: Vec<Node>,
    /// Bounding box per node: `boxes[node * 2e..]` holds the minima, then the maxima.
    boxes: Vec<f64>,
}

impl<'m> KdTree<'m> {
    /// Build the tree over every position of `manifold` (median split on the widest side).
    pub fn new(manifold: &'m Manifold, theiler: usize) -> Self {
        let n = manifold.len();
        let e = manifold.e();
        let mut tree = Self {
            manifold,
            theiler,
            order: (0..n as u32).collect(),
            coords: Vec::new(),
            nodes: Vec::with_capacity(2 * n / LEAF + 1),
            boxes: Vec::new(),
        };
        if n > 0 {
            tree.build(0, n);
        }
        tree.coords = Vec::with_capacity(n * e);
        for &p in &tree.order {
            tree.coords.extend_from_slice(manifold.point(p as usize));
        }
        tree
    }

    fn build(&mut self, start: usize, end: usize) -> u32 {
        let m = self.manifold;
        let e = m.e();
        let id = self.nodes.len() as u32;
        self.nodes.push(Node {
            start: start as u32,
            end: end as u32,
            left: 0,
            right: 0,
        });
        let (mut lo, mut hi) = (vec![f64::INFINITY; e], vec![f64::NEG_INFINITY; e]);
        for &p in &self.order[start..end] {
            for (j, &c) in m.point(p as usize).iter().enumerate() {
                lo[j] = lo[j].min(c);
                hi[j] = hi[j].max(c);
            }
        }
        self.boxes.extend_from_slice(&lo);
        self.boxes.extend_from_slice(&hi);
        if end - start <= LEAF {
            return id;
        }
        let dim = (0..e)
            .max_by(|&a, &b| (hi[a] - lo[a]).total_cmp(&(hi[b] - lo[b])))
            .expect("E >= 1");
        if hi[dim] <= lo[dim] {
            // Every point equal: nothing to split.
            return id;
        }
        let mid = start + (end - start) / 2;
        self.order[start..end].select_nth_unstable_by(mid - start, |&a, &b| {
            m.point(a as usize)[dim].total_cmp(&m.point(b as usize)[dim])
        });
        let left = self.build(start, mid);
        let right = self.build(mid, end);
        self.nodes[id as usize].left = left;
        self.nodes[id as usize].right = right;
        id
    }

    /// Squared distance from `q` to node `id`'s box, summed in coordinate order.
    #[inline]
    fn box_dist2(&self, id: usize, q: &[f64]) -> f64 {
        let e = q.len();
        let b = &self.boxes[id * 2 * e..(id + 1) * 2 * e];
        let (lo, hi) = b.split_at(e);
        let mut s = 0.0;
        for j in 0..e {
            let d = if q[j] < lo[j] {
                lo[j] - q[j]
            } else if q[j] > hi[j] {
                q[j] - hi[j]
            } else {
                0.0
            };
            s += d * d;
        }
        s
    }

    /// The `k` smallest keys `(d2 bits) << 32 | position` among positions outside the Theiler
    /// window of `q`, that are library members (when `library` is given) and accepted, into
    /// `heap` (a max-heap; its contents on return are the answer, unordered).
    fn search<A: Fn(usize) -> bool + ?Sized>(
        &self,
        q: usize,
        k: usize,
        library: Option<&Library>,
        accept: &A,
        heap: &mut BinaryHeap<u128>,
        stack: &mut Vec<u32>,
    ) {
        heap.clear();
        stack.clear();
        if k == 0 || self.nodes.is_empty() {
            return;
        }
        let m = self.manifold;
        let e = m.e();
        let tq = m.time(q);
        let qp = m.point(q);
        let w = self.theiler;
        stack.push(0);
        while let Some(id) = stack.pop() {
            let id = id as usize;
            if heap.len() == k {
                let worst = f64::from_bits((*heap.peek().expect("full") >> 32) as u64);
                if self.box_dist2(id, qp) > worst {
                    continue;
                }
            }
            let node = &self.nodes[id];
            if node.left == 0 {
                let (s, t) = (node.start as usize, node.end as usize);
                for (i, &p) in self.order[s..t].iter().enumerate() {
                    let pu = p as usize;
                    if m.time(pu).abs_diff(tq) <= w {
                        continue;
                    }
                    if library.is_some_and(|l| !l.contains(pu)) {
                        continue;
                    }
                    let c = &self.coords[(s + i) * e..(s + i + 1) * e];
                    let d2 = sq_dist(qp, c);
                    let key = u128::from(d2.to_bits()) << 32 | u128::from(p);
                    if heap.len() < k {
                        if accept(pu) {
                            heap.push(key);
                        }
                    } else if key < *heap.peek().expect("full") && accept(pu) {
                        heap.pop();
                        heap.push(key);
                    }
                }
                continue;
            }
            // Visit the nearer child first: push it last.
            let (l, r) = (node.left, node.right);
            let (dl, dr) = (
                self.box_dist2(l as usize, qp),
                self.box_dist2(r as usize, qp),
            );
            if dl <= dr {
                stack.push(r);
                stack.push(l);
            } else {
                stack.push(l);
                stack.push(r);
            }
        }
    }

    /// Per query, the `depth` nearest positions outside the Theiler window in (distance,
    /// position) order, as [`crate::neighbours::SortedLists`] stores them; `row` receives them
    /// with their distances in `dists`, and the count is returned.
    pub(crate) fn sorted_row(
        &self,
        q: usize,
        depth: usize,
        row: &mut [u32],
        dists: &mut [f64],
        heap: &mut BinaryHeap<u128>,
        stack: &mut Vec<u32>,
    ) -> usize {
        self.search(q, depth, None, &|_| true, heap, stack);
        let mut keys = std::mem::take(heap).into_vec();
        keys.sort_unstable();
        for ((slot, d), &key) in row.iter_mut().zip(dists.iter_mut()).zip(&keys) {
            *slot = key as u32;
            *d = f64::from_bits((key >> 32) as u64).sqrt();
        }
        let cnt = keys.len();
        keys.clear();
        *heap = BinaryHeap::from(keys);
        cnt
    }
}

/// Keys of a max-heap into neighbours in (distance, position) order.
fn drain_sorted(heap: &mut BinaryHeap<u128>, out: &mut Vec<Neighbour>) {
    out.clear();
    let mut keys = std::mem::take(heap).into_vec();
    keys.sort_unstable();
    out.extend(keys.iter().map(|&key| Neighbour {
        pos: key as u32,
        dist: f64::from_bits((key >> 32) as u64).sqrt(),
    }));
    keys.clear();
    *heap = BinaryHeap::from(keys);
}

impl NeighbourIndex for KdTree<'_> {
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
        let (mut heap, mut stack) = (BinaryHeap::with_capacity(k + 1), Vec::new());
        let lib = (library.len() < self.manifold.len()).then_some(library);
        self.search(q, k, lib, accept, &mut heap, &mut stack);
        drain_sorted(&mut heap, out);
    }

    fn nearest_every(
        &self,
        library: &Library,
        k: usize,
        rows: &mut Vec<Neighbour>,
        full: &mut Vec<bool>,
    ) {
        let n = self.manifold.len();
        size_rows(n, k, rows, full);
        let lib = (library.len() < n).then_some(library);
        let (mut heap, mut stack, mut out) = (
            BinaryHeap::with_capacity(k + 1),
            Vec::new(),
            Vec::with_capacity(k),
        );
        for q in 0..n {
            self.search(q, k, lib, &|_| true, &mut heap, &mut stack);
            drain_sorted(&mut heap, &mut out);
            full[q] = out.len() == k && k > 0;
            if full[q] {
                rows[q * k..(q + 1) * k].copy_from_slice(&out);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::ExactScan;
    use super::*;
    use crate::seeds::{keyed_rng, sample_without_replacement, unit};

    fn manifold(n: usize, e: usize, seed: u64, rounded: bool) -> Manifold {
        let mut rng = keyed_rng(&[seed]);
        // Rounded values force exact distance ties, exercising the (distance, position) rule.
        let x: Vec<f64> = (0..n)
            .map(|_| {
                let v = unit(&mut rng) * 8.0;
                if rounded { v.round() } else { v }
            })
            .collect();
        Manifold::new(&x, e, 1).unwrap()
    }

    #[test]
    fn tree_equals_the_exact_scan_bit_for_bit() {
        for (e, w, rounded) in [(1, 0, true), (2, 1, true), (3, 2, false), (5, 4, false)] {
            for (e, w) in [(e, w), (e + 5, w)] {
                let m = manifold(400, e, 3 + e as u64, rounded);
                let (scan, tree) = (ExactScan::new(&m, w), KdTree::new(&m, w));
                let all = Library::all(m.len());
                let mut rng = keyed_rng(&[e as u64]);
                let part = Library::from_positions(
                    sample_without_replacement(&mut rng, m.len(), 150),
                    m.len(),
                );
                let accept = |p: usize| p % 5 != 2;
                for k in [1, e + 1, 16] {
                    for lib in [&all, &part] {
                        let (mut ra, mut fa, mut rb, mut fb) =
                            (Vec::new(), Vec::new(), Vec::new(), Vec::new());
                        scan.nearest_every(lib, k, &mut ra, &mut fa);
                        tree.nearest_every(lib, k, &mut rb, &mut fb);
                        assert_eq!(fa, fb, "e={e} k={k}");
                        for q in 0..m.len() {
                            if fa[q] {
                                assert_eq!(ra[q * k..(q + 1) * k], rb[q * k..(q + 1) * k]);
                            }
                            let (mut a, mut b) = (Vec::new(), Vec::new());
                            scan.nearest(q, lib, k, &accept, &mut a);
                            tree.nearest(q, lib, k, &accept, &mut b);
                            assert_eq!(a, b, "e={e} w={w} k={k} q={q}");
                        }
                    }
                }
            }
        }
    }
}

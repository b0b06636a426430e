//! Point-to-point queries on a customized hierarchy.
//!
//! Elimination-tree search (Dibbelt, Strasser & Wagner 2016, §5.2): the
//! upward search space of a node is exactly its ancestors in the elimination
//! tree, so instead of a priority queue both searches walk the ancestor
//! chains in increasing rank (`cch::chains`), relaxing upward arcs
//! (forward) and downward arcs (backward). Every node on both chains is a meeting candidate. The
//! walk supports several start nodes per side (a query that starts mid-edge
//! leaves through both ends of a two-way road), each with an initial cost.
//!
//! Each endpoint names the class of its partial edge; on a metric with
//! classes ([`super::classes`]) the result's class times are the partial
//! costs in their classes plus the class times of the path's arcs, adding up
//! exactly to its time.
//!
//! [`CchQuery`] owns the per-thread scratch (distance arrays sized to the
//! graph, reset after each query along the same chains), so a query
//! allocates nothing.

use super::chains::Chains;
use super::classes::{add, single, ClassTimes, CLASSES};
use super::customize::{CustomizedMetric, PrunedArc, INFINITY, VIA_EDGE, VIA_NONE};
use super::Cch;
use crate::graph::NONE;

/// Most start nodes per side.
pub const MAX_ENDPOINTS: usize = 2;

/// A start (or end) of a search: a road node reached at a given cost.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Endpoint {
    /// Road graph node id.
    pub node: u32,
    /// Cost already spent to reach this node from the origin (or still to
    /// spend from it to the destination), in the metric's unit.
    pub time: u32,
    /// Length of that partial stretch, in centimetres.
    pub len_cm: u32,
    /// Edge class of that partial stretch (see [`super::classes`]).
    pub class: u8,
}

impl Endpoint {
    pub fn at(node: u32) -> Self {
        Self {
            node,
            time: 0,
            len_cm: 0,
            class: 0,
        }
    }
}

/// The best path found by [`CchQuery::run`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PathResult {
    /// Total time including both endpoints' partial costs.
    pub time: u32,
    /// Total length in centimetres including the partial stretches.
    pub len_cm: u64,
    /// Which source endpoint (index into the slice given) the path uses.
    pub source: usize,
    /// Which target endpoint the path uses.
    pub target: usize,
    /// Milliseconds per edge class, adding up to `time` on a metric with
    /// classes (all zero on one without).
    pub classes: ClassTimes,
}

const UP: bool = true;
const DOWN: bool = false;

/// Relaxes the arcs of one node: `dist[head] = min(dist[head], d + weight)`,
/// recording the arc as predecessor on improvement, with a branch-free
/// update: this loop is most of a query's time.
#[inline(always)]
fn relax<const D: usize>(arcs: &[PrunedArc], d: u32, labels: &mut [Label]) {
    for &PrunedArc {
        head,
        weight,
        arc: a,
    } in arcs
    {
        let l = &mut labels[head as usize];
        let nd = d + weight;
        let old = l.dist[D];
        let better = nd < old;
        l.dist[D] = if better { nd } else { old };
        let p = l.pred[D];
        l.pred[D] = if better { a } else { p };
    }
}

/// Forward (index 0) and backward (index 1) distance and predecessor arc of
/// one node, side by side: a query touches each visited node's label once
/// per relaxation, and one cache line then serves both searches.
#[derive(Debug, Clone, Copy)]
#[repr(C, align(16))]
struct Label {
    dist: [u32; 2],
    pred: [u32; 2],
}

const FWD: usize = 0;
const BWD: usize = 1;

const EMPTY_LABEL: Label = Label {
    dist: [INFINITY; 2],
    pred: [NONE; 2],
};

/// Reusable query scratch for one thread.
#[derive(Debug, Clone)]
pub struct CchQuery {
    labels: Vec<Label>,
    /// Hierarchy arcs of the last path, origin to destination, with
    /// direction (UP = tail→head).
    arc_path: Vec<(u32, bool)>,
    stack: Vec<(u32, bool)>,
    /// Tree nodes visited by the last query (for statistics).
    pub last_visited: usize,
}

impl CchQuery {
    pub fn new(cch: &Cch) -> Self {
        let n = cch.num_nodes();
        Self {
            labels: vec![EMPTY_LABEL; n],
            arc_path: Vec::new(),
            stack: Vec::new(),
            last_visited: 0,
        }
    }

    /// Number of nodes this scratch is sized for.
    pub fn num_nodes(&self) -> usize {
        self.labels.len()
    }

    /// Shortest travel time between two road nodes, if connected.
    pub fn node_to_node(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        s: u32,
        t: u32,
    ) -> Option<PathResult> {
        self.run(cch, metric, &[Endpoint::at(s)], &[Endpoint::at(t)])
    }

    /// Best path from any source endpoint to any target endpoint. At most
    /// [`MAX_ENDPOINTS`] per side (extra ones are ignored).
    pub fn run(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &[Endpoint],
        targets: &[Endpoint],
    ) -> Option<PathResult> {
        let sources = &sources[..sources.len().min(MAX_ENDPOINTS)];
        let targets = &targets[..targets.len().min(MAX_ENDPOINTS)];
        let fwd = self.seed::<FWD>(&cch.rank, sources);
        let bwd = self.seed::<BWD>(&cch.rank, targets);
        let (best, meet) = self.search(cch, metric, fwd, bwd);
        let result = if meet == NONE {
            self.arc_path.clear();
            None
        } else {
            Some(self.extract(cch, metric, meet, best, sources, targets))
        };
        // Reset exactly what this query touched: the ancestor chains.
        self.reset(&cch.parent, fwd);
        self.reset(&cch.parent, bwd);
        result
    }

    /// Seeds side `D` with its endpoints' partial costs (the first of
    /// equally cheap endpoints on one rank wins) and returns its chains.
    #[inline]
    fn seed<const D: usize>(&mut self, rank: &[u32], eps: &[Endpoint]) -> Chains<MAX_ENDPOINTS> {
        for e in eps {
            let l = &mut self.labels[rank[e.node as usize] as usize];
            if e.time < l.dist[D] {
                l.dist[D] = e.time;
                l.pred[D] = NONE;
            }
        }
        Chains::new(eps.iter().map(|e| rank[e.node as usize]))
    }

    /// Walks the union of both sides' chains in increasing rank, relaxing
    /// upward arcs on the forward chains and downward arcs on the backward
    /// ones; every node on both is a meeting candidate. A side stops
    /// relaxing from nodes it reaches no cheaper than the best meeting so
    /// far. Returns the best time and its meeting rank (NONE if none).
    #[inline]
    fn search(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        mut fwd: Chains<MAX_ENDPOINTS>,
        mut bwd: Chains<MAX_ENDPOINTS>,
    ) -> (u32, u32) {
        let mut best = INFINITY;
        let mut meet = NONE;
        let mut visited = 0;
        loop {
            let (xf, xb) = (fwd.peek(), bwd.peek());
            let x = xf.min(xb);
            if x == NONE {
                break;
            }
            visited += 1;
            let xi = x as usize;
            let p = cch.parent[xi];
            let [df, db] = self.labels[xi].dist;
            if df < INFINITY && db < INFINITY && df + db < best {
                best = df + db;
                meet = x;
            }
            if xf == x && df < best {
                let f = &metric.forward;
                relax::<FWD>(&f.arcs[f.range(x)], df, &mut self.labels);
            }
            if xb == x && db < best {
                let b = &metric.backward;
                relax::<BWD>(&b.arcs[b.range(x)], db, &mut self.labels);
            }
            fwd.step(x, p);
            bwd.step(x, p);
        }
        self.last_visited = visited;
        (best, meet)
    }

    /// Clears the distances along `chains` (all a search wrote to).
    #[inline]
    fn reset(&mut self, parent: &[u32], mut chains: Chains<MAX_ENDPOINTS>) {
        while let Some(x) = chains.next(parent) {
            self.labels[x as usize].dist = [INFINITY; 2];
        }
    }

    fn extract(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        meet: u32,
        best: u32,
        sources: &[Endpoint],
        targets: &[Endpoint],
    ) -> PathResult {
        self.arc_path.clear();
        let mut len: u64 = 0;
        let mut x = meet;
        while self.labels[x as usize].pred[FWD] != NONE {
            let a = self.labels[x as usize].pred[FWD];
            self.arc_path.push((a, UP));
            len += u64::from(metric.up_len[a as usize]);
            x = cch.tail[a as usize];
        }
        let first = x;
        self.arc_path.reverse();
        let mut y = meet;
        while self.labels[y as usize].pred[BWD] != NONE {
            let a = self.labels[y as usize].pred[BWD];
            self.arc_path.push((a, DOWN));
            len += u64::from(metric.down_len[a as usize]);
            y = cch.tail[a as usize];
        }
        let last = y;
        // The chain ends where the cheapest endpoint seeded it.
        let pick = |eps: &[Endpoint], r: u32| {
            eps.iter()
                .enumerate()
                .filter(|(_, e)| cch.rank[e.node as usize] == r)
                .min_by_key(|(_, e)| e.time)
                .map(|(i, _)| i)
                .unwrap_or_else(|| {
                    debug_assert!(false, "chain must end at an endpoint");
                    0
                })
        };
        let source = pick(sources, first);
        let target = pick(targets, last);
        len += u64::from(sources[source].len_cm) + u64::from(targets[target].len_cm);
        let mut classes = [0; CLASSES];
        if metric.has_classes() {
            let (s, t) = (&sources[source], &targets[target]);
            classes = single(s.class, s.time);
            add(&mut classes, &single(t.class, t.time));
            for &(a, dir) in &self.arc_path {
                let c = if dir == UP {
                    &metric.up_cls[a as usize]
                } else {
                    &metric.down_cls[a as usize]
                };
                add(&mut classes, c);
            }
        }
        PathResult {
            time: best,
            len_cm: len,
            source,
            target,
            classes,
        }
    }

    /// Road edges of the last path found, origin to destination, appended
    /// to `out` (partial first/last edges are the caller's business).
    pub fn unpack_edges(&mut self, cch: &Cch, metric: &CustomizedMetric, out: &mut Vec<u32>) {
        for i in 0..self.arc_path.len() {
            let start = self.arc_path[i];
            self.stack.clear();
            self.stack.push(start);
            while let Some((a, dir)) = self.stack.pop() {
                let via = if dir == UP {
                    metric.up_via[a as usize]
                } else {
                    metric.down_via[a as usize]
                };
                debug_assert_ne!(via, VIA_NONE, "a finite path never uses an infinite arc");
                if via == VIA_NONE {
                    continue;
                }
                if via & VIA_EDGE != 0 {
                    out.push(via & !VIA_EDGE);
                    continue;
                }
                let (x, y) = (cch.tail[a as usize], cch.head[a as usize]);
                let awx = cch.find_arc(via, x).expect("triangle arc w-x");
                let awy = cch.find_arc(via, y).expect("triangle arc w-y");
                if dir == UP {
                    // x→y = x→w (down of w–x), then w→y (up of w–y).
                    self.stack.push((awy, UP));
                    self.stack.push((awx, DOWN));
                } else {
                    // y→x = y→w (down of w–y), then w→x (up of w–x).
                    self.stack.push((awx, UP));
                    self.stack.push((awy, DOWN));
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::RoadGraph;
    use crate::testing::{city, reference_dists, Rng};

    /// The road edges of the last path form a walk from endpoint `a`'s node
    /// to `b`'s whose weights add up to the time less both partial costs,
    /// and whose lengths (cm, rounded per edge as customization does) add
    /// up to the length less both partial lengths.
    fn check_path(
        q: &mut CchQuery,
        cch: &Cch,
        metric: &CustomizedMetric,
        (g, weights): (&RoadGraph, &[u32]),
        r: PathResult,
        (a, b): (Endpoint, Endpoint),
    ) {
        let mut edges = Vec::new();
        q.unpack_edges(cch, metric, &mut edges);
        let (to, partial_time) = (b.node, a.time + b.time);
        let partial_cm = u64::from(a.len_cm) + u64::from(b.len_cm);
        let mut at = a.node;
        let (mut time, mut cm) = (0u64, 0u64);
        for &e in &edges {
            assert_eq!(g.edge_tail[e as usize], at, "path is a walk");
            at = g.edge_head[e as usize];
            time += u64::from(weights[e as usize]);
            cm += (g.edge_len_m[e as usize] * 100.0).round() as u64;
        }
        assert_eq!(at, to, "path ends at the target endpoint");
        assert_eq!(time + u64::from(partial_time), u64::from(r.time));
        assert_eq!(cm + partial_cm, r.len_cm);
    }

    /// `CchQuery::run` against petgraph's Dijkstra (`petgraph::algo::dijkstra`,
    /// the reference) on a synthetic city, for free-flow and random speeds:
    /// node-to-node times equal the reference exactly over random pairs, and
    /// with two endpoints per side carrying partial costs the time equals
    /// the best of `cost + Dijkstra + cost` over the four combinations, the
    /// reported endpoints realise it, and the unpacked path is a road walk
    /// of that time.
    #[test]
    fn run_equals_dijkstra() {
        let art = city(3_000, 21);
        let (g, cch) = (&art.graph, &art.cch);
        let n = g.num_nodes();
        let mut rng = Rng::new(4);
        let speeds: Vec<f32> = (0..g.num_edges())
            .map(|_| 5.0 + rng.below(116) as f32)
            .collect();
        for weights in [
            crate::metric::free_flow(g),
            crate::metric::from_speeds(g, &speeds),
        ] {
            let metric = CustomizedMetric::new(cch, &weights, &g.edge_len_m);
            let mut q = CchQuery::new(cch);
            let mut compared = 0;
            for _ in 0..12 {
                let s = rng.below(n);
                let reference = reference_dists(g, &weights, s);
                for _ in 0..25 {
                    let t = rng.below(n);
                    let got = q.node_to_node(cch, &metric, s, t);
                    assert_eq!(
                        got.map(|r| u64::from(r.time)),
                        reference[t as usize],
                        "{s} -> {t}"
                    );
                    if let Some(r) = got {
                        let ends = (Endpoint::at(s), Endpoint::at(t));
                        check_path(&mut q, cch, &metric, (g, &weights), r, ends);
                    }
                    compared += 1;
                }
            }
            assert_eq!(compared, 300);

            for _ in 0..40 {
                let ends = |rng: &mut Rng| {
                    [0, 1].map(|_| Endpoint {
                        node: rng.below(n),
                        time: rng.below(20_000),
                        len_cm: rng.below(50_000),
                        class: 0,
                    })
                };
                let (src, dst) = (ends(&mut rng), ends(&mut rng));
                let d = src.map(|s| reference_dists(g, &weights, s.node));
                let cost = |i: usize, j: usize| {
                    d[i][dst[j].node as usize]
                        .map(|x| u64::from(src[i].time) + x + u64::from(dst[j].time))
                };
                let expect = (0..2)
                    .flat_map(|i| (0..2).filter_map(move |j| cost(i, j)))
                    .min();
                let got = q.run(cch, &metric, &src, &dst);
                assert_eq!(got.map(|r| u64::from(r.time)), expect, "{src:?} -> {dst:?}");
                let r = got.expect("the city is strongly connected");
                assert_eq!(cost(r.source, r.target), expect, "reported endpoints");
                let ends = (src[r.source], dst[r.target]);
                check_path(&mut q, cch, &metric, (g, &weights), r, ends);
            }
        }
    }

    /// Class times on a metric with random edge classes: the total equals
    /// petgraph's Dijkstra (the reference) for random pairs with partial
    /// endpoint costs of random classes, and each class's time equals the
    /// sum of that class's edge weights along the path hodos unpacks, plus
    /// the partial costs in their classes (a hand-summed reference: among
    /// tied shortest paths only the unpacked one is checked per class).
    #[test]
    fn class_times_match_the_unpacked_path() {
        let art = city(3_000, 23);
        let (g, cch) = (&art.graph, &art.cch);
        let n = g.num_nodes();
        let mut rng = Rng::new(9);
        let speeds: Vec<f32> = (0..g.num_edges())
            .map(|_| 5.0 + rng.below(116) as f32)
            .collect();
        let weights = crate::metric::from_speeds(g, &speeds);
        let classes: Vec<u8> = (0..g.num_edges()).map(|_| rng.below(3) as u8).collect();
        let mut metric = CustomizedMetric::new(cch, &weights, &g.edge_len_m);
        metric.set_classes(cch, &weights, &classes);
        let mut q = CchQuery::new(cch);
        let mut edges = Vec::new();
        let mut mixed = 0;
        for _ in 0..200 {
            let ep = |rng: &mut Rng| Endpoint {
                node: rng.below(n),
                time: rng.below(5_000),
                len_cm: 0,
                class: rng.below(3) as u8,
            };
            let (a, b) = (ep(&mut rng), ep(&mut rng));
            let reference = reference_dists(g, &weights, a.node)[b.node as usize]
                .map(|d| d + u64::from(a.time) + u64::from(b.time));
            let r = q.run(cch, &metric, &[a], &[b]).expect("strongly connected");
            assert_eq!(Some(u64::from(r.time)), reference);
            let mut expect = [0u64; CLASSES];
            expect[a.class as usize] += u64::from(a.time);
            expect[b.class as usize] += u64::from(b.time);
            edges.clear();
            q.unpack_edges(cch, &metric, &mut edges);
            for &e in &edges {
                expect[classes[e as usize] as usize] += u64::from(weights[e as usize]);
            }
            assert_eq!(r.classes.map(u64::from), expect);
            assert_eq!(
                r.classes.iter().map(|&c| u64::from(c)).sum::<u64>(),
                u64::from(r.time)
            );
            mixed += usize::from(expect.iter().filter(|&&c| c > 0).count() == 3);
        }
        assert!(mixed > 100, "{mixed} paths touch all three classes");
        // Without classes the result carries none.
        let plain = CustomizedMetric::new(cch, &weights, &g.edge_len_m);
        let r = q
            .node_to_node(cch, &plain, 0, (n - 1) as u32)
            .expect("connected");
        assert_eq!(r.classes, [0; CLASSES]);
    }
}

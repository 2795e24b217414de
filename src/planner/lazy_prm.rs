//! Lazy PRM: R. Bohlin, L. Kavraki, "Path planning using lazy PRM", ICRA 2000.
//!
//! A roadmap over a [`ConfigSpace`]: its nodes are valid samples of the space (in a
//! constrained space, projected samples), and each new node gets edges to its `neighbours`
//! nearest nodes without checking them. A query adds start and goal as nodes, searches the
//! shortest path (A*, heuristic: the distance to the goal), and only then checks that path's
//! edges with the space's motion check (`extend`; in a constrained space a manifold walk),
//! alternating from both ends as in the paper. A failed edge is removed and the search
//! repeated; a checked edge keeps the points its motion passed through, so the returned path
//! is the walked one, not a chord. When start and goal are not connected the roadmap grows by
//! a batch of samples. The roadmap keeps every node and checked edge for later queries in the
//! same space (the same stance): a second query there starts from what the first one learned.
//!
//! Nodes are valid when added (the space's samplers check them), so only edges are lazy.

use std::cmp::Ordering;
use std::collections::BinaryHeap;
use std::time::{Duration, Instant};

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

use super::{check_endpoints, stats_delta, Plan, PlanError, PlanStats};
use crate::cspace::ConfigSpace;
use crate::model::Robot;
use crate::nearest::NearestIndex;
use crate::settings::SettingsError;

/// Lazy PRM settings. Build with [`PrmSettings::new`] (checked).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PrmSettings {
    /// Each new node gets unchecked edges to this many nearest nodes.
    pub neighbours: usize,
    /// Longest edge (joint-space distance); `f64::INFINITY` for no limit.
    pub max_edge: f64,
    /// Samples drawn per growth round when start and goal are not connected.
    pub batch: usize,
    /// Samples drawn at most per query.
    pub max_samples: usize,
    /// Wall-clock limit per query (results that hit it depend on the machine's speed).
    pub time_limit: Duration,
    /// Seed of the roadmap's random stream (kept across queries).
    pub seed: u64,
}

impl PrmSettings {
    pub fn new(
        neighbours: usize,
        max_edge: f64,
        batch: usize,
        max_samples: usize,
        time_limit: Duration,
        seed: u64,
    ) -> Result<Self, SettingsError> {
        for (name, v) in [
            ("neighbours", neighbours),
            ("batch", batch),
            ("max_samples", max_samples),
        ] {
            if v == 0 {
                return Err(SettingsError::OutOfRange {
                    name,
                    expected: "at least 1",
                    got: 0.0,
                });
            }
        }
        if max_edge.is_nan() || max_edge <= 0.0 {
            return Err(SettingsError::OutOfRange {
                name: "max_edge",
                expected: "positive (infinity allowed)",
                got: max_edge,
            });
        }
        Ok(PrmSettings {
            neighbours,
            max_edge,
            batch,
            max_samples,
            time_limit,
            seed,
        })
    }
}

impl Default for PrmSettings {
    /// 10 neighbours, no edge limit, batches of 50, 5000 samples, 60 s, seed 0.
    fn default() -> Self {
        PrmSettings {
            neighbours: 10,
            max_edge: f64::INFINITY,
            batch: 50,
            max_samples: 5000,
            time_limit: Duration::from_secs(60),
            seed: 0,
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
enum EdgeState {
    Unchecked,
    /// The motion from `a` to `b`: the points after `a`, ending with `b`.
    Valid(Vec<Vec<f64>>),
    Invalid,
}

#[derive(Clone, Debug)]
struct Edge {
    a: usize,
    b: usize,
    /// Chord distance while unchecked; length of the checked motion once valid.
    cost: f64,
    state: EdgeState,
}

/// Edge counts of a roadmap.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct EdgeCounts {
    pub unchecked: usize,
    pub valid: usize,
    pub invalid: usize,
}

/// A lazy PRM roadmap, kept across queries in one space (one stance). Use it only with the
/// space it was first queried in: nodes and checked edges are that space's.
#[derive(Clone, Debug)]
pub struct Roadmap {
    settings: PrmSettings,
    nodes: Vec<Vec<f64>>,
    index: NearestIndex,
    edges: Vec<Edge>,
    /// Edge numbers at each node, in the order they were added.
    adjacency: Vec<Vec<usize>>,
    rng: ChaCha8Rng,
    scratch: Vec<(usize, f64)>,
}

/// A* queue entry: ordered by smallest `f`, then lowest node number (deterministic).
#[derive(Clone, Copy, PartialEq)]
struct Open {
    f: f64,
    node: usize,
}
impl Eq for Open {}
impl Ord for Open {
    fn cmp(&self, other: &Self) -> Ordering {
        other
            .f
            .total_cmp(&self.f)
            .then_with(|| other.node.cmp(&self.node))
    }
}
impl PartialOrd for Open {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Roadmap {
    /// An empty roadmap for configurations of `robot`.
    pub fn new(robot: &Robot, settings: PrmSettings) -> Self {
        Roadmap {
            settings,
            nodes: Vec::new(),
            index: NearestIndex::new(robot),
            edges: Vec::new(),
            adjacency: Vec::new(),
            rng: ChaCha8Rng::seed_from_u64(settings.seed),
            scratch: Vec::new(),
        }
    }

    pub fn settings(&self) -> &PrmSettings {
        &self.settings
    }

    /// Number of nodes.
    pub fn node_count(&self) -> usize {
        self.nodes.len()
    }

    /// Configuration of node `i`.
    pub fn node(&self, i: usize) -> Option<&[f64]> {
        self.nodes.get(i).map(Vec::as_slice)
    }

    /// How many edges are unchecked, checked valid, and checked invalid.
    pub fn edge_counts(&self) -> EdgeCounts {
        let mut c = EdgeCounts::default();
        for e in &self.edges {
            match e.state {
                EdgeState::Unchecked => c.unchecked += 1,
                EdgeState::Valid(_) => c.valid += 1,
                EdgeState::Invalid => c.invalid += 1,
            }
        }
        c
    }

    /// Add a valid configuration as a node (or return the node already there at distance 0)
    /// and give it unchecked edges to its nearest nodes.
    fn add_node(&mut self, q: &[f64]) -> Result<(usize, bool), PlanError> {
        let k = self.settings.neighbours;
        let mut near = std::mem::take(&mut self.scratch);
        self.index.k_nearest(q, k, &mut near)?;
        if let Some(&(i, d)) = near.first() {
            if d == 0.0 {
                self.scratch = near;
                return Ok((i, false));
            }
        }
        let n = self.index.insert(q)?;
        self.nodes.push(q.to_vec());
        self.adjacency.push(Vec::new());
        for &(m, d) in &near {
            if d > self.settings.max_edge {
                break; // nearest first
            }
            let e = self.edges.len();
            self.edges.push(Edge {
                a: m,
                b: n,
                cost: d,
                state: EdgeState::Unchecked,
            });
            self.adjacency[m].push(e);
            self.adjacency[n].push(e);
        }
        self.scratch = near;
        Ok((n, true))
    }

    /// Shortest path from `s` to `g` over edges not known invalid: the edges in order with
    /// their direction (true: traversed from `a` to `b`).
    fn search(&self, s: usize, g: usize) -> Result<Option<Vec<(usize, bool)>>, PlanError> {
        let n = self.nodes.len();
        let mut cost = vec![f64::INFINITY; n];
        let mut via: Vec<Option<usize>> = vec![None; n];
        let mut closed = vec![false; n];
        let mut open = BinaryHeap::new();
        let goal = &self.nodes[g];
        cost[s] = 0.0;
        open.push(Open {
            f: self.index.distance(&self.nodes[s], goal)?,
            node: s,
        });
        while let Some(Open { node, .. }) = open.pop() {
            if closed[node] {
                continue;
            }
            if node == g {
                let mut out = Vec::new();
                let mut at = g;
                while let Some(e) = via[at] {
                    let edge = &self.edges[e];
                    let forward = edge.b == at;
                    out.push((e, forward));
                    at = if forward { edge.a } else { edge.b };
                }
                out.reverse();
                return Ok(Some(out));
            }
            closed[node] = true;
            for &e in &self.adjacency[node] {
                let edge = &self.edges[e];
                if edge.state == EdgeState::Invalid {
                    continue;
                }
                let other = if edge.a == node { edge.b } else { edge.a };
                if closed[other] {
                    continue;
                }
                let c = cost[node] + edge.cost;
                if c < cost[other] {
                    cost[other] = c;
                    via[other] = Some(e);
                    open.push(Open {
                        f: c + self.index.distance(&self.nodes[other], goal)?,
                        node: other,
                    });
                }
            }
        }
        Ok(None)
    }

    /// Check edge `e` with the space's motion check (from `a` to `b`); true if valid.
    fn check_edge<S: ConfigSpace>(&mut self, space: &mut S, e: usize) -> Result<bool, PlanError> {
        let edge = &self.edges[e];
        match edge.state {
            EdgeState::Valid(_) => return Ok(true),
            EdgeState::Invalid => return Ok(false),
            EdgeState::Unchecked => {}
        }
        let (a, b) = (edge.a, edge.b);
        let ext = space.extend(&self.nodes[a], &self.nodes[b], f64::INFINITY)?;
        let ok = ext.reached && ext.path.last().is_some_and(|q| *q == self.nodes[b]);
        let edge = &mut self.edges[e];
        if ok {
            let mut length = 0.0;
            let mut prev = &self.nodes[a];
            for q in &ext.path {
                length += self.index.distance(prev, q)?;
                prev = q;
            }
            edge.cost = length.max(edge.cost);
            edge.state = EdgeState::Valid(ext.path);
        } else {
            edge.state = EdgeState::Invalid;
        }
        Ok(ok)
    }

    /// The configurations along a path of checked edges, starting at `s`.
    fn assemble(&self, s: usize, edges: &[(usize, bool)]) -> Vec<Vec<f64>> {
        let mut out = vec![self.nodes[s].clone()];
        for &(e, forward) in edges {
            let edge = &self.edges[e];
            let EdgeState::Valid(points) = &edge.state else {
                continue; // not reached: every edge was checked valid before assembling
            };
            if forward {
                out.extend(points.iter().cloned());
            } else {
                out.extend(points.iter().rev().skip(1).cloned());
                out.push(self.nodes[edge.a].clone());
            }
        }
        out
    }

    /// Plan from `start` to `goal` in `space`, growing the roadmap as needed. Start and goal
    /// stay in the roadmap as nodes. Stats count this query's work only.
    pub fn query<S: ConfigSpace>(
        &mut self,
        space: &mut S,
        start: &[f64],
        goal: &[f64],
    ) -> Result<Plan, PlanError> {
        let t0 = Instant::now();
        let before = space.stats();
        let nodes_before = self.nodes.len();
        check_endpoints(space, start, goal)?;
        let mut stats = PlanStats::default();
        let (s, _) = self.add_node(start)?;
        let (g, _) = self.add_node(goal)?;
        let mut path = None;
        if s == g {
            path = Some(vec![start.to_vec()]);
        }
        while path.is_none() && t0.elapsed() < self.settings.time_limit {
            match self.search(s, g)? {
                Some(edges) => {
                    // Check from both ends toward the middle (Bohlin & Kavraki, section 3).
                    let n = edges.len();
                    let mut all_valid = true;
                    for k in 0..n {
                        let i = if k % 2 == 0 { k / 2 } else { n - 1 - k / 2 };
                        let (e, _) = edges[i];
                        if self.edges[e].state == EdgeState::Unchecked {
                            stats.motions_checked += 1;
                        }
                        if !self.check_edge(space, e)? {
                            all_valid = false;
                            break;
                        }
                    }
                    if all_valid {
                        path = Some(self.assemble(s, &edges));
                    }
                }
                None => {
                    if stats.samples >= self.settings.max_samples {
                        break;
                    }
                    for _ in 0..self.settings.batch {
                        if stats.samples >= self.settings.max_samples
                            || t0.elapsed() >= self.settings.time_limit
                        {
                            break;
                        }
                        stats.samples += 1;
                        if let Some(q) = space.sample(&mut self.rng)? {
                            self.add_node(&q)?;
                        }
                    }
                }
            }
        }
        stats.nodes = self.nodes.len();
        stats.new_nodes = self.nodes.len() - nodes_before;
        stats.space = stats_delta(space.stats(), before);
        stats.elapsed = t0.elapsed();
        Ok(Plan { path, stats })
    }
}

/// Plan one query with a fresh lazy PRM roadmap (for several queries in one space, keep a
/// [`Roadmap`] and call [`Roadmap::query`]).
pub fn lazy_prm<S: ConfigSpace>(
    space: &mut S,
    start: &[f64],
    goal: &[f64],
    settings: &PrmSettings,
) -> Result<Plan, PlanError> {
    let mut roadmap = Roadmap::new(space.robot(), *settings);
    roadmap.query(space, start, goal)
}

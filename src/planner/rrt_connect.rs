//! RRT-Connect: J. Kuffner, S. LaValle, "RRT-Connect: An efficient approach to single-query
//! path planning", ICRA 2000. Two trees grow from the start and the goal; each round one tree
//! extends toward a random sample and the other tries to connect to the new node.

use std::time::{Duration, Instant};

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

use super::{check_endpoints, stats_delta, Plan, PlanError, PlanStats};
use crate::cspace::ConfigSpace;
use crate::nearest::NearestIndex;
use crate::settings::{positive, SettingsError};

/// Least share of a connect step's possible progress (`max_step`, or the gap if shorter) that
/// keeps the connect going.
const CONNECT_MIN_PROGRESS: f64 = 0.25;

/// Planner settings. Build with [`RrtSettings::new`] (checked).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RrtSettings {
    /// Longest extension toward a sample (joint-space distance).
    pub max_step: f64,
    /// Random samples drawn at most.
    pub max_samples: usize,
    /// Wall-clock limit (results that hit it depend on the machine's speed).
    pub time_limit: Duration,
    pub seed: u64,
}

impl RrtSettings {
    pub fn new(
        max_step: f64,
        max_samples: usize,
        time_limit: Duration,
        seed: u64,
    ) -> Result<Self, SettingsError> {
        if max_samples == 0 {
            return Err(SettingsError::OutOfRange {
                name: "max_samples",
                expected: "at least 1",
                got: 0.0,
            });
        }
        Ok(RrtSettings {
            max_step: positive("max_step", max_step)?,
            max_samples,
            time_limit,
            seed,
        })
    }
}

struct Tree {
    nodes: Vec<Vec<f64>>,
    parent: Vec<usize>,
    index: NearestIndex,
}

impl Tree {
    fn new(robot: &crate::model::Robot, root: &[f64]) -> Result<Self, PlanError> {
        let mut index = NearestIndex::new(robot);
        index.insert(root)?;
        Ok(Tree {
            nodes: vec![root.to_vec()],
            parent: vec![0],
            index,
        })
    }
    fn nearest(&self, q: &[f64]) -> Result<usize, PlanError> {
        Ok(self.index.nearest(q)?.map_or(0, |(i, _)| i))
    }
    /// Append a chain of nodes below `from`; returns the index of the last (or `from`).
    fn add_chain(&mut self, from: usize, chain: Vec<Vec<f64>>) -> Result<usize, PlanError> {
        let mut last = from;
        for q in chain {
            self.index.insert(&q)?;
            self.nodes.push(q);
            self.parent.push(last);
            last = self.nodes.len() - 1;
        }
        Ok(last)
    }
    /// Nodes from the root to `i`.
    fn path_to(&self, mut i: usize) -> Vec<Vec<f64>> {
        let mut out = vec![self.nodes[i].clone()];
        while i != 0 {
            i = self.parent[i];
            out.push(self.nodes[i].clone());
        }
        out.reverse();
        out
    }
}

/// Plan from `start` to `goal` with RRT-Connect. Nearest neighbours use the robot's
/// joint-space distance ([`NearestIndex`]), the distance of both spaces in
/// [`crate::cspace`].
pub fn rrt_connect<S: ConfigSpace>(
    space: &mut S,
    start: &[f64],
    goal: &[f64],
    settings: &RrtSettings,
) -> Result<Plan, PlanError> {
    let t0 = Instant::now();
    let before = space.stats();
    check_endpoints(space, start, goal)?;
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let robot = space.robot();
    let mut trees = [Tree::new(robot, start)?, Tree::new(robot, goal)?];
    let mut a = 0; // the tree that extends toward the sample this round
    let mut stats = PlanStats::default();
    let finish = |trees: &[Tree; 2], stats: &mut PlanStats, space: &S| {
        stats.nodes = trees[0].nodes.len() + trees[1].nodes.len();
        stats.new_nodes = stats.nodes - 2;
        stats.space = stats_delta(space.stats(), before);
        stats.elapsed = t0.elapsed();
    };
    // Try the direct connection first.
    let direct = space.extend(start, goal, f64::INFINITY)?;
    stats.motions_checked += 1;
    if direct.reached {
        let mut path = vec![start.to_vec()];
        path.extend(direct.path);
        finish(&trees, &mut stats, space);
        return Ok(Plan {
            path: Some(path),
            stats,
        });
    }
    while stats.samples < settings.max_samples && t0.elapsed() < settings.time_limit {
        stats.samples += 1;
        let Some(q_rand) = space.sample(&mut rng)? else {
            continue;
        };
        let near = trees[a].nearest(&q_rand)?;
        let ext = space.extend(&trees[a].nodes[near], &q_rand, settings.max_step)?;
        stats.motions_checked += 1;
        if ext.path.is_empty() {
            a = 1 - a;
            continue;
        }
        let new = trees[a].add_chain(near, ext.path)?;
        let q_new = trees[a].nodes[new].clone();
        // Connect the other tree toward q_new, step after step.
        let b = 1 - a;
        let mut from = trees[b].nearest(&q_new)?;
        // The time limit bounds the whole call, so it is checked between connect steps too.
        let mut gap = space.distance(&trees[b].nodes[from], &q_new);
        while t0.elapsed() < settings.time_limit {
            let ext = space.extend(&trees[b].nodes[from], &q_new, settings.max_step)?;
            stats.motions_checked += 1;
            let Some(end) = ext.path.last() else {
                break;
            };
            let reached = ext.reached;
            // A constrained extension can slide along the manifold while closing the gap only
            // a little; connecting on through such steps costs many projections for nothing.
            // Keep the nodes (they are valid) but stop connecting when a step closed less than
            // a quarter of what it could have.
            let left = space.distance(end, &q_new);
            let stalled =
                !reached && gap - left < CONNECT_MIN_PROGRESS * settings.max_step.min(gap);
            gap = left;
            from = trees[b].add_chain(from, ext.path)?;
            if stalled {
                break;
            }
            if reached {
                let (ia, ib) = (new, from);
                let mut first = trees[a].path_to(ia);
                let mut second = trees[b].path_to(ib);
                second.pop(); // q_new is already the end of `first`
                second.reverse();
                first.extend(second);
                if a == 1 {
                    first.reverse();
                }
                finish(&trees, &mut stats, space);
                return Ok(Plan {
                    path: Some(first),
                    stats,
                });
            }
        }
        a = 1 - a;
    }
    finish(&trees, &mut stats, space);
    Ok(Plan { path: None, stats })
}

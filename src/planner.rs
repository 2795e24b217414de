//! Sampling-based planners written once against [`ConfigSpace`]: the same code plans in the
//! free joint box and on a constraint manifold.
//!
//! RRT-Connect: J. Kuffner, S. LaValle, "RRT-Connect: An efficient approach to single-query
//! path planning", ICRA 2000. Two trees grow from the start and the goal; each round one tree
//! extends toward a random sample and the other tries to connect to the new node.
//! Nearest neighbours by linear scan (fine for trees of a few thousand nodes; a measured
//! spatial index comes with the roadmap planner).

use std::time::{Duration, Instant};

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use thiserror::Error;

use crate::cspace::{CSpaceError, CSpaceStats, ConfigSpace};
use crate::settings::{positive, SettingsError};

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

/// What the planner did.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct PlanStats {
    pub samples: usize,
    pub nodes: usize,
    pub space: CSpaceStats,
    pub elapsed: Duration,
}

/// A planner's answer: the path (start to goal, each consecutive pair joined by a valid
/// motion of the space), or `None` if none was found within the limits; and what it cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    pub path: Option<Vec<Vec<f64>>>,
    pub stats: PlanStats,
}

/// Why planning could not start.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum PlanError {
    #[error("the {which} configuration is not valid (limits, constraints or collision)")]
    InvalidEndpoint { which: &'static str },
    #[error(transparent)]
    Space(#[from] CSpaceError),
}

struct Tree {
    nodes: Vec<Vec<f64>>,
    parent: Vec<usize>,
}

impl Tree {
    fn new(root: &[f64]) -> Self {
        Tree {
            nodes: vec![root.to_vec()],
            parent: vec![0],
        }
    }
    fn nearest<S: ConfigSpace>(&self, space: &S, q: &[f64]) -> usize {
        let mut best = (0, f64::INFINITY);
        for (i, n) in self.nodes.iter().enumerate() {
            let d = space.distance(n, q);
            if d < best.1 {
                best = (i, d);
            }
        }
        best.0
    }
    /// Append a chain of nodes below `from`; returns the index of the last (or `from`).
    fn add_chain(&mut self, from: usize, chain: Vec<Vec<f64>>) -> usize {
        let mut last = from;
        for q in chain {
            self.nodes.push(q);
            self.parent.push(last);
            last = self.nodes.len() - 1;
        }
        last
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

/// Plan from `start` to `goal` with RRT-Connect.
pub fn rrt_connect<S: ConfigSpace>(
    space: &mut S,
    start: &[f64],
    goal: &[f64],
    settings: &RrtSettings,
) -> Result<Plan, PlanError> {
    let t0 = Instant::now();
    if !space.is_valid(start)? {
        return Err(PlanError::InvalidEndpoint { which: "start" });
    }
    if !space.is_valid(goal)? {
        return Err(PlanError::InvalidEndpoint { which: "goal" });
    }
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let mut trees = [Tree::new(start), Tree::new(goal)];
    let mut a = 0; // the tree that extends toward the sample this round
    let mut stats = PlanStats::default();
    let finish = |trees: &[Tree; 2], stats: &mut PlanStats, space: &S| {
        stats.nodes = trees[0].nodes.len() + trees[1].nodes.len();
        stats.space = space.stats();
        stats.elapsed = t0.elapsed();
    };
    // Try the direct connection first.
    let direct = space.extend(start, goal, f64::INFINITY)?;
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
        let near = trees[a].nearest(space, &q_rand);
        let ext = space.extend(&trees[a].nodes[near], &q_rand, settings.max_step)?;
        if ext.path.is_empty() {
            a = 1 - a;
            continue;
        }
        let new = trees[a].add_chain(near, ext.path);
        let q_new = trees[a].nodes[new].clone();
        // Connect the other tree toward q_new, step after step.
        let b = 1 - a;
        let mut from = trees[b].nearest(space, &q_new);
        loop {
            let ext = space.extend(&trees[b].nodes[from], &q_new, settings.max_step)?;
            if ext.path.is_empty() {
                break;
            }
            let reached = ext.reached;
            from = trees[b].add_chain(from, ext.path);
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

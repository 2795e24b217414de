//! Search with feedback over the stance graph.
//!
//! A weighted shortest-path search (Dijkstra, ties broken by the stances' order so the result
//! is deterministic) from the start stance yields a candidate hold sequence. Switches already
//! made cost nothing, so the candidate runs through what has been reached; the first switch
//! of the candidate whose target stance is not reached yet is attempted (switch pose, then the
//! leg inside the current stance to it). A failure raises that switch's weight (with
//! `feedback` on) and the search repeats, so effort moves away from what keeps failing: the
//! discrete lead with feedback of E. Plaku, L. Kavraki, M. Vardi, "Motion planning with
//! dynamics by a synergistic combination of layers of planning", IEEE Transactions on
//! Robotics 26(3), 2010. A switch that failed `attempts_per_switch` times is dropped. The
//! search ends when a goal stance is reached, at the time limit, or when no candidate
//! sequence is left.

use std::cmp::Ordering;
use std::collections::{BTreeMap, BTreeSet, BinaryHeap};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::graph::{EdgeWeights, StanceGraph, SwitchEdge};
use super::leg::plan_leg;
use super::region::{finish, RegionGoal};
use super::switch::{SwitchFailure, SwitchFinder, SwitchPose};
use super::{Context, RouteError};
use crate::scene::Stance;

/// How a reached stance was reached.
#[derive(Clone, Debug)]
pub(crate) struct Arrival {
    pub edge: SwitchEdge,
    /// Path inside `edge.from` from its configuration to the switch pose.
    pub leg: Vec<Vec<f64>>,
    pub pose: SwitchPose,
}

/// A stance the search reached: the configuration it holds there and how it got there.
#[derive(Clone, Debug)]
pub(crate) struct Reached {
    pub q: Vec<f64>,
    pub arrival: Option<Arrival>,
    pub depth: usize,
}

/// Attempts of one switch and why they failed.
#[derive(Clone, Debug, Default)]
pub(crate) struct EdgeRecord {
    pub attempts: usize,
    pub failures: Vec<SwitchFailure>,
}

/// Counts of the search's work.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize)]
pub struct SearchStats {
    /// Shortest-path searches run.
    pub searches: usize,
    /// Switches attempted (grabs and releases).
    pub switch_attempts: usize,
    /// Attempts that failed (no switch pose, or no leg to it).
    pub failed_switch_attempts: usize,
    /// Random samples drawn by the leg planner.
    pub leg_samples: usize,
    /// Switches dropped after failing too often.
    pub dropped_switches: usize,
    /// True if the time limit ended the search.
    pub timed_out: bool,
    /// Seconds spent finding switch poses and planning legs (not written: machine-dependent).
    #[serde(skip)]
    pub switch_pose_seconds: f64,
    #[serde(skip)]
    pub leg_seconds: f64,
}

pub(crate) struct SearchOutcome {
    pub reached: BTreeMap<Stance, Reached>,
    pub goal: Option<Stance>,
    pub records: BTreeMap<SwitchEdge, EdgeRecord>,
    pub stats: SearchStats,
    /// True when the search ran out of candidate sequences.
    pub exhausted: bool,
    /// For a region goal: the last leg inside the goal stance, into the region.
    pub final_leg: Option<Vec<Vec<f64>>>,
    /// Candidate goal stances struck off because no last leg into the region was found.
    pub struck: BTreeSet<Stance>,
}

#[derive(PartialEq)]
struct Entry {
    cost: f64,
    stance: Stance,
}
impl Eq for Entry {}
impl Ord for Entry {
    fn cmp(&self, other: &Self) -> Ordering {
        // Min-heap on cost, then on the stance's order.
        other
            .cost
            .total_cmp(&self.cost)
            .then_with(|| other.stance.cmp(&self.stance))
    }
}
impl PartialOrd for Entry {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

pub(crate) struct Search<'c, 'a> {
    ctx: &'c Context<'a>,
    pub graph: StanceGraph,
    weights: EdgeWeights,
    dropped: BTreeSet<SwitchEdge>,
    neighbours: BTreeMap<Stance, Vec<SwitchEdge>>,
    /// Candidate goal stances struck off (region goals whose last leg failed).
    struck: BTreeSet<Stance>,
}

impl<'c, 'a> Search<'c, 'a> {
    pub(crate) fn new(ctx: &'c Context<'a>) -> Self {
        Search {
            ctx,
            graph: StanceGraph::new(ctx.robot, ctx.scene),
            weights: EdgeWeights::default(),
            dropped: BTreeSet::new(),
            neighbours: BTreeMap::new(),
            struck: BTreeSet::new(),
        }
    }

    fn edges(&mut self, s: &Stance) -> Vec<SwitchEdge> {
        if let Some(e) = self.neighbours.get(s) {
            return e.clone();
        }
        let (edges, _) = self.graph.neighbours(s, self.ctx.scene.holds.len());
        self.neighbours.insert(s.clone(), edges.clone());
        edges
    }

    /// Shortest candidate sequence from `start` to a goal stance under the current weights,
    /// and whether it ends at a goal. When no goal stance can be reached in the graph, the
    /// sequence ends at the stance closest to the goal (`progress`, metres; ties: the cheaper),
    /// so the search still gets as far as it can and the explanation can say where it stuck.
    fn candidate(
        &mut self,
        start: &Stance,
        reached: &BTreeMap<Stance, Reached>,
        is_goal: &dyn Fn(&Stance) -> bool,
        progress: &dyn Fn(&Stance) -> f64,
    ) -> Option<(Vec<Stance>, bool)> {
        let path_to = |prev: &BTreeMap<Stance, Stance>, mut s: Stance| {
            let mut seq = vec![s.clone()];
            while let Some(p) = prev.get(&s) {
                seq.push(p.clone());
                s = p.clone();
            }
            seq.reverse();
            seq
        };
        let mut closest: Option<(f64, f64, Stance)> = None;
        let mut dist: BTreeMap<Stance, f64> = BTreeMap::new();
        let mut prev: BTreeMap<Stance, Stance> = BTreeMap::new();
        let mut heap = BinaryHeap::new();
        dist.insert(start.clone(), 0.0);
        heap.push(Entry {
            cost: 0.0,
            stance: start.clone(),
        });
        let mut done = BTreeSet::new();
        while let Some(Entry { cost, stance }) = heap.pop() {
            if !done.insert(stance.clone()) {
                continue;
            }
            if is_goal(&stance) && !self.struck.contains(&stance) {
                return Some((path_to(&prev, stance), true));
            }
            let d = progress(&stance);
            if closest
                .as_ref()
                .is_none_or(|(bd, bc, _)| d < *bd || (d == *bd && cost < *bc))
            {
                closest = Some((d, cost, stance.clone()));
            }
            for e in self.edges(&stance) {
                if self.dropped.contains(&e) || done.contains(&e.to) {
                    continue;
                }
                let made = reached
                    .get(&e.to)
                    .and_then(|r| r.arrival.as_ref())
                    .is_some_and(|a| a.edge == e);
                let w = if made {
                    0.0
                } else {
                    self.graph.base_weight(&e) * self.weights.factor(&e)
                };
                let c = cost + w;
                if dist.get(&e.to).is_none_or(|&d| c < d) {
                    dist.insert(e.to.clone(), c);
                    prev.insert(e.to.clone(), stance.clone());
                    heap.push(Entry {
                        cost: c,
                        stance: e.to.clone(),
                    });
                }
            }
        }
        closest.map(|(_, _, s)| (path_to(&prev, s), false))
    }

    /// Attempt one switch from the reached stance `from` (configuration `q`).
    fn attempt<R: Rng>(
        &self,
        finder: &SwitchFinder<'_, '_>,
        edge: &SwitchEdge,
        q: &[f64],
        effort: usize,
        rng: &mut R,
        stats: &mut SearchStats,
    ) -> Result<Result<Arrival, SwitchFailure>, RouteError> {
        if !edge.grab {
            // A release: the current configuration satisfies both stances.
            let (clearance, _) = finder.clearance(q)?;
            return Ok(Ok(Arrival {
                edge: edge.clone(),
                leg: vec![q.to_vec()],
                pose: SwitchPose {
                    q: q.to_vec(),
                    grip_position: None,
                    reach_margin: self.ctx.robot.reach_margin(q),
                    clearance,
                },
            }));
        }
        let t = std::time::Instant::now();
        let found = finder.grab(&edge.from, q, &edge.effector, edge.hold, effort, rng)?;
        stats.switch_pose_seconds += t.elapsed().as_secs_f64();
        let pose = match found {
            Ok(p) => p,
            Err(f) => return Ok(Err(f)),
        };
        let t = std::time::Instant::now();
        let leg = plan_leg(self.ctx, &edge.from, q, &pose.q, rng.random())?;
        stats.leg_seconds += t.elapsed().as_secs_f64();
        stats.leg_samples += leg.samples;
        match leg.path {
            Some(path) => Ok(Ok(Arrival {
                edge: edge.clone(),
                leg: path,
                pose,
            })),
            None => Ok(Err(SwitchFailure::NoLeg {
                stance: edge.from.describe(self.ctx.scene),
                samples: leg.samples,
                clearance: pose.clearance,
            })),
        }
    }

    /// Run the search from the start. With `region`, a goal stance is only a candidate: the
    /// search finishes there with a last leg into the region, or strikes it off and goes on.
    pub(crate) fn run(
        mut self,
        is_goal: &dyn Fn(&Stance) -> bool,
        progress: &dyn Fn(&Stance) -> f64,
        region: Option<&RegionGoal>,
    ) -> Result<SearchOutcome, RouteError> {
        let ctx = self.ctx;
        let start = ctx.start.stance.clone();
        let mut reached = BTreeMap::new();
        reached.insert(
            start.clone(),
            Reached {
                q: ctx.start.q.clone(),
                arrival: None,
                depth: 0,
            },
        );
        let mut records: BTreeMap<SwitchEdge, EdgeRecord> = BTreeMap::new();
        let mut stats = SearchStats::default();
        let mut rng = ChaCha8Rng::seed_from_u64(ctx.limits.seed);
        let finder = SwitchFinder::new(ctx);
        let mut goal = None;
        let mut final_leg = None;
        let mut exhausted = false;
        // Finish in a reached goal stance: at once, or (region goals) with a last leg.
        let mut arrive = |search: &mut Self,
                          stance: &Stance,
                          reached: &BTreeMap<Stance, Reached>,
                          rng: &mut ChaCha8Rng|
         -> Result<bool, RouteError> {
            let Some(region) = region else {
                return Ok(true);
            };
            let Some(here) = reached.get(stance) else {
                return Ok(false);
            };
            match finish(ctx, region, stance, &here.q, rng)? {
                Some(path) => {
                    final_leg = Some(path);
                    Ok(true)
                }
                None => {
                    search.struck.insert(stance.clone());
                    Ok(false)
                }
            }
        };
        loop {
            if is_goal(&start)
                && !self.struck.contains(&start)
                && arrive(&mut self, &start, &reached, &mut rng)?
            {
                goal = Some(start.clone());
                break;
            }
            if ctx.remaining().is_zero() {
                stats.timed_out = true;
                break;
            }
            stats.searches += 1;
            let Some((seq, to_goal)) = self.candidate(&start, &reached, is_goal, progress) else {
                exhausted = true;
                break;
            };
            let k = seq
                .iter()
                .rposition(|s| reached.contains_key(s))
                .unwrap_or(0);
            if k + 1 == seq.len() {
                if !to_goal {
                    exhausted = true; // as close to the goal as the graph allows
                    break;
                }
                let last = seq[k].clone();
                if arrive(&mut self, &last, &reached, &mut rng)? {
                    goal = Some(last);
                    break;
                }
                continue; // struck off: look for another goal stance
            }
            let (from, to) = (&seq[k], &seq[k + 1]);
            let Some(edge) = self.edges(from).into_iter().find(|e| &e.to == to) else {
                exhausted = true;
                break;
            };
            let Some(here) = reached.get(from) else {
                exhausted = true;
                break;
            };
            let (q, depth) = (here.q.clone(), here.depth);
            stats.switch_attempts += 1;
            let record = records.entry(edge.clone()).or_default();
            record.attempts += 1;
            let effort = record.attempts;
            match self.attempt(&finder, &edge, &q, effort, &mut rng, &mut stats)? {
                Ok(arrival) => {
                    reached.insert(
                        to.clone(),
                        Reached {
                            q: arrival.pose.q.clone(),
                            arrival: Some(arrival),
                            depth: depth + 1,
                        },
                    );
                }
                Err(failure) => {
                    stats.failed_switch_attempts += 1;
                    let record = records.entry(edge.clone()).or_default();
                    record.failures.push(failure);
                    if ctx.settings.feedback {
                        self.weights.raise(&edge, ctx.settings.failure_factor);
                    }
                    if record.attempts >= ctx.settings.attempts_per_switch {
                        self.dropped.insert(edge);
                        stats.dropped_switches += 1;
                    }
                }
            }
        }
        Ok(SearchOutcome {
            reached,
            goal,
            records,
            stats,
            exhausted,
            final_leg,
            struck: self.struck,
        })
    }
}

//! The stance graph: nodes are stances (effector -> hold), edges are switches (one effector
//! grabs a hold, or releases its hold, the others unchanged). Built lazily: the neighbours of
//! a stance are generated when the search reaches it, after a cheap geometric test.
//!
//! Reach pruning: an effector can grab hold `H` only if `H` is within reach of every hold the
//! other effectors grip. The reach bound between two effectors is computed from the robot's
//! link geometry ([`crate::reach::effector_span`]: the length of the kinematic-tree path
//! between their grip frames). A fixed-base robot also has its root as an anchor
//! ([`crate::reach::link_point_bound`]). The hold distance is the exact distance between the
//! hold segments (a point hold is a segment of length 0), so pruning never removes a switch
//! that could be feasible.
//!
//! Rule for free-flying robots (a floating joint anywhere in the tree): at least one grip at
//! all times, so the empty stance is never a node (common practice for free-flying
//! climbers: a body with no grip drifts out of control).

use std::collections::BTreeMap;

use nalgebra::{Point3, Vector3};

use crate::model::{JointKind, Robot};
use crate::reach::{effector_span, hold_segment, link_point_bound, segment_distance};
use crate::scenario::Goal;
use crate::scene::{Scene, Stance};

/// A finite bound, or `None`.
fn finite(b: Option<f64>) -> Option<f64> {
    b.filter(|v| v.is_finite())
}

/// One switch: from one stance to another, `effector` grabbing (`grab == true`) or releasing
/// `hold`.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct SwitchEdge {
    pub from: Stance,
    pub to: Stance,
    pub effector: String,
    pub hold: usize,
    pub grab: bool,
}

/// A grab that the reach test ruled out before any projection: the hold is `excess` metres
/// farther from `anchor_hold` than the reach bound between the two effectors.
#[derive(Clone, Debug, PartialEq)]
pub struct PrunedGrab {
    pub edge: SwitchEdge,
    /// The hold (or `None`: the robot's fixed root) the distance is measured from.
    pub anchor_hold: Option<usize>,
    /// The effector gripping the anchor hold (`None` for the root).
    pub anchor_effector: Option<String>,
    /// Distance between the holds (metres).
    pub distance: f64,
    /// Reach bound between the two effectors (metres).
    pub bound: f64,
    /// `distance - bound` (positive).
    pub excess: f64,
}

/// The stance graph of one robot in one scene.
#[derive(Clone, Debug)]
pub struct StanceGraph {
    /// Effector names in the robot's order.
    pub effectors: Vec<String>,
    /// Reach bound between effectors `i` and `j` (`None`: unbounded).
    pub pair_bound: Vec<Vec<Option<f64>>>,
    /// Reach bound from each effector's grip frame to the root link's origin (`None`: the path
    /// has a floating joint, or is unbounded).
    pub root_bound: Vec<Option<f64>>,
    /// Segments of the holds (start, end); `None` for handles (they move).
    pub hold_segments: Vec<Option<(Point3<f64>, Point3<f64>)>>,
    /// True when the robot has a floating joint: every stance keeps at least one grip.
    pub free_flying: bool,
}

impl StanceGraph {
    pub fn new(robot: &Robot, scene: &Scene) -> Self {
        let effectors: Vec<String> = robot.effectors().iter().map(|e| e.name.clone()).collect();
        let n = effectors.len();
        let mut pair_bound = vec![vec![None; n]; n];
        for i in 0..n {
            for j in 0..n {
                if i != j {
                    pair_bound[i][j] =
                        finite(effector_span(robot, &effectors[i], &effectors[j]).ok());
                }
            }
        }
        let root_bound = effectors
            .iter()
            .map(|e| {
                let ef = robot.effector(e)?;
                finite(
                    link_point_bound(
                        robot,
                        0,
                        Vector3::zeros(),
                        ef.link,
                        ef.grip.translation.vector,
                    )
                    .ok(),
                )
            })
            .collect();
        let hold_segments = scene.holds.iter().map(hold_segment).collect();
        let free_flying = robot
            .joints()
            .iter()
            .any(|j| matches!(j.kind, JointKind::Floating));
        StanceGraph {
            effectors,
            pair_bound,
            root_bound,
            hold_segments,
            free_flying,
        }
    }

    fn effector_index(&self, name: &str) -> Option<usize> {
        self.effectors.iter().position(|e| e == name)
    }

    /// Smallest distance between two holds' geometry (0 when either is a handle).
    pub fn hold_distance(&self, a: usize, b: usize) -> f64 {
        match (
            self.hold_segments.get(a).copied().flatten(),
            self.hold_segments.get(b).copied().flatten(),
        ) {
            (Some(sa), Some(sb)) => segment_distance(&sa.0, &sa.1, &sb.0, &sb.1),
            _ => 0.0,
        }
    }

    /// The reach test for `effector` grabbing `hold` while the others keep `stance`'s grips:
    /// `None` when it passes, else the most violated anchor.
    pub fn reach_test(&self, stance: &Stance, effector: &str, hold: usize) -> Option<PrunedGrab> {
        let e = self.effector_index(effector)?;
        let mut worst: Option<PrunedGrab> = None;
        let edge = || SwitchEdge {
            from: stance.clone(),
            to: stance.clone().with(effector, hold),
            effector: effector.to_string(),
            hold,
            grab: true,
        };
        for (other, &h) in &stance.grips {
            let Some(o) = self.effector_index(other) else {
                continue;
            };
            if o == e {
                continue;
            }
            let Some(bound) = self.pair_bound[o][e] else {
                continue;
            };
            let distance = self.hold_distance(h, hold);
            let excess = distance - bound;
            if excess > 0.0 && worst.as_ref().is_none_or(|w| excess > w.excess) {
                worst = Some(PrunedGrab {
                    edge: edge(),
                    anchor_hold: Some(h),
                    anchor_effector: Some(other.clone()),
                    distance,
                    bound,
                    excess,
                });
            }
        }
        if !self.free_flying {
            if let (Some(bound), Some(Some((a, b)))) =
                (self.root_bound[e], self.hold_segments.get(hold).copied())
            {
                let o = Point3::origin();
                let distance = segment_distance(&a, &b, &o, &o);
                let excess = distance - bound;
                if excess > 0.0 && worst.as_ref().is_none_or(|w| excess > w.excess) {
                    worst = Some(PrunedGrab {
                        edge: edge(),
                        anchor_hold: None,
                        anchor_effector: None,
                        distance,
                        bound,
                        excess,
                    });
                }
            }
        }
        worst
    }

    /// The switches out of `stance`, in a fixed order (effector order, then hold index):
    /// those that pass the reach test, and those it ruled out.
    pub fn neighbours(&self, stance: &Stance, holds: usize) -> (Vec<SwitchEdge>, Vec<PrunedGrab>) {
        let mut edges = Vec::new();
        let mut pruned = Vec::new();
        for e in &self.effectors {
            if let Some(&h) = stance.grips.get(e) {
                if self.free_flying && stance.grips.len() <= 1 {
                    continue; // never let go of the last grip
                }
                edges.push(SwitchEdge {
                    from: stance.clone(),
                    to: stance.clone().without(e),
                    effector: e.clone(),
                    hold: h,
                    grab: false,
                });
                continue;
            }
            for hold in 0..holds {
                // One effector per hold.
                if stance.grips.values().any(|&g| g == hold) {
                    continue;
                }
                match self.reach_test(stance, e, hold) {
                    Some(p) => pruned.push(p),
                    None => edges.push(SwitchEdge {
                        from: stance.clone(),
                        to: stance.clone().with(e.clone(), hold),
                        effector: e.clone(),
                        hold,
                        grab: true,
                    }),
                }
            }
        }
        (edges, pruned)
    }

    /// Base weight of a switch: 1 per switch plus `d + 6 d^2` for the distance `d` (metres) the
    /// grabbed hold lies from the holds kept (long reaches, near the edge of the workspace,
    /// fail more often, so they cost more than their length). Releases cost 1. The factor 6
    /// makes one grab over twice a distance dearer than two grabs and a release over it
    /// (`1 + 2d + 24 d^2 > 2 (1 + d + 6 d^2) + 1` for every `d > 0.41 m`): measured on the
    /// corridors, with `d + d^2` the search skipped rungs and failed 19 % of its attempts on
    /// 16 bars; with `6 d^2`, 1.5 % and a flat cost per switch (`docs/performance.md`).
    pub fn base_weight(&self, edge: &SwitchEdge) -> f64 {
        if !edge.grab {
            return 1.0;
        }
        let d = edge
            .from
            .grips
            .values()
            .map(|&h| self.hold_distance(h, edge.hold))
            .fold(0.0, f64::max);
        1.0 + d + 6.0 * d * d
    }

    /// Whether `stance` satisfies a goal that is about stances (`Stance`, `Grip`); `None` for
    /// goals that are not (a region, a configuration).
    pub fn is_goal(&self, stance: &Stance, goal: &Goal) -> Option<bool> {
        match goal {
            Goal::Stance(s) => Some(s == stance),
            Goal::Grip { effector, hold } => Some(stance.grips.get(effector) == Some(hold)),
            _ => None,
        }
    }

    /// How far `stance`'s holds are from the goal (metres; for reporting the furthest stance
    /// reached): the smallest distance from a gripped hold to a goal hold or region.
    pub fn distance_to_goal(&self, stance: &Stance, goal: &Goal) -> f64 {
        let goal_holds: Vec<usize> = match goal {
            Goal::Stance(s) => s.grips.values().copied().collect(),
            Goal::Grip { hold, .. } => vec![*hold],
            Goal::BodyInRegion { min, max, .. } => {
                return stance
                    .grips
                    .values()
                    .filter_map(|&h| self.hold_segments.get(h).copied().flatten())
                    .map(|(a, b)| {
                        let c = nalgebra::center(&a, &b);
                        let q = Point3::from(c.coords.sup(&min.coords).inf(&max.coords));
                        (c - q).norm()
                    })
                    .fold(f64::INFINITY, f64::min);
            }
            _ => return 0.0,
        };
        let mut best = f64::INFINITY;
        for &g in &goal_holds {
            for &h in stance.grips.values() {
                best = best.min(self.hold_distance(g, h));
            }
        }
        best
    }
}

/// Weights of the switches, raised by failures (the feedback of the search).
#[derive(Clone, Debug, Default)]
pub struct EdgeWeights {
    factor: BTreeMap<SwitchEdge, f64>,
}

impl EdgeWeights {
    pub fn factor(&self, e: &SwitchEdge) -> f64 {
        self.factor.get(e).copied().unwrap_or(1.0)
    }
    pub fn raise(&mut self, e: &SwitchEdge, by: f64) {
        *self.factor.entry(e.clone()).or_insert(1.0) *= by;
    }
}

//! Switch feasibility over a scene: for each effector and each pair of holds it may move
//! between (while another effector keeps a hold), whether the move can be made, with the
//! reach margin and clearance at the best switch pose. The same reach test, switch-pose
//! search and leg planner as route planning are used, so the verdicts agree with routes: a
//! move reported out of reach is never a switch of a route (the reach test prunes it from the
//! stance graph), and a feasible move has a switch pose checked by the verifier.
//!
//! A move of effector `e` from hold `a` to hold `b` while effector `o` keeps hold `h`: first
//! a pose on `{o: h, e: a}` (projected from the scenario's start, its floating base shifted
//! to the holds), then, from there, the switch pose grabbing `b` from `{o: h}`, checked by
//! the verifier. The leg between the two is route planning's business and not checked here.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use super::graph::StanceGraph;
use super::switch::{SwitchFailure, SwitchFinder};
use super::{with_context, Context, RouteError, RouteSettings};
use crate::model::JointKind;
use crate::projection::{project, ProjectionBuffer};
use crate::scenario::Scenario;
use crate::scene::Stance;
use crate::verify::{verify_path, VerifySettings};

/// The verdict on one move.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// A verified switch pose was found.
    Feasible,
    /// Ruled out by the reach bound (certain: no configuration can make it).
    OutOfReach,
    /// Within the reach bound, but no switch pose or leg was found at the effort given.
    NotFound,
}

/// One move: `effector` from `from_hold` to `to_hold` while `anchor_effector` keeps
/// `anchor_hold`.
#[derive(Clone, Debug, Serialize)]
pub struct FeasibilityEntry {
    pub effector: String,
    pub anchor_effector: String,
    pub anchor_hold: String,
    pub from_hold: String,
    pub to_hold: String,
    pub verdict: Verdict,
    /// At the best switch pose (feasible moves only).
    pub reach_margin: Option<f64>,
    pub clearance: Option<f64>,
    pub grip_position: Option<f64>,
    /// Why not (infeasible moves).
    pub reason: Option<SwitchFailure>,
    /// Hold indices (not written): anchor, from, to.
    #[serde(skip)]
    pub holds: [usize; 3],
    /// The verified switch pose (not written).
    #[serde(skip)]
    pub pose: Option<Vec<f64>>,
}

/// Feasibility of every move in a scene.
#[derive(Clone, Debug, Serialize)]
pub struct FeasibilityReport {
    pub format_version: u32,
    pub scenario: String,
    pub tolerance: f64,
    pub min_clearance: f64,
    pub seed: u64,
    pub entries: Vec<FeasibilityEntry>,
}

impl FeasibilityReport {
    /// The entry for a move, if the report has it.
    pub fn find(
        &self,
        effector: &str,
        anchor: usize,
        from: usize,
        to: usize,
    ) -> Option<&FeasibilityEntry> {
        self.entries
            .iter()
            .find(|e| e.effector == effector && e.holds == [anchor, from, to])
    }
}

impl std::fmt::Display for FeasibilityReport {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        writeln!(
            f,
            "switch feasibility for `{}` (tolerance {:.1e}, clearance >= {} m, seed {})",
            self.scenario, self.tolerance, self.min_clearance, self.seed
        )?;
        writeln!(
            f,
            "{:<16} {:<12} {:<12} {:<12} {:<12} {:>9} {:>9}  note",
            "effector", "keeps", "from", "to", "verdict", "margin", "clear"
        )?;
        for e in &self.entries {
            let v = match e.verdict {
                Verdict::Feasible => "feasible",
                Verdict::OutOfReach => "out of reach",
                Verdict::NotFound => "not found",
            };
            let num = |x: Option<f64>| x.map_or_else(|| "-".to_string(), |v| format!("{v:.3}"));
            writeln!(
                f,
                "{:<16} {:<12} {:<12} {:<12} {:<12} {:>9} {:>9}  {}",
                e.effector,
                e.anchor_hold,
                e.from_hold,
                e.to_hold,
                v,
                num(e.reach_margin),
                num(e.clearance),
                e.reason
                    .as_ref()
                    .map_or_else(String::new, |r| r.to_string())
            )?;
        }
        Ok(())
    }
}

/// A seed for a stance: the start configuration with its floating base moved by the offset
/// between the holds' centres and the start stance's holds' centres.
fn seed_for(ctx: &Context<'_>, graph: &StanceGraph, holds: &[usize]) -> Vec<f64> {
    let centre = |hs: &mut dyn Iterator<Item = usize>| {
        let mut sum = nalgebra::Vector3::zeros();
        let mut n = 0.0;
        for h in hs {
            if let Some(Some((a, b))) = graph.hold_segments.get(h) {
                sum += nalgebra::center(a, b).coords;
                n += 1.0;
            }
        }
        (n > 0.0).then(|| sum / n)
    };
    let mut q = ctx.start.q.clone();
    let from = centre(&mut ctx.start.stance.grips.values().copied());
    let to = centre(&mut holds.iter().copied());
    if let (Some(from), Some(to)) = (from, to) {
        if let Some(j) = ctx
            .robot
            .joints()
            .iter()
            .find(|j| matches!(j.kind, JointKind::Floating))
        {
            for k in 0..3 {
                q[j.q_index + k] += to[k] - from[k];
            }
        }
    }
    q
}

/// Check every move of every effector in `scenario`'s scene (robots with two or more
/// effectors: one moves, one keeps its hold).
pub fn check_feasibility(
    scenario: &Scenario,
    settings: &RouteSettings,
) -> Result<FeasibilityReport, RouteError> {
    with_context(scenario, settings, |ctx| {
        let graph = StanceGraph::new(ctx.robot, ctx.scene);
        let finder = SwitchFinder::new(ctx);
        let mut rng = ChaCha8Rng::seed_from_u64(ctx.limits.seed);
        let name = |h: usize| {
            ctx.scene
                .holds
                .get(h)
                .map_or("?".to_string(), |h| h.name.clone())
        };
        let n = ctx.scene.holds.len();
        let pose_vs = VerifySettings::new(ctx.verify_resolution(), ctx.limits.tolerance, 1.0)?;
        let mut entries = Vec::new();
        for e in &graph.effectors {
            for o in graph.effectors.iter().filter(|o| *o != e) {
                for h in 0..n {
                    let anchor = Stance::new().with(o.clone(), h);
                    // A pose on {o: h, e: a} for every reachable a, computed once.
                    let mut start_poses: Vec<Option<Vec<f64>>> = vec![None; n];
                    for a in (0..n).filter(|&a| a != h) {
                        if graph.reach_test(&anchor, e, a).is_some() {
                            continue;
                        }
                        let stance = anchor.clone().with(e.clone(), a);
                        let stack = stance.constraints(ctx.robot, ctx.scene, ctx.constant)?;
                        let mut q = seed_for(ctx, &graph, &[h, a]);
                        let mut buf = ProjectionBuffer::new(ctx.robot, &stack);
                        let rep = project(ctx.robot, &stack, &ctx.projection, &mut q, &mut buf)?;
                        if rep.converged() && finder.clearance(&q)?.0 >= ctx.settings.min_clearance
                        {
                            start_poses[a] = Some(q);
                        }
                    }
                    for a in (0..n).filter(|&a| a != h) {
                        for b in (0..n).filter(|&b| b != h && b != a) {
                            let mut entry = FeasibilityEntry {
                                effector: e.clone(),
                                anchor_effector: o.clone(),
                                anchor_hold: name(h),
                                from_hold: name(a),
                                to_hold: name(b),
                                verdict: Verdict::NotFound,
                                reach_margin: None,
                                clearance: None,
                                grip_position: None,
                                reason: None,
                                holds: [h, a, b],
                                pose: None,
                            };
                            let pruned = graph
                                .reach_test(&anchor, e, b)
                                .or_else(|| graph.reach_test(&anchor, e, a));
                            if let Some(p) = pruned {
                                entry.verdict = Verdict::OutOfReach;
                                entry.reason = Some(SwitchFailure::OutOfReach {
                                    hold: name(p.edge.hold),
                                    anchor: name(h),
                                    anchor_effector: o.clone(),
                                    distance: p.distance,
                                    bound: p.bound,
                                    by: p.excess,
                                });
                                entries.push(entry);
                                continue;
                            }
                            let Some(qa) = &start_poses[a] else {
                                entry.reason = Some(SwitchFailure::NoStartPose { hold: name(a) });
                                entries.push(entry);
                                continue;
                            };
                            // The widest search a route's switch gets (its last attempt).
                            let effort = ctx.settings.attempts_per_switch;
                            match finder.grab(&anchor, qa, e, b, effort, &mut rng)? {
                                Err(f) => entry.reason = Some(f),
                                Ok(pose) => {
                                    let target = anchor.clone().with(e.clone(), b);
                                    let stack =
                                        target.constraints(ctx.robot, ctx.scene, ctx.constant)?;
                                    let rep = verify_path(
                                        ctx.robot,
                                        &stack,
                                        ctx.collision,
                                        std::slice::from_ref(&pose.q),
                                        &pose_vs,
                                    )?;
                                    if rep.passed() {
                                        entry.verdict = Verdict::Feasible;
                                        entry.reach_margin = Some(pose.reach_margin);
                                        entry.clearance = Some(pose.clearance);
                                        entry.grip_position = pose.grip_position;
                                        entry.pose = Some(pose.q);
                                    }
                                }
                            }
                            entries.push(entry);
                        }
                    }
                }
            }
        }
        Ok(FeasibilityReport {
            format_version: super::FORMAT_VERSION,
            scenario: scenario.name.clone(),
            tolerance: ctx.limits.tolerance,
            min_clearance: ctx.settings.min_clearance,
            seed: ctx.limits.seed,
            entries,
        })
    })
}

//! Switch poses: a configuration satisfying two stances at once (the stance before a grab and
//! the stance after it), within limits and collision-free with clearance.
//!
//! The pose is found by projecting onto the union of both stances' constraint stacks from
//! several seeds near the current configuration. On a bar, the grip position is chosen, not
//! given: candidate positions are scanned along the bar (each one a point grip at the bar
//! frame there), and the best is refined with Brent's method (R. Brent, "Algorithms for
//! Minimization without Derivatives", 1973; the argmin implementation) for the score
//! `reach margin - 0.05 x distance from the current configuration`. Every attempt that fails
//! records why, so a switch that never succeeds can be explained.

use std::cell::RefCell;
use std::sync::Arc;

use argmin::core::{CostFunction, Error as ArgminError, Executor};
use argmin::solver::brent::BrentOpt;
use nalgebra::{Translation3, Unit, Vector3};
use rand::Rng;
use serde::Serialize;

use super::{Context, RouteError};
use crate::collision::{Body, CollisionScratch};
use crate::constraint::{BarGrip, Constraint, ConstraintStack, FrameMatch, FrameRef, MatchMode};
use crate::kinematics::forward_kinematics;
use crate::math::Pose;
use crate::projection::{project, ProjectionBuffer, StopReason};
use crate::scene::{HoldKind, Stance};

/// A configuration satisfying both stances of a switch.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SwitchPose {
    pub q: Vec<f64>,
    /// Metres from the bar's start, for a grab of a bar.
    pub grip_position: Option<f64>,
    /// Reach margin (distance to the nearest joint limit, radians or metres).
    pub reach_margin: f64,
    /// Smallest signed distance between bodies (metres; infinite with no obstacles and no
    /// self-collision pairs).
    pub clearance: f64,
}

/// Why one attempt at a switch failed (at its best attempt).
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
#[non_exhaustive]
pub enum SwitchFailure {
    /// Ruled out by the reach test: the hold is `by` metres beyond the reach bound `bound`
    /// from the hold `anchor` (gripped by `anchor_effector`), `distance` metres away.
    OutOfReach {
        hold: String,
        anchor: String,
        anchor_effector: String,
        distance: f64,
        bound: f64,
        by: f64,
    },
    /// No projection reached the hold: the grip rows' residual at the best attempt.
    NotReached { hold: String, residual: f64 },
    /// The best pose on both stances collides (or is closer than the clearance asked for).
    Collision {
        hold: String,
        first: String,
        second: String,
        clearance: f64,
    },
    /// The projection stopped with joint `joint` at its limit (residual left).
    AtLimit {
        hold: String,
        joint: String,
        residual: f64,
    },
    /// The move cannot start: no configuration was found that holds `hold` together with
    /// the holds the other effectors keep (checked by the feasibility report).
    NoStartPose { hold: String },
    /// A switch pose was found but no leg inside the stance reaches it.
    NoLeg {
        stance: String,
        samples: usize,
        clearance: f64,
    },
}

impl std::fmt::Display for SwitchFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SwitchFailure::OutOfReach {
                hold,
                anchor,
                anchor_effector,
                distance,
                bound,
                by,
            } => write!(
                f,
                "hold `{hold}` out of reach by {by:.3} m: {distance:.3} m from `{anchor}` \
                 (held by {anchor_effector}), reach bound {bound:.3} m"
            ),
            SwitchFailure::NotReached { hold, residual } => write!(
                f,
                "hold `{hold}` out of reach by {residual:.3} m (grip residual at the best attempt)"
            ),
            SwitchFailure::NoStartPose { hold } => write!(
                f,
                "no configuration holds `{hold}` together with the kept holds: the move cannot start"
            ),
            SwitchFailure::Collision {
                hold,
                first,
                second,
                clearance,
            } => write!(
                f,
                "grabbing `{hold}`: collision between {first} and {second} (clearance {clearance:.4} m)"
            ),
            SwitchFailure::AtLimit {
                hold,
                joint,
                residual,
            } => write!(
                f,
                "grabbing `{hold}`: joint `{joint}` at its limit (residual {residual:.3} m)"
            ),
            SwitchFailure::NoLeg {
                stance,
                samples,
                clearance,
            } => write!(
                f,
                "no leg inside stance {stance} reaches the switch pose ({samples} samples; \
                 pose clearance {clearance:.4} m)"
            ),
        }
    }
}

/// One projected candidate.
#[derive(Clone, Debug)]
struct Attempt {
    q: Vec<f64>,
    stop: StopReason,
    /// Residual of the new grip's rows.
    grip_residual: f64,
    /// Clearance and the closest pair, when projected.
    clearance: f64,
    pair: Option<(Body, Body)>,
    margin: f64,
    score: f64,
}

impl Attempt {
    fn valid(&self, min_clearance: f64) -> bool {
        self.stop == StopReason::Converged && self.clearance >= min_clearance
    }
}

/// Scores at or above this mean a valid pose; below, the attempt failed.
const INVALID: f64 = -1e6;

/// Finds switch poses for grabs in one scenario.
pub(crate) struct SwitchFinder<'c, 'a> {
    ctx: &'c Context<'a>,
    scratch: RefCell<CollisionScratch>,
    poses: RefCell<Vec<Pose>>,
}

impl<'c, 'a> SwitchFinder<'c, 'a> {
    pub(crate) fn new(ctx: &'c Context<'a>) -> Self {
        SwitchFinder {
            ctx,
            scratch: RefCell::new(CollisionScratch::new()),
            poses: RefCell::new(vec![Pose::identity(); ctx.robot.links().len()]),
        }
    }

    /// Human-readable name of a collision body.
    pub(crate) fn body_name(&self, b: Body) -> String {
        match b {
            Body::Link(l) => self
                .ctx
                .robot
                .links()
                .get(l)
                .map_or_else(|| format!("link {l}"), |l| format!("link `{}`", l.name)),
            Body::Obstacle(o) => self.ctx.scene.obstacles.get(o).map_or_else(
                || format!("obstacle {o}"),
                |o| format!("obstacle `{}`", o.name),
            ),
        }
    }

    /// Clearance at `q` and the pair attaining it.
    pub(crate) fn clearance(&self, q: &[f64]) -> Result<(f64, Option<(Body, Body)>), RouteError> {
        let Some(model) = self.ctx.collision else {
            return Ok((f64::INFINITY, None));
        };
        let mut poses = self.poses.borrow_mut();
        forward_kinematics(self.ctx.robot, q, &mut poses)
            .map_err(crate::constraint::ConstraintError::from)?;
        let c = model.clearance(&poses, &mut self.scratch.borrow_mut())?;
        Ok((c.distance, c.pair))
    }

    /// Project `seed` onto `others` + `grip`, and judge the result.
    fn attempt(
        &self,
        others: &ConstraintStack,
        grip: Arc<dyn Constraint>,
        seed: &[f64],
        from: &[f64],
    ) -> Result<Attempt, RouteError> {
        let robot = self.ctx.robot;
        let mut stack = others.clone();
        stack.push(grip);
        let mut buf = ProjectionBuffer::new(robot, &stack);
        let mut q = seed.to_vec();
        let rep = project(robot, &stack, &self.ctx.projection, &mut q, &mut buf)?;
        let norms = stack.residual_norms(robot, &q, &mut buf.stack)?;
        let grip_residual = norms.last().copied().unwrap_or(rep.residual);
        let margin = robot.reach_margin(&q);
        let mut a = Attempt {
            q,
            stop: rep.stop,
            grip_residual,
            clearance: f64::NEG_INFINITY,
            pair: None,
            margin,
            score: INVALID - rep.residual,
        };
        if rep.converged() {
            let (c, pair) = self.clearance(&a.q)?;
            a.clearance = c;
            a.pair = pair;
            if a.valid(self.ctx.settings.min_clearance) {
                let d = robot.distance(from, &a.q).unwrap_or(f64::INFINITY);
                a.score = margin - 0.05 * d;
            } else {
                a.score = INVALID / 2.0 + c;
            }
        }
        Ok(a)
    }

    /// A pose satisfying `from` (current configuration `q_from`) and `from` + `effector` on
    /// `hold`, or the reason none was found. `rng` draws the seeds. `effort` (1 for a first
    /// attempt, counting up with the switch's attempts) widens the search: `effort` times the
    /// settings' seeds, spread over `1 + (effort - 1) / 2` times the settings' spread, so a
    /// switch that failed near the current configuration looks farther away next time.
    pub(crate) fn grab<R: Rng + ?Sized>(
        &self,
        from: &Stance,
        q_from: &[f64],
        effector: &str,
        hold: usize,
        effort: usize,
        rng: &mut R,
    ) -> Result<Result<SwitchPose, SwitchFailure>, RouteError> {
        let effort = effort.max(1);
        let ctx = self.ctx;
        let robot = ctx.robot;
        let h = ctx.scene.holds.get(hold).ok_or_else(|| {
            RouteError::Scene(crate::scene::SceneError::NoSuchHold(format!("#{hold}")))
        })?;
        let others = from.constraints(robot, ctx.scene, ctx.constant)?;
        let target =
            from.clone()
                .with(effector, hold)
                .constraints(robot, ctx.scene, ctx.constant)?;
        // Seeds: the current configuration, then random perturbations of it.
        let mut seeds = vec![q_from.to_vec()];
        let spread = ctx.settings.seed_spread * (1.0 + 0.5 * (effort - 1) as f64);
        for _ in 1..ctx.settings.switch_seeds * effort {
            let dv: Vec<f64> = (0..robot.nv())
                .map(|_| rng.random_range(-spread..=spread))
                .collect();
            let mut q = vec![0.0; robot.nq()];
            robot
                .integrate(q_from, &dv, &mut q)
                .map_err(crate::constraint::ConstraintError::from)?;
            robot.clamp_to_limits(&mut q);
            seeds.push(q);
        }
        let bar = match &h.kind {
            HoldKind::Bar {
                start,
                end,
                approach,
                turn_free,
            } => Some(
                BarGrip::new(robot, effector, *start, *end, *approach, *turn_free).map_err(
                    |source| crate::scene::SceneError::Grip {
                        hold: h.name.clone(),
                        source,
                    },
                )?,
            ),
            _ => None,
        };
        let mut best: Option<(Attempt, Option<f64>, usize)> = None;
        let mut consider = |a: Attempt, s: Option<f64>, seed: usize| {
            if best.as_ref().is_none_or(|b| a.score > b.0.score) {
                best = Some((a, s, seed));
            }
        };
        match &bar {
            Some(bar) => {
                let n = ctx.settings.grip_scan.max(1);
                for (k, seed) in seeds.iter().enumerate() {
                    for i in 0..n {
                        let s = bar.length * (i as f64 + 0.5) / n as f64;
                        let a = self.attempt(&others, Arc::new(grip_at(bar, s)), seed, q_from)?;
                        consider(a, Some(s), k);
                    }
                }
            }
            None => {
                let grip = h.grip(robot, effector)?;
                for (k, seed) in seeds.iter().enumerate() {
                    let a = self.attempt(&others, grip.clone(), seed, q_from)?;
                    consider(a, None, k);
                }
            }
        }
        let Some((mut best_a, mut best_s, _)) = best else {
            return Ok(Err(SwitchFailure::NotReached {
                hold: h.name.clone(),
                residual: f64::INFINITY,
            }));
        };
        // Refine the grip position along the bar around the best scanned one.
        if let (Some(bar), Some(s0), true) = (&bar, best_s, best_a.score > INVALID / 4.0) {
            let n = ctx.settings.grip_scan.max(1) as f64;
            let half = bar.length / n;
            let lo = (s0 - half).max(0.0);
            let hi = (s0 + half).min(bar.length);
            let cost = PositionCost {
                finder: self,
                others: &others,
                bar,
                seed: best_a.q.clone(),
                from: q_from,
                best: RefCell::new(None),
            };
            let best_cell = {
                let exec = Executor::new(cost, BrentOpt::new(lo, hi).set_tolerance(1e-3, 1e-3))
                    .configure(|s| s.max_iters(12));
                // Errors inside the optimizer leave the scan's best, which is valid.
                match exec.run() {
                    Ok(res) => res.problem.problem.and_then(|p| p.best.into_inner()),
                    Err(_) => None,
                }
            };
            if let Some((a, s)) = best_cell {
                if a.score > best_a.score {
                    best_a = a;
                    best_s = Some(s);
                }
            }
        }
        if best_a.valid(ctx.settings.min_clearance) {
            // Independent check against the switch's full stack (the bar grip itself).
            let mut buf = target.buffer(robot);
            let r = target.evaluate(robot, &best_a.q, &mut buf, false)?;
            if r <= ctx.limits.tolerance && robot.within_limits(&best_a.q, 0.0) {
                let grip_position = match &bar {
                    Some(b) => Some(b.grip_position(&buf.poses)),
                    None => best_s,
                };
                return Ok(Ok(SwitchPose {
                    q: best_a.q,
                    grip_position,
                    reach_margin: best_a.margin,
                    clearance: best_a.clearance,
                }));
            }
            return Ok(Err(SwitchFailure::NotReached {
                hold: h.name.clone(),
                residual: r,
            }));
        }
        Ok(Err(self.explain_attempt(&best_a, &h.name)))
    }

    fn explain_attempt(&self, a: &Attempt, hold: &str) -> SwitchFailure {
        let hold = hold.to_string();
        if a.stop == StopReason::Converged {
            let (first, second) = match a.pair {
                Some((x, y)) => (self.body_name(x), self.body_name(y)),
                None => ("?".into(), "?".into()),
            };
            return SwitchFailure::Collision {
                hold,
                first,
                second,
                clearance: a.clearance,
            };
        }
        if a.stop == StopReason::BlockedByLimits {
            if let Some(joint) = joint_at_limit(self.ctx.robot, &a.q) {
                return SwitchFailure::AtLimit {
                    hold,
                    joint,
                    residual: a.grip_residual,
                };
            }
        }
        SwitchFailure::NotReached {
            hold,
            residual: a.grip_residual,
        }
    }
}

/// The first driven joint with a coordinate at (within 1e-9 of) a position limit.
fn joint_at_limit(robot: &crate::model::Robot, q: &[f64]) -> Option<String> {
    robot.joints().iter().filter(|j| !j.passive).find_map(|j| {
        j.bounded_coordinates()
            .any(|(i, l)| q[i] <= l.lower + 1e-9 || q[i] >= l.upper - 1e-9)
            .then(|| j.name.clone())
    })
}

/// The grip "effector at `s` metres along `bar`": a point grip at the bar frame there (the
/// bar's orientation rows; turning about the bar axis when the bar allows it).
fn grip_at(bar: &BarGrip, s: f64) -> FrameMatch {
    let p = bar.start + bar.axis.into_inner() * s;
    let hold = Pose::from_parts(Translation3::from(p.coords), bar.orientation);
    let mode = if bar.turn_free {
        MatchMode::TurnAbout(Unit::new_unchecked(Vector3::x()))
    } else {
        MatchMode::Full
    };
    FrameMatch::new(bar.effector, FrameRef::world(hold), mode, bar.label.clone())
}

/// Cost of a grip position for Brent's method: minus the attempt's score.
struct PositionCost<'f, 'c, 'a> {
    finder: &'f SwitchFinder<'c, 'a>,
    others: &'f ConstraintStack,
    bar: &'f BarGrip,
    seed: Vec<f64>,
    from: &'f [f64],
    best: RefCell<Option<(Attempt, f64)>>,
}

impl CostFunction for PositionCost<'_, '_, '_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, s: &f64) -> Result<f64, ArgminError> {
        let a = self
            .finder
            .attempt(
                self.others,
                Arc::new(grip_at(self.bar, *s)),
                &self.seed,
                self.from,
            )
            .map_err(|e| ArgminError::msg(e.to_string()))?;
        let score = a.score;
        let mut best = self.best.borrow_mut();
        if best.as_ref().is_none_or(|b| score > b.0.score) {
            *best = Some((a, *s));
        }
        Ok(-score)
    }
}

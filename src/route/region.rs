//! Goals of the kind "body within a region" (`Goal::BodyInRegion`): the origin of a link
//! inside an axis-aligned box.
//!
//! Such a goal is not a stance, so the search treats a stance as a *candidate* goal when the
//! reach test allows it (every gripped hold within the link's reach bound of the box,
//! `reach::effector_reach`), and finishes there with a last leg: a pose on the stance's
//! manifold with the link's origin held at a point of the box (projection with an extra
//! position row, `MatchMode::Position`), then a leg to it. A candidate whose last leg fails is
//! struck off and the search goes on.

use std::sync::Arc;

use nalgebra::{Point3, Translation3};
use rand::Rng;

use super::switch::SwitchFinder;
use super::{Context, RouteError};
use crate::constraint::{ConstraintError, FrameMatch, FrameRef, MatchMode};
use crate::kinematics::forward_kinematics;
use crate::math::Pose;
use crate::model::{LinkId, Robot};
use crate::projection::{project, ProjectionBuffer};
use crate::reach::{effector_reach, hold_segment};
use crate::scene::{Scene, Stance};

/// Share of the box's half-extent kept free around the target point, so the pose lands
/// strictly inside the box (the verifier checks the box exactly).
const INSET: f64 = 0.2;

/// A "link inside a box" goal, with the reach bounds the search needs.
#[derive(Clone, Debug)]
pub(crate) struct RegionGoal {
    pub link_name: String,
    pub link: LinkId,
    pub min: Point3<f64>,
    pub max: Point3<f64>,
    /// Reach bound from each effector's grip frame to the link's origin (`None`: unbounded).
    reach: Vec<(String, Option<f64>)>,
    /// Segments of the holds (`None` for handles: they move).
    segments: Vec<Option<(Point3<f64>, Point3<f64>)>>,
}

impl RegionGoal {
    /// Check the goal against the robot: the link exists, the box is finite and not inverted.
    pub fn new(
        robot: &Robot,
        scene: &Scene,
        link: &str,
        min: Point3<f64>,
        max: Point3<f64>,
    ) -> Result<Self, RouteError> {
        let id = robot
            .link_id(link)
            .ok_or_else(|| RouteError::BadGoal(format!("no link named `{link}`")))?;
        let finite = min.iter().chain(max.iter()).all(|v| v.is_finite());
        if !finite || (0..3).any(|k| min[k] > max[k]) {
            return Err(RouteError::BadGoal(format!(
                "the region of link `{link}` must be finite with min <= max on every axis"
            )));
        }
        let reach = robot
            .effectors()
            .iter()
            .map(|e| {
                let r = effector_reach(robot, &e.name, link)
                    .ok()
                    .filter(|r| r.is_finite());
                (e.name.clone(), r)
            })
            .collect();
        Ok(RegionGoal {
            link_name: link.to_string(),
            link: id,
            min,
            max,
            reach,
            segments: scene.holds.iter().map(hold_segment).collect(),
        })
    }

    /// Distance from a hold's segment to the box (0 when they touch or for handles).
    fn hold_to_box(&self, hold: usize) -> f64 {
        let Some(Some((a, b))) = self.segments.get(hold) else {
            return 0.0;
        };
        // The distance from a point of the segment to the box is convex along the segment,
        // so a ternary search finds its minimum (60 rounds: far below a micrometre).
        let d = |t: f64| {
            let p = a + (b - a) * t;
            (p - self.clamp(&p)).norm()
        };
        let (mut lo, mut hi) = (0.0, 1.0);
        for _ in 0..60 {
            let m1 = lo + (hi - lo) / 3.0;
            let m2 = hi - (hi - lo) / 3.0;
            if d(m1) <= d(m2) {
                hi = m2;
            } else {
                lo = m1;
            }
        }
        d(0.5 * (lo + hi)).min(d(0.0)).min(d(1.0))
    }

    /// The nearest point of the box to `p`.
    pub fn clamp(&self, p: &Point3<f64>) -> Point3<f64> {
        Point3::from(p.coords.sup(&self.min.coords).inf(&self.max.coords))
    }

    /// True if `p` lies in the box.
    pub fn contains(&self, p: &Point3<f64>) -> bool {
        (0..3).all(|k| p[k] >= self.min[k] && p[k] <= self.max[k])
    }

    /// Reach test: a stance can be a goal only if every gripped hold is within the link's
    /// reach bound of the box (and something is gripped).
    pub fn candidate(&self, stance: &Stance) -> bool {
        !stance.grips.is_empty()
            && stance.grips.iter().all(|(e, &h)| {
                let bound = self
                    .reach
                    .iter()
                    .find(|(name, _)| name == e)
                    .and_then(|(_, r)| *r);
                bound.is_none_or(|r| self.hold_to_box(h) <= r)
            })
    }

    /// How far a stance's holds are from the box (for the furthest stance reached).
    pub fn distance(&self, stance: &Stance) -> f64 {
        stance
            .grips
            .values()
            .map(|&h| self.hold_to_box(h))
            .fold(f64::INFINITY, f64::min)
    }

    /// The target point for the link: its current position clamped into the box shrunk by
    /// [`INSET`] of each half-extent.
    fn target(&self, p: &Point3<f64>) -> Point3<f64> {
        let c = nalgebra::center(&self.min, &self.max);
        let half = (self.max - self.min) * 0.5 * (1.0 - INSET);
        Point3::from(p.coords.sup(&(c - half).coords).inf(&(c + half).coords))
    }
}

/// Try to finish in `stance` (reached with configuration `q`): a pose with the link in the
/// box and a leg to it. `Ok(None)` when neither was found.
pub(crate) fn finish<R: Rng + ?Sized>(
    ctx: &Context<'_>,
    goal: &RegionGoal,
    stance: &Stance,
    q: &[f64],
    rng: &mut R,
) -> Result<Option<Vec<Vec<f64>>>, RouteError> {
    let robot = ctx.robot;
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).map_err(ConstraintError::from)?;
    let here = Point3::from(poses[goal.link].translation.vector);
    if goal.contains(&here) {
        return Ok(Some(vec![q.to_vec()]));
    }
    let stack = stance.constraints(robot, ctx.scene, ctx.constant)?;
    let mut with_region = stack.clone();
    with_region.push(Arc::new(FrameMatch::new(
        FrameRef {
            link: goal.link,
            offset: Pose::identity(),
        },
        FrameRef::world(Pose::from_parts(
            Translation3::from(goal.target(&here).coords),
            nalgebra::Rotation3::identity(),
        )),
        MatchMode::Position,
        format!("{} in the goal region", goal.link_name),
    )));
    let finder = SwitchFinder::new(ctx);
    let mut buf = ProjectionBuffer::new(robot, &with_region);
    let mut check = stack.buffer(robot);
    for k in 0..ctx.settings.switch_seeds.max(1) {
        let mut p = q.to_vec();
        if k > 0 {
            let spread = ctx.settings.seed_spread;
            let dv: Vec<f64> = (0..robot.nv())
                .map(|_| rng.random_range(-spread..=spread))
                .collect();
            robot
                .integrate(q, &dv, &mut p)
                .map_err(ConstraintError::from)?;
            robot.clamp_to_limits(&mut p);
        }
        let rep = project(robot, &with_region, &ctx.projection, &mut p, &mut buf)?;
        if !rep.converged() || !robot.within_limits(&p, 0.0) {
            continue;
        }
        if stack.evaluate(robot, &p, &mut check, false)? > ctx.limits.tolerance {
            continue;
        }
        forward_kinematics(robot, &p, &mut poses).map_err(ConstraintError::from)?;
        if !goal.contains(&Point3::from(poses[goal.link].translation.vector)) {
            continue;
        }
        if finder.clearance(&p)?.0 < ctx.settings.min_clearance {
            continue;
        }
        let leg = super::leg::plan_leg(ctx, stance, q, &p, rng.random())?;
        if let Some(path) = leg.path {
            return Ok(Some(path));
        }
    }
    Ok(None)
}

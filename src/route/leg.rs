//! Legs: a motion inside one stance, between two switch poses. Planned with RRT-Connect
//! (`planner::rrt_connect`) in the constrained C-space of the stance's constraint stack (plus
//! the scenario's constant constraints); RRT-Connect tries the direct manifold walk first.

use crate::cspace::ConstrainedSpace;
use crate::planner::{rrt_connect, PlanError, RrtSettings};
use crate::scene::Stance;

use super::{Context, RouteError};

/// A planned leg: the waypoints (first = start, last = goal), or `None`, and the samples
/// the planner drew.
pub(crate) struct LegPlan {
    pub path: Option<Vec<Vec<f64>>>,
    pub samples: usize,
}

/// Plan a leg in `stance` from `a` to `b` (both on the stance's manifold).
pub(crate) fn plan_leg(
    ctx: &Context<'_>,
    stance: &Stance,
    a: &[f64],
    b: &[f64],
    seed: u64,
) -> Result<LegPlan, RouteError> {
    let robot = ctx.robot;
    if robot
        .distance(a, b)
        .map_err(crate::constraint::ConstraintError::from)?
        == 0.0
    {
        return Ok(LegPlan {
            path: Some(vec![a.to_vec()]),
            samples: 0,
        });
    }
    let stack = stance.constraints(robot, ctx.scene, ctx.constant)?;
    let mut space = ConstrainedSpace::new(
        robot,
        &stack,
        ctx.collision,
        ctx.walk,
        ctx.verify_resolution(),
    )
    .map_err(crate::planner::PlanError::from)?;
    let remaining = ctx.remaining().min(ctx.settings.leg_time_limit);
    let settings = RrtSettings::new(
        ctx.settings.leg_step,
        ctx.settings.leg_samples,
        remaining,
        seed,
    )?;
    match rrt_connect(&mut space, a, b, &settings) {
        Ok(plan) => Ok(LegPlan {
            samples: plan.stats.samples,
            path: plan.path,
        }),
        // An endpoint the space rejects (a pose within tolerance for the switch but not for
        // this stack's walk) is a failed leg, not an error of the whole planning.
        Err(PlanError::InvalidEndpoint { .. }) => Ok(LegPlan {
            path: None,
            samples: 0,
        }),
        Err(e) => Err(e.into()),
    }
}

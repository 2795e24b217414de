//! Legs: a motion inside one stance, between two switch poses. Planned with RRT-Connect
//! (`planner::rrt_connect`) in the constrained C-space of the stance's constraint stack (plus
//! the scenario's constant constraints); RRT-Connect tries the direct manifold walk first.

use std::time::Instant;

use rand::Rng;

use crate::cspace::{
    CSpaceError, CSpaceStats, ConfigSpace, ConstrainedSpace, Extension, SamplingBox,
    SegmentSampling,
};
use crate::model::Robot;
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
    let space = ConstrainedSpace::new(
        robot,
        &stack,
        ctx.collision,
        ctx.walk,
        ctx.verify_resolution(),
    )
    .map_err(crate::planner::PlanError::from)?
    .with_sampling_box(SamplingBox::around(
        robot,
        a,
        b,
        ctx.settings.leg_box_margin,
    ))
    .with_segment_sampling(
        SegmentSampling::new(
            robot,
            a,
            b,
            ctx.settings.leg_sample_spread,
            ctx.settings.leg_segment_share,
        )
        .map_err(crate::planner::PlanError::from)?,
    );
    let remaining = ctx.remaining().min(ctx.settings.leg_time_limit);
    let settings = RrtSettings::new(
        ctx.settings.leg_step,
        ctx.settings.leg_samples,
        remaining,
        seed,
    )?;
    let mut space = WithDeadline {
        inner: space,
        deadline: Instant::now() + remaining,
    };
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

/// A C-space that stops moving at a deadline: after it, extensions return nothing and
/// samples fail, so every loop of the planner ends (the planner checks its time limit only
/// between samples; its connect step repeats extensions while they make progress).
struct WithDeadline<S> {
    inner: S,
    deadline: Instant,
}

impl<S: ConfigSpace> ConfigSpace for WithDeadline<S> {
    fn robot(&self) -> &Robot {
        self.inner.robot()
    }
    fn sample<R: Rng + ?Sized>(&mut self, rng: &mut R) -> Result<Option<Vec<f64>>, CSpaceError> {
        if Instant::now() >= self.deadline {
            return Ok(None);
        }
        self.inner.sample(rng)
    }
    fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        self.inner.distance(a, b)
    }
    fn extend(
        &mut self,
        from: &[f64],
        to: &[f64],
        max_distance: f64,
    ) -> Result<Extension, CSpaceError> {
        if Instant::now() >= self.deadline {
            return Ok(Extension {
                path: Vec::new(),
                reached: false,
            });
        }
        self.inner.extend(from, to, max_distance)
    }
    fn is_valid(&mut self, q: &[f64]) -> Result<bool, CSpaceError> {
        self.inner.is_valid(q)
    }
    fn stats(&self) -> CSpaceStats {
        self.inner.stats()
    }
}

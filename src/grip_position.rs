//! Choosing where along a bar to grip it: the position whose grip pose leaves the most reach
//! margin (distance to joint limits), found with a one-dimensional optimizer from argmin
//! (Brent's method) after a coarse scan. This runs outside the hot projection loop; each cost
//! evaluation is one projection.

use std::cell::RefCell;

use argmin::core::{CostFunction, Error as ArgminError, Executor};
use argmin::solver::brent::BrentOpt;
use nalgebra::{Point3, Unit};

use crate::constraint::{
    BarGrip, ConstraintError, ConstraintStack, FrameMatch, FrameRef, MatchMode,
};
use crate::math::Pose;
use crate::model::Robot;
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};

/// The chosen grip position and the configuration that realizes it.
#[derive(Clone, Debug, PartialEq)]
pub struct GripChoice {
    /// Metres from the bar's start.
    pub position: f64,
    /// A configuration satisfying the other constraints and the grip at `position`.
    pub q: Vec<f64>,
    /// Reach margin at `q` (see [`Robot::reach_margin`]).
    pub margin: f64,
    /// Projections spent.
    pub projections: usize,
}

/// Cost added when the grip at a position cannot be reached (keeps the objective finite).
const UNREACHABLE: f64 = 1e3;

/// Projections spent, and the best (position, q, margin) seen.
type Tally = (usize, Option<(f64, Vec<f64>, f64)>);

struct MarginCost<'a> {
    robot: &'a Robot,
    others: &'a ConstraintStack,
    bar: &'a BarGrip,
    seed: &'a [f64],
    settings: &'a ProjectionSettings,
    state: &'a RefCell<Tally>,
}

impl MarginCost<'_> {
    /// The grip constraint at `s` metres along the bar: a point grip at the bar frame there.
    fn grip_at(&self, s: f64) -> FrameMatch {
        let p = self.bar.start + self.bar.axis.into_inner() * s;
        let hold = Pose::from_parts(nalgebra::Translation3::from(p.coords), self.bar.orientation);
        let mode = if self.bar.turn_free {
            MatchMode::TurnAbout(Unit::new_unchecked(nalgebra::Vector3::x()))
        } else {
            MatchMode::Full
        };
        FrameMatch::new(
            self.bar.effector,
            FrameRef::world(hold),
            mode,
            "grip at bar position",
        )
    }

    fn evaluate(&self, s: f64) -> Result<f64, ConstraintError> {
        let mut stack = self.others.clone();
        stack.push(std::sync::Arc::new(self.grip_at(s)));
        let mut buf = ProjectionBuffer::new(self.robot, &stack);
        let mut q = self.seed.to_vec();
        let rep = project(self.robot, &stack, self.settings, &mut q, &mut buf)?;
        let mut st = self.state.borrow_mut();
        st.0 += 1;
        if !rep.converged() {
            return Ok(UNREACHABLE + rep.residual);
        }
        let margin = self.robot.reach_margin(&q);
        if st.1.as_ref().is_none_or(|b| margin > b.2) {
            st.1 = Some((s, q, margin));
        }
        Ok(-margin)
    }
}

impl CostFunction for MarginCost<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, s: &f64) -> Result<f64, ArgminError> {
        Ok(self.evaluate(*s)?)
    }
}

/// Choose the grip position along `bar` (with the constraints `others` also held) that
/// leaves the most reach margin, projecting from `seed`. Scans `scan` evenly spaced
/// positions, then refines around the best with Brent's method (R. Brent, "Algorithms for
/// Minimization without Derivatives", 1973, as implemented by argmin). `None` when no
/// position could be reached.
pub fn choose_grip_position(
    robot: &Robot,
    others: &ConstraintStack,
    bar: &BarGrip,
    seed: &[f64],
    settings: &ProjectionSettings,
    scan: usize,
) -> Result<Option<GripChoice>, ConstraintError> {
    let tally = RefCell::new((0, None));
    let cost = MarginCost {
        robot,
        others,
        bar,
        seed,
        settings,
        state: &tally,
    };
    let n = scan.max(2);
    let step = bar.length / (n - 1) as f64;
    let mut best: Option<(usize, f64)> = None;
    for i in 0..n {
        let c = cost.evaluate(i as f64 * step)?;
        if best.is_none_or(|(_, b)| c < b) {
            best = Some((i, c));
        }
    }
    if let Some((i, c)) = best {
        if c < UNREACHABLE {
            let lo = (i as f64 - 1.0).max(0.0) * step;
            let hi = ((i + 1) as f64 * step).min(bar.length);
            // Errors inside the optimizer are projection errors already reported above for the
            // same inputs; a failure here leaves the scan's best, which is still valid.
            let _ = Executor::new(cost, BrentOpt::new(lo, hi).set_tolerance(1e-4, 1e-4))
                .configure(|s| s.max_iters(40))
                .run();
        }
    }
    let (projections, found) = tally.into_inner();
    Ok(found.map(|(position, q, margin)| GripChoice {
        position,
        q,
        margin,
        projections,
    }))
}

/// The world point `s` metres along `bar`.
pub fn bar_point(bar: &BarGrip, s: f64) -> Point3<f64> {
    bar.start + bar.axis.into_inner() * s
}

//! Demo scenario `bar_slide`: the seven-joint arm `sevenfold` keeps its `hand` on a
//! horizontal bar (free to turn about it) and slides the grip from near one end to near the
//! other. A ball hangs where the wrist passes on the direct slide, so the arm has to move
//! around it while keeping hold of the bar.
//!
//! Scene (world frame, metres): the bar runs from `BAR_START` to `BAR_END` (along +y), the
//! hand approaches it along +x; the grip starts `START_AT` and ends `GOAL_AT` metres along it.

use std::sync::Arc;

use nalgebra::{Point3, Translation3, Unit, Vector3};

use super::kit::{load_spec, obstacle, settle, DemoError};
use crate::collision::CollisionModel;
use crate::constraint::{BarGrip, ConstraintStack, FrameMatch, FrameRef, MatchMode};
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::Geometry;
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, Scene, Stance};

pub const BAR_START: [f64; 3] = [0.5, -0.4, 0.6];
pub const BAR_END: [f64; 3] = [0.5, 0.4, 0.6];
/// Grip position along the bar at the start and at the goal (metres from `BAR_START`).
pub const START_AT: f64 = 0.1;
pub const GOAL_AT: f64 = 0.7;
/// The ball in the way: centre and radius.
pub const BALL: [f64; 4] = [0.36, 0.0, 0.74, 0.05];

/// The bar-slide scenario with the default limits.
pub fn scenario() -> Result<Scenario, DemoError> {
    build(ScenarioLimits {
        tolerance: 1e-5,
        ..ScenarioLimits::default()
    })
}

/// The bar-slide scenario with the given limits.
pub fn build(limits: ScenarioLimits) -> Result<Scenario, DemoError> {
    const DEMO: &str = "bar_slide";
    let spec = load_spec(
        include_str!("../../robots/sevenfold.toml"),
        "robots/sevenfold.toml",
    )?;
    let robot = Arc::new(spec.build()?);
    let (a, b) = (Point3::from(BAR_START), Point3::from(BAR_END));
    let mut hold = Hold::bar("bar", a, b, Vector3::x());
    if let crate::scene::HoldKind::Bar { turn_free, .. } = &mut hold.kind {
        *turn_free = true;
    }
    let rail = obstacle(
        "bar",
        pose_from_xyz_rpy([0.5, 0.0, 0.6], [std::f64::consts::FRAC_PI_2, 0.0, 0.0]),
        Geometry::Cylinder {
            radius: 0.015,
            length: 0.8,
        },
    );
    let ball = obstacle(
        "ball",
        pose_from_xyz_rpy([BALL[0], BALL[1], BALL[2]], [0.0; 3]),
        Geometry::Sphere { radius: BALL[3] },
    );
    let scene = Scene {
        obstacles: vec![rail, ball],
        holds: vec![hold],
        mechanisms: vec![],
    };
    scene.check()?;
    let model = CollisionModel::new(&robot, &scene.obstacles)?;
    let grip = BarGrip::new(&robot, "hand", a, b, Vector3::x(), true)?;
    // A point on the bar with the bar's grip frame there, free to turn about the bar.
    let at = |s: f64| -> Result<ConstraintStack, DemoError> {
        let p = a + grip.axis.into_inner() * s;
        let pose = Pose::from_parts(Translation3::from(p.coords), grip.orientation);
        Ok(ConstraintStack::new().with(FrameMatch::new(
            FrameRef::effector(&robot, "hand")?,
            FrameRef::world(pose),
            MatchMode::TurnAbout(Unit::new_unchecked(Vector3::x())),
            "grip at a bar position",
        )))
    };
    let guess = vec![0.0, 0.6, 0.0, 1.2, 0.0, 0.8, 0.0];
    let start = settle(
        &robot,
        &at(START_AT)?,
        &model,
        &guess,
        0.3,
        1,
        DEMO,
        "start",
    )?;
    let goal = settle(&robot, &at(GOAL_AT)?, &model, &start, 0.3, 1, DEMO, "goal")?;
    Ok(Scenario {
        name: DEMO.into(),
        robot,
        scene,
        start: Start {
            q: start,
            stance: Stance::new().with("hand", 0),
        },
        goal: Goal::Configuration(goal),
        constant: Vec::new(),
        limits,
    })
}

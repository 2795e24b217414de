//! Demo scenario `lever`: the seven-joint arm `sevenfold` (effector `hand`) pulls a
//! wall-mounted lever through `PULL_ANGLE` (60 degrees) about its horizontal pivot.
//!
//! Scene (world frame, metres): a wall plate facing the arm (its face at x = 0.6); the lever
//! pivot at `PIVOT` with its axis along +x (out of the wall), so the lever swings in a plane
//! parallel to the wall; a positive angle turns its top toward -y. At angle 0 the lever points
//! straight up; its handle sits `HANDLE_RADIUS` from the pivot axis, 5 cm in front of the lever,
//! and the hand approaches it along +x (along the pivot axis).

use std::f64::consts::FRAC_PI_2;
use std::sync::Arc;

use nalgebra::Vector3;

use super::kit::{hinge_mechanism, load_spec, obstacle, settle, shape, DemoError};
use crate::collision::CollisionModel;
use crate::constraint::{ConstraintStack, FrameMatch, MatchMode};
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::Geometry;
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, HoldKind, Scene, Stance};

/// Pivot position (axis along +x through it).
pub const PIVOT: [f64; 3] = [0.55, 0.0, 0.45];
/// Handle standoff in front of the lever (toward the robot, -x).
pub const HANDLE_STANDOFF: f64 = 0.05;
/// Distance from the pivot axis to the handle frame origin (along the lever).
pub const HANDLE_RADIUS: f64 = 0.28;
/// How far the lever is pulled (radians): 60 degrees.
pub const PULL_ANGLE: f64 = std::f64::consts::FRAC_PI_3;

/// Handle frame in the lever frame: `HANDLE_RADIUS` up the lever and `HANDLE_STANDOFF` in
/// front of it, z axis (the approach direction) along +x, toward the wall.
pub fn handle_pose() -> Pose {
    pose_from_xyz_rpy(
        [-HANDLE_STANDOFF, 0.0, HANDLE_RADIUS],
        [0.0, FRAC_PI_2, 0.0],
    )
}

/// World pose of the lever frame pulled by `angle`.
pub fn lever_world(angle: f64) -> Pose {
    pose_from_xyz_rpy(PIVOT, [0.0; 3])
        * Pose::from_parts(
            nalgebra::Translation3::identity(),
            crate::math::axis_angle(&Vector3::x(), angle),
        )
}

/// World pose of the handle with the lever pulled by `angle`.
pub fn handle_world(angle: f64) -> Pose {
    lever_world(angle) * handle_pose()
}

/// The lever scenario with the default limits.
pub fn scenario() -> Result<Scenario, DemoError> {
    build(ScenarioLimits {
        tolerance: 1e-5,
        ..ScenarioLimits::default()
    })
}

/// The lever scenario with the given limits.
pub fn build(limits: ScenarioLimits) -> Result<Scenario, DemoError> {
    const DEMO: &str = "lever";
    let mut spec = load_spec(
        include_str!("../../robots/sevenfold.toml"),
        "robots/sevenfold.toml",
    )?;
    let bar = shape(
        pose_from_xyz_rpy([0.0, 0.0, 0.13], [0.0; 3]),
        Geometry::Capsule {
            radius: 0.02,
            length: 0.22,
        },
    );
    let lever = hinge_mechanism(
        "lever",
        "lever_pivot",
        "lever_arm",
        pose_from_xyz_rpy(PIVOT, [0.0; 3]),
        Vector3::x(),
        (-0.05, PULL_ANGLE + 0.2),
        vec![bar],
    );
    let wall = obstacle(
        "wall",
        pose_from_xyz_rpy([0.62, 0.0, 0.6], [0.0; 3]),
        Geometry::Cuboid {
            size: Vector3::new(0.04, 1.2, 1.2),
        },
    );
    let scene = Scene {
        obstacles: vec![wall],
        holds: vec![Hold {
            name: "lever_handle".into(),
            kind: HoldKind::Handle {
                link: "lever_arm".into(),
                pose: handle_pose(),
            },
        }],
        mechanisms: vec![lever],
    };
    scene.check()?;
    scene.attach_mechanisms(&mut spec);
    let robot = Arc::new(spec.build()?);
    let model = CollisionModel::new(&robot, &scene.obstacles)?;
    let tether = FrameMatch::handle_tether(&robot, "hand", "lever_arm", handle_pose())?;
    let at = |angle: f64| -> Result<ConstraintStack, DemoError> {
        Ok(ConstraintStack::new()
            .with(tether.clone())
            .with(FrameMatch::point_grip(
                &robot,
                "hand",
                handle_world(angle),
                MatchMode::Full,
            )?))
    };
    // Arm bent forward toward the handle.
    let mut guess = vec![0.0; robot.nq()];
    guess[1] = 0.9;
    guess[3] = 1.0;
    guess[5] = -0.4;
    let start = settle(&robot, &at(0.0)?, &model, &guess, 0.4, 1, DEMO, "start")?;
    let mut guess = start.clone();
    if let Some(j) = robot.joint_id("lever_pivot") {
        guess[robot.joints()[j].q_index] = PULL_ANGLE;
    }
    let goal = settle(
        &robot,
        &at(PULL_ANGLE)?,
        &model,
        &guess,
        0.4,
        1,
        DEMO,
        "goal",
    )?;
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

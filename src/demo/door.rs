//! Demo scenario `door`: the mobile manipulator `trundle` (planar base + seven-joint arm,
//! effector `gripper`) holds the handle of a door and pushes it open 90 degrees about its
//! vertical hinge. A pillar stands where the base would pass on the obvious (direct) motion,
//! so the base has to go around it.
//!
//! Scene (world frame, metres): hinge axis vertical through `HINGE`; the closed door lies
//! along +x from the hinge (panel 0.8 m wide, 1.9 m tall); the handle is on the panel's -y
//! face at `HANDLE_IN_PANEL` (panel frame); the robot starts on the -y side. Opening turns the
//! panel about +z, away from the robot. The room is 4 m x 4.5 m: the base's x and y limits
//! are narrowed to it.

use std::f64::consts::FRAC_PI_2;
use std::sync::Arc;

use crate::collision::CollisionModel;
use crate::constraint::{ConstraintStack, FrameMatch, MatchMode};
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::Geometry;
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, HoldKind, Scene, Stance};
use nalgebra::Vector3;

pub use super::kit::DemoError;
use super::kit::{hinge_mechanism, load_spec, obstacle, q_index, set_bounds, settle, shape};

/// Hinge axis position (vertical axis through this point).
pub const HINGE: [f64; 3] = [1.2, 0.4, 0.0];
/// Handle frame origin in the panel frame (the panel frame is at the hinge, x along the
/// closed panel). The handle is 6 cm in front of the panel's -y face.
pub const HANDLE_IN_PANEL: [f64; 3] = [0.7, -0.06, 0.95];
/// How far the door is opened (radians).
pub const OPEN_ANGLE: f64 = FRAC_PI_2;
/// The pillar the base must go around: centre (x, y), radius, height.
pub const PILLAR: [f64; 4] = [2.38, 0.5, 0.1, 1.6];

/// Handle frame in the panel frame: the gripper approaches along +y (the frame's z axis).
pub fn handle_pose() -> Pose {
    pose_from_xyz_rpy(HANDLE_IN_PANEL, [-FRAC_PI_2, 0.0, 0.0])
}

/// World pose of the handle with the door open by `angle`.
pub fn handle_world(angle: f64) -> Pose {
    pose_from_xyz_rpy(HINGE, [0.0, 0.0, angle]) * handle_pose()
}

/// The door scenario with the default limits.
pub fn scenario() -> Result<Scenario, DemoError> {
    build(ScenarioLimits {
        tolerance: 1e-5,
        ..ScenarioLimits::default()
    })
}

/// The door scenario with the given limits.
pub fn build(limits: ScenarioLimits) -> Result<Scenario, DemoError> {
    const DEMO: &str = "door";
    let mut spec = load_spec(
        include_str!("../../robots/trundle.toml"),
        "robots/trundle.toml",
    )?;
    // The room: the base stays inside it.
    for j in spec.joints.iter_mut() {
        match j.name.as_str() {
            "base_x" => set_bounds(j, -0.5, 3.5),
            "base_y" => set_bounds(j, -1.5, 3.0),
            _ => {}
        }
    }
    let panel = shape(
        pose_from_xyz_rpy([0.42, 0.0, 0.97], [0.0; 3]),
        Geometry::Cuboid {
            size: Vector3::new(0.76, 0.04, 1.9),
        },
    );
    let door = hinge_mechanism(
        "door",
        "door_hinge",
        "door_panel",
        pose_from_xyz_rpy(HINGE, [0.0; 3]),
        Vector3::z(),
        (-0.05, OPEN_ANGLE + 0.15),
        vec![panel],
    );
    let pillar = obstacle(
        "pillar",
        pose_from_xyz_rpy([PILLAR[0], PILLAR[1], 0.5 * PILLAR[3]], [0.0; 3]),
        Geometry::Cylinder {
            radius: PILLAR[2],
            length: PILLAR[3],
        },
    );
    let scene = Scene {
        obstacles: vec![pillar],
        holds: vec![Hold {
            name: "door_handle".into(),
            kind: HoldKind::Handle {
                link: "door_panel".into(),
                pose: handle_pose(),
            },
        }],
        mechanisms: vec![door],
    };
    scene.check()?;
    scene.attach_mechanisms(&mut spec);
    let robot = Arc::new(spec.build()?);
    let stance = Stance::new().with("gripper", 0);
    let model = CollisionModel::new(&robot, &scene.obstacles)?;

    // Start: door closed, handle held. Goal: door open, handle held. Each is found by
    // projecting a guess onto the tether plus a grip of the handle's world pose at that angle
    // (which fixes the hinge angle).
    let tether = FrameMatch::handle_tether(&robot, "gripper", "door_panel", handle_pose())?;
    let at = |angle: f64| -> Result<ConstraintStack, DemoError> {
        Ok(ConstraintStack::new()
            .with(tether.clone())
            .with(FrameMatch::point_grip(
                &robot,
                "gripper",
                handle_world(angle),
                MatchMode::Full,
            )?))
    };
    let ix = |name| q_index(&robot, name, DEMO);
    let mut guess = vec![0.0; robot.nq()];
    guess[ix("base_x")?] = HINGE[0] + 0.7;
    guess[ix("base_y")?] = HINGE[1] - 0.75;
    guess[ix("base_yaw")?] = FRAC_PI_2;
    guess[ix("arm_joint2")?] = 0.6;
    guess[ix("arm_joint4")?] = 1.0;
    guess[ix("arm_joint6")?] = 0.2;
    let start = settle(&robot, &at(0.0)?, &model, &guess, 0.3, 1, DEMO, "start")?;
    let open = handle_world(OPEN_ANGLE);
    let mut guess = start.clone();
    guess[ix("base_x")?] = open.translation.x + 0.75;
    guess[ix("base_y")?] = open.translation.y;
    guess[ix("base_yaw")?] = 3.1;
    guess[ix("door_hinge")?] = OPEN_ANGLE;
    let goal = settle(
        &robot,
        &at(OPEN_ANGLE)?,
        &model,
        &guess,
        0.3,
        1,
        DEMO,
        "goal",
    )?;
    Ok(Scenario {
        name: DEMO.into(),
        robot,
        scene,
        start: Start { q: start, stance },
        goal: Goal::Configuration(goal),
        constant: Vec::new(),
        limits,
    })
}

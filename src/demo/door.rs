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
//!
//! This file also holds the small helpers the other demo builders share ([`DemoError`],
//! [`settle`], [`load_spec`]).

use std::f64::consts::FRAC_PI_2;
use std::path::Path;
use std::sync::Arc;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch, Obstacle};
use crate::constraint::{ConstraintError, ConstraintStack, FrameMatch, MatchMode};
use crate::kinematics::forward_kinematics;
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::{
    Geometry, JointSpec, JointType, Limits, LinkSpec, ModelError, Robot, RobotSpec, Shape,
};
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::robot_file::{toml_format, RobotFileError};
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, HoldKind, Mechanism, Scene, SceneError, Stance};
use nalgebra::Vector3;

/// A demo scenario could not be built (a bundled file or a hand-written value is wrong).
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum DemoError {
    #[error(transparent)]
    RobotFile(#[from] RobotFileError),
    #[error(transparent)]
    Model(#[from] ModelError),
    #[error(transparent)]
    Scene(#[from] SceneError),
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error("demo `{demo}`: no valid {which} configuration found near the guess")]
    NoConfiguration {
        demo: &'static str,
        which: &'static str,
    },
    #[error("demo `{demo}`: no joint or link named `{name}`")]
    Missing { demo: &'static str, name: String },
}

/// Hinge axis position (vertical axis through this point).
pub const HINGE: [f64; 3] = [1.2, 0.4, 0.0];
/// Handle frame origin in the panel frame (the panel frame is at the hinge, x along the
/// closed panel). The handle is 6 cm in front of the panel's -y face.
pub const HANDLE_IN_PANEL: [f64; 3] = [0.7, -0.06, 0.95];
/// How far the door is opened (radians).
pub const OPEN_ANGLE: f64 = FRAC_PI_2;
/// The pillar the base must go around: centre (x, y), radius, height.
pub const PILLAR: [f64; 4] = [2.38, 0.5, 0.1, 1.6];

/// Bundled robot file text and its name (for error messages).
pub(crate) fn load_spec(text: &str, file: &str) -> Result<RobotSpec, DemoError> {
    Ok(toml_format::parse(text, Path::new(file))?.0)
}

/// A configuration satisfying `stack` (projected to 1e-10) within limits and collision-free,
/// from `guess` and seeded random perturbations of it: of the first `candidates` found, the
/// one with the largest reach margin.
#[allow(clippy::too_many_arguments)] // each argument is one plain value of the search
pub(crate) fn settle(
    robot: &Robot,
    stack: &ConstraintStack,
    model: &CollisionModel,
    guess: &[f64],
    spread: f64,
    candidates: usize,
    demo: &'static str,
    which: &'static str,
) -> Result<Vec<f64>, DemoError> {
    let settings = ProjectionSettings {
        tolerance: 1e-10,
        max_iterations: 200,
        max_step: 0.3,
    };
    let mut buf = ProjectionBuffer::new(robot, stack);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut scratch = CollisionScratch::new();
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    // The first valid configuration, or among the first few found the one farthest from
    // the joint limits (reach margin).
    let mut best: Option<(f64, Vec<f64>)> = None;
    let mut found = 0;
    for attempt in 0..400 {
        let mut q = guess.to_vec();
        if attempt > 0 {
            for j in robot.joints() {
                if j.kind.nv() == 1 && !j.passive {
                    q[j.q_index] += rng.random_range(-spread..spread);
                }
            }
            robot.clamp_to_limits(&mut q);
        }
        let rep = project(robot, stack, &settings, &mut q, &mut buf)?;
        if !rep.converged() || !robot.within_limits(&q, 0.0) {
            continue;
        }
        forward_kinematics(robot, &q, &mut poses).map_err(ConstraintError::from)?;
        // Keep a little clearance so the start and goal are not grazing anything.
        if model.in_collision_with_margin(&poses, 0.01, &mut scratch)? {
            continue;
        }
        let margin = robot.reach_margin(&q);
        if best.as_ref().is_none_or(|(m, _)| margin > *m) {
            best = Some((margin, q));
        }
        found += 1;
        if found >= candidates {
            break;
        }
    }
    if let Some((_, q)) = best {
        return Ok(q);
    }
    Err(DemoError::NoConfiguration { demo, which })
}

pub(crate) fn q_index(robot: &Robot, joint: &str, demo: &'static str) -> Result<usize, DemoError> {
    robot
        .joint_id(joint)
        .map(|j| robot.joints()[j].q_index)
        .ok_or_else(|| DemoError::Missing {
            demo,
            name: joint.to_string(),
        })
}

pub(crate) fn obstacle(name: &str, origin: Pose, geometry: Geometry) -> Obstacle {
    Obstacle {
        name: name.into(),
        shape: Shape {
            origin,
            geometry,
            source: None,
        },
    }
}

pub(crate) fn link(name: &str, shapes: Vec<Shape>) -> LinkSpec {
    LinkSpec {
        name: name.into(),
        shapes,
    }
}

pub(crate) fn shape(origin: Pose, geometry: Geometry) -> Shape {
    Shape {
        origin,
        geometry,
        source: None,
    }
}

/// A one-revolute-joint mechanism (`frame` -> `moving`) with a passive joint at `origin`.
pub(crate) fn hinge_mechanism(
    name: &str,
    joint: &str,
    moving: &str,
    origin: Pose,
    axis: Vector3<f64>,
    (lower, upper): (f64, f64),
    shapes: Vec<Shape>,
) -> Mechanism {
    let frame = format!("{name}_frame");
    Mechanism {
        spec: RobotSpec {
            name: name.into(),
            links: vec![link(&frame, vec![]), link(moving, shapes)],
            joints: vec![JointSpec {
                name: joint.into(),
                joint_type: JointType::Revolute,
                parent: frame.clone(),
                child: moving.into(),
                origin,
                axis,
                limits: vec![Limits {
                    lower,
                    upper,
                    velocity: 1.0,
                    acceleration: 2.0,
                }],
                passive: true,
            }],
            ..Default::default()
        },
    }
}

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

pub(crate) fn set_bounds(j: &mut JointSpec, lower: f64, upper: f64) {
    for l in j.limits.iter_mut() {
        l.lower = lower;
        l.upper = upper;
    }
}

//! Demo scenario `carry`: the two-armed robot `yoke` (two seven-joint arms on a fixed torso,
//! effectors `left_hand` and `right_hand`) holds a rigid box between its hands and carries
//! it from a low shelf to the shelf above it. The direct motion (straight up) would push the
//! box into the underside of the upper shelf; the box has to come out toward the robot, rise
//! and go in again.
//!
//! The closed chain is one constant constraint ([`FrameMatch::carried_object`]): the right
//! hand's grip frame stays at `right_in_left()` in the left hand's grip frame. The box's
//! collision shape is put on the left hand's palm link (a scenario-built variant of the
//! robot), so it collides with the shelves, the torso and the right arm like a link.
//!
//! Box frame: centre of the box, axes along the world's when level. Both hands grip the
//! box's side faces (y = +/-`HALF_WIDTH`), approaching along -y (left) and +y (right). Each shelf board is narrower
//! than the box (it supports the box's middle), so the hands and forearms pass beside it.

use std::f64::consts::PI;
use std::sync::Arc;

use nalgebra::{Matrix3, Rotation3, Translation3, Vector3};

use super::kit::{load_spec, obstacle, q_index, settle, shape, DemoError};
use crate::collision::CollisionModel;
use crate::constraint::{Constraint, ConstraintStack, FrameMatch, MatchMode};
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::Geometry;
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Scene, Stance};

/// Half the distance between the two grip points (metres).
pub const HALF_WIDTH: f64 = 0.12;
/// Box size (x depth, y between the hands, z height); 2 cm short of each grip along y.
pub const BOX_SIZE: [f64; 3] = [0.22, 0.2, 0.18];
/// Box centre at the start (on the low shelf) and at the goal (on the upper one), each
/// 3 cm above its board.
pub const BOX_START: [f64; 3] = [0.5, 0.0, 0.85];
pub const BOX_GOAL: [f64; 3] = [0.5, 0.0, 1.22];

/// The right hand's grip frame in the left hand's: 2 * `HALF_WIDTH` ahead along the left
/// approach axis, turned half a revolution about x (the approach axes face each other).
pub fn right_in_left() -> Pose {
    pose_from_xyz_rpy([0.0, 0.0, 2.0 * HALF_WIDTH], [PI, 0.0, 0.0])
}

/// The left hand's grip frame in the box frame: on the +y face, z (approach) along -y,
/// x along the box's x, y along its z.
pub fn left_in_box() -> Pose {
    let r = Matrix3::from_columns(&[Vector3::x(), Vector3::z(), -Vector3::y()]);
    Pose::from_parts(
        Translation3::new(0.0, HALF_WIDTH, 0.0),
        Rotation3::from_matrix_unchecked(r),
    )
}

/// World pose of the left grip frame with the box centre at `c` and level.
pub fn left_grip_world(c: [f64; 3]) -> Pose {
    pose_from_xyz_rpy(c, [0.0; 3]) * left_in_box()
}

/// The carry scenario with the default limits.
pub fn scenario() -> Result<Scenario, DemoError> {
    build(ScenarioLimits {
        tolerance: 1e-5,
        ..ScenarioLimits::default()
    })
}

/// The carry scenario with the given limits.
pub fn build(limits: ScenarioLimits) -> Result<Scenario, DemoError> {
    const DEMO: &str = "carry";
    let mut spec = load_spec(include_str!("../../robots/yoke.toml"), "robots/yoke.toml")?;
    // The box rides on the left palm: its centre is HALF_WIDTH along the left grip's z.
    let grip = spec
        .effectors
        .iter()
        .find(|e| e.name == "left_hand")
        .map(|e| (e.link.clone(), e.grip))
        .ok_or_else(|| DemoError::Missing {
            demo: DEMO,
            name: "left_hand".into(),
        })?;
    let box_in_palm = grip.1 * left_in_box().inverse();
    let link = spec
        .links
        .iter_mut()
        .find(|l| l.name == grip.0)
        .ok_or_else(|| DemoError::Missing {
            demo: DEMO,
            name: grip.0.clone(),
        })?;
    link.shapes.push(shape(
        box_in_palm,
        Geometry::Cuboid {
            size: Vector3::from(BOX_SIZE),
        },
    ));
    let robot = Arc::new(spec.build()?);
    let board = |name: &str, c: [f64; 3]| {
        obstacle(
            name,
            pose_from_xyz_rpy(c, [0.0; 3]),
            Geometry::Cuboid {
                size: Vector3::new(0.3, 0.14, 0.03),
            },
        )
    };
    let low = BOX_START[2] - 0.5 * BOX_SIZE[2] - 0.03 - 0.015;
    let high = BOX_GOAL[2] - 0.5 * BOX_SIZE[2] - 0.03 - 0.015;
    let scene = Scene {
        obstacles: vec![
            board("low_shelf", [0.6, 0.0, low]),
            board("high_shelf", [0.6, 0.0, high]),
        ],
        holds: vec![],
        mechanisms: vec![],
    };
    scene.check()?;
    let model = CollisionModel::new(&robot, &scene.obstacles)?;
    let carried: Arc<dyn Constraint> = Arc::new(FrameMatch::carried_object(
        &robot,
        "left_hand",
        "right_hand",
        right_in_left(),
    )?);
    let at = |c: [f64; 3]| -> Result<ConstraintStack, DemoError> {
        let mut s = ConstraintStack::new();
        s.push(carried.clone());
        Ok(s.with(FrameMatch::point_grip(
            &robot,
            "left_hand",
            left_grip_world(c),
            MatchMode::Full,
        )?))
    };
    // Upper arms swung forward, elbows bent: the forearms reach forward toward the box.
    let mut guess = vec![0.0; robot.nq()];
    for side in ["left", "right"] {
        guess[q_index(&robot, &format!("{side}_joint2"), DEMO)?] = 0.4;
        guess[q_index(&robot, &format!("{side}_joint4"), DEMO)?] = 1.3;
    }
    let start = settle(
        &robot,
        &at(BOX_START)?,
        &model,
        &guess,
        0.8,
        20,
        DEMO,
        "start",
    )?;
    // Goal in the same posture family as the start: move the box target from the start
    // to the goal in small steps, each projection starting from the previous answer.
    let mut q = start.clone();
    let steps = 20;
    let mut buf = ProjectionBuffer::new(&robot, &at(BOX_START)?);
    let settings = ProjectionSettings {
        tolerance: 1e-10,
        max_iterations: 200,
        max_step: 0.3,
    };
    for k in 1..=steps {
        let f = k as f64 / steps as f64;
        let c = [0, 1, 2].map(|i| BOX_START[i] + f * (BOX_GOAL[i] - BOX_START[i]));
        let rep = project(&robot, &at(c)?, &settings, &mut q, &mut buf)?;
        if !rep.converged() {
            return Err(DemoError::NoConfiguration {
                demo: DEMO,
                which: "goal",
            });
        }
    }
    let goal = settle(&robot, &at(BOX_GOAL)?, &model, &q, 0.05, 1, DEMO, "goal")?;
    Ok(Scenario {
        name: DEMO.into(),
        robot,
        scene,
        start: Start {
            q: start,
            stance: Stance::new(),
        },
        goal: Goal::Configuration(goal),
        constant: vec![carried],
        limits,
    })
}

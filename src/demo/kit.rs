//! Building blocks the demo builders share: the demo error type, loading a bundled robot
//! file, settling a configuration onto a stance, and small constructors for links, shapes,
//! obstacles and a hinged mechanism.

use std::path::Path;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch, Obstacle};
use crate::constraint::{ConstraintError, ConstraintStack};
use crate::kinematics::forward_kinematics;
use crate::math::Pose;
use crate::model::{
    Geometry, JointSpec, JointType, Limits, LinkSpec, ModelError, Robot, RobotSpec, Shape,
};
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::robot_file::{toml_format, RobotFileError};
use crate::scene::{Mechanism, SceneError};
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

pub(crate) fn set_bounds(j: &mut JointSpec, lower: f64, upper: f64) {
    for l in j.limits.iter_mut() {
        l.lower = lower;
        l.upper = upper;
    }
}

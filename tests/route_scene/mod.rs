//! A small climbing scene for the route tests, built in the tests (invented): brachia under a
//! row of horizontal bars ("monkey bars"), a ceiling panel above them.
#![allow(dead_code)]

use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

use clamber::collision::{CollisionModel, CollisionScratch, Obstacle};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use clamber::robot_file::load_robot;
use clamber::scenario::{Goal, Scenario, ScenarioLimits, Start};
use clamber::scene::{Hold, Scene, Stance};
use nalgebra::{Point3, Vector3};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

pub fn brachia() -> Robot {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("robots/brachia.toml");
    load_robot(&path).expect("brachia loads")
}

/// Bars parallel to y, 0.6 m long, at height 0, at the given x positions; approached from
/// below (+z). A ceiling panel 0.12 m above the bars.
pub fn bars_scene(xs: &[f64]) -> Scene {
    let holds = xs
        .iter()
        .enumerate()
        .map(|(i, &x)| {
            Hold::bar(
                format!("rung{i}"),
                Point3::new(x, -0.3, 0.0),
                Point3::new(x, 0.3, 0.0),
                Vector3::z(),
            )
        })
        .collect();
    let lo = xs.iter().cloned().fold(f64::INFINITY, f64::min) - 1.0;
    let hi = xs.iter().cloned().fold(f64::NEG_INFINITY, f64::max) + 1.0;
    let ceiling = Obstacle {
        name: "ceiling".into(),
        shape: Shape {
            origin: pose_from_xyz_rpy([0.5 * (lo + hi), 0.0, 0.17], [0.0; 3]),
            geometry: Geometry::Cuboid {
                size: Vector3::new(hi - lo, 2.0, 0.1),
            },
            source: None,
        },
    };
    Scene {
        obstacles: vec![ceiling],
        holds,
        mechanisms: vec![],
    }
}

/// A configuration on `stance` (projected from seeds below the holds), collision-free.
pub fn pose_on(robot: &Robot, scene: &Scene, stance: &Stance, seed: u64) -> Vec<f64> {
    let stack = stance.constraints(robot, scene, &[]).unwrap();
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let model = CollisionModel::new(robot, &scene.obstacles).unwrap();
    let mut scratch = CollisionScratch::new();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let settings = ProjectionSettings::new(1e-10, 200, 0.5).unwrap();
    let centre: Vector3<f64> = stance
        .grips
        .values()
        .map(|&h| {
            let (c, _) = scene.holds[h].fixed_extent().unwrap();
            c.coords
        })
        .sum::<Vector3<f64>>()
        / stance.grips.len() as f64;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    for _ in 0..200 {
        let mut q = robot.neutral();
        for k in 0..3 {
            q[k] = centre[k] + rng.random_range(-0.2..0.2);
        }
        q[2] -= 0.55;
        for v in q.iter_mut().skip(7) {
            *v += rng.random_range(-0.8..0.8);
        }
        let rep = project(robot, &stack, &settings, &mut q, &mut buf).unwrap();
        if !rep.converged() {
            continue;
        }
        forward_kinematics(robot, &q, &mut poses).unwrap();
        let c = model.clearance(&poses, &mut scratch).unwrap();
        if c.distance > 0.02 && robot.reach_margin(&q) > 0.05 {
            return q;
        }
    }
    panic!("no start pose found for the test scene");
}

/// Brachia under bars at `xs`: starts with the left gripper on rung 0 and the right on
/// rung 1; `goal` given.
pub fn scenario(xs: &[f64], goal: Goal, seed: u64) -> Scenario {
    let robot = brachia();
    let scene = bars_scene(xs);
    let stance = Stance::new()
        .with("left_gripper", 0)
        .with("right_gripper", 1);
    let q = pose_on(&robot, &scene, &stance, 7);
    Scenario {
        name: "test rungs".into(),
        robot: Arc::new(robot),
        scene,
        start: Start { q, stance },
        goal,
        constant: vec![],
        limits: ScenarioLimits {
            tolerance: 1e-6,
            stride: 0.05,
            time_limit: Duration::from_secs(60),
            seed,
        },
    }
}

/// Reach bound of brachia between its two grip frames, summed by hand from
/// robots/brachia.toml (joint `xyz` offsets and the effectors' grip offsets): per arm
/// joint2 0.085, joint4 |(0.017, 0, 0.289)|, joint5 |(-0.017, 0, 0.136)|, joint6 0.119,
/// joint7 0.068, palm mount 0.034, grip 0.085 (joint3 is at the origin of link2); the two
/// shoulders (joint1) are 0.30 m apart in the torso frame.
pub fn brachia_bound_by_hand() -> f64 {
    let arm = 0.085
        + (0.017f64.powi(2) + 0.289f64.powi(2)).sqrt()
        + (0.017f64.powi(2) + 0.136f64.powi(2)).sqrt()
        + 0.119
        + 0.068
        + 0.034
        + 0.085;
    2.0 * arm + 0.30
}

/// Errors of effector `effector`'s grip frame on hold `hold` at `q`, computed here from
/// forward kinematics and the hold's geometry (independent of the constraint code):
/// (distance of the grip point from the bar segment, orientation error in radians as the
/// Frobenius norm of R_grip - R_bar over sqrt 2, which is the angle to first order; for a bar
/// free to turn, the angle between the grip x axis and the bar axis).
pub fn grip_errors(
    robot: &Robot,
    scene: &Scene,
    q: &[f64],
    effector: &str,
    hold: usize,
) -> (f64, f64) {
    use clamber::scene::HoldKind;
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    let e = robot.effector(effector).unwrap();
    let g = poses[e.link] * e.grip;
    let p = g.translation.vector;
    let r = g.rotation;
    match &scene.holds[hold].kind {
        HoldKind::Bar {
            start,
            end,
            approach,
            turn_free,
        } => {
            let axis = (end - start).normalize();
            let len = (end - start).norm();
            let t = axis.dot(&(p - start.coords)).clamp(0.0, len);
            let foot = start.coords + axis * t;
            let dist = (p - foot).norm();
            let x = r.matrix().column(0).into_owned();
            if *turn_free {
                return (dist, x.cross(&axis).norm());
            }
            let z = (approach - axis * axis.dot(approach)).normalize();
            let y = z.cross(&axis);
            let bar = nalgebra::Matrix3::from_columns(&[axis, y, z]);
            (dist, (r.matrix() - bar).norm() / 2f64.sqrt())
        }
        HoldKind::Point { pose, .. } => {
            let d = (p - pose.translation.vector).norm();
            let a = (r.matrix() - pose.rotation.matrix()).norm() / 2f64.sqrt();
            (d, a)
        }
        _ => panic!("handles are not used in these tests"),
    }
}

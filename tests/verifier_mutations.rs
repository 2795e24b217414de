//! The verifier against corrupted paths: a path walked along a bar on the seven-joint arm
//! passes; each corruption is rejected and located.

use std::path::Path;

use clamber::collision::{CollisionModel, Obstacle};
use clamber::constraint::{BarGrip, ConstraintStack};
use clamber::grip_position::choose_grip_position;
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::projection::ProjectionSettings;
use clamber::verify::{verify_path, Defect, VerifySettings};
use clamber::walk::{walk, WalkSettings};
use nalgebra::{Point3, Vector3};

const STRIDE: f64 = 0.01;
const TOL: f64 = 1e-4;

struct Fixture {
    robot: Robot,
    stack: ConstraintStack,
    path: Vec<Vec<f64>>,
    obstacles: Vec<Obstacle>,
    settings: VerifySettings,
}

fn sphere(name: &str, at: [f64; 3], radius: f64) -> Obstacle {
    Obstacle {
        name: name.into(),
        shape: Shape {
            origin: pose_from_xyz_rpy(at, [0.0; 3]),
            geometry: Geometry::Sphere { radius },
            source: None,
        },
    }
}

/// Slide the hand 0.35 m along a horizontal bar, walking on the bar-grip manifold.
fn fixture() -> Fixture {
    let robot = clamber::robot_file::load_robot(Path::new("robots/sevenfold.toml")).unwrap();
    let bar = BarGrip::new(
        &robot,
        "hand",
        Point3::new(0.5, -0.4, 0.6),
        Point3::new(0.5, 0.4, 0.6),
        Vector3::x(),
        true,
    )
    .unwrap();
    let stack = ConstraintStack::new().with(bar.clone());
    let settings = ProjectionSettings::default();
    let seed = vec![0.0, 0.6, 0.0, 1.2, 0.0, 0.8, 0.0];
    // Start and goal: the best grips on the first and the second half of the bar.
    let half = |start: f64| BarGrip {
        start: bar.start + bar.axis.into_inner() * start,
        length: 0.3,
        ..bar.clone()
    };
    let a = choose_grip_position(
        &robot,
        &ConstraintStack::new(),
        &half(0.05),
        &seed,
        &settings,
        7,
    )
    .unwrap()
    .unwrap();
    let b = choose_grip_position(
        &robot,
        &ConstraintStack::new(),
        &half(0.45),
        &a.q,
        &settings,
        7,
    )
    .unwrap()
    .unwrap();
    let mut buf = clamber::projection::ProjectionBuffer::new(&robot, &stack);
    let w = WalkSettings {
        stride: STRIDE,
        ..Default::default()
    };
    let walked = walk(&robot, &stack, &a.q, &b.q, &w, &mut buf).unwrap();
    assert!(walked.reached(), "{:?}", walked.stop);
    assert!(
        walked.path.len() > 20,
        "a long enough path: {}",
        walked.path.len()
    );
    let obstacles = vec![sphere("far ball", [-0.6, 0.0, 0.3], 0.1)];
    let settings = VerifySettings::new(STRIDE / 10.0, TOL, 1.5 * STRIDE).unwrap();
    Fixture {
        robot,
        stack,
        path: walked.path,
        obstacles,
        settings,
    }
}

fn check(f: &Fixture, path: &[Vec<f64>], obstacles: &[Obstacle]) -> clamber::verify::VerifyReport {
    let model = CollisionModel::new(&f.robot, obstacles).unwrap();
    verify_path(&f.robot, &f.stack, Some(&model), path, &f.settings).unwrap()
}

#[test]
fn verifier_passes_the_walk_and_rejects_every_corruption() {
    let f = fixture();
    let good = check(&f, &f.path, &f.obstacles);
    assert!(good.passed(), "{:?}", good.defects);
    // Spacing at most the resolution: at least length / resolution points.
    let length: f64 = f
        .path
        .windows(2)
        .map(|w| f.robot.distance(&w[0], &w[1]).unwrap())
        .sum();
    assert!(
        good.checked as f64 >= length / f.settings.resolution,
        "dense: {} points over {length}",
        good.checked
    );
    println!(
        "clean path: {} waypoints, {} points checked, max residual {:.2e}",
        f.path.len(),
        good.checked,
        good.max_residual
    );
    let k = f.path.len() / 2;

    // 1. A waypoint moved off the manifold by 10x the tolerance (along joint 1).
    let mut path = f.path.clone();
    let mut buf = f.stack.buffer(&f.robot);
    let base = f
        .stack
        .evaluate(&f.robot, &path[k], &mut buf, false)
        .unwrap();
    let mut eps = 1e-3;
    for _ in 0..60 {
        let mut q = path[k].clone();
        q[0] += eps;
        let r = f.stack.evaluate(&f.robot, &q, &mut buf, false).unwrap();
        eps *= 10.0 * TOL / (r - base).max(1e-15);
    }
    path[k][0] += eps;
    let r = f
        .stack
        .evaluate(&f.robot, &path[k], &mut buf, false)
        .unwrap();
    assert!((r / (10.0 * TOL) - 1.0).abs() < 0.05, "residual {r}");
    let rep = check(&f, &path, &f.obstacles);
    let off: Vec<_> = rep
        .defects
        .iter()
        .filter(|d| matches!(d, Defect::OffManifold { .. }))
        .collect();
    assert!(!off.is_empty(), "{:?}", rep.defects);
    for d in &off {
        let Defect::OffManifold { at, .. } = d else {
            unreachable!()
        };
        assert!(
            at.segment == k - 1 || at.segment == k,
            "located at {at}, expected near waypoint {k}"
        );
    }
    println!("off manifold: {}", off[0]);

    // 2. An obstacle where the palm is at waypoint k.
    let mut poses = vec![Pose::identity(); f.robot.links().len()];
    forward_kinematics(&f.robot, &f.path[k], &mut poses).unwrap();
    let palm = f.robot.link_id("palm").unwrap();
    let p = poses[palm].translation.vector;
    let mut obstacles = f.obstacles.clone();
    obstacles.push(sphere("intruder", [p.x, p.y, p.z], 0.02));
    let rep = check(&f, &f.path, &obstacles);
    let hits: Vec<_> = rep
        .defects
        .iter()
        .filter_map(|d| {
            if let Defect::Collision { at, first, second } = d {
                Some((*at, *first, *second))
            } else {
                None
            }
        })
        .collect();
    assert!(!hits.is_empty(), "{:?}", rep.defects);
    assert!(
        hits.iter()
            .any(|(at, ..)| at.segment == k || at.segment + 1 == k),
        "{hits:?}"
    );
    assert!(
        hits.iter()
            .all(|(_, a, b)| format!("{a} {b}").contains("obstacle")),
        "{hits:?}"
    );
    println!(
        "collision: {}",
        rep.defects
            .iter()
            .find(|d| matches!(d, Defect::Collision { .. }))
            .unwrap()
    );

    // 3. A joint beyond its upper limit at waypoint k.
    let mut path = f.path.clone();
    let j = &f.robot.joints()[3];
    path[k][j.q_index] = j.limits[0].upper + 0.01;
    let rep = check(&f, &path, &f.obstacles);
    let lim = rep
        .defects
        .iter()
        .find(|d| matches!(d, Defect::OutsideLimits { .. }))
        .expect("limit defect");
    let Defect::OutsideLimits { at, joint, .. } = lim else {
        unreachable!()
    };
    assert_eq!(joint, &j.name);
    assert!(at.segment == k || at.segment + 1 == k, "{at}");
    println!("limit: {lim}");

    // 4. A gap: waypoints k..k+5 removed.
    let mut path = f.path.clone();
    path.drain(k..k + 5);
    let rep = check(&f, &path, &f.obstacles);
    assert!(
        rep.defects
            .iter()
            .any(|d| matches!(d, Defect::Gap { segment, .. } if *segment == k - 1)),
        "{:?}",
        rep.defects
    );
    println!(
        "gap: {}",
        rep.defects
            .iter()
            .find(|d| matches!(d, Defect::Gap { .. }))
            .unwrap()
    );
}

/// Every waypoint on the manifold is not enough: keep every 15th waypoint of the walk; each
/// is still on the bar, but the straight segments between them cut the curve and leave it.
#[test]
fn sparse_waypoints_on_the_manifold_are_rejected_between_them() {
    let f = fixture();
    let sparse: Vec<Vec<f64>> = f
        .path
        .iter()
        .step_by(15)
        .chain(f.path.last())
        .cloned()
        .collect();
    let mut buf = f.stack.buffer(&f.robot);
    for q in &sparse {
        assert!(f.stack.evaluate(&f.robot, q, &mut buf, false).unwrap() <= 1e-9);
    }
    let settings = VerifySettings::new(STRIDE / 10.0, TOL, 1.0).unwrap();
    let model = CollisionModel::new(&f.robot, &f.obstacles).unwrap();
    let rep = verify_path(&f.robot, &f.stack, Some(&model), &sparse, &settings).unwrap();
    let off: Vec<_> = rep
        .defects
        .iter()
        .filter_map(|d| {
            if let Defect::OffManifold { at, .. } = d {
                Some(*at)
            } else {
                None
            }
        })
        .collect();
    assert!(
        !off.is_empty(),
        "sparse path passed: max residual {:.2e}",
        rep.max_residual
    );
    assert!(
        off.iter().all(|at| at.fraction > 0.0 && at.fraction < 1.0),
        "defects between waypoints: {off:?}"
    );
    println!(
        "sparse: {} waypoints, max residual between them {:.2e}, {} segments off",
        sparse.len(),
        rep.max_residual,
        off.len()
    );
}

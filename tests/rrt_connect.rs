//! The same RRT-Connect code plans a free query and a constrained one; every path it returns
//! passes the independent verifier, and the same seed gives the same path.

use std::path::Path;
use std::time::Duration;

use clamber::collision::{CollisionModel, Obstacle};
use clamber::constraint::{BarGrip, ConstraintStack};
use clamber::cspace::{ConstrainedSpace, FreeSpace};
use clamber::grip_position::choose_grip_position;
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::planner::{rrt_connect, RrtSettings};
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::verify::{verify_path, VerifySettings};
use clamber::walk::{walk, WalkSettings};
use nalgebra::{Point3, Vector3};

fn robot() -> Robot {
    clamber::robot_file::load_robot(Path::new("robots/sevenfold.toml")).unwrap()
}

fn obstacle(name: &str, at: [f64; 3], geometry: Geometry) -> Obstacle {
    Obstacle {
        name: name.into(),
        shape: Shape {
            origin: pose_from_xyz_rpy(at, [0.0; 3]),
            geometry,
            source: None,
        },
    }
}

#[test]
fn free_query_around_a_wall() {
    let robot = robot();
    // A wall in front of the arm between a pose on its left and one on its right.
    let wall = obstacle(
        "wall",
        [0.45, 0.0, 0.5],
        Geometry::Cuboid {
            size: Vector3::new(0.1, 0.1, 1.0),
        },
    );
    let model = CollisionModel::new(&robot, std::slice::from_ref(&wall)).unwrap();
    let start = vec![1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    let goal = vec![-1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    let mut space = FreeSpace::new(&robot, Some(&model), 0.01).unwrap();
    let settings = RrtSettings::new(0.3, 20_000, Duration::from_secs(60), 1).unwrap();
    let plan = rrt_connect(&mut space, &start, &goal, &settings).unwrap();
    let stats = plan.stats;
    let path = plan.path;
    let path = path.expect("a path around the wall");
    assert_eq!(path.first().unwrap(), &start);
    assert_eq!(path.last().unwrap(), &goal);
    let v = VerifySettings::new(0.01, 1e-9, 0.3 + 1e-9).unwrap();
    let rep = verify_path(&robot, &ConstraintStack::new(), Some(&model), &path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    // The straight line is blocked (so the planner did real work).
    let direct = verify_path(
        &robot,
        &ConstraintStack::new(),
        Some(&model),
        &[start.clone(), goal.clone()],
        &VerifySettings::new(0.01, 1e-9, 10.0).unwrap(),
    )
    .unwrap();
    assert!(!direct.passed());
    println!("free: {} waypoints, {stats:?}", path.len());

    // Same seed, same path.
    let mut space2 = FreeSpace::new(&robot, Some(&model), 0.01).unwrap();
    let again = rrt_connect(&mut space2, &start, &goal, &settings).unwrap();
    assert_eq!(again.path.unwrap(), path);
}

#[test]
fn constrained_query_slides_a_grip_along_a_bar_past_an_obstacle() {
    let robot = robot();
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
    let ps = ProjectionSettings::default();
    let seed = vec![0.0, 0.6, 0.0, 1.2, 0.0, 0.8, 0.0];
    let part = |start: f64| BarGrip {
        start: bar.start + bar.axis.into_inner() * start,
        length: 0.2,
        ..bar.clone()
    };
    let a = choose_grip_position(&robot, &ConstraintStack::new(), &part(0.05), &seed, &ps, 5)
        .unwrap()
        .unwrap()
        .q;
    let b = choose_grip_position(&robot, &ConstraintStack::new(), &part(0.55), &a, &ps, 5)
        .unwrap()
        .unwrap()
        .q;
    let walk_settings = WalkSettings {
        stride: 0.02,
        ..Default::default()
    };

    // Put a ball where the wrist passes halfway along the direct walk.
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let direct = walk(&robot, &stack, &a, &b, &walk_settings, &mut buf).unwrap();
    assert!(direct.reached());
    let mid = &direct.path[direct.path.len() / 2];
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(&robot, mid, &mut poses).unwrap();
    let wrist = poses[robot.link_id("link6").unwrap()].translation.vector;
    let ball = obstacle(
        "ball",
        [wrist.x, wrist.y, wrist.z],
        Geometry::Sphere { radius: 0.03 },
    );
    let model = CollisionModel::new(&robot, &[ball]).unwrap();
    let v = VerifySettings::new(0.002, 1e-3, 0.02 + 1e-9).unwrap();
    let blocked = verify_path(&robot, &stack, Some(&model), &direct.path, &v).unwrap();
    assert!(!blocked.passed(), "the obstacle blocks the direct walk");

    for (name, q) in [("start", &a), ("goal", &b)] {
        forward_kinematics(&robot, q, &mut poses).unwrap();
        let c = model
            .clearance(&poses, &mut clamber::collision::CollisionScratch::new())
            .unwrap();
        assert!(
            c.distance > 0.01,
            "{name} must be free: clearance {}",
            c.distance
        );
    }
    let mut space =
        ConstrainedSpace::new(&robot, &stack, Some(&model), walk_settings, 0.005).unwrap();
    let settings = RrtSettings::new(0.3, 5_000, Duration::from_secs(120), 3).unwrap();
    let plan = rrt_connect(&mut space, &a, &b, &settings).unwrap();
    let stats = plan.stats;
    let path = plan.path;
    let path = path.expect("a constrained path around the ball");
    let rep = verify_path(&robot, &stack, Some(&model), &path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    println!(
        "constrained: {} waypoints, max residual {:.2e}, {stats:?}",
        path.len(),
        rep.max_residual
    );
}

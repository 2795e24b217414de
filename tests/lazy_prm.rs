//! Lazy PRM (Bohlin & Kavraki, ICRA 2000) on the queries of tests/rrt_connect.rs: a free
//! query around a wall and a constrained one sliding a grip along a bar past a ball. The
//! outside check is the independent verifier (dense re-check of limits, residual and
//! collisions along the returned path, at a spacing of at most a tenth of the stride) and,
//! for the obstacles, the verifier's verdict that the direct motion is blocked. Reuse: a
//! second query in the same space on the kept roadmap draws fewer samples and checks fewer
//! motions than the same query on a fresh roadmap.

use std::path::Path;
use std::time::Duration;

use clamber::collision::{CollisionModel, Obstacle};
use clamber::constraint::{BarGrip, ConstraintStack};
use clamber::cspace::{ConfigSpace, ConstrainedSpace, FreeSpace};
use clamber::grip_position::choose_grip_position;
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::planner::{lazy_prm, PlanError, PrmSettings, Roadmap};
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::shortcut::{shorten, ShortenSettings};
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

/// The wall scenario of tests/rrt_connect.rs.
fn wall(robot: &Robot) -> (CollisionModel, Vec<f64>, Vec<f64>) {
    let wall = obstacle(
        "wall",
        [0.45, 0.0, 0.5],
        Geometry::Cuboid {
            size: Vector3::new(0.1, 0.1, 1.0),
        },
    );
    let model = CollisionModel::new(robot, std::slice::from_ref(&wall)).unwrap();
    let start = vec![1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    let goal = vec![-1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    (model, start, goal)
}

struct Bar {
    stack: ConstraintStack,
    model: CollisionModel,
    walk: WalkSettings,
    /// Grip positions: near the bar's start, past the ball, and back near the start (found
    /// from the second, so usually with another arm posture than the first).
    a: Vec<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
}

/// The bar scenario of tests/rrt_connect.rs (a ball where the wrist passes halfway along the
/// direct walk), plus a third grip position for a second query.
fn bar(robot: &Robot) -> Bar {
    let bar = BarGrip::new(
        robot,
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
    let grip = |s: f64, seed: &[f64]| {
        choose_grip_position(robot, &ConstraintStack::new(), &part(s), seed, &ps, 5)
            .unwrap()
            .unwrap()
            .q
    };
    let a = grip(0.05, &seed);
    let b = grip(0.55, &a);
    let c = grip(0.15, &b);
    let walk_settings = WalkSettings {
        stride: 0.02,
        ..Default::default()
    };
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let direct = walk(robot, &stack, &a, &b, &walk_settings, &mut buf).unwrap();
    assert!(direct.reached());
    let mid = &direct.path[direct.path.len() / 2];
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, mid, &mut poses).unwrap();
    let wrist = poses[robot.link_id("link6").unwrap()].translation.vector;
    let ball = obstacle(
        "ball",
        [wrist.x, wrist.y, wrist.z],
        Geometry::Sphere { radius: 0.03 },
    );
    let model = CollisionModel::new(robot, &[ball]).unwrap();
    let v = bar_verify(&walk_settings);
    let blocked = verify_path(robot, &stack, Some(&model), &direct.path, &v).unwrap();
    assert!(!blocked.passed(), "the obstacle blocks the direct walk");
    Bar {
        stack,
        model,
        walk: walk_settings,
        a,
        b,
        c,
    }
}

/// Dense re-check: spacing a tenth of the stride, residual 1e-3, gaps at most one stride.
fn bar_verify(w: &WalkSettings) -> VerifySettings {
    VerifySettings::new(w.stride / 10.0, 1e-3, w.stride + 1e-9).unwrap()
}

fn bar_settings(seed: u64) -> PrmSettings {
    PrmSettings::new(10, 1.5, 50, 5_000, Duration::from_secs(120), seed).unwrap()
}

#[test]
fn free_query_around_a_wall() {
    let robot = robot();
    let (model, start, goal) = wall(&robot);
    let settings =
        PrmSettings::new(10, f64::INFINITY, 50, 20_000, Duration::from_secs(60), 1).unwrap();
    let mut space = FreeSpace::new(&robot, Some(&model), 0.01).unwrap();
    let mut roadmap = Roadmap::new(&robot, settings);
    let plan = roadmap.query(&mut space, &start, &goal).unwrap();
    let path = plan.path.expect("a path around the wall");
    assert_eq!(path.first().unwrap(), &start);
    assert_eq!(path.last().unwrap(), &goal);
    // Free-space motions are straight lines of any length: check at 0.005 (half the
    // space's own resolution), no gap limit.
    let v = VerifySettings::new(0.005, 1e-9, 100.0).unwrap();
    let stack = ConstraintStack::new();
    let rep = verify_path(&robot, &stack, Some(&model), &path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    let direct = verify_path(
        &robot,
        &stack,
        Some(&model),
        &[start.clone(), goal.clone()],
        &v,
    )
    .unwrap();
    assert!(!direct.passed(), "the straight line is blocked");
    // Lazy: only some of the roadmap's edges were checked.
    let edges = roadmap.edge_counts();
    println!(
        "free lazy PRM: {} waypoints, {:?}, edges {edges:?}",
        path.len(),
        plan.stats
    );
    assert_eq!(plan.stats.motions_checked, edges.valid + edges.invalid);
    assert!(edges.unchecked > edges.valid + edges.invalid);

    let mut space2 = FreeSpace::new(&robot, Some(&model), 0.01).unwrap();
    let again = lazy_prm(&mut space2, &start, &goal, &settings).unwrap();
    assert_eq!(again.path.unwrap(), path, "same seed, same path");
}

#[test]
fn constrained_bar_query_and_a_second_query_on_the_kept_roadmap() {
    let robot = robot();
    let bar = bar(&robot);
    let v = bar_verify(&bar.walk);
    let mut space =
        ConstrainedSpace::new(&robot, &bar.stack, Some(&bar.model), bar.walk, 0.005).unwrap();
    let mut roadmap = Roadmap::new(&robot, bar_settings(3));
    let first = roadmap.query(&mut space, &bar.a, &bar.b).unwrap();
    let path = first
        .path
        .clone()
        .expect("a constrained path around the ball");
    assert_eq!(path.first().unwrap(), &bar.a);
    assert_eq!(path.last().unwrap(), &bar.b);
    let rep = verify_path(&robot, &bar.stack, Some(&bar.model), &path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    println!(
        "bar query 1: {} waypoints, max residual {:.2e}, {:?}, edges {:?}",
        path.len(),
        rep.max_residual,
        first.stats,
        roadmap.edge_counts()
    );

    // Shortcut and smoothing on the manifold keep it valid and make it shorter.
    let short = shorten(&mut space, &path, &ShortenSettings::default()).unwrap();
    let rep = verify_path(&robot, &bar.stack, Some(&bar.model), &short.path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    assert!(short.stats.length_after < short.stats.length_before);
    println!("bar query 1 shortened: {:?}", short.stats);

    // Second query in the same stance: from b back past the ball to c.
    let warm = roadmap.query(&mut space, &bar.b, &bar.c).unwrap();
    let warm_path = warm.path.clone().expect("second query on the kept roadmap");
    let rep = verify_path(&robot, &bar.stack, Some(&bar.model), &warm_path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    assert_eq!(warm_path.first().unwrap(), &bar.b);
    assert_eq!(warm_path.last().unwrap(), &bar.c);

    // The same second query on a fresh roadmap (same seed, fresh space).
    let mut cold_space =
        ConstrainedSpace::new(&robot, &bar.stack, Some(&bar.model), bar.walk, 0.005).unwrap();
    let cold = Roadmap::new(&robot, bar_settings(3))
        .query(&mut cold_space, &bar.b, &bar.c)
        .unwrap();
    let cold_path = cold.path.expect("second query on a fresh roadmap");
    let rep = verify_path(&robot, &bar.stack, Some(&bar.model), &cold_path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    println!("warm: {:?}\ncold: {:?}", warm.stats, cold.stats);
    assert!(
        warm.stats.samples < cold.stats.samples,
        "reuse draws fewer samples: warm {} cold {}",
        warm.stats.samples,
        cold.stats.samples
    );
    assert!(
        warm.stats.space.projections < cold.stats.space.projections,
        "reuse projects less: warm {} cold {}",
        warm.stats.space.projections,
        cold.stats.space.projections
    );
}

#[test]
fn bad_input_is_a_typed_error() {
    let robot = robot();
    let (model, start, goal) = wall(&robot);
    let mut space = FreeSpace::new(&robot, Some(&model), 0.01).unwrap();
    let settings = PrmSettings::default();
    let short = vec![0.0; 3];
    assert!(matches!(
        lazy_prm(&mut space, &short, &goal, &settings),
        Err(PlanError::WrongLength {
            which: "start",
            got: 3,
            expected: 7
        })
    ));
    // A configuration in collision with the wall (the first such random one) is not a
    // valid goal.
    let mut rng = <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(9);
    let blocked = loop {
        let q = robot.random_configuration(&mut rng);
        if !space.is_valid(&q).unwrap() {
            break q;
        }
    };
    assert!(matches!(
        lazy_prm(&mut space, &start, &blocked, &settings),
        Err(PlanError::InvalidEndpoint { which: "goal" })
    ));
    assert!(PrmSettings::new(0, 1.0, 1, 1, Duration::from_secs(1), 0).is_err());
    assert!(PrmSettings::new(5, f64::NAN, 1, 1, Duration::from_secs(1), 0).is_err());
    assert!(PrmSettings::new(5, -1.0, 1, 1, Duration::from_secs(1), 0).is_err());
}

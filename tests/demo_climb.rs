//! The climbing demo scenes (`clamber::demo::climb`) and the reach bound (`clamber::reach`).
//!
//! Outside checks:
//! - The reach bound is the triangle inequality along the kinematic chain. It is checked
//!   against an analytic case (a planar chain of known link lengths, whose straight pose
//!   attains the bound), against the climber's arms stretched straight out sideways (the
//!   joint offsets cancel, so the grips are exactly 2 x (sum of the z offsets) + shoulder
//!   width apart), and by sampling: no configuration may exceed it.
//! - Segment distances are checked against closed forms (parallel segments side by side,
//!   skew perpendicular segments, point to segment).
//! - Feasibility of every intended switch is shown by producing the configuration (projection
//!   converges, within limits, no collision) and re-checking it with independent calls.
//! - Unreachability is shown by geometry: the distance between two bars, computed here from
//!   the hold coordinates, exceeds the bound computed from the link geometry.

use clamber::collision::{CollisionModel, CollisionScratch};
use clamber::demo::climb::{self, Verdict};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use clamber::reach::{effector_reach, effector_span, segment_distance};
use clamber::scenario::{Goal, Scenario};
use clamber::scene::{HoldKind, Scene, Stance};
use nalgebra::{Point3, Vector3};
use rand::SeedableRng;

/// Residual norm of `stance` at `q`.
fn residual(s: &Scenario, stance: &Stance, q: &[f64]) -> f64 {
    let stack = stance.constraints(&s.robot, &s.scene, &[]).unwrap();
    let mut buf = stack.buffer(&s.robot);
    stack.evaluate(&s.robot, q, &mut buf, false).unwrap()
}

fn collides(robot: &Robot, scene: &Scene, q: &[f64]) -> bool {
    let model = CollisionModel::new(robot, &scene.obstacles).unwrap();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    model
        .in_collision(&poses, &mut CollisionScratch::new())
        .unwrap()
}

fn clearance(robot: &Robot, scene: &Scene, q: &[f64]) -> f64 {
    let model = CollisionModel::new(robot, &scene.obstacles).unwrap();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    model
        .clearance(&poses, &mut CollisionScratch::new())
        .unwrap()
        .distance
}

/// World position of an effector's grip frame at `q`.
fn grip_point(robot: &Robot, effector: &str, q: &[f64]) -> Point3<f64> {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    let e = robot.effector(effector).unwrap();
    Point3::from((poses[e.link] * e.grip).translation.vector)
}

fn bar_ends(scene: &Scene, name: &str) -> (Point3<f64>, Point3<f64>) {
    let (_, h) = scene.hold(name).unwrap();
    match &h.kind {
        HoldKind::Bar { start, end, .. } => (*start, *end),
        other => panic!("{name} is not a bar: {other:?}"),
    }
}

/// Check the scenario's start: satisfies its stance to the scenario's tolerance, within the
/// joint limits, collision-free, and every grip point lies on its hold.
fn check_start(s: &Scenario) {
    let r = residual(s, &s.start.stance, &s.start.q);
    assert!(
        r <= s.limits.tolerance,
        "{}: start residual {r:e} above tolerance {:e}",
        s.name,
        s.limits.tolerance
    );
    assert!(
        s.robot.within_limits(&s.start.q, 0.0),
        "{}: start outside limits",
        s.name
    );
    assert!(
        !collides(&s.robot, &s.scene, &s.start.q),
        "{}: start collides",
        s.name
    );
    // Independent of the constraint code: each grip point is on its bar segment / point.
    for (e, &h) in &s.start.stance.grips {
        let p = grip_point(&s.robot, e, &s.start.q);
        let d = match &s.scene.holds[h].kind {
            HoldKind::Bar { start, end, .. } => segment_distance(start, end, &p, &p),
            HoldKind::Point { pose, .. } => (p.coords - pose.translation.vector).norm(),
            other => panic!("unexpected hold {other:?}"),
        };
        assert!(d <= 1e-6, "{}: {e} is {d:e} m off its hold", s.name);
    }
}

// ---------------------------------------------------------------------------------------
// Reach bound

/// A planar chain of three revolute joints (axes z) with links of 0.5, 0.4, 0.3 m along x
/// and the effector 0.1 m past the last joint: reach from the base = 0.5 + 0.4 + 0.3 + 0.1
/// (elementary: a chain of rigid segments is longest when straight).
fn planar_chain() -> Robot {
    let mut links = vec![LinkSpec {
        name: "base".into(),
        shapes: vec![],
    }];
    let mut joints = vec![];
    let lens = [0.0, 0.5, 0.4];
    for (i, len) in lens.iter().enumerate() {
        links.push(LinkSpec {
            name: format!("l{i}"),
            shapes: vec![],
        });
        joints.push(JointSpec {
            name: format!("j{i}"),
            joint_type: JointType::Revolute,
            parent: if i == 0 {
                "base".into()
            } else {
                format!("l{}", i - 1)
            },
            child: format!("l{i}"),
            origin: pose_from_xyz_rpy([*len, 0.0, 0.0], [0.0; 3]),
            axis: Vector3::z(),
            limits: vec![Limits {
                lower: -3.0,
                upper: 3.0,
                velocity: 1.0,
                acceleration: 1.0,
            }],
            passive: false,
        });
    }
    RobotSpec {
        name: "chain".into(),
        links,
        joints,
        effectors: vec![EffectorSpec {
            name: "tip".into(),
            link: "l2".into(),
            grip: pose_from_xyz_rpy([0.3 + 0.1, 0.0, 0.0], [0.0; 3]),
        }],
        ..Default::default()
    }
    .build()
    .unwrap()
}

#[test]
fn reach_bound_of_a_planar_chain_is_its_stretched_length() {
    let robot = planar_chain();
    let bound = effector_reach(&robot, "tip", "base").unwrap();
    // 0.5 + 0.4 + (0.3 + 0.1): analytic, the straight chain.
    assert!((bound - 1.3).abs() < 1e-12, "bound {bound}");
    let q = vec![0.0; robot.nq()];
    let tip = grip_point(&robot, "tip", &q);
    assert!(
        (tip.coords.norm() - bound).abs() < 1e-12,
        "straight chain tip {tip}"
    );
}

#[test]
fn climber_span_matches_the_stretched_arms_and_is_never_exceeded() {
    let robot = climb::climber().unwrap();
    let span = effector_span(&robot, climb::LEFT, climb::RIGHT).unwrap();
    // Robot file: shoulders 0.3 m apart (joint1 at y = +-0.15); from the shoulder to the grip
    // the segments are 0.085, 0, |(0.017, 0, 0.289)|, |(-0.017, 0, 0.136)|, 0.119, 0.068,
    // 0.034 and the grip offset 0.085.
    let arm =
        0.085 + (0.017f64.hypot(0.289)) + (0.017f64.hypot(0.136)) + 0.119 + 0.068 + 0.034 + 0.085;
    assert!((span - (0.3 + 2.0 * arm)).abs() < 1e-12, "span {span}");
    // All arm joints at zero: both arms point straight out sideways (joint1 turns the arm's
    // z axis onto the torso's +-y) and the x offsets +-0.017 cancel, so the grips are
    // 0.3 + 2 x (0.085 + 0.289 + 0.136 + 0.119 + 0.068 + 0.034 + 0.085) = 1.932 m apart.
    let q = robot.neutral();
    let d = (grip_point(&robot, climb::LEFT, &q) - grip_point(&robot, climb::RIGHT, &q)).norm();
    assert!((d - 1.932).abs() < 1e-5, "stretched distance {d}");
    assert!(
        d <= span && span - d < 0.005,
        "span {span} vs stretched {d}"
    );
    // Sampling: no configuration exceeds the bound.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let mut worst: f64 = 0.0;
    for _ in 0..20_000 {
        let q = robot.random_configuration(&mut rng);
        let d = (grip_point(&robot, climb::LEFT, &q) - grip_point(&robot, climb::RIGHT, &q)).norm();
        worst = worst.max(d);
    }
    assert!(worst <= span, "sampled {worst} > span {span}");
    assert!(worst > 1.0, "sampling should spread the arms (max {worst})");
    // Per effector from the torso: the arm plus the shoulder offset |(0, 0.15, 0.14)|.
    let from_torso = effector_reach(&robot, climb::LEFT, "torso").unwrap();
    assert!((from_torso - (arm + 0.15f64.hypot(0.14))).abs() < 1e-12);
}

#[test]
fn segment_distance_closed_forms() {
    let p = |x, y, z| Point3::new(x, y, z);
    // Parallel side by side, overlapping: the perpendicular offset.
    let d = segment_distance(
        &p(0., 0., 0.),
        &p(0., 1., 0.),
        &p(0.3, 0.2, 0.4),
        &p(0.3, 0.9, 0.4),
    );
    assert!((d - 0.5).abs() < 1e-12);
    // Parallel, not overlapping along the axis: end to end.
    let d = segment_distance(
        &p(0., 0., 0.),
        &p(0., 1., 0.),
        &p(0., 1.3, 0.4),
        &p(0., 2., 0.4),
    );
    assert!((d - 0.5).abs() < 1e-12);
    // Skew perpendicular segments crossing in projection: the common normal length.
    let d = segment_distance(
        &p(-1., 0., 0.),
        &p(1., 0., 0.),
        &p(0., -1., 2.),
        &p(0., 1., 2.),
    );
    assert!((d - 2.0).abs() < 1e-12);
    // Point to segment.
    let d = segment_distance(
        &p(3., 4., 0.),
        &p(3., 4., 0.),
        &p(0., 0., 0.),
        &p(0., 0., 1.),
    );
    assert!((d - 5.0).abs() < 1e-12);
}

// ---------------------------------------------------------------------------------------
// Corridor

/// Bar `k` of the corridor and the hand that holds it.
fn rung(s: &Scenario, k: usize) -> usize {
    s.scene.hold(&format!("rung_{k:02}")).unwrap().0
}

#[test]
fn corridor_start_holds_its_stance() {
    let s = climb::corridor(12).unwrap();
    check_start(&s);
    assert_eq!(s.start.stance.grips.get(climb::LEFT), Some(&rung(&s, 0)));
    assert_eq!(s.start.stance.grips.get(climb::RIGHT), Some(&rung(&s, 1)));
    match &s.goal {
        Goal::Stance(g) => {
            assert_eq!(g.grips.len(), 2);
            assert!(g.grips.values().any(|&h| h == rung(&s, 11)));
            assert!(g.grips.values().any(|&h| h == rung(&s, 10)));
        }
        other => panic!("goal {other:?}"),
    }
}

#[test]
fn corridor_turns_the_corner_and_keeps_spacing_inside_the_span() {
    let s = climb::corridor(12).unwrap();
    let span = effector_span(&s.robot, climb::LEFT, climb::RIGHT).unwrap();
    let mut on_deck = 0;
    for k in 0..12 {
        let (a, b) = bar_ends(&s.scene, &format!("rung_{k:02}"));
        if (a.z - b.z).abs() < 1e-12 {
            on_deck += 1;
        }
        if k + 1 < 12 {
            let (c, d) = bar_ends(&s.scene, &format!("rung_{:02}", k + 1));
            let gap = segment_distance(&a, &b, &c, &d);
            // Comfortably inside: less than a third of the span.
            assert!(
                gap < span / 3.0,
                "rungs {k},{}: {gap} vs span {span}",
                k + 1
            );
        }
    }
    // Half on the deck (horizontal rungs), half upright on the wall: a corner partway.
    assert_eq!(on_deck, 6);
}

#[test]
fn every_consecutive_corridor_pair_can_be_held_at_once() {
    // The hand-over-hand route holds rungs (k, k+1) with the hands alternating. For each pair
    // find a configuration and re-check it independently.
    for n in [4, 8, 12, 16] {
        let s = climb::corridor(n).unwrap();
        all_pairs_held(&s, n);
    }
}

fn all_pairs_held(s: &Scenario, n: usize) {
    for k in 0..n - 1 {
        let stance = climb::pair_stance(k, rung(s, k), k + 1, rung(s, k + 1));
        let q = climb::find_pose(&s.robot, &s.scene, &stance, 100 + k as u64, 400)
            .unwrap()
            .unwrap_or_else(|| panic!("no configuration holds rungs {k} and {}", k + 1));
        let r = residual(s, &stance, &q);
        assert!(
            r <= s.limits.tolerance,
            "corridor_{n} pair {k}: residual {r:e}"
        );
        assert!(
            s.robot.within_limits(&q, 0.0),
            "corridor_{n} pair {k}: limits"
        );
        assert!(
            !collides(&s.robot, &s.scene, &q),
            "corridor_{n} pair {k}: collision"
        );
        // Comfortably: away from every joint limit and every wall. Margin recomputed here
        // from the joint limits, clearance from the collision model's distance query.
        let margin = s
            .robot
            .joints()
            .iter()
            .flat_map(|j| j.bounded_coordinates())
            .map(|(i, l)| (q[i] - l.lower).min(l.upper - q[i]))
            .fold(f64::INFINITY, f64::min);
        assert!(
            margin >= climb::POSE_MIN_MARGIN,
            "corridor_{n} pair {k}: joint margin {margin}"
        );
        let c = clearance(&s.robot, &s.scene, &q);
        assert!(
            c >= climb::POSE_MIN_CLEARANCE,
            "corridor_{n} pair {k}: clearance {c}"
        );
    }
}

#[test]
fn corridor_lure_is_beyond_the_span_from_every_bar() {
    let s = climb::corridor(12).unwrap();
    let span = effector_span(&s.robot, climb::LEFT, climb::RIGHT).unwrap();
    let (l0, l1) = bar_ends(&s.scene, climb::LURE);
    // The lure runs along x on the ceiling; every rung is either a deck rung (along y at
    // z = 0.1) or a wall rung (along z at y = 1.1). For such axis-aligned perpendicular
    // segments the distance is computed here coordinate by coordinate: clamp each
    // coordinate of one segment's range against the other's.
    let interval_gap = |a0: f64, a1: f64, b0: f64, b1: f64| {
        let (a0, a1) = (a0.min(a1), a0.max(a1));
        let (b0, b1) = (b0.min(b1), b0.max(b1));
        (b0 - a1).max(a0 - b1).max(0.0)
    };
    let mut nearest = f64::INFINITY;
    for k in 0..12 {
        let (a, b) = bar_ends(&s.scene, &format!("rung_{k:02}"));
        let d = Vector3::new(
            interval_gap(a.x, b.x, l0.x, l1.x),
            interval_gap(a.y, b.y, l0.y, l1.y),
            interval_gap(a.z, b.z, l0.z, l1.z),
        )
        .norm();
        nearest = nearest.min(d);
    }
    assert!(
        nearest > span + climb::LURE_MARGIN,
        "lure {nearest} m from the nearest rung; span {span}, margin {}",
        climb::LURE_MARGIN
    );
    assert!(
        (climb::nearest_other_hold(&s.scene, s.scene.hold(climb::LURE).unwrap().0) - nearest).abs()
            < 1e-12
    );
}

#[test]
fn corridor_sizes_build_and_same_call_same_scene() {
    for n in [4, 8, 16] {
        let a = climb::corridor(n).unwrap();
        assert_eq!(a.scene.holds.len(), n + 1);
        check_start(&a);
        let b = climb::corridor(n).unwrap();
        assert_eq!(a.start.q, b.start.q);
        assert_eq!(a.scene.holds, b.scene.holds);
        assert_eq!(a.scene.obstacles, b.scene.obstacles);
        assert_eq!(a.start.stance, b.start.stance);
    }
    assert!(matches!(
        climb::corridor(3),
        Err(climb::ClimbError::TooFewBars { got: 3, .. })
    ));
}

// ---------------------------------------------------------------------------------------
// Point wall, gap, feasibility

#[test]
fn point_wall_start_and_goal() {
    let s = climb::point_wall().unwrap();
    check_start(&s);
    assert_eq!(
        s.scene.holds.len(),
        climb::POINT_COLUMNS * climb::POINT_ROWS - climb::POINT_MISSING.len()
    );
    match &s.goal {
        Goal::Grip { effector, hold } => {
            assert_eq!(effector, climb::LEFT);
            assert_eq!(
                s.scene.holds[*hold].name,
                climb::point_name(climb::POINT_COLUMNS - 1, 1)
            );
        }
        other => panic!("goal {other:?}"),
    }
    let b = climb::point_wall().unwrap();
    assert_eq!(s.start.q, b.start.q);
}

#[test]
fn gap_is_wider_than_the_span() {
    let s = climb::gap().unwrap();
    check_start(&s);
    let span = effector_span(&s.robot, climb::LEFT, climb::RIGHT).unwrap();
    let (a0, a1) = bar_ends(&s.scene, climb::GAP_NEAR);
    let (b0, b1) = bar_ends(&s.scene, climb::GAP_FAR);
    // Parallel rungs side by side (same y range, same height): the distance is the
    // difference of their x coordinates.
    assert_eq!((a0.y, a1.y, a0.z), (b0.y, b1.y, b0.z));
    let width = b0.x - a0.x;
    assert!(width > span, "gap {width} not wider than span {span}");
    assert!(
        (width - (span + climb::GAP_MARGIN)).abs() < 1e-12,
        "gap {width} vs span {span} + margin {}",
        climb::GAP_MARGIN
    );
    // Every hold before the gap is farther from every hold after it than the span.
    let near: Vec<_> = ["ledge_0", "ledge_1", climb::GAP_NEAR]
        .into_iter()
        .collect();
    let far: Vec<_> = [climb::GAP_FAR, "ledge_4"].into_iter().collect();
    for n in &near {
        for f in &far {
            let (p0, _) = bar_ends(&s.scene, n);
            let (q0, _) = bar_ends(&s.scene, f);
            assert!(q0.x - p0.x > span, "{n} -> {f}");
        }
    }
}

#[test]
fn feasibility_scene_verdicts_hold() {
    let s = climb::feasibility_scene().unwrap();
    check_start(&s);
    let span = effector_span(&s.robot, climb::LEFT, climb::RIGHT).unwrap();
    let expect = climb::feasibility_expectations(&s).unwrap();
    assert!(expect.iter().any(|e| e.verdict == Verdict::Feasible));
    assert!(expect
        .iter()
        .any(|e| matches!(e.verdict, Verdict::OutOfReach { .. })));
    assert!(expect
        .iter()
        .any(|e| matches!(e.verdict, Verdict::InsideObstacle { .. })));
    for (i, e) in expect.iter().enumerate() {
        let (held, _) = s.scene.hold(&e.held).unwrap();
        let (target, _) = s.scene.hold(&e.target).unwrap();
        let (h0, h1) = bar_ends(&s.scene, &e.held);
        let (t0, t1) = bar_ends(&s.scene, &e.target);
        match &e.verdict {
            Verdict::Feasible => {
                let stance = Stance::new()
                    .with(climb::LEFT, held)
                    .with(climb::RIGHT, target);
                let q = climb::find_pose(&s.robot, &s.scene, &stance, 7 + i as u64, 400)
                    .unwrap()
                    .unwrap_or_else(|| panic!("{} + {} not held", e.held, e.target));
                assert!(residual(&s, &stance, &q) <= s.limits.tolerance);
                assert!(s.robot.within_limits(&q, 0.0));
                assert!(!collides(&s.robot, &s.scene, &q));
            }
            Verdict::OutOfReach { excess } => {
                // Deck rungs: parallel, side by side; distance = x difference.
                let d = (t0.x - h0.x).abs();
                assert!((segment_distance(&h0, &h1, &t0, &t1) - d).abs() < 1e-12);
                assert!((d - span - excess).abs() < 1e-12);
                assert!(*excess > 0.0, "{} -> {}: excess {excess}", e.held, e.target);
            }
            Verdict::InsideObstacle { obstacle, depth } => {
                // The whole rung lies inside the locker box at least `depth` from its faces.
                let o = s
                    .scene
                    .obstacles
                    .iter()
                    .find(|o| &o.name == obstacle)
                    .unwrap();
                let clamber::model::Geometry::Cuboid { size } = &o.shape.geometry else {
                    panic!("locker is not a box");
                };
                let c = o.shape.origin.translation.vector;
                for p in [t0, t1] {
                    for ax in 0..3 {
                        let inside = 0.5 * size[ax] - (p[ax] - c[ax]).abs();
                        assert!(inside >= *depth - 1e-12, "{p} axis {ax}: {inside}");
                    }
                }
                // The palm face centre is 0.034 m behind the grip point (robot file); inside
                // that depth every grip puts the palm into the locker.
                assert!(*depth > 0.034);
                // And a configuration found on the stance manifold regardless of collision
                // does collide.
                let stance = Stance::new()
                    .with(climb::LEFT, held)
                    .with(climb::RIGHT, target);
                let free = Scene {
                    obstacles: vec![],
                    ..s.scene.clone()
                };
                let q = climb::find_pose(&s.robot, &free, &stance, 3, 400)
                    .unwrap()
                    .expect("reachable when the locker is ignored");
                assert!(collides(&s.robot, &s.scene, &q));
            }
            other => panic!("unexpected verdict {other:?}"),
        }
    }
}

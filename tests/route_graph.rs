//! The stance graph's geometry: the reach bound against a hand sum of the robot file's link
//! offsets, segment distances against closed-form cases, and the pruning rule.

mod route_scene;

use clamber::reach::{effector_span, segment_distance};
use clamber::route::graph::StanceGraph;
use clamber::scene::Stance;
use nalgebra::Point3;

use route_scene::brachia_bound_by_hand;

#[test]
fn reach_bound_matches_the_hand_sum_of_link_offsets() {
    let robot = route_scene::brachia();
    let b = effector_span(&robot, "left_gripper", "right_gripper").unwrap();
    let hand = brachia_bound_by_hand();
    assert!((b - hand).abs() < 1e-12, "bound {b} vs hand sum {hand}");
    let back = effector_span(&robot, "right_gripper", "left_gripper").unwrap();
    assert!((b - back).abs() < 1e-12, "the bound is symmetric");
    // The stance graph uses this bound for the pair, and no root anchor (free-flying).
    let g = StanceGraph::new(&robot, &route_scene::bars_scene(&[0.0]));
    assert_eq!(g.pair_bound[0][1], Some(b));
}

#[test]
fn reach_bound_is_never_exceeded_by_sampled_configurations() {
    // Outside check: forward kinematics of random configurations (the bound is an upper
    // bound over all of them).
    use clamber::kinematics::forward_kinematics;
    use clamber::math::Pose;
    use rand::SeedableRng;
    let robot = route_scene::brachia();
    let b = effector_span(&robot, "left_gripper", "right_gripper").unwrap();
    let l = robot.effector("left_gripper").unwrap().clone();
    let r = robot.effector("right_gripper").unwrap().clone();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut longest: f64 = 0.0;
    for _ in 0..20_000 {
        let q = robot.random_configuration(&mut rng);
        forward_kinematics(&robot, &q, &mut poses).unwrap();
        let pl = (poses[l.link] * l.grip).translation.vector;
        let pr = (poses[r.link] * r.grip).translation.vector;
        longest = longest.max((pl - pr).norm());
    }
    assert!(longest <= b, "sampled {longest} above the bound {b}");
    // And the bound is not wildly loose: random samples get within 35 % of it.
    assert!(longest > 0.65 * b, "sampled {longest}, bound {b}");
}

#[test]
fn segment_distance_closed_form_cases() {
    let p = |x: f64, y: f64, z: f64| Point3::new(x, y, z);
    // Parallel bars 0.5 apart.
    let d = segment_distance(
        &p(0., -0.3, 0.),
        &p(0., 0.3, 0.),
        &p(0.5, -0.3, 0.),
        &p(0.5, 0.3, 0.),
    );
    assert!((d - 0.5).abs() < 1e-15);
    // Crossing skew segments at heights 0 and 1: distance 1.
    let d = segment_distance(
        &p(-1., 0., 0.),
        &p(1., 0., 0.),
        &p(0., -1., 1.),
        &p(0., 1., 1.),
    );
    assert!((d - 1.0).abs() < 1e-15);
    // Collinear, end to end with a 0.25 gap.
    let d = segment_distance(
        &p(0., 0., 0.),
        &p(1., 0., 0.),
        &p(1.25, 0., 0.),
        &p(2., 0., 0.),
    );
    assert!((d - 0.25).abs() < 1e-15);
    // A point against a segment: the perpendicular foot lies beyond the end, so the
    // distance is to the end point (3-4-5 triangle).
    let d = segment_distance(
        &p(4., 3., 0.),
        &p(4., 3., 0.),
        &p(-1., 0., 0.),
        &p(0., 0., 0.),
    );
    assert!((d - 5.0).abs() < 1e-15);
}

#[test]
fn reach_test_prunes_exactly_beyond_the_bound() {
    let hand = brachia_bound_by_hand();
    let robot = route_scene::brachia();
    let scene = route_scene::bars_scene(&[0.0, hand - 0.01, hand + 0.01]);
    let g = StanceGraph::new(&robot, &scene);
    assert!(g.free_flying);
    let s = Stance::new().with("left_gripper", 0);
    assert!(g.reach_test(&s, "right_gripper", 1).is_none());
    let p = g.reach_test(&s, "right_gripper", 2).expect("pruned");
    assert!((p.excess - 0.01).abs() < 1e-12, "excess {}", p.excess);
    // A single grip is never released by a free-flying robot.
    let (edges, _) = g.neighbours(&s, scene.holds.len());
    assert!(
        edges.iter().all(|e| e.grab),
        "no release from the last grip"
    );
    let two = s.clone().with("right_gripper", 1);
    let (edges, _) = g.neighbours(&two, scene.holds.len());
    assert_eq!(edges.len(), 2, "two releases, no free effector: {edges:?}");
}

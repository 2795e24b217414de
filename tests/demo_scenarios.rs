//! The four single-stance demo scenarios: their start and goal satisfy the stance and are
//! collision-free, the obvious motion is blocked, `plan_motion` solves each for several seeds,
//! and the timed trajectory keeps the geometry each closed chain must keep, checked against
//! elementary geometry rather than against the constraint code:
//!
//! - door and lever: a point fixed on a body turning about a fixed axis stays on a circle
//!   about that axis (radius = its distance from the axis, analytic from the handle offset);
//! - carry: two frames fixed on one rigid body keep their relative pose.

use clamber::collision::{CollisionModel, CollisionScratch};
use clamber::demo::{bar_slide, carry, door, lever};
use clamber::kinematics::forward_kinematics;
use clamber::math::{rotation_log, Pose};
use clamber::motion::{plan_motion, Motion, MotionSettings};
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::scenario::{Goal, Scenario};
use clamber::verify::{verify_path, Defect, VerifySettings};
use clamber::walk::{walk, WalkSettings};
use nalgebra::Vector3;

fn all() -> Vec<Scenario> {
    vec![
        door::scenario().unwrap(),
        lever::scenario().unwrap(),
        bar_slide::scenario().unwrap(),
        carry::scenario().unwrap(),
    ]
}

fn goal(s: &Scenario) -> Vec<f64> {
    match &s.goal {
        Goal::Configuration(q) => q.clone(),
        other => panic!("{}: unexpected goal {other:?}", s.name),
    }
}

fn poses(s: &Scenario, q: &[f64]) -> Vec<Pose> {
    let mut p = vec![Pose::identity(); s.robot.links().len()];
    forward_kinematics(&s.robot, q, &mut p).unwrap();
    p
}

fn grip(s: &Scenario, poses: &[Pose], effector: &str) -> Pose {
    let e = s.robot.effector(effector).unwrap();
    poses[e.link] * e.grip
}

#[test]
fn start_and_goal_satisfy_the_stance_and_are_collision_free() {
    for s in all() {
        let stack = s
            .start
            .stance
            .constraints(&s.robot, &s.scene, &s.constant)
            .unwrap();
        assert!(!stack.is_empty(), "{}: every demo is constrained", s.name);
        let model = CollisionModel::new(&s.robot, &s.scene.obstacles).unwrap();
        let mut buf = stack.buffer(&s.robot);
        let mut scratch = CollisionScratch::new();
        for (which, q) in [("start", s.start.q.clone()), ("goal", goal(&s))] {
            let r = stack.evaluate(&s.robot, &q, &mut buf, false).unwrap();
            assert!(
                r <= 0.1 * s.limits.tolerance,
                "{} {which}: residual {r:.3e}",
                s.name
            );
            assert!(s.robot.within_limits(&q, 0.0), "{} {which}: limits", s.name);
            let c = model
                .clearance(&poses(&s, &q), &mut scratch)
                .unwrap()
                .distance;
            assert!(c > 0.0, "{} {which}: clearance {c}", s.name);
            println!("{} {which}: residual {r:.2e}, clearance {c:.3} m", s.name);
        }
    }
}

/// The direct manifold walk from start to goal (the obvious motion) collides, so each
/// scenario makes the planner work.
#[test]
fn the_obvious_motion_is_blocked() {
    // The lever has no obstacle in the way: its direct walk is its motion.
    for s in all().into_iter().filter(|s| s.name != "lever") {
        let stack = s
            .start
            .stance
            .constraints(&s.robot, &s.scene, &s.constant)
            .unwrap();
        let ws = WalkSettings {
            stride: s.limits.stride,
            projection: ProjectionSettings {
                tolerance: 0.1 * s.limits.tolerance,
                ..Default::default()
            },
            ..Default::default()
        };
        let mut buf = ProjectionBuffer::new(&s.robot, &stack);
        let w = walk(&s.robot, &stack, &s.start.q, &goal(&s), &ws, &mut buf).unwrap();
        let model = CollisionModel::new(&s.robot, &s.scene.obstacles).unwrap();
        // Collisions only: the tolerance is set so loose that no residual counts.
        let v = VerifySettings::new(0.1 * s.limits.stride, 1.0, 1.0).unwrap();
        let rep = verify_path(&s.robot, &stack, Some(&model), &w.path, &v).unwrap();
        let hit = rep
            .defects
            .iter()
            .find(|d| matches!(d, Defect::Collision { .. }));
        println!(
            "{}: direct walk {:?}, {} points, first collision {:?}",
            s.name,
            w.stop,
            w.path.len(),
            hit.map(|d| d.to_string())
        );
        assert!(w.reached(), "{}: the direct walk reaches the goal", s.name);
        assert!(
            hit.is_some(),
            "{}: the direct walk is collision-free",
            s.name
        );
    }
}

fn plan(s: &Scenario, seed: u64) -> Motion {
    let mut s = s.clone();
    s.limits.seed = seed;
    plan_motion(&s, &MotionSettings::default())
        .unwrap_or_else(|e| panic!("{} seed {seed}: {e}", s.name))
}

/// Basic facts every motion must have: ends at start and goal, at rest there, fixed time
/// step, residual at every sample within the tolerance.
fn check_motion(s: &Scenario, m: &Motion) {
    let dt = m.tolerances.time_step;
    let first = m.samples.first().unwrap();
    let last = m.samples.last().unwrap();
    assert_eq!(first.q, s.start.q, "{}: starts at the start", s.name);
    assert_eq!(last.q, goal(s), "{}: ends at the goal", s.name);
    assert!(first.qdot.iter().chain(&last.qdot).all(|v| v.abs() < 1e-9));
    for (k, w) in m.samples.windows(2).enumerate() {
        let step = w[1].t - w[0].t;
        assert!(
            (step - dt).abs() <= 1e-9 * dt.max(1.0),
            "{}: sample {k} step {step} vs {dt}",
            s.name
        );
    }
    assert!(m.stats.max_residual_samples <= m.tolerances.tolerance);
    assert!(m.tolerances.verify_resolution <= m.tolerances.stride / 10.0 + 1e-15);
    assert!(m.stats.min_clearance > 0.0, "{}", s.name);
}

const SEEDS: [u64; 2] = [2, 3];

#[test]
fn door_opens_with_the_handle_on_its_hinge_circle() {
    let s = door::scenario().unwrap();
    let panel = s.robot.link_id("door_panel").unwrap();
    let hinge = s.robot.joint_id("door_hinge").unwrap();
    let hq = s.robot.joints()[hinge].q_index;
    // Elementary geometry: the handle origin is (hx, hy, hz) in the panel frame, whose z
    // axis is the hinge axis, so it stays at radius sqrt(hx^2 + hy^2) from the axis and at
    // height hz.
    let [hx, hy, hz] = door::HANDLE_IN_PANEL;
    let r = (hx * hx + hy * hy).sqrt();
    let [cx, cy, _] = door::HINGE;
    assert!(
        (goal(&s)[hq] - door::OPEN_ANGLE).abs() < 1e-6,
        "door open 90 deg"
    );
    assert!(s.start.q[hq].abs() < 1e-6, "door closed at the start");
    for seed in SEEDS {
        let m = plan(&s, seed);
        check_motion(&s, &m);
        let (mut worst_r, mut worst_z, mut worst_o): (f64, f64, f64) = (0.0, 0.0, 0.0);
        for smp in &m.samples {
            let p = poses(&s, &smp.q);
            let g = grip(&s, &p, "gripper");
            let t = g.translation.vector;
            worst_r = worst_r.max((((t.x - cx).powi(2) + (t.y - cy).powi(2)).sqrt() - r).abs());
            worst_z = worst_z.max((t.z - hz).abs());
            // The gripper turns with the panel: its orientation is the handle's.
            let h = p[panel] * door::handle_pose();
            worst_o = worst_o.max(rotation_log(&(h.rotation.inverse() * g.rotation)).norm());
        }
        println!(
            "door seed {seed}: {} samples at {} s, duration {:.2} s, max |rho - r| {worst_r:.2e} m, \
             max |z - h| {worst_z:.2e} m, orientation {worst_o:.2e} rad, stats {:?}",
            m.samples.len(),
            m.tolerances.time_step,
            m.stats.duration,
            m.stats
        );
        let tol = m.tolerances.tolerance;
        assert!(worst_r <= tol && worst_z <= tol && worst_o <= tol);
    }
}

#[test]
fn lever_handle_stays_on_its_arc() {
    let s = lever::scenario().unwrap();
    let pivot = s.robot.joint_id("lever_pivot").unwrap();
    let pq = s.robot.joints()[pivot].q_index;
    assert!(
        (goal(&s)[pq] - lever::PULL_ANGLE).abs() < 1e-6,
        "pulled 60 deg"
    );
    // The arc: the pivot axis is the line through PIVOT along x; the handle stays at
    // HANDLE_RADIUS from it, in the plane x = PIVOT.x - HANDLE_STANDOFF; its angle from
    // vertical toward -y is the lever angle and runs 0 -> 60 deg.
    let [px, py, pz] = lever::PIVOT;
    for seed in SEEDS {
        let m = plan(&s, seed);
        check_motion(&s, &m);
        let (mut worst_r, mut worst_x, mut worst_angle): (f64, f64, f64) = (0.0, 0.0, 0.0);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for smp in &m.samples {
            let t = grip(&s, &poses(&s, &smp.q), "hand").translation.vector;
            let (dy, dz) = (t.y - py, t.z - pz);
            worst_r = worst_r.max(((dy * dy + dz * dz).sqrt() - lever::HANDLE_RADIUS).abs());
            worst_x = worst_x.max((t.x - (px - lever::HANDLE_STANDOFF)).abs());
            let angle = (-dy).atan2(dz);
            worst_angle = worst_angle.max((angle - smp.q[pq]).abs());
            lo = lo.min(angle);
            hi = hi.max(angle);
        }
        println!(
            "lever seed {seed}: {} samples, duration {:.2} s, max |rho - r| {worst_r:.2e} m, \
             |x - x0| {worst_x:.2e}, angle from geometry vs joint {worst_angle:.2e}, swept \
             [{lo:.4}, {hi:.4}] rad",
            m.samples.len(),
            m.stats.duration
        );
        let tol = m.tolerances.tolerance;
        assert!(worst_r <= tol && worst_x <= tol);
        assert!(worst_angle <= tol / lever::HANDLE_RADIUS * 2.0);
        assert!(lo.abs() < 1e-4 && (hi - lever::PULL_ANGLE).abs() < 1e-4 + 0.2);
    }
}

#[test]
fn bar_slide_keeps_the_hand_on_the_bar() {
    let s = bar_slide::scenario().unwrap();
    let a = Vector3::from(bar_slide::BAR_START);
    let b = Vector3::from(bar_slide::BAR_END);
    let axis = (b - a).normalize();
    for seed in SEEDS {
        let m = plan(&s, seed);
        check_motion(&s, &m);
        // Elementary geometry: distance of the grip point from the bar's line, its position
        // along the bar within [0, length], and the approach axis perpendicular to the bar.
        let (mut worst_line, mut worst_perp): (f64, f64) = (0.0, 0.0);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for smp in &m.samples {
            let g = grip(&s, &poses(&s, &smp.q), "hand");
            let d = g.translation.vector - a;
            let along = d.dot(&axis);
            worst_line = worst_line.max((d - axis * along).norm());
            worst_perp = worst_perp.max((g.rotation * Vector3::z()).dot(&axis).abs());
            lo = lo.min(along);
            hi = hi.max(along);
        }
        println!(
            "bar_slide seed {seed}: {} samples, duration {:.2} s, off the bar line \
             {worst_line:.2e} m, approach . bar {worst_perp:.2e}, grip from {lo:.4} to {hi:.4} m",
            m.samples.len(),
            m.stats.duration
        );
        let tol = m.tolerances.tolerance;
        assert!(worst_line <= tol && worst_perp <= tol);
        assert!(lo >= -tol && hi <= (b - a).norm() + tol);
        assert!((lo - bar_slide::START_AT).abs() < 0.2 && (hi - bar_slide::GOAL_AT).abs() < 0.2);
    }
}

#[test]
fn carried_box_keeps_its_relative_pose() {
    let s = carry::scenario().unwrap();
    let rel = carry::right_in_left();
    for seed in SEEDS {
        let m = plan(&s, seed);
        check_motion(&s, &m);
        // Two frames on one rigid body: right grip = left grip * rel at every sample.
        let (mut worst_p, mut worst_o): (f64, f64) = (0.0, 0.0);
        for smp in &m.samples {
            let p = poses(&s, &smp.q);
            let want = grip(&s, &p, "left_hand") * rel;
            let got = grip(&s, &p, "right_hand");
            worst_p = worst_p.max((want.translation.vector - got.translation.vector).norm());
            worst_o = worst_o.max(rotation_log(&(want.rotation.inverse() * got.rotation)).norm());
        }
        // The box really moved from the low shelf to the high one.
        let centre = |q: &[f64]| {
            (grip(&s, &poses(&s, q), "left_hand") * carry::left_in_box().inverse())
                .translation
                .vector
        };
        let c0 = centre(&m.samples[0].q);
        let c1 = centre(&m.samples.last().unwrap().q);
        println!(
            "carry seed {seed}: {} samples, duration {:.2} s, relative pose error {worst_p:.2e} m \
             / {worst_o:.2e} rad, box {c0:?} -> {c1:?}",
            m.samples.len(),
            m.stats.duration
        );
        let tol = m.tolerances.tolerance;
        assert!(worst_p <= tol && worst_o <= tol);
        assert!((c0 - Vector3::from(carry::BOX_START)).norm() < 1e-6);
        assert!((c1 - Vector3::from(carry::BOX_GOAL)).norm() < 1e-6);
    }
}

//! Projection gives the same answers before and after a change meant only to make it faster.
//!
//! A fixed, seeded set of projection problems covers every constraint kind and every stop
//! reason: point grips (full pose, free to turn about an axis, position only), bar grips
//! (fixed and free to turn, with the one-sided "inside the segment" row active), keep-level
//! rows (equality and one-sided), a tether through a passive hinge, a carried object, the
//! floating torso, starts outside the joint limits, unreachable targets (stalls, limits,
//! iteration caps), the 7-DOF bench task at the bench's perturbations, and the climbing
//! robot's stances in the route-feasibility scene (bar grips on a floating torso).
//!
//! `tests/data/projection_golden.json` holds the outcome of each problem computed by the
//! projection code as it was before the speed-ups (stop reason, iterations, residual and the
//! returned configuration). The check: same stop reason, same iterations, configuration and
//! residual within 1e-12. Regenerate only for a change that is meant to alter results, with
//! `CLAMBER_RECORD_GOLDEN=1 cargo test --test projection_equivalence`, and say why in the
//! commit.

mod common;

use std::fmt::Write as _;
use std::path::PathBuf;

use clamber::constraint::{BarGrip, ConstraintStack, FrameMatch, FrameRef, KeepLevel, MatchMode};
use clamber::demo::climb::feasibility_scene;
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{JointKind, Robot};
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use nalgebra::{Point3, Unit, Vector3};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::{json, Value};

/// Configurations and residuals must agree to this (absolute).
const TOL: f64 = 1e-12;

fn poses_at(robot: &Robot, q: &[f64]) -> Vec<Pose> {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    poses
}

fn grip_at(robot: &Robot, poses: &[Pose], eff: &str) -> Pose {
    FrameRef::effector(robot, eff).unwrap().pose(poses)
}

fn jitter(rng: &mut ChaCha8Rng, lin: f64, ang: f64) -> Pose {
    let mut r = |s: f64| rng.random_range(-s..=s);
    pose_from_xyz_rpy([r(lin), r(lin), r(lin)], [r(ang), r(ang), r(ang)])
}

fn push_outside(robot: &Robot, q: &mut [f64], rng: &mut ChaCha8Rng) {
    for j in robot.joints() {
        if matches!(
            j.kind,
            JointKind::Revolute { .. } | JointKind::Prismatic { .. }
        ) && j.limits[0].lower.is_finite()
            && rng.random_bool(0.5)
        {
            let l = &j.limits[0];
            q[j.q_index] = if rng.random_bool(0.5) {
                l.upper + rng.random_range(0.01..1.0)
            } else {
                l.lower - rng.random_range(0.01..1.0)
            };
        }
    }
}

/// A bar through `at` along its x axis. `before` is the share of the bar before `at`: above
/// 1 (or below 0) puts `at` off the segment, so the one-sided row starts active.
fn bar_through(robot: &Robot, eff: &str, at: &Pose, len: f64, before: f64, free: bool) -> BarGrip {
    let x = at.rotation * Vector3::x();
    let start = Point3::from(at.translation.vector) - x * (before * len);
    BarGrip::new(
        robot,
        eff,
        start,
        start + x * len,
        at.rotation * Vector3::z(),
        free,
    )
    .unwrap()
}

fn arm_stack(
    robot: &Robot,
    q_ref: &[f64],
    kind: u8,
    far: bool,
    rng: &mut ChaCha8Rng,
) -> ConstraintStack {
    let poses = poses_at(robot, q_ref);
    let off = if far {
        pose_from_xyz_rpy([5.0, 0.0, 0.0], [0.0; 3])
    } else {
        Pose::identity()
    };
    let hold = off * grip_at(robot, &poses, "hand") * jitter(rng, 0.05, 0.2);
    let hand = FrameRef::effector(robot, "hand").unwrap();
    let up = (hand.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::z();
    let s = ConstraintStack::new();
    match kind % 8 {
        0 => s.with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Full).unwrap()),
        1 => s.with(
            FrameMatch::point_grip(robot, "hand", hold, MatchMode::TurnAbout(Vector3::z_axis()))
                .unwrap(),
        ),
        2 => s.with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Position).unwrap()),
        3 => s.with(bar_through(robot, "hand", &hold, 0.6, 0.4, false)),
        4 => s
            .with(bar_through(robot, "hand", &hold, 0.6, 0.4, true))
            .with(KeepLevel::new(hand, Vector3::z(), up, 0.4, "tilt").unwrap()),
        5 => s
            .with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Position).unwrap())
            .with(KeepLevel::new(hand, Vector3::z(), up, 0.0, "level").unwrap()),
        // The grip starts 5 cm beyond the end of the bar: the one-sided row is active.
        6 => s.with(bar_through(
            robot,
            "hand",
            &hold,
            0.3,
            0.3 + 0.05 / 0.3,
            true,
        )),
        // Keep-level one-sided row violated at the start (tight angle about a tilted up).
        _ => {
            let tilted = (hand.pose(&poses) * jitter(rng, 0.0, 0.6)).rotation * Vector3::z();
            s.with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Position).unwrap())
                .with(KeepLevel::new(hand, Vector3::z(), tilted, 0.05, "tight tilt").unwrap())
        }
    }
}

fn twin_stack(
    robot: &Robot,
    q_ref: &[f64],
    kind: u8,
    far: bool,
    rng: &mut ChaCha8Rng,
) -> ConstraintStack {
    let poses = poses_at(robot, q_ref);
    let off = if far {
        pose_from_xyz_rpy([0.0, 0.0, 5.0], [0.0; 3])
    } else {
        Pose::identity()
    };
    let left = off * grip_at(robot, &poses, "left") * jitter(rng, 0.03, 0.1);
    let right = grip_at(robot, &poses, "right") * jitter(rng, 0.03, 0.1);
    let torso = FrameRef::on_link(robot, "torso", Pose::identity()).unwrap();
    let lframe = FrameRef::effector(robot, "left").unwrap();
    let torso_up = (torso.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::z();
    let left_up = (lframe.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::x();
    let s = ConstraintStack::new();
    match kind % 5 {
        0 => s
            .with(FrameMatch::point_grip(robot, "left", left, MatchMode::Full).unwrap())
            .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Position).unwrap()),
        1 => s
            .with(bar_through(robot, "left", &left, 1.0, 0.4, true))
            .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Full).unwrap())
            .with(KeepLevel::new(torso, Vector3::z(), torso_up, 0.0, "torso level").unwrap()),
        2 => {
            let door = robot.link_id("door").unwrap();
            let handle = poses[door].inverse() * left;
            s.with(FrameMatch::handle_tether(robot, "left", "door", handle).unwrap())
                .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Full).unwrap())
        }
        3 => {
            let rel = grip_at(robot, &poses, "left").inverse() * right;
            let rel = if far {
                rel * pose_from_xyz_rpy([5.0, 0.0, 0.0], [0.0; 3])
            } else {
                rel
            };
            s.with(FrameMatch::carried_object(robot, "left", "right", rel).unwrap())
                .with(
                    FrameMatch::point_grip(
                        robot,
                        "left",
                        left,
                        MatchMode::TurnAbout(Unit::new_normalize(Vector3::new(1.0, 0.0, 1.0))),
                    )
                    .unwrap(),
                )
        }
        _ => s
            .with(bar_through(robot, "right", &right, 0.8, 1.1, false))
            .with(KeepLevel::new(lframe, Vector3::x(), left_up, 0.3, "left tilt").unwrap())
            .with(FrameMatch::point_grip(robot, "left", left, MatchMode::Position).unwrap()),
    }
}

fn start_near(
    robot: &Robot,
    q_ref: &[f64],
    spread: f64,
    outside: bool,
    rng: &mut ChaCha8Rng,
) -> Vec<f64> {
    let mut v = vec![0.0; robot.nv()];
    v.iter_mut()
        .for_each(|x| *x = rng.random_range(-spread..=spread));
    let mut q = vec![0.0; robot.nq()];
    robot.integrate(q_ref, &v, &mut q).unwrap();
    if outside {
        push_outside(robot, &mut q, rng);
    }
    q
}

/// One problem and its outcome, as JSON.
fn solve(
    name: String,
    robot: &Robot,
    stack: &ConstraintStack,
    settings: &ProjectionSettings,
    q0: &[f64],
    buf: &mut ProjectionBuffer,
) -> Value {
    let mut q = q0.to_vec();
    let rep = project(robot, stack, settings, &mut q, buf).unwrap();
    json!({
        "case": name,
        "stop": format!("{:?}", rep.stop),
        "iterations": rep.iterations,
        "residual": rep.residual,
        "q": q,
    })
}

fn all_cases() -> Vec<Value> {
    let mut out = Vec::new();
    let default = ProjectionSettings::default();
    // A short cap and a small step: iteration caps and scaled steps occur.
    let short = ProjectionSettings::new(1e-9, 6, 0.1).unwrap();

    // The bench task: a 6-row point grip on robots/sevenfold.toml, effector `hand`.
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("robots/sevenfold.toml");
    let seven = clamber::robot_file::load_robot(&path).unwrap();
    let e = seven.effector("hand").unwrap().clone();
    for (d, delta) in [0.05, 0.2, 0.5].into_iter().enumerate() {
        let mut rng = ChaCha8Rng::seed_from_u64(1000 + d as u64);
        let mut buf = None;
        for i in 0..40 {
            let q0 = seven.random_configuration(&mut rng);
            let hold = poses_at(&seven, &q0)[e.link] * e.grip;
            let grip = FrameMatch::point_grip(&seven, "hand", hold, MatchMode::Full).unwrap();
            let stack = ConstraintStack::new().with(grip);
            let start: Vec<f64> = q0
                .iter()
                .map(|x| x + rng.random_range(-delta..=delta))
                .collect();
            // One buffer for all problems, as the bench does.
            let buf = buf.get_or_insert_with(|| ProjectionBuffer::new(&seven, &stack));
            out.push(solve(
                format!("sevenfold delta {delta} #{i}"),
                &seven,
                &stack,
                &default,
                &start,
                buf,
            ));
        }
    }

    for (name, robot, kinds) in [("arm7", common::arm7(), 8u8), ("twin", common::twin(), 5u8)] {
        let mut rng = ChaCha8Rng::seed_from_u64(77);
        for kind in 0..kinds {
            for far in [false, true] {
                for outside in [false, true] {
                    for spread in [0.05, 0.3, 1.0] {
                        for i in 0..4 {
                            let q_ref = robot.random_configuration(&mut rng);
                            let stack = if name == "arm7" {
                                arm_stack(&robot, &q_ref, kind, far, &mut rng)
                            } else {
                                twin_stack(&robot, &q_ref, kind, far, &mut rng)
                            };
                            let q0 = start_near(&robot, &q_ref, spread, outside, &mut rng);
                            let settings = if i == 3 { &short } else { &default };
                            let mut buf = ProjectionBuffer::new(&robot, &stack);
                            out.push(solve(
                                format!(
                                    "{name} kind {kind} far {far} outside {outside} \
                                     spread {spread} #{i}"
                                ),
                                &robot,
                                &stack,
                                settings,
                                &q0,
                                &mut buf,
                            ));
                        }
                    }
                }
            }
        }
    }

    // The climber in the route-feasibility scene: its start stance, and every hand on every
    // hold with the other hand on its start hold (bar grips and point grips on a floating
    // torso), from perturbed start configurations.
    let sc = feasibility_scene().unwrap();
    let robot = &*sc.robot;
    out.push(json!({ "case": "climber start configuration", "q": sc.start.q }));
    let mut stances = vec![sc.start.stance.clone()];
    for eff in sc.start.stance.grips.keys() {
        for h in 0..sc.scene.holds.len() {
            stances.push(sc.start.stance.clone().with(eff.clone(), h));
        }
    }
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for (k, stance) in stances.iter().enumerate() {
        let stack = stance.constraints(robot, &sc.scene, &[]).unwrap();
        let mut buf = ProjectionBuffer::new(robot, &stack);
        for (i, spread) in [0.02, 0.1, 0.4].into_iter().enumerate() {
            let q0 = start_near(robot, &sc.start.q, spread, false, &mut rng);
            out.push(solve(
                format!("climber stance {k} ({}) #{i}", stance.describe(&sc.scene)),
                robot,
                &stack,
                &default,
                &q0,
                &mut buf,
            ));
        }
    }
    out
}

fn golden_path() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/data/projection_golden.json")
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn projection_matches_the_recorded_outcomes() {
    let cases = all_cases();
    if std::env::var("CLAMBER_RECORD_GOLDEN").is_ok_and(|v| v == "1") {
        let text = serde_json::to_string_pretty(&Value::Array(cases)).unwrap();
        clamber::output::write_atomic(&golden_path(), text.as_bytes()).unwrap();
        return;
    }
    let text = std::fs::read_to_string(golden_path()).unwrap();
    let golden: Vec<Value> = serde_json::from_str(&text).unwrap();
    assert_eq!(golden.len(), cases.len(), "number of problems");
    let mut failures = String::new();
    let mut stops = std::collections::BTreeMap::<String, usize>::new();
    let mut worst = 0.0f64;
    for (got, want) in cases.iter().zip(&golden) {
        let name = want["case"].as_str().unwrap();
        assert_eq!(got["case"], want["case"], "problem order");
        if let Some(stop) = want.get("stop") {
            *stops.entry(stop.as_str().unwrap().to_string()).or_default() += 1;
            if got["stop"] != *stop || got["iterations"] != want["iterations"] {
                let _ = writeln!(
                    failures,
                    "{name}: stop {} after {} iterations, recorded {} after {}",
                    got["stop"], got["iterations"], stop, want["iterations"]
                );
                continue;
            }
            let dr = (got["residual"].as_f64().unwrap() - want["residual"].as_f64().unwrap()).abs();
            worst = worst.max(dr);
            if dr > TOL {
                let _ = writeln!(failures, "{name}: residual differs by {dr:.3e}");
            }
        }
        let (gq, wq) = (numbers(&got["q"]), numbers(&want["q"]));
        assert_eq!(gq.len(), wq.len(), "{name}: configuration length");
        let dq = gq
            .iter()
            .zip(&wq)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        worst = worst.max(dq);
        if dq > TOL {
            let _ = writeln!(failures, "{name}: configuration differs by {dq:.3e}");
        }
    }
    println!(
        "{} problems, stop reasons {stops:?}, largest difference {worst:.3e}",
        golden.len()
    );
    // The set must exercise every way projection stops, or it proves little.
    for stop in ["Converged", "Stalled", "BlockedByLimits", "IterationCap"] {
        assert!(stops.get(stop).copied().unwrap_or(0) > 0, "no {stop} case");
    }
    assert!(failures.is_empty(), "{failures}");
}

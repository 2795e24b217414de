//! Numerical edge cases with stated behaviour: a singular configuration (the seven-joint arm
//! straight up), a target beyond reach and a hold exactly at the reach bound, a bar of zero
//! (or vanishing) length, coincident holds.

use std::path::Path;
use std::sync::Arc;

use nalgebra::{DMatrix, Point3, Vector3};

use clamber::constraint::ConstraintStack;
use clamber::demo::climb::{climber, climber_span, LEFT, RIGHT};
use clamber::kinematics::{forward_kinematics, frame_jacobian};
use clamber::math::Pose;
use clamber::model::Robot;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings, StopReason};
use clamber::reach::effector_reach;
use clamber::robot_file::load_robot;
use clamber::route::graph::StanceGraph;
use clamber::route::{plan_route, RouteSettings};
use clamber::scenario::{Goal, Scenario, ScenarioLimits, Start};
use clamber::scenario_file::parse_scenario;
use clamber::scene::{Hold, Scene, SceneError, Stance};

fn sevenfold() -> Robot {
    load_robot(Path::new("robots/sevenfold.toml")).unwrap()
}

fn grip_frame(robot: &Robot, q: &[f64]) -> (Vec<Pose>, Pose) {
    let e = robot.effector("hand").unwrap();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    let g = poses[e.link] * e.grip;
    (poses, g)
}

fn point_stack(robot: &Robot, target: Pose) -> ConstraintStack {
    let scene = Scene {
        holds: vec![Hold::point("target", target)],
        ..Scene::default()
    };
    Stance::new()
        .with("hand", 0)
        .constraints(robot, &scene, &[])
        .unwrap()
}

/// Straight up (q = 0) the arm's four z joints (1, 3, 5, 7) lie on one line through the grip
/// point: their four Jacobian columns are the same twist [0 0 0 0 0 1], so the 6 x 7 frame
/// Jacobian has rank 4 (three singular values exactly zero). Analytic case from the robot
/// file's joint origins (every z joint's axis passes through x = y = 0 at q = 0).
#[test]
fn stretched_arm_jacobian_has_rank_four() {
    let robot = sevenfold();
    let q = vec![0.0; robot.nq()];
    let (poses, _) = grip_frame(&robot, &q);
    let e = robot.effector("hand").unwrap();
    let mut jac = DMatrix::zeros(6, robot.nv());
    frame_jacobian(&robot, &poses, e.link, &e.grip, &mut jac).unwrap();
    for j in [0, 2, 4, 6] {
        let col = jac.column(j);
        let expected = [0.0, 0.0, 0.0, 0.0, 0.0, 1.0];
        for (a, b) in col.iter().zip(expected) {
            assert!((a - b).abs() < 1e-12, "column {j}: {col}");
        }
    }
    let sv = jac.clone().svd(false, false).singular_values;
    let mut s: Vec<f64> = sv.iter().copied().collect();
    s.sort_by(f64::total_cmp);
    assert!(s[0] < 1e-12 && s[1] < 1e-12, "{s:?}");
    // The other four are well away from zero.
    assert!(s[2] > 1e-3, "{s:?}");
}

/// Projection starting exactly at the singular configuration onto the grip frame it already
/// has stops at once (converged, 0 iterations, q unchanged); from nearby bent starts it
/// converges to the tolerance without NaN and within the limits.
#[test]
fn projection_at_and_near_the_singular_configuration() {
    let robot = sevenfold();
    let q0 = vec![0.0; robot.nq()];
    let (_, g0) = grip_frame(&robot, &q0);
    let stack = point_stack(&robot, g0);
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let settings = ProjectionSettings::default();
    let mut q = q0.clone();
    let r = project(&robot, &stack, &settings, &mut q, &mut buf).unwrap();
    assert!(r.converged());
    assert_eq!(r.iterations, 0);
    assert_eq!(q, q0);
    let mut converged = 0;
    for k in 0..20 {
        // Bend the y joints a little: the start is regular, the target singular.
        let mut q = q0.clone();
        let b = 0.02 * (k + 1) as f64;
        q[1] = b;
        q[3] = -b;
        q[5] = 0.5 * b;
        let r = project(&robot, &stack, &settings, &mut q, &mut buf).unwrap();
        assert!(q.iter().all(|x| x.is_finite()), "{q:?}");
        assert!(robot.within_limits(&q, 0.0));
        assert!(r.residual.is_finite());
        if r.converged() {
            converged += 1;
            assert!(r.residual <= settings.tolerance);
        }
    }
    // Measured: every start converges (the damped steps cross the singularity).
    assert_eq!(converged, 20);
}

/// A target 1 cm beyond the arm's reach bound (`reach::effector_reach` from link1's origin,
/// an upper bound on the hand's distance from it over all configurations): projection
/// cannot converge, says why, and returns a finite configuration within the limits whose
/// position error is at least the 1 cm excess.
#[test]
fn target_beyond_reach_is_reported_not_converged() {
    let robot = sevenfold();
    let bound = effector_reach(&robot, "hand", "link1").unwrap();
    let q0 = vec![0.0; robot.nq()];
    let (poses, g0) = grip_frame(&robot, &q0);
    let l1 = robot.link_id("link1").unwrap();
    // link1's origin does not move (joint1 turns about z through it).
    let centre = Point3::from(poses[l1].translation.vector);
    let up = Vector3::z();
    let mut target = g0;
    target.translation.vector = (centre + up * (bound + 0.01)).coords;
    let stack = point_stack(&robot, target);
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let settings = ProjectionSettings::default();
    let mut q = vec![0.1; robot.nq()];
    let r = project(&robot, &stack, &settings, &mut q, &mut buf).unwrap();
    assert!(!r.converged());
    assert!(matches!(
        r.stop,
        StopReason::IterationCap | StopReason::Stalled | StopReason::BlockedByLimits
    ));
    assert!(q.iter().all(|x| x.is_finite()));
    assert!(robot.within_limits(&q, 0.0));
    let (_, g) = grip_frame(&robot, &q);
    let miss = (g.translation.vector - target.translation.vector).norm();
    assert!(miss >= 0.01 - 1e-12, "position error {miss}");
    assert!(r.residual >= miss - 1e-12);
}

fn point(name: &str, x: f64) -> Hold {
    let mut pose = Pose::identity();
    pose.translation.vector = Vector3::new(x, 0.0, 0.1);
    Hold::point(name, pose)
}

/// The route's reach pruning keeps a hold exactly at the reach bound between the climber's
/// hands and prunes it 1e-9 m beyond, with that excess reported.
#[test]
fn hold_exactly_at_reach_is_kept_just_beyond_is_pruned() {
    let robot = climber().unwrap();
    let span = climber_span(&robot).unwrap();
    let scene = Scene {
        holds: vec![
            point("a", 0.0),
            point("at", span),
            point("beyond", span + 1e-9),
        ],
        ..Scene::default()
    };
    let g = StanceGraph::new(&robot, &scene);
    assert_eq!(g.hold_distance(0, 1), span);
    let stance = Stance::new().with(LEFT, 0);
    assert_eq!(g.reach_test(&stance, RIGHT, 1), None);
    let p = g.reach_test(&stance, RIGHT, 2).expect("pruned");
    assert_eq!(p.anchor_hold, Some(0));
    assert!((p.excess - 1e-9).abs() < 1e-12, "excess {}", p.excess);
}

/// A bar whose ends coincide: a typed error when a grip on it is built, and a located error
/// when a scenario file says so (the file case is also in tests/data/bad_scenarios). A bar of
/// vanishing but positive length (1e-300 m) either errors or gives a finite residual.
#[test]
fn bar_of_zero_length_is_an_error() {
    let robot = sevenfold();
    let p = Point3::new(0.45, -0.2, 0.55);
    let h = Hold::bar("rail", p, p, Vector3::x());
    match h.grip(&robot, "hand") {
        Err(SceneError::Grip { hold, source }) => {
            assert_eq!(hold, "rail");
            assert!(source.to_string().contains("bar length"), "{source}");
        }
        other => panic!("expected a grip error, got {other:?}"),
    }
    let tiny = Hold::bar("rail", p, p + Vector3::new(1e-300, 0.0, 0.0), Vector3::z());
    if tiny.grip(&robot, "hand").is_ok() {
        let scene = Scene {
            holds: vec![tiny.clone()],
            ..Scene::default()
        };
        let stack = Stance::new()
            .with("hand", 0)
            .constraints(&robot, &scene, &[])
            .unwrap();
        let mut buf = stack.buffer(&robot);
        let r = stack
            .evaluate(&robot, &vec![0.1; robot.nq()], &mut buf, true)
            .unwrap();
        assert!(r.is_finite(), "residual {r}");
    }
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let text = "robot = \"../robots/sevenfold.toml\"\n\
                [[scene.hold]]\nname = \"rail\"\ntype = \"bar\"\n\
                start = [0.45, -0.2, 0.55]\nend = [0.45, -0.2, 0.55]\napproach = [1.0, 0.0, 0.0]\n\
                [start]\nq = {}\n[goal]\ngrip = { effector = \"hand\", hold = \"rail\" }\n";
    let e = parse_scenario(text, &root.join("scenarios/zero_bar.scenario.toml")).unwrap_err();
    assert_eq!(e.position().map(|p| p.0), Some(6), "{e}");
    assert!(e.message().contains("length"), "{}", e.message());
}

/// Two holds with different names at the same pose are a valid scene (only duplicate names
/// are refused); the reach test treats them as 0 m apart; and the arm, holding one, reaches a
/// goal grip on the other with a route that ends on it.
#[test]
fn coincident_holds() {
    let robot = Arc::new(sevenfold());
    let q: Vec<f64> = vec![0.0, 0.6, 0.0, 0.9, 0.0, 0.1, 0.0];
    let (_, g) = grip_frame(&robot, &q);
    let scene = Scene {
        holds: vec![Hold::point("a", g), Hold::point("b", g)],
        ..Scene::default()
    };
    scene.check().unwrap();
    let g2 = StanceGraph::new(&robot, &scene);
    assert_eq!(g2.hold_distance(0, 1), 0.0);
    let same = Scene {
        holds: vec![Hold::point("a", g), Hold::point("a", g)],
        ..Scene::default()
    };
    assert_eq!(same.check(), Err(SceneError::DuplicateHold("a".into())));
    let s = Scenario {
        name: "coincident".into(),
        robot: robot.clone(),
        scene,
        start: Start {
            q,
            stance: Stance::new().with("hand", 0),
        },
        goal: Goal::Grip {
            effector: "hand".into(),
            hold: 1,
        },
        constant: vec![],
        limits: ScenarioLimits::default(),
    };
    let r = plan_route(&s, &RouteSettings::default()).unwrap();
    let last = r.legs.last().unwrap();
    assert_eq!(last.stance_index, Stance::new().with("hand", 1));
    println!(
        "coincident holds: {} legs, {} switches: {:?}",
        r.legs.len(),
        r.switches.len(),
        r.switches
            .iter()
            .map(|w| format!("{} {}", w.action, w.hold))
            .collect::<Vec<_>>()
    );
    // Every switch pose is the start configuration's grip (both holds are one frame).
    for w in &r.switches {
        let (_, gw) = grip_frame(&robot, &w.pose);
        assert!((gw.translation.vector - g.translation.vector).norm() < 1e-6);
    }
}

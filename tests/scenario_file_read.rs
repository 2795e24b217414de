//! Reading and writing scenario files: the bundled scenarios load and mean what they say
//! (checked with plain geometry on forward kinematics), defaults, floating-joint values,
//! and the writer's round trip.

use std::path::{Path, PathBuf};

use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::scenario::{Goal, ScenarioLimits};
use clamber::scenario_file::{load_scenario, parse_scenario, to_toml, Outputs, ScenarioFile};
use clamber::scene::HoldKind;
use nalgebra::{Point3, UnitQuaternion, Vector3};

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

fn load(rel: &str) -> ScenarioFile {
    let path = repo(rel);
    load_scenario(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// World pose of an effector's grip frame at `q`.
fn grip_pose(f: &ScenarioFile, effector: &str, q: &[f64]) -> Pose {
    let robot = &f.scenario.robot;
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).expect("forward kinematics");
    let e = robot.effector(effector).expect("effector exists");
    poses[e.link] * e.grip
}

/// Distance from `p` to the segment `a`-`b` (closest point by clamped projection).
fn distance_to_segment(p: &Point3<f64>, a: &Point3<f64>, b: &Point3<f64>) -> f64 {
    let ab = b - a;
    let t = ((p - a).dot(&ab) / ab.norm_squared()).clamp(0.0, 1.0);
    (p - (a + ab * t)).norm()
}

#[test]
fn every_bundled_scenario_loads() {
    let mut n = 0;
    for entry in std::fs::read_dir(repo("scenarios")).expect("scenarios/ exists") {
        let path = entry.expect("dir entry").path();
        if path.to_string_lossy().ends_with(".scenario.toml") {
            load_scenario(&path).unwrap_or_else(|e| panic!("{e}"));
            n += 1;
        }
    }
    assert!(n >= 2, "expected the bundled scenarios, found {n}");
}

#[test]
fn rail_scenario_reads_as_written() {
    let f = load("scenarios/sevenfold_rail.scenario.toml");
    let s = &f.scenario;
    assert_eq!(s.name, "sevenfold-rail-to-peg");
    assert_eq!(s.robot.name(), "sevenfold");
    assert_eq!(f.robot_file, repo("scenarios/../robots/sevenfold.toml"));
    assert_eq!(s.scene.obstacles.len(), 1);
    assert_eq!(s.scene.obstacles[0].name, "crate");
    let names: Vec<&str> = s.scene.holds.iter().map(|h| h.name.as_str()).collect();
    assert_eq!(names, ["rail", "peg"]);
    match &s.scene.holds[0].kind {
        HoldKind::Bar {
            start,
            end,
            approach,
            turn_free,
        } => {
            assert_eq!(*start, Point3::new(0.45, -0.2, 0.55));
            assert_eq!(*end, Point3::new(0.45, 0.2, 0.55));
            assert_eq!(*approach, Vector3::new(1.0, 0.0, 0.0));
            assert!(!turn_free);
        }
        other => panic!("rail read as {other:?}"),
    }
    // The peg's grip frame: rpy = (0, pi/2, 0) turns z onto +x (rotation about y).
    match &s.scene.holds[1].kind {
        HoldKind::Point { pose, turn_free } => {
            assert!(!turn_free);
            assert!((pose.translation.vector - Vector3::new(0.35, 0.35, 0.4)).norm() < 1e-15);
            assert!((pose.rotation * Vector3::z() - Vector3::x()).norm() < 1e-12);
        }
        other => panic!("peg read as {other:?}"),
    }
    assert_eq!(
        s.limits,
        ScenarioLimits {
            tolerance: 1e-6,
            stride: 0.05,
            time_limit: std::time::Duration::from_secs(20),
            seed: 7,
        }
    );
    match &s.goal {
        Goal::Grip { effector, hold } => {
            assert_eq!(effector, "hand");
            assert_eq!(*hold, 1);
        }
        other => panic!("goal read as {other:?}"),
    }
    // Outputs are relative to the scenario file's directory.
    assert_eq!(
        f.outputs.route,
        Some(repo("scenarios/out/sevenfold_rail.route.json"))
    );
    assert_eq!(
        f.outputs.picture,
        Some(repo("scenarios/out/sevenfold_rail.png"))
    );
}

#[test]
fn settled_start_holds_the_rail() {
    let f = load("scenarios/sevenfold_rail.scenario.toml");
    assert!(f.settled);
    let s = &f.scenario;
    assert_eq!(s.start.stance.describe(&s.scene), "hand@rail");
    // Independent check: the hand's grip point lies on the rail segment (point-to-segment
    // distance, plain geometry) to the scenario's tolerance.
    let g = grip_pose(&f, "hand", &s.start.q);
    let p = Point3::from(g.translation.vector);
    let d = distance_to_segment(
        &p,
        &Point3::new(0.45, -0.2, 0.55),
        &Point3::new(0.45, 0.2, 0.55),
    );
    assert!(d <= s.limits.tolerance, "hand is {d} m from the rail");
    // The hand approaches along +x, perpendicular to the rail: its z axis is +x.
    let z = g.rotation * Vector3::z();
    assert!(
        (z - Vector3::x()).norm() < 1e-5,
        "hand z axis {z:?} (expected +x)"
    );
    // Joints that were not named but projected stay within their limits.
    assert!(s.robot.within_limits(&s.start.q, 0.0));
}

#[test]
fn inline_mechanism_joins_q_and_handle_moves_with_it() {
    let f = load("scenarios/sevenfold_lever.scenario.toml");
    let s = &f.scenario;
    let pivot = s.robot.joint_id("lever_pivot").expect("pivot attached");
    let j = &s.robot.joints()[pivot];
    assert!(j.passive, "mechanism joints are passive");
    assert_eq!(s.robot.nq(), 8);
    assert_eq!(s.robot.passive_dof(), 1);
    // The knob: pivot at (0.55, 0, 0), arm along z, knob 0.32 up the arm. At pivot angle
    // a (about +y), the knob is at (0.55 + 0.32 sin a, 0, 0.32 cos a) (rotation about y).
    let a = s.start.q[j.q_index];
    let g = grip_pose(&f, "hand", &s.start.q);
    let knob = Vector3::new(0.55 + 0.32 * a.sin(), 0.0, 0.32 * a.cos());
    assert!(
        (g.translation.vector - knob).norm() <= s.limits.tolerance,
        "hand at {:?}, knob at {knob:?} (pivot angle {a})",
        g.translation.vector
    );
    match &s.goal {
        Goal::Configuration(q) => {
            // The named pivot keeps the file's value; the arm follows the knob (the reader
            // projects the goal onto the start's stance), so the hand is on the knob where
            // the same closed form puts it at the goal's angle.
            let a = q[j.q_index];
            assert_eq!(a, -0.2);
            let g = grip_pose(&f, "hand", q);
            let knob = Vector3::new(0.55 + 0.32 * a.sin(), 0.0, 0.32 * a.cos());
            assert!(
                (g.translation.vector - knob).norm() <= s.limits.tolerance,
                "goal: hand at {:?}, knob at {knob:?}",
                g.translation.vector
            );
        }
        other => panic!("goal read as {other:?}"),
    }
}

#[test]
fn defaults_fill_what_a_minimal_file_leaves_out() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("minimal.scenario.toml");
    let robot = repo("robots/sevenfold.toml");
    let text = format!(
        "robot = {:?}\n[goal]\nregion = {{ link = \"palm\", min = [0, 0, 0], max = [1, 1, 1] }}\n",
        robot.to_str().expect("utf-8")
    );
    let f = parse_scenario(&text, &path).unwrap_or_else(|e| panic!("{e}"));
    let s = &f.scenario;
    assert_eq!(s.name, "minimal", "name defaults to the file name");
    assert_eq!(s.start.q, s.robot.neutral());
    assert!(s.start.stance.grips.is_empty());
    assert_eq!(s.limits, ScenarioLimits::default());
    assert_eq!(f.outputs, Outputs::default());
    assert!(!f.settled);
    assert!(s.constant.is_empty());
}

#[test]
fn floating_joint_value_is_xyz_and_roll_pitch_yaw() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("float.scenario.toml");
    let robot = repo("robots/brachia.toml");
    let f0 = load_scenario_text(
        &path,
        &format!(
            "robot = {:?}\n[goal]\nq = {{}}\n",
            robot.to_str().expect("utf-8")
        ),
    );
    let base = f0
        .scenario
        .robot
        .joints()
        .iter()
        .find(|j| j.kind == clamber::model::JointKind::Floating)
        .expect("brachia has a floating base")
        .clone();
    let text = format!(
        "robot = {:?}\n[start]\nq = {{ {} = [0.1, -0.2, 0.3, 0.4, -0.5, 0.6] }}\n[goal]\nq = {{}}\n",
        robot.to_str().expect("utf-8"),
        base.name
    );
    let f = load_scenario_text(&path, &text);
    let q = &f.scenario.start.q[base.q_index..base.q_index + 7];
    assert_eq!(&q[..3], &[0.1, -0.2, 0.3]);
    // Reference: nalgebra's own roll-pitch-yaw quaternion (fixed axes X, Y, Z).
    let r = UnitQuaternion::from_euler_angles(0.4, -0.5, 0.6);
    let c = r.quaternion().coords; // x, y, z, w
    let same = (0..4).all(|k| (q[3 + k] - c[k]).abs() < 1e-12);
    let opposite = (0..4).all(|k| (q[3 + k] + c[k]).abs() < 1e-12);
    assert!(same || opposite, "quaternion {:?} vs {:?}", &q[3..], c);
}

fn load_scenario_text(path: &Path, text: &str) -> ScenarioFile {
    parse_scenario(text, path).unwrap_or_else(|e| panic!("{e}"))
}

/// Write, read back, write again: the two texts are the same and the scenarios agree.
fn round_trip(rel: &str) {
    let f = load(rel);
    let outputs = Outputs {
        route: Some(PathBuf::from("out/route.json")),
        trajectory: None,
        summary: Some(PathBuf::from("out/summary.txt")),
        picture: Some(PathBuf::from("out/route.png")),
        plots: Some(PathBuf::from("out/plots")),
    };
    let text = to_toml(&f.scenario, &f.robot_file, &outputs).expect("writes");
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("exported.scenario.toml");
    std::fs::write(&path, &text).expect("write file");
    let g = load_scenario(&path).unwrap_or_else(|e| panic!("{e}\n---\n{text}"));
    let text2 = to_toml(&g.scenario, &g.robot_file, &outputs).expect("writes again");
    assert_eq!(text, text2, "writing is a fixed point after one round");

    let (a, b) = (&f.scenario, &g.scenario);
    assert_eq!(a.name, b.name);
    assert_eq!(a.robot.nq(), b.robot.nq());
    assert_eq!(a.robot.dof_names(), b.robot.dof_names());
    assert_eq!(a.scene.obstacles, b.scene.obstacles);
    assert_eq!(a.scene.holds.len(), b.scene.holds.len());
    for (h, k) in a.scene.holds.iter().zip(&b.scene.holds) {
        assert_eq!(h.name, k.name);
        match (&h.kind, &k.kind) {
            (HoldKind::Point { pose: p, .. }, HoldKind::Point { pose: r, .. })
            | (HoldKind::Handle { pose: p, .. }, HoldKind::Handle { pose: r, .. }) => {
                assert!((p.to_homogeneous() - r.to_homogeneous()).norm() < 1e-12);
            }
            (x, y) => assert_eq!(x, y),
        }
    }
    let err: f64 = a
        .start
        .q
        .iter()
        .zip(&b.start.q)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max);
    assert!(err < 1e-12, "start q differs by {err}");
    assert_eq!(a.start.stance, b.start.stance);
    assert_eq!(a.limits, b.limits);
    assert_eq!(format!("{:?}", a.goal), format!("{:?}", b.goal));
    // The same robot: forward kinematics agree at the start configuration.
    let robot_a = &a.robot;
    let robot_b = &b.robot;
    let mut pa = vec![Pose::identity(); robot_a.links().len()];
    let mut pb = vec![Pose::identity(); robot_b.links().len()];
    forward_kinematics(robot_a, &a.start.q, &mut pa).expect("fk");
    forward_kinematics(robot_b, &a.start.q, &mut pb).expect("fk");
    for (x, y) in pa.iter().zip(&pb) {
        assert!((x.to_homogeneous() - y.to_homogeneous()).norm() < 1e-12);
    }
    // Outputs are resolved against the exported file's directory.
    assert_eq!(g.outputs.route, Some(dir.path().join("out/route.json")));
    assert_eq!(g.outputs.trajectory, None);
}

#[test]
fn writer_round_trip_rail() {
    round_trip("scenarios/sevenfold_rail.scenario.toml");
}

#[test]
fn writer_round_trip_inline_mechanism() {
    round_trip("scenarios/sevenfold_lever.scenario.toml");
}

//! Forward kinematics and effector frame Jacobian timings.
//!
//! ```text
//! cargo bench --bench kinematics
//! ```
//! Robots: `robots/sevenfold.toml` (7-DOF arm) and `robots/brachia.toml` (floating torso
//! and two 7-DOF arms, 20 DOF) when they load; otherwise equivalent robots built in code
//! (7 revolute joints z y z y z y z with ~0.3 m link offsets; a floating torso carrying two
//! such arms). The robot used is printed. Each iteration takes the next of 1024
//! configurations drawn beforehand, so no result can be computed once and reused; the
//! C++ reference bench (`reference/pinocchio_bench.cpp`) does the same.
//!
//! - `fk/<robot>`: world pose of every link (`forward_kinematics`);
//! - `fk_jacobian/<robot>`: the same plus the 6 x nv frame Jacobian of the first
//!   effector's grip frame (`frame_jacobian`).
//!
//! `CLAMBER_BENCH_LOOP=1 cargo bench --bench kinematics` skips criterion and times the same
//! operations exactly like `reference/pinocchio_bench.cpp` (11 runs of 1e6 calls: median
//! and minimum wall-clock ns per call, median thread-CPU ns per call), for a like-for-like
//! comparison on a shared machine.

use std::hint::black_box;
use std::path::Path;
use std::time::Instant;

use clamber::kinematics::{forward_kinematics, frame_jacobian, KinematicsBuffer};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use criterion::Criterion;
use nalgebra::Vector3;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

const CONFIGS: usize = 1024;

fn revolute(
    name: &str,
    parent: &str,
    child: &str,
    origin: Pose,
    axis: [f64; 3],
    range: f64,
) -> JointSpec {
    JointSpec {
        name: name.into(),
        joint_type: JointType::Revolute,
        parent: parent.into(),
        child: child.into(),
        origin,
        axis: Vector3::from(axis),
        limits: vec![Limits {
            lower: -range,
            upper: range,
            velocity: 2.0,
            acceleration: 6.0,
        }],
        passive: false,
    }
}

/// Seven revolute joints z y z y z y z from `parent` with ~0.3 m offsets, ending in a
/// palm on a fixed joint. Returns (links, joints, palm link name).
fn arm(prefix: &str, parent: &str, mount: Pose) -> (Vec<LinkSpec>, Vec<JointSpec>, String) {
    let offsets = [
        [0.0, 0.0, 0.1],
        [0.0, 0.0, 0.3],
        [0.02, 0.0, 0.3],
        [-0.02, 0.0, 0.16],
        [0.0, 0.0, 0.14],
        [0.0, 0.0, 0.08],
    ];
    let (mut links, mut joints) = (Vec::new(), Vec::new());
    let mut p = parent.to_string();
    for i in 0..7 {
        let child = format!("{prefix}link{}", i + 1);
        let origin = if i == 0 {
            mount
        } else {
            pose_from_xyz_rpy(offsets[i - 1], [0.0; 3])
        };
        let axis = if i % 2 == 0 {
            [0.0, 0.0, 1.0]
        } else {
            [0.0, 1.0, 0.0]
        };
        joints.push(revolute(
            &format!("{prefix}joint{}", i + 1),
            &p,
            &child,
            origin,
            axis,
            2.9,
        ));
        links.push(LinkSpec {
            name: child.clone(),
            shapes: Vec::new(),
        });
        p = child;
    }
    let palm = format!("{prefix}palm");
    joints.push(JointSpec {
        name: format!("{prefix}palm_mount"),
        joint_type: JointType::Fixed,
        parent: p,
        child: palm.clone(),
        origin: pose_from_xyz_rpy([0.0, 0.0, 0.04], [0.0; 3]),
        axis: Vector3::zeros(),
        limits: Vec::new(),
        passive: false,
    });
    links.push(LinkSpec {
        name: palm.clone(),
        shapes: Vec::new(),
    });
    (links, joints, palm)
}

fn effector(name: &str, link: &str) -> EffectorSpec {
    EffectorSpec {
        name: name.into(),
        link: link.into(),
        grip: pose_from_xyz_rpy([0.0, 0.0, 0.1], [0.0; 3]),
    }
}

fn arm7_in_code() -> Robot {
    let (links, joints, palm) = arm("", "base", pose_from_xyz_rpy([0.0, 0.0, 0.12], [0.0; 3]));
    RobotSpec {
        name: "arm7 (built in code)".into(),
        links: std::iter::once(LinkSpec {
            name: "base".into(),
            shapes: Vec::new(),
        })
        .chain(links)
        .collect(),
        joints,
        effectors: vec![effector("hand", &palm)],
        ..Default::default()
    }
    .build()
    .expect("valid arm")
}

fn climber_in_code() -> Robot {
    let mut links: Vec<LinkSpec> = ["world", "torso"]
        .iter()
        .map(|n| LinkSpec {
            name: n.to_string(),
            shapes: Vec::new(),
        })
        .collect();
    let mut joints = vec![JointSpec {
        name: "body_float".into(),
        joint_type: JointType::Floating,
        parent: "world".into(),
        child: "torso".into(),
        origin: Pose::identity(),
        axis: Vector3::zeros(),
        limits: Vec::new(),
        passive: false,
    }];
    let half_pi = std::f64::consts::FRAC_PI_2;
    let (ll, lj, lp) = arm(
        "left_",
        "torso",
        pose_from_xyz_rpy([0.0, 0.15, 0.14], [-half_pi, 0.0, 0.0]),
    );
    let (rl, rj, _) = arm(
        "right_",
        "torso",
        pose_from_xyz_rpy([0.0, -0.15, 0.14], [half_pi, 0.0, 0.0]),
    );
    links.extend(ll.into_iter().chain(rl));
    joints.extend(lj.into_iter().chain(rj));
    RobotSpec {
        name: "climber (built in code)".into(),
        links,
        joints,
        effectors: vec![effector("left_hand", &lp)],
        ..Default::default()
    }
    .build()
    .expect("valid climber")
}

fn load_or(path: &str, fallback: fn() -> Robot) -> Robot {
    match clamber::robot_file::load_robot(Path::new(path)) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("{path} did not load ({e}); using a robot built in code");
            fallback()
        }
    }
}

fn bench_robot(c: &mut Criterion, label: &str, robot: &Robot) {
    eprintln!(
        "{label}: robot `{}`, nq {}, nv {}, {} links",
        robot.name(),
        robot.nq(),
        robot.nv(),
        robot.links().len()
    );
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let qs: Vec<Vec<f64>> = (0..CONFIGS)
        .map(|_| robot.random_configuration(&mut rng))
        .collect();
    let mut buf = KinematicsBuffer::new(robot);
    let eff = robot
        .effectors()
        .first()
        .expect("the bench robots have an effector")
        .clone();

    let mut i = 0;
    c.bench_function(&format!("fk/{label}"), |b| {
        b.iter(|| {
            i = (i + 1) % CONFIGS;
            forward_kinematics(robot, black_box(&qs[i]), &mut buf.poses).unwrap();
            black_box(&buf.poses);
        })
    });
    c.bench_function(&format!("fk_jacobian/{label}"), |b| {
        b.iter(|| {
            i = (i + 1) % CONFIGS;
            forward_kinematics(robot, black_box(&qs[i]), &mut buf.poses).unwrap();
            frame_jacobian(robot, &buf.poses, eff.link, &eff.grip, &mut buf.jacobian).unwrap();
            black_box(&buf.jacobian);
        })
    });
}

/// Nanoseconds this thread has spent on a CPU (Linux `/proc/thread-self/schedstat`, first
/// field); NaN where unavailable. Same source as the C++ reference bench.
fn thread_cpu_ns() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|t| t.parse().ok()))
        .unwrap_or(f64::NAN)
}

fn loop_timing(what: &str, calls: usize, runs: usize, mut f: impl FnMut(usize)) {
    let (mut wall, mut cpu) = (Vec::new(), Vec::new());
    for _ in 0..runs {
        let c0 = thread_cpu_ns();
        let t0 = Instant::now();
        for k in 0..calls {
            f(k);
        }
        let t = t0.elapsed().as_nanos() as f64;
        cpu.push((thread_cpu_ns() - c0) / calls as f64);
        wall.push(t / calls as f64);
    }
    let med = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let min = wall.iter().copied().fold(f64::INFINITY, f64::min);
    println!(
        "{what:<62} wall median {:7.1} ns  min {min:7.1} ns  cpu median {:7.1} ns",
        med(&mut wall),
        med(&mut cpu)
    );
}

fn loop_mode(label: &str, robot: &Robot) {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let qs: Vec<Vec<f64>> = (0..CONFIGS)
        .map(|_| robot.random_configuration(&mut rng))
        .collect();
    let mut buf = KinematicsBuffer::new(robot);
    let eff = robot
        .effectors()
        .first()
        .expect("the bench robots have an effector")
        .clone();
    // CLAMBER_BENCH_LOOP_CALLS shortens the loop (for profilers).
    let calls = std::env::var("CLAMBER_BENCH_LOOP_CALLS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1_000_000);
    let runs = 11;
    loop_timing(&format!("clamber fk/{label}"), calls, runs, |k| {
        forward_kinematics(robot, black_box(&qs[k % CONFIGS]), &mut buf.poses).unwrap();
        black_box(&buf.poses);
    });
    loop_timing(&format!("clamber fk_jacobian/{label}"), calls, runs, |k| {
        forward_kinematics(robot, black_box(&qs[k % CONFIGS]), &mut buf.poses).unwrap();
        frame_jacobian(robot, &buf.poses, eff.link, &eff.grip, &mut buf.jacobian).unwrap();
        black_box(&buf.jacobian);
    });
}

fn main() {
    let arm = load_or("robots/sevenfold.toml", arm7_in_code);
    let climber = load_or("robots/brachia.toml", climber_in_code);
    if std::env::var_os("CLAMBER_BENCH_LOOP").is_some() {
        loop_mode("arm7", &arm);
        loop_mode("climber20", &climber);
        return;
    }
    let mut c = Criterion::default().configure_from_args();
    bench_robot(&mut c, "arm7", &arm);
    bench_robot(&mut c, "climber20", &climber);
    c.final_summary();
}

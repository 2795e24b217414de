//! Forward kinematics and effector frame Jacobian timings.
//!
//! ```text
//! cargo bench --bench kinematics
//! ```
//! Robots: `robots/sevenfold.toml` (7-DOF arm) and `robots/brachia.toml` (floating torso
//! and two 7-DOF arms, 20 DOF). Each iteration takes the next of 1024
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
use clamber::model::Robot;
use criterion::Criterion;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

const CONFIGS: usize = 1024;

fn load(path: &str) -> Robot {
    clamber::robot_file::load_robot(Path::new(path)).unwrap_or_else(|e| panic!("{e}"))
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
    let arm = load("robots/sevenfold.toml");
    let climber = load("robots/brachia.toml");
    if std::env::var_os("CLAMBER_BENCH_LOOP").is_some() {
        loop_mode("sevenfold", &arm);
        loop_mode("brachia", &climber);
        return;
    }
    let mut c = Criterion::default().configure_from_args();
    bench_robot(&mut c, "sevenfold", &arm);
    bench_robot(&mut c, "brachia", &climber);
    c.final_summary();
}

//! Projection timings: a 6-row point grip (`FrameMatch::point_grip`, `MatchMode::Full`) on
//! the seven-joint arm `robots/sevenfold.toml`, effector `hand`.
//!
//! ```text
//! cargo bench --bench projection
//! ```
//! For each perturbation size δ (0.05, 0.2, 0.5 rad) 1024 seeded pairs (q0, start) are
//! prepared beforehand: q0 is a random configuration, the hold is the world pose of the grip
//! frame at q0, and the start is q0 plus a uniform perturbation in [-δ, δ] per joint. Each
//! criterion iteration projects the next pair's start (one prepared stack per pair, one
//! `ProjectionBuffer` for all of them: the stacks have the same shape). Before timing, the
//! success rate, mean iterations and mean evaluations over the 1024 pairs are printed to
//! stderr.
//!
//! `CLAMBER_BENCH_LOOP=1 cargo bench --bench projection` skips criterion and prints the
//! median and 95th-percentile wall-clock time of single projections (the same pairs, 20
//! passes), like the `k` comparison in `reference/k-compare`, and the thread-CPU time per
//! projection (each pass sweeps the pairs `CLAMBER_BENCH_LOOP_SWEEPS` times, default 10;
//! its thread-CPU total divided by its projections, median over the passes). For profilers,
//! `CLAMBER_BENCH_LOOP_PASSES` sets the passes (default 20) and `CLAMBER_BENCH_DELTAS` a
//! comma-separated subset of the perturbation sizes, e.g.
//! `CLAMBER_BENCH_LOOP=1 CLAMBER_BENCH_LOOP_PASSES=1 CLAMBER_BENCH_LOOP_SWEEPS=1 CLAMBER_BENCH_DELTAS=0.05
//! valgrind --tool=callgrind <bench binary>`.

use std::hint::black_box;
use std::path::Path;
use std::time::Instant;

use clamber::constraint::{ConstraintStack, FrameMatch, MatchMode};
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::model::Robot;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use criterion::Criterion;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const PAIRS: usize = 1024;
const EFFECTOR: &str = "hand";

/// The prepared problems for one perturbation size.
struct PairSet {
    delta: f64,
    stacks: Vec<ConstraintStack>,
    starts: Vec<Vec<f64>>,
}

fn prepare(robot: &Robot, delta: f64, seed: u64) -> PairSet {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let e = robot.effector(EFFECTOR).expect("sevenfold has `hand`");
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let (mut stacks, mut starts) = (Vec::with_capacity(PAIRS), Vec::with_capacity(PAIRS));
    for _ in 0..PAIRS {
        let q0 = robot.random_configuration(&mut rng);
        forward_kinematics(robot, &q0, &mut poses).unwrap();
        let hold = poses[e.link] * e.grip;
        let grip = FrameMatch::point_grip(robot, EFFECTOR, hold, MatchMode::Full).unwrap();
        stacks.push(ConstraintStack::new().with(grip));
        starts.push(
            q0.iter()
                .map(|x| x + rng.random_range(-delta..=delta))
                .collect(),
        );
    }
    PairSet {
        delta,
        stacks,
        starts,
    }
}

/// Success rate and mean iterations (of converged projections) and mean evaluations.
fn statistics(robot: &Robot, set: &PairSet, buf: &mut ProjectionBuffer) {
    let settings = ProjectionSettings::default();
    let (mut ok, mut iters, mut evals) = (0usize, 0usize, 0usize);
    for (stack, start) in set.stacks.iter().zip(&set.starts) {
        let mut q = start.clone();
        let rep = project(robot, stack, &settings, &mut q, buf).unwrap();
        evals += rep.evaluations;
        if rep.converged() {
            ok += 1;
            iters += rep.iterations;
        }
    }
    eprintln!(
        "projection/sevenfold/{}: {PAIRS} pairs, tolerance {:e}: success {:.2} %, \
         mean iterations {:.2} (converged), mean evaluations {:.2}",
        set.delta,
        settings.tolerance,
        100.0 * ok as f64 / PAIRS as f64,
        iters as f64 / ok.max(1) as f64,
        evals as f64 / PAIRS as f64
    );
}

/// Nanoseconds this thread has spent on a CPU (Linux `/proc/thread-self/schedstat`, first
/// field); NaN where unavailable. Same source as the kinematics bench.
fn thread_cpu_ns() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|t| t.parse().ok()))
        .unwrap_or(f64::NAN)
}

/// Per-call wall-clock median and p95 over all projections, and the thread-CPU time per
/// projection of each pass (its median over the passes): time the thread was descheduled by
/// other load on the machine does not count.
fn loop_mode(robot: &Robot, set: &PairSet, buf: &mut ProjectionBuffer) {
    let settings = ProjectionSettings::default();
    let passes = std::env::var("CLAMBER_BENCH_LOOP_PASSES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(20);
    // The schedstat clock advances in scheduler ticks (4 ms here): a pass sweeps the pairs
    // `sweeps` times so that a tick is a small part of it.
    let sweeps = std::env::var("CLAMBER_BENCH_LOOP_SWEEPS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(10);
    let mut q = vec![0.0; robot.nq()];
    let mut times = Vec::with_capacity(passes * sweeps * PAIRS);
    let mut cpu = Vec::with_capacity(passes);
    for _ in 0..passes {
        let c0 = thread_cpu_ns();
        for _ in 0..sweeps {
            for (stack, start) in set.stacks.iter().zip(&set.starts) {
                q.copy_from_slice(start);
                let t = Instant::now();
                let rep = project(robot, stack, &settings, black_box(&mut q), buf).unwrap();
                times.push(t.elapsed().as_nanos() as f64);
                black_box(rep);
            }
        }
        cpu.push((thread_cpu_ns() - c0) / (sweeps * PAIRS) as f64);
    }
    times.sort_by(f64::total_cmp);
    cpu.sort_by(f64::total_cmp);
    println!(
        "projection/sevenfold/{}: median {:.0} ns, p95 {:.0} ns ({} projections); \
         thread-CPU per projection {:.0} ns (median of {} passes, timer calls included)",
        set.delta,
        times[times.len() / 2],
        times[times.len() * 95 / 100],
        times.len(),
        cpu[cpu.len() / 2],
        cpu.len()
    );
}

fn main() {
    let robot = clamber::robot_file::load_robot(Path::new("robots/sevenfold.toml"))
        .unwrap_or_else(|e| panic!("{e}"));
    let only: Option<Vec<f64>> = std::env::var("CLAMBER_BENCH_DELTAS")
        .ok()
        .map(|s| s.split(',').filter_map(|d| d.trim().parse().ok()).collect());
    let sets: Vec<PairSet> = [0.05, 0.2, 0.5]
        .iter()
        .enumerate()
        .filter(|(_, d)| only.as_ref().is_none_or(|o| o.contains(d)))
        .map(|(k, &d)| prepare(&robot, d, 2026 + k as u64))
        .collect();
    let mut buf = ProjectionBuffer::new(&robot, &sets[0].stacks[0]);
    for set in &sets {
        statistics(&robot, set, &mut buf);
    }
    if std::env::var_os("CLAMBER_BENCH_LOOP").is_some() {
        for set in &sets {
            loop_mode(&robot, set, &mut buf);
        }
        return;
    }
    let settings = ProjectionSettings::default();
    let mut c = Criterion::default().configure_from_args();
    let mut q = vec![0.0; robot.nq()];
    for set in &sets {
        let mut i = 0;
        c.bench_function(&format!("projection/sevenfold/{}", set.delta), |b| {
            b.iter(|| {
                i = (i + 1) % PAIRS;
                q.copy_from_slice(&set.starts[i]);
                let rep = project(
                    &robot,
                    &set.stacks[i],
                    &settings,
                    black_box(&mut q),
                    &mut buf,
                )
                .unwrap();
                black_box(rep);
            })
        });
    }
    c.final_summary();
}

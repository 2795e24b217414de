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
//! median and 95th-percentile time of single projections (the same pairs, 20 passes),
//! like the `k` comparison in `reference/k-compare`. For profilers,
//! `CLAMBER_BENCH_LOOP_PASSES` sets the passes (default 20) and `CLAMBER_BENCH_DELTAS` a
//! comma-separated subset of the perturbation sizes, e.g.
//! `CLAMBER_BENCH_LOOP=1 CLAMBER_BENCH_LOOP_PASSES=1 CLAMBER_BENCH_DELTAS=0.05
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

fn loop_mode(robot: &Robot, set: &PairSet, buf: &mut ProjectionBuffer) {
    let settings = ProjectionSettings::default();
    let passes = std::env::var("CLAMBER_BENCH_LOOP_PASSES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(20);
    let mut q = vec![0.0; robot.nq()];
    // Untimed warm-up passes (common practice), so the timed ones do not include start-up.
    // Short runs still vary between processes on a shared VM (2.07-2.9 µs medians over 20
    // passes in one session); more passes average that out.
    for _ in 0..5 {
        for (stack, start) in set.stacks.iter().zip(&set.starts) {
            q.copy_from_slice(start);
            black_box(project(robot, stack, &settings, black_box(&mut q), buf).unwrap());
        }
    }
    let mut times = Vec::with_capacity(passes * PAIRS);
    for _ in 0..passes {
        for (stack, start) in set.stacks.iter().zip(&set.starts) {
            q.copy_from_slice(start);
            let t = Instant::now();
            let rep = project(robot, stack, &settings, black_box(&mut q), buf).unwrap();
            times.push(t.elapsed().as_nanos() as f64);
            black_box(rep);
        }
    }
    times.sort_by(f64::total_cmp);
    println!(
        "projection/sevenfold/{}: median {:.0} ns, p95 {:.0} ns ({} projections)",
        set.delta,
        times[times.len() / 2],
        times[times.len() * 95 / 100],
        times.len()
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

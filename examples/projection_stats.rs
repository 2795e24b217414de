//! Projection statistics for a 6-row point grip on a seven-joint arm: for each perturbation
//! size, the median and 95th-percentile time of one projection, mean iterations and success
//! rate. Recorded in docs/performance.md.
//!
//! cargo run --release --example projection_stats -- [robot.toml] [effector] [trials]

use std::time::Instant;

use clamber::constraint::{ConstraintStack, FrameMatch, MatchMode};
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use rand::{Rng, SeedableRng};

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    let path = args
        .get(1)
        .map(String::as_str)
        .unwrap_or("robots/sevenfold.toml");
    let effector = args.get(2).map(String::as_str).unwrap_or("hand");
    let trials: usize = args
        .get(3)
        .map(|s| s.parse())
        .transpose()?
        .unwrap_or(20_000);
    let robot = clamber::robot_file::load_robot(std::path::Path::new(path))?;
    let settings = ProjectionSettings::default();
    println!(
        "robot {path} ({} DOF), effector {effector}, tolerance {:e}, {trials} trials per row",
        robot.nv(),
        settings.tolerance
    );
    println!("| perturbation (rad, per joint) | success | mean iterations | mean evaluations | median time (us) | p95 time (us) |");
    println!("|---|---|---|---|---|---|");
    for delta in [0.05, 0.2, 0.5] {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
        let mut times = Vec::with_capacity(trials);
        let (mut ok, mut iters, mut evals) = (0usize, 0usize, 0usize);
        let mut poses = vec![Pose::identity(); robot.links().len()];
        let e = robot
            .effector(effector)
            .ok_or_else(|| anyhow::anyhow!("no effector {effector}"))?;
        // One stack whose hold is replaced per trial keeps the buffers' shapes fixed.
        let mut stack = ConstraintStack::new().with(FrameMatch::point_grip(
            &robot,
            effector,
            Pose::identity(),
            MatchMode::Full,
        )?);
        let mut buf = ProjectionBuffer::new(&robot, &stack);
        for _ in 0..trials {
            let q0 = robot.random_configuration(&mut rng);
            forward_kinematics(&robot, &q0, &mut poses)?;
            let hold = poses[e.link] * e.grip;
            stack = ConstraintStack::new().with(FrameMatch::point_grip(
                &robot,
                effector,
                hold,
                MatchMode::Full,
            )?);
            let mut q: Vec<f64> = q0
                .iter()
                .map(|x| x + rng.random_range(-delta..=delta))
                .collect();
            let t = Instant::now();
            let rep = project(&robot, &stack, &settings, &mut q, &mut buf)?;
            times.push(t.elapsed().as_secs_f64() * 1e6);
            evals += rep.evaluations;
            if rep.converged() {
                ok += 1;
                iters += rep.iterations;
            }
        }
        times.sort_by(|a, b| a.total_cmp(b));
        println!(
            "| {delta} | {:.2}% | {:.2} | {:.2} | {:.2} | {:.2} |",
            100.0 * ok as f64 / trials as f64,
            iters as f64 / ok.max(1) as f64,
            evals as f64 / trials as f64,
            times[trials / 2],
            times[trials * 95 / 100]
        );
    }
    Ok(())
}

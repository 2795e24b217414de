//! Clamber's projection against the `k` crate's `JacobianIkSolver` (crates.io, a
//! general-purpose kinematics crate) on the same task: hold the grip frame of `hand` of
//! `robots/sevenfold.toml` at a pose (6 rows: position and orientation), starting from a
//! perturbation of a configuration that reaches it.
//!
//! `cargo run --release --manifest-path reference/k-compare/Cargo.toml`
//!
//! 1. The robot is exported to URDF with Clamber's writer (which adds the fixed joint and
//!    link `hand_grip` at the grip frame) and loaded into `k`; `k`'s forward kinematics of
//!    the chain to `hand_grip` must equal Clamber's at 1000 random configurations to 1e-12.
//! 2. For perturbations 0.05, 0.2 and 0.5 rad, the same 1024 seeded (q0, start) pairs as
//!    `benches/projection.rs` (starts clamped into the joint limits, as both solvers clamp)
//!    are solved by both. Success is judged the same way for both, by Clamber's forward
//!    kinematics of the returned configuration: position error <= 1e-9 m and rotation error
//!    (norm of log(R_hold^T R)) <= 1e-9 rad. Neither solver's own flag is trusted.
//! 3. Time per solve (median, p95) over several passes, the solvers interleaved pass by
//!    pass so both see the same machine load.

use std::hint::black_box;
use std::path::Path;
use std::time::Instant;

use clamber::constraint::{ConstraintStack, FrameMatch, MatchMode};
use clamber::kinematics::forward_kinematics;
use clamber::math::{rotation_log, Pose};
use clamber::model::Robot;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use k::nalgebra as kna;
use k::prelude::InverseKinematicsSolver;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const PAIRS: usize = 1024;
const EFFECTOR: &str = "hand";
/// Success: position error (m) and rotation error (rad) at most this.
const TOL: f64 = 1e-9;
/// Iteration cap for both solvers (Clamber's default).
const MAX_ITERATIONS: usize = 50;
/// Timing passes over the 1024 pairs per solver and perturbation.
const PASSES: usize = 5;

struct Pair {
    hold: Pose,
    stack: ConstraintStack,
    target: kna::Isometry3<f64>,
    start: Vec<f64>,
}

fn to_k(p: &Pose) -> kna::Isometry3<f64> {
    let t = p.translation.vector;
    let m = p.rotation.matrix();
    let r = kna::Matrix3::new(
        m[(0, 0)],
        m[(0, 1)],
        m[(0, 2)],
        m[(1, 0)],
        m[(1, 1)],
        m[(1, 2)],
        m[(2, 0)],
        m[(2, 1)],
        m[(2, 2)],
    );
    kna::Isometry3::from_parts(
        kna::Translation3::new(t.x, t.y, t.z),
        kna::UnitQuaternion::from_rotation_matrix(&kna::Rotation3::from_matrix_unchecked(r)),
    )
}

/// The same pairs as `benches/projection.rs` (same seeds and draws), starts clamped.
fn prepare(robot: &Robot, delta: f64, seed: u64) -> Vec<Pair> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let e = robot.effector(EFFECTOR).expect("sevenfold has `hand`");
    let mut poses = vec![Pose::identity(); robot.links().len()];
    (0..PAIRS)
        .map(|_| {
            let q0 = robot.random_configuration(&mut rng);
            forward_kinematics(robot, &q0, &mut poses).unwrap();
            let hold = poses[e.link] * e.grip;
            let grip = FrameMatch::point_grip(robot, EFFECTOR, hold, MatchMode::Full).unwrap();
            let mut start: Vec<f64> = q0
                .iter()
                .map(|x| x + rng.random_range(-delta..=delta))
                .collect();
            robot.clamp_to_limits(&mut start);
            Pair {
                hold,
                stack: ConstraintStack::new().with(grip),
                target: to_k(&hold),
                start,
            }
        })
        .collect()
}

/// Position and rotation error of the grip frame at `q` against `hold`, by Clamber's FK.
fn pose_error(robot: &Robot, q: &[f64], hold: &Pose, poses: &mut [Pose]) -> (f64, f64) {
    let e = robot.effector(EFFECTOR).expect("sevenfold has `hand`");
    forward_kinematics(robot, q, poses).unwrap();
    let p = poses[e.link] * e.grip;
    let dp = (p.translation.vector - hold.translation.vector).norm();
    let dr = rotation_log(&(hold.rotation.inverse() * p.rotation)).norm();
    (dp, dr)
}

fn median_p95(times: &mut [f64]) -> (f64, f64) {
    times.sort_by(f64::total_cmp);
    (times[times.len() / 2], times[times.len() * 95 / 100])
}

/// One solver under test.
trait Solver {
    fn name(&self) -> String;
    /// Solve from `pair.start` with at most `max_iterations` steps; final configuration into
    /// `q`. Returns the seconds spent in the solver call alone.
    fn solve(&mut self, pair: &Pair, max_iterations: usize, q: &mut Vec<f64>) -> f64;
    /// Iterations the solver reports for the last solve, if it reports them.
    fn reported_iterations(&self) -> Option<usize>;
    /// Its own success flag for the last solve.
    fn own_flag(&self) -> bool;
}

struct Clamber<'a> {
    robot: &'a Robot,
    buf: ProjectionBuffer,
    last: Option<(usize, bool)>,
}

impl Solver for Clamber<'_> {
    fn name(&self) -> String {
        "Clamber `project` (LM, tolerance 1e-9 on the 6-vector norm)".into()
    }
    fn solve(&mut self, pair: &Pair, max_iterations: usize, q: &mut Vec<f64>) -> f64 {
        let settings = ProjectionSettings {
            max_iterations,
            ..ProjectionSettings::default()
        };
        q.clone_from(&pair.start);
        let t = Instant::now();
        let rep = project(self.robot, &pair.stack, &settings, q, &mut self.buf).unwrap();
        let s = t.elapsed().as_secs_f64();
        self.last = Some((rep.iterations, rep.converged()));
        s
    }
    fn reported_iterations(&self) -> Option<usize> {
        self.last.map(|l| l.0)
    }
    fn own_flag(&self) -> bool {
        self.last.is_some_and(|l| l.1)
    }
}

struct KSolver {
    arm: k::SerialChain<f64>,
    multiplier: f64,
    ok: bool,
}

impl KSolver {
    fn solver(&self, max_iterations: usize) -> k::JacobianIkSolver<f64> {
        // Position and angle thresholds equal to the success check: k stops when the
        // position error norm < TOL and the rotation error norm < TOL (each strictly).
        k::JacobianIkSolver::new(TOL, TOL, self.multiplier, max_iterations)
    }
}

impl Solver for KSolver {
    fn name(&self) -> String {
        format!(
            "k `JacobianIkSolver` (multiplier {}, thresholds 1e-9 m / 1e-9 rad)",
            self.multiplier
        )
    }
    fn solve(&mut self, pair: &Pair, max_iterations: usize, q: &mut Vec<f64>) -> f64 {
        let solver = self.solver(max_iterations);
        self.arm.set_joint_positions_clamped(&pair.start);
        let t = Instant::now();
        let r = solver.solve(&self.arm, black_box(&pair.target));
        let s = t.elapsed().as_secs_f64();
        self.ok = r.is_ok();
        *q = self.arm.joint_positions();
        s
    }
    fn reported_iterations(&self) -> Option<usize> {
        None
    }
    fn own_flag(&self) -> bool {
        self.ok
    }
}

struct Outcome {
    success: usize,
    flag_disagreements: usize,
    iterations: Option<f64>,
    times_us: Vec<f64>,
}

/// Success (by our check) and iterations over all pairs. For a solver that does not report
/// iterations (k), the iteration count of a success is the smallest cap `n` at which the
/// same solve still succeeds (found by bisection: a capped solve takes the same steps as an
/// uncapped one up to the cap, so success is monotone in `n`).
fn evaluate(robot: &Robot, pairs: &[Pair], s: &mut dyn Solver) -> Outcome {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut q = Vec::new();
    let (mut success, mut disagree, mut iters, mut counted) = (0, 0, 0usize, 0usize);
    for pair in pairs {
        s.solve(pair, MAX_ITERATIONS, &mut q);
        let (dp, dr) = pose_error(robot, &q, &pair.hold, &mut poses);
        let ok = dp <= TOL && dr <= TOL;
        if ok != s.own_flag() {
            disagree += 1;
        }
        if !ok {
            continue;
        }
        success += 1;
        let n = match s.reported_iterations() {
            Some(n) => n,
            None => {
                let (mut lo, mut hi) = (1, MAX_ITERATIONS); // success at hi
                while lo < hi {
                    let mid = (lo + hi) / 2;
                    s.solve(pair, mid, &mut q);
                    let (dp, dr) = pose_error(robot, &q, &pair.hold, &mut poses);
                    if dp <= TOL && dr <= TOL {
                        hi = mid;
                    } else {
                        lo = mid + 1;
                    }
                }
                lo
            }
        };
        iters += n;
        counted += 1;
    }
    Outcome {
        success,
        flag_disagreements: disagree,
        iterations: (counted > 0).then(|| iters as f64 / counted as f64),
        times_us: Vec::new(),
    }
}

fn check_fk(robot: &Robot, arm: &k::SerialChain<f64>) -> f64 {
    let e = robot.effector(EFFECTOR).expect("sevenfold has `hand`");
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let mut worst: f64 = 0.0;
    for k in 0..1000 {
        let q = if k == 0 {
            robot.neutral()
        } else {
            robot.random_configuration(&mut rng)
        };
        arm.set_joint_positions(&q).expect("within k's limits");
        let tk = arm.end_transform();
        forward_kinematics(robot, &q, &mut poses).unwrap();
        let p = poses[e.link] * e.grip;
        let rk = tk.rotation.to_rotation_matrix();
        for i in 0..3 {
            worst = worst.max((tk.translation.vector[i] - p.translation.vector[i]).abs());
            for j in 0..3 {
                worst = worst.max((rk[(i, j)] - p.rotation[(i, j)]).abs());
            }
        }
    }
    worst
}

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let robot = clamber::robot_file::load_robot(&root.join("robots/sevenfold.toml"))
        .unwrap_or_else(|e| panic!("{e}"));
    let urdf_path = std::env::temp_dir().join("clamber-k-compare-sevenfold.urdf");
    std::fs::write(&urdf_path, clamber::robot_file::urdf::write_urdf(&robot))
        .expect("write the URDF");
    let chain = k::Chain::<f64>::from_urdf_file(&urdf_path).expect("k reads the URDF");
    let end = chain
        .find_link("hand_grip")
        .expect("the export adds link hand_grip");
    let arm = k::SerialChain::from_end(end);

    // Same moving joints in the same order (k's joint positions skip fixed joints).
    let k_names: Vec<String> = arm.iter_joints().map(|j| j.name.clone()).collect();
    let our_names: Vec<String> = robot
        .joints()
        .iter()
        .filter(|j| j.kind.nq() == 1)
        .map(|j| j.name.clone())
        .collect();
    assert_eq!(
        robot.nq(),
        our_names.len(),
        "one coordinate per moving joint"
    );
    assert_eq!(k_names, our_names, "joint order of k's chain");
    let fk_err = check_fk(&robot, &arm);
    println!(
        "FK check: k's chain to hand_grip vs Clamber's grip frame, 1000 configurations: \
         max error {fk_err:.1e} (limit 1e-12)"
    );
    assert!(
        fk_err <= 1e-12,
        "FK of the exported URDF differs: {fk_err:e}"
    );

    let mut clamber_solver = Clamber {
        robot: &robot,
        buf: ProjectionBuffer::new(
            &robot,
            &ConstraintStack::new().with(
                FrameMatch::point_grip(&robot, EFFECTOR, Pose::identity(), MatchMode::Full)
                    .unwrap(),
            ),
        ),
        last: None,
    };
    let mut k_full = KSolver {
        arm: arm.clone(),
        multiplier: 1.0,
        ok: false,
    };
    let mut k_half = KSolver {
        arm: arm.clone(),
        multiplier: 0.5,
        ok: false,
    };
    println!(
        "{PAIRS} pairs per perturbation, iteration cap {MAX_ITERATIONS}, {PASSES} timing passes; \
         success = position error <= 1e-9 m and rotation error <= 1e-9 rad by Clamber's FK"
    );
    println!(
        "| perturbation (rad) | solver | success | mean iterations | median time | p95 time | \
         own flag disagrees |"
    );
    println!("|---|---|---|---|---|---|---|");
    let mut ratios = Vec::new();
    for (kk, delta) in [0.05, 0.2, 0.5].into_iter().enumerate() {
        let pairs = prepare(&robot, delta, 2026 + kk as u64);
        let solvers: [&mut dyn Solver; 3] = [&mut clamber_solver, &mut k_full, &mut k_half];
        let mut outcomes: Vec<Outcome> = Vec::new();
        let mut names = Vec::new();
        for s in solvers {
            names.push(s.name());
            outcomes.push(evaluate(&robot, &pairs, s));
        }
        // Timing, interleaved pass by pass.
        let mut q = Vec::new();
        for _ in 0..PASSES {
            for (o, s) in outcomes.iter_mut().zip([
                &mut clamber_solver as &mut dyn Solver,
                &mut k_full,
                &mut k_half,
            ]) {
                for pair in &pairs {
                    o.times_us.push(1e6 * s.solve(pair, MAX_ITERATIONS, &mut q));
                }
            }
        }
        let mut medians = Vec::new();
        for (o, name) in outcomes.iter_mut().zip(&names) {
            let (med, p95) = median_p95(&mut o.times_us);
            medians.push(med);
            println!(
                "| {delta} | {name} | {:.2} % | {} | {med:.2} µs | {p95:.2} µs | {} |",
                100.0 * o.success as f64 / PAIRS as f64,
                o.iterations.map_or("-".to_string(), |i| format!("{i:.2}")),
                o.flag_disagreements
            );
        }
        ratios.push((delta, medians[0] / medians[1], medians[0] / medians[2]));
    }
    println!();
    for (delta, r1, r2) in ratios {
        println!(
            "δ {delta}: median time Clamber / k (multiplier 1) = {r1:.3}, \
             Clamber / k (multiplier 0.5) = {r2:.3}"
        );
    }
    let _ = std::fs::remove_file(&urdf_path);
}

//! A planar four-bar linkage as a closed chain: the projection against Freudenstein's
//! equation, and the manifold walk against branch jumping.
//!
//! Model: ground = root link; crank about z at O2 = origin (length a), coupler on the crank
//! tip (length b), rocker about z at O4 = (d, 0, 0) (length c) as a second branch of the tree.
//! Loop closure: coupler end point = rocker end point (`FrameMatch`, `MatchMode::Position`;
//! its z row is identically zero in a planar linkage).
//!
//! Angles, all measured from the ground line (+x) counter-clockwise like Freudenstein's:
//! theta2 = q_crank, theta3 = q_crank + q_coupler (the coupler joint is relative to the
//! crank), theta4 = q_rocker.

mod common;

use std::f64::consts::{PI, TAU};

use clamber::constraint::{ConstraintStack, FrameMatch, FrameRef, MatchMode};
use clamber::math::pose_from_xyz_rpy;
use clamber::model::{JointType, LinkSpec, Robot, RobotSpec};
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use clamber::walk::{walk, WalkSettings, WalkStop};
use common::{joint, wrap_angle, JointPin};
use rand::{Rng, SeedableRng};

/// Ground d, crank a, coupler b, rocker c (metres).
const D: f64 = 1.0;
const A: f64 = 0.3;
const B: f64 = 0.9;
const C: f64 = 0.8;

fn four_bar() -> Robot {
    let link = |n: &str| LinkSpec {
        name: n.into(),
        shapes: vec![],
    };
    RobotSpec {
        name: "four_bar".into(),
        links: vec![
            link("ground"),
            link("crank"),
            link("coupler"),
            link("rocker"),
        ],
        joints: vec![
            joint(
                "crank_joint",
                JointType::Revolute,
                "ground",
                "crank",
                [0.0; 3],
                [0., 0., 1.],
                None,
            ),
            joint(
                "coupler_joint",
                JointType::Revolute,
                "crank",
                "coupler",
                [A, 0.0, 0.0],
                [0., 0., 1.],
                None,
            ),
            joint(
                "rocker_joint",
                JointType::Revolute,
                "ground",
                "rocker",
                [D, 0.0, 0.0],
                [0., 0., 1.],
                None,
            ),
        ],
        ..Default::default()
    }
    .build()
    .unwrap()
}

struct Ix {
    crank: usize,
    coupler: usize,
    rocker: usize,
}

fn indices(robot: &Robot) -> Ix {
    let q = |n: &str| robot.joints()[robot.joint_id(n).unwrap()].q_index;
    Ix {
        crank: q("crank_joint"),
        coupler: q("coupler_joint"),
        rocker: q("rocker_joint"),
    }
}

/// (theta2, theta3, theta4) of a configuration.
fn angles(ix: &Ix, q: &[f64]) -> (f64, f64, f64) {
    (q[ix.crank], q[ix.crank] + q[ix.coupler], q[ix.rocker])
}

/// Branch indicator: z of (coupler direction x rocker direction) = sin(theta4 - theta3).
fn branch(ix: &Ix, q: &[f64]) -> f64 {
    let (_, t3, t4) = angles(ix, q);
    (t4 - t3).sin()
}

fn closure(robot: &Robot) -> FrameMatch {
    FrameMatch::new(
        FrameRef::on_link(robot, "coupler", pose_from_xyz_rpy([B, 0.0, 0.0], [0.0; 3])).unwrap(),
        FrameRef::on_link(robot, "rocker", pose_from_xyz_rpy([C, 0.0, 0.0], [0.0; 3])).unwrap(),
        MatchMode::Position,
        "four-bar loop",
    )
}

/// Freudenstein's equation residual (F. Freudenstein, "Approximate synthesis of four-bar
/// linkages", Trans. ASME 77, 1955): K1 cos t4 - K2 cos t2 + K3 - cos(t2 - t4).
fn freudenstein(t2: f64, t4: f64) -> f64 {
    let k1 = D / A;
    let k2 = D / C;
    let k3 = (A * A - B * B + C * C + D * D) / (2.0 * A * C);
    k1 * t4.cos() - k2 * t2.cos() + k3 - (t2 - t4).cos()
}

/// A configuration on the loop at crank angle `t2` (projected with the crank pinned).
fn assemble(robot: &Robot, t2: f64, t3: f64, t4: f64, tol: f64) -> Vec<f64> {
    let ix = indices(robot);
    let stack = ConstraintStack::new()
        .with(closure(robot))
        .with(JointPin::new(robot, "crank_joint", t2));
    let mut q = vec![0.0; robot.nq()];
    q[ix.crank] = t2;
    q[ix.coupler] = t3 - t2;
    q[ix.rocker] = t4;
    let settings = ProjectionSettings::new(tol, 100, 0.5).unwrap();
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let rep = project(robot, &stack, &settings, &mut q, &mut buf).unwrap();
    assert!(rep.converged(), "{rep:?}");
    q
}

#[test]
fn grashof_crank_rocker() {
    // Grashof (1883): s + l <= p + q with the shortest link as the crank -> crank-rocker.
    let mut l = [A, B, C, D];
    l.sort_by(f64::total_cmp);
    assert!(l[0] + l[3] <= l[1] + l[2]);
    assert_eq!(l[0], A);
}

/// Circle-intersection assembly (open branch, branch indicator > 0) of the loop at crank
/// angle t2: used only to build perturbed starting guesses.
fn open_branch_guess(t2: f64) -> (f64, f64) {
    let (px, py) = (A * t2.cos(), A * t2.sin());
    let (dx, dy) = (D - px, -py);
    let e = (dx * dx + dy * dy).sqrt();
    // Law of cosines in triangle (crank tip, O4, joint): angle at the crank tip.
    let alpha = ((B * B + e * e - C * C) / (2.0 * B * e)).acos();
    let base = dy.atan2(dx);
    let t3 = base + alpha;
    let (jx, jy) = (px + B * t3.cos(), py + B * t3.sin());
    let t4 = jy.atan2(jx - D);
    (t3, t4)
}

#[test]
fn projection_satisfies_freudenstein() {
    let robot = four_bar();
    let ix = indices(&robot);
    let tol = 1e-12;
    let settings = ProjectionSettings::new(tol, 100, 0.5).unwrap();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1955);
    let n = 300;
    let (mut worst, mut worst_crank, mut open, mut max_iter) = (0.0f64, 0.0f64, 0, 0);
    for _ in 0..n {
        let t2 = rng.random_range(-PI..PI);
        let stack = ConstraintStack::new()
            .with(closure(&robot))
            .with(JointPin::new(&robot, "crank_joint", t2));
        let mut buf = ProjectionBuffer::new(&robot, &stack);
        let (g3, g4) = open_branch_guess(t2);
        let mut q = vec![0.0; robot.nq()];
        q[ix.crank] = t2 + rng.random_range(-0.2..0.2);
        q[ix.coupler] = g3 - t2 + rng.random_range(-0.2..0.2);
        q[ix.rocker] = g4 + rng.random_range(-0.2..0.2);
        // The loop's z row is identically zero (planar linkage): J has a zero row, and the
        // damped normal matrix J J^T + lambda I stays positive definite.
        stack.evaluate(&robot, &q, &mut buf.stack, true).unwrap();
        assert!(buf.stack.jacobian.row(2).iter().all(|&x| x == 0.0));
        assert_eq!(buf.stack.residual[2], 0.0);
        let rep = project(&robot, &stack, &settings, &mut q, &mut buf).unwrap();
        assert!(rep.converged(), "crank {t2}: {rep:?}");
        max_iter = max_iter.max(rep.iterations);
        let (p2, _, p4) = angles(&ix, &q);
        worst_crank = worst_crank.max(wrap_angle(p2 - t2).abs());
        let f = freudenstein(p2, p4);
        assert!(f.abs() <= 1e-9, "crank {t2}: Freudenstein residual {f}");
        worst = worst.max(f.abs());
        if branch(&ix, &q) > 0.0 {
            open += 1;
        }
    }
    println!(
        "{n} crank angles: max |Freudenstein residual| {worst:.3e}, max crank pin error \
         {worst_crank:.3e}, open branch {open}/{n}, max iterations {max_iter}"
    );
    assert!(worst_crank <= 1e-12);
}

#[test]
fn loop_and_pin_jacobians_match_finite_differences() {
    let robot = four_bar();
    let stack = ConstraintStack::new()
        .with(closure(&robot))
        .with(JointPin::new(&robot, "crank_joint", 0.4));
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    for _ in 0..50 {
        let q = robot.random_configuration(&mut rng);
        let e = common::jacobian_fd_error(&robot, &stack, &q);
        assert!(e <= 1e-6, "{e}");
    }
}

/// The configuration on the loop at crank angle `t2` reached from `from` by a pinned
/// projection started with the crank set to `t2` and the other joints unchanged.
fn pinned_target(robot: &Robot, from: &[f64], t2: f64) -> (Vec<f64>, bool) {
    let ix = indices(robot);
    let stack = ConstraintStack::new()
        .with(closure(robot))
        .with(JointPin::new(robot, "crank_joint", t2));
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let mut q = from.to_vec();
    q[ix.crank] = t2;
    let rep = project(
        robot,
        &stack,
        &ProjectionSettings::default(),
        &mut q,
        &mut buf,
    )
    .unwrap();
    (q, rep.converged())
}

/// Full crank turn by walks along the loop manifold between targets every 20 degrees: one
/// assembly branch all the way and back to the start after 360 degrees.
///
/// For a Grashof crank-rocker driven by the crank the transmission angle theta4 - theta3
/// stays inside (0, pi) or inside (-pi, 0) (the two circuits never meet), so
/// sin(theta4 - theta3) keeps its sign on a branch (common practice in linkage analysis).
#[test]
fn full_crank_turn_stays_on_one_branch() {
    let robot = four_bar();
    let ix = indices(&robot);
    let loop_only = ConstraintStack::new().with(closure(&robot));
    let mut buf = ProjectionBuffer::new(&robot, &loop_only);
    let settings = WalkSettings::default();
    let (g3, g4) = open_branch_guess(0.0);
    let q0 = assemble(&robot, 0.0, g3, g4, settings.projection.tolerance);
    let sign0 = branch(&ix, &q0).signum();
    let mut q = q0.clone();
    let (mut points, mut min_indicator, mut worst_f) = (0, f64::MAX, 0.0f64);
    let step = 20.0f64.to_radians();
    for k in 1..=18 {
        let (target, ok) = pinned_target(&robot, &q, k as f64 * step);
        assert!(ok);
        let w = walk(&robot, &loop_only, &q, &target, &settings, &mut buf).unwrap();
        assert_eq!(w.stop, WalkStop::Reached, "walk {k}");
        for p in &w.path[1..] {
            points += 1;
            let s = branch(&ix, p) * sign0;
            assert!(
                s > 0.0,
                "walk {k}: branch indicator flipped at {:?}",
                angles(&ix, p)
            );
            min_indicator = min_indicator.min(s);
            let (t2, _, t4) = angles(&ix, p);
            worst_f = worst_f.max(freudenstein(t2, t4).abs());
        }
        q = w.path.last().unwrap().clone();
    }
    // After a full turn: crank at 2 pi, coupler and rocker back where they started.
    let (s2, s3, s4) = angles(&ix, &q0);
    let (e2, e3, e4) = angles(&ix, &q);
    let err = [e2 - s2 - TAU, wrap_angle(e3 - s3), wrap_angle(e4 - s4)]
        .iter()
        .fold(0.0f64, |m, x| m.max(x.abs()));
    println!(
        "full turn: {points} walk points, min |sin(theta4 - theta3)| {min_indicator:.4}, \
         max Freudenstein residual on the walk {worst_f:.3e}, return error {err:.3e}"
    );
    assert!(err <= 1e-6, "{err}");
    // The smallest transmission angle of a crank-rocker is at crank angle 0 (crank along
    // the ground line, toward O4): cos mu_min = (b^2 + c^2 - (d - a)^2) / (2 b c) (law of
    // cosines; common practice in linkage design). The walk never gets closer to a toggle.
    let cos_min = (B * B + C * C - (D - A) * (D - A)) / (2.0 * B * C);
    let sin_min = (1.0 - cos_min * cos_min).sqrt();
    assert!(
        min_indicator >= sin_min - 1e-6,
        "{min_indicator} vs {sin_min}"
    );
    assert!(
        min_indicator <= sin_min + 1e-6,
        "{min_indicator} vs {sin_min}"
    );
    // Loop residual <= 1e-9 (the walk's tolerance) bounds the Freudenstein residual by about
    // b / (a c) * 1e-9 = 3.75e-9 (derivative of the squared loop equation divided by 2ac).
    assert!(worst_f <= 1e-8, "{worst_f}");
}

/// Branch jumps: a naive "step the crank 90 degrees, then project" lands on the other
/// circuit; an unguarded walk (huge stride and max_deviation) toward that configuration
/// jumps there too; the guarded walk (default settings) refuses.
#[test]
fn guard_prevents_branch_jump() {
    let robot = four_bar();
    let ix = indices(&robot);
    let loop_only = ConstraintStack::new().with(closure(&robot));
    let mut buf = ProjectionBuffer::new(&robot, &loop_only);
    let (g3, g4) = open_branch_guess(0.0);
    let q0 = assemble(&robot, 0.0, g3, g4, 1e-9);
    assert!(branch(&ix, &q0) > 0.0);

    // Naive: crank +90 degrees, other joints unchanged, projection with the crank pinned.
    let (jumped, ok) = pinned_target(&robot, &q0, 90.0f64.to_radians());
    assert!(ok);
    println!(
        "naive step 90 deg: indicator {:.4} -> {:.4}",
        branch(&ix, &q0),
        branch(&ix, &jumped)
    );
    assert!(branch(&ix, &jumped) < 0.0, "the naive step did not jump");
    // The same step in 20-degree pieces stays on the branch (so the jump is the step size's
    // doing, not a wrong model).
    let mut q = q0.clone();
    for k in 1..=18 {
        let (t, ok) = pinned_target(&robot, &q, (k * 5) as f64 * PI / 180.0);
        assert!(ok && branch(&ix, &t) > 0.0);
        q = t;
    }

    // Unguarded walk toward the configuration on the other circuit.
    let loose = WalkSettings::new(10.0, 1e9, 10_000, ProjectionSettings::default()).unwrap();
    let w = walk(&robot, &loop_only, &q0, &jumped, &loose, &mut buf).unwrap();
    let flipped = w.path.iter().any(|p| branch(&ix, p) < 0.0);
    println!(
        "unguarded walk (stride 10, max_deviation 1e9): {:?}, {} points, flipped {flipped}",
        w.stop,
        w.path.len()
    );
    assert!(flipped, "the unguarded walk did not jump: {:?}", w.stop);

    // Guarded walk (default: stride 0.05, max_deviation 1): never a point on the other
    // circuit, and it does not claim to have reached the target.
    let guarded = WalkSettings::default();
    let w = walk(&robot, &loop_only, &q0, &jumped, &guarded, &mut buf).unwrap();
    println!("guarded walk: {:?}, {} points", w.stop, w.path.len());
    assert!(w.path.iter().all(|p| branch(&ix, p) > 0.0));
    assert!(
        matches!(
            w.stop,
            WalkStop::Deviated { .. } | WalkStop::NoProgress { .. }
        ),
        "{:?}",
        w.stop
    );
}

/// Bug (src/walk.rs): a walk toward a target that is off the manifold is documented to end
/// with `NoProgress` ("gets as close as it can"), but with the default `max_deviation = 1`
/// it ends with `Deviated { ratio: 1 + rounding }` (a branch-jump report) instead: near the
/// closest point the step toward `qb` is almost normal to the manifold, so projection undoes
/// it and the deviation equals the step length. On the way it crawls (hundreds of points
/// for a few degrees of crank), because any positive progress counts as progress.
#[test]
fn walk_to_off_manifold_target_ends_with_no_progress() {
    let robot = four_bar();
    let ix = indices(&robot);
    let loop_only = ConstraintStack::new().with(closure(&robot));
    let mut buf = ProjectionBuffer::new(&robot, &loop_only);
    let (g3, g4) = open_branch_guess(0.0);
    let q0 = assemble(&robot, 0.0, g3, g4, 1e-9);
    let mut target = q0.clone();
    target[ix.crank] += 20.0f64.to_radians(); // coupler and rocker unchanged: off the loop
    let w = walk(
        &robot,
        &loop_only,
        &q0,
        &target,
        &WalkSettings::default(),
        &mut buf,
    )
    .unwrap();
    println!(
        "{:?} after {} points, crank advanced {:.4} rad",
        w.stop,
        w.path.len(),
        w.path.last().unwrap()[ix.crank] - q0[ix.crank]
    );
    assert!(
        matches!(w.stop, WalkStop::NoProgress { .. }),
        "{:?}",
        w.stop
    );
}

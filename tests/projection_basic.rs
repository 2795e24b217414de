mod common;

use clamber::constraint::{ConstraintStack, FrameMatch, MatchMode};
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings, StopReason};
use rand::{Rng, SeedableRng};

#[test]
fn point_grip_projection_converges_from_small_perturbations() {
    let robot = common::arm7();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let settings = ProjectionSettings::default();
    let mut ok = 0;
    let n = 500;
    let mut iters = 0;
    for _ in 0..n {
        let q0 = robot.random_configuration(&mut rng);
        let mut poses = vec![Pose::identity(); robot.links().len()];
        forward_kinematics(&robot, &q0, &mut poses).unwrap();
        let e = robot.effector("hand").unwrap();
        let hold = poses[e.link] * e.grip;
        let stack = ConstraintStack::new()
            .with(FrameMatch::point_grip(&robot, "hand", hold, MatchMode::Full).unwrap());
        let mut buf = ProjectionBuffer::new(&robot, &stack);
        let mut q: Vec<f64> = q0
            .iter()
            .map(|x| x + rng.random_range(-0.05..0.05))
            .collect();
        let rep = project(&robot, &stack, &settings, &mut q, &mut buf).unwrap();
        assert!(robot.within_limits(&q, 0.0));
        if rep.stop == StopReason::Converged {
            assert!(rep.residual <= settings.tolerance);
            let r = stack.evaluate(&robot, &q, &mut buf.stack, false).unwrap();
            assert!(r <= settings.tolerance, "{r}");
            ok += 1;
            iters += rep.iterations;
        }
    }
    println!(
        "converged {ok}/{n}, mean iterations {}",
        iters as f64 / ok as f64
    );
    assert!(ok >= n * 99 / 100, "{ok}/{n}");
}

//! Projection, constrained sampling and the manifold walk on surfaces with closed forms: the
//! unit sphere and a torus, for a point robot (three prismatic joints x, y, z). The
//! constraints are written here against the `Constraint` trait (the seam for custom
//! constraints); the checks use the surfaces' own equations, not the constraints.

mod common;

use common::Sphere;

use clamber::constraint::{
    Constraint, ConstraintError, ConstraintStack, EvalContext, FrameRef, JacobianRows,
};
use clamber::math::Pose;
use clamber::model::Robot;
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::sampling::{sample_on_manifold, SamplingStats};
use clamber::walk::{walk, WalkSettings};
use nalgebra::Vector3;
use rand::SeedableRng;

const BOX: f64 = 2.0;

fn point_frame(robot: &Robot) -> FrameRef {
    FrameRef::on_link(robot, "point", Pose::identity()).unwrap()
}

/// Torus about the z axis (major radius `big`, minor radius `small`), distance form:
/// residual sqrt((rho - R)^2 + z^2) - r with rho = sqrt(x^2 + y^2); gradient
/// ((rho - R) / D * (x, y) / rho, z / D) with D = sqrt((rho - R)^2 + z^2).
#[derive(Debug)]
struct Torus {
    point: FrameRef,
    big: f64,
    small: f64,
}

fn write_row(
    ctx: &mut EvalContext<'_>,
    f: &FrameRef,
    grad: Vector3<f64>,
    jacobian: Option<JacobianRows<'_>>,
) -> Result<(), ConstraintError> {
    if let Some(mut jac) = jacobian {
        ctx.frame_jacobian(f)?;
        let lin = ctx.scratch.rows(0, 3);
        jac.row_mut(0).copy_from(&(grad.transpose() * lin));
    }
    Ok(())
}

impl Constraint for Torus {
    fn rows(&self) -> usize {
        1
    }
    fn codimension(&self) -> usize {
        1
    }
    fn describe(&self) -> String {
        format!("torus R={} r={}", self.big, self.small)
    }
    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError> {
        let p = self.point.pose(ctx.poses).translation.vector;
        let rho = (p.x * p.x + p.y * p.y).sqrt();
        let d = ((rho - self.big).powi(2) + p.z * p.z).sqrt();
        residual[0] = d - self.small;
        let grad = if rho > 0.0 && d > 0.0 {
            let k = (rho - self.big) / (d * rho);
            Vector3::new(k * p.x, k * p.y, p.z / d)
        } else {
            Vector3::zeros()
        };
        write_row(ctx, &self.point, grad, jacobian)
    }
}

const R_BIG: f64 = 1.0;
const R_SMALL: f64 = 0.3;

/// Off the unit sphere by the implicit equation x^2 + y^2 + z^2 = 1, converted to a
/// distance: |p| - 1 = (|p|^2 - 1) / (|p| + 1).
fn sphere_error(p: &[f64]) -> f64 {
    let s = p[0] * p[0] + p[1] * p[1] + p[2] * p[2];
    ((s - 1.0) / (s.sqrt() + 1.0)).abs()
}

/// Off the torus, from its parametric form P(u, v) = ((R + r cos v) cos u,
/// (R + r cos v) sin u, r sin v) at the angles u, v of the point: the distance |p - P(u, v)|.
fn torus_error(p: &[f64]) -> f64 {
    let u = p[1].atan2(p[0]);
    let rho = (p[0] * p[0] + p[1] * p[1]).sqrt();
    let v = p[2].atan2(rho - R_BIG);
    let w = R_BIG + R_SMALL * v.cos();
    let surf = [w * u.cos(), w * u.sin(), R_SMALL * v.sin()];
    (0..3).map(|k| (p[k] - surf[k]).powi(2)).sum::<f64>().sqrt()
}

fn sphere_stack(robot: &Robot) -> ConstraintStack {
    ConstraintStack::new().with(Sphere {
        point: point_frame(robot),
    })
}

fn torus_stack(robot: &Robot) -> ConstraintStack {
    ConstraintStack::new().with(Torus {
        point: point_frame(robot),
        big: R_BIG,
        small: R_SMALL,
    })
}

#[test]
fn custom_jacobians_match_finite_differences() {
    let robot = common::point_robot(BOX);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let mut worst = 0.0f64;
    for stack in [sphere_stack(&robot), torus_stack(&robot)] {
        for _ in 0..200 {
            let q = robot.random_configuration(&mut rng);
            let rho = (q[0] * q[0] + q[1] * q[1]).sqrt();
            if rho < 1e-3 || ((rho - R_BIG).powi(2) + q[2] * q[2]).sqrt() < 1e-3 {
                continue; // the torus distance is not differentiable on the axis / core circle
            }
            let e = common::jacobian_fd_error(&robot, &stack, &q);
            worst = worst.max(e);
        }
    }
    println!("max |analytic - finite difference| {worst:.3e}");
    assert!(worst <= 1e-6, "{worst}");
}

struct Outcome {
    reached: usize,
    walks: usize,
    points: usize,
    max_surface: f64,
    max_step: f64,
    stats: SamplingStats,
}

fn run(
    robot: &Robot,
    stack: &ConstraintStack,
    error: fn(&[f64]) -> f64,
    seed: u64,
    pairs: usize,
    antipodal_cut: Option<f64>,
) -> Outcome {
    let settings = WalkSettings::default();
    let tol = settings.projection.tolerance;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut buf = ProjectionBuffer::new(robot, stack);
    let mut stats = SamplingStats::default();
    let mut out = Outcome {
        reached: 0,
        walks: 0,
        points: 0,
        max_surface: 0.0,
        max_step: 0.0,
        stats,
    };
    let proj = ProjectionSettings::default();
    while out.walks < pairs {
        let a = sample_on_manifold(robot, stack, &proj, &mut rng, 20, &mut buf, &mut stats)
            .unwrap()
            .expect("a sample within 20 attempts");
        let b = sample_on_manifold(robot, stack, &proj, &mut rng, 20, &mut buf, &mut stats)
            .unwrap()
            .expect("a sample within 20 attempts");
        for s in [&a, &b] {
            assert!(error(s) <= tol, "sample off the surface by {}", error(s));
        }
        if let Some(cut) = antipodal_cut {
            // cos of the angle between the two points: skip nearly antipodal pairs, where
            // the direction toward the target is not defined.
            let c = (a[0] * b[0] + a[1] * b[1] + a[2] * b[2]) / (norm(&a) * norm(&b));
            if c < cut {
                continue;
            }
        }
        let w = walk(robot, stack, &a, &b, &settings, &mut buf).unwrap();
        out.walks += 1;
        if w.reached() {
            out.reached += 1;
            assert_eq!(w.path.last().unwrap(), &b);
        }
        out.points += w.path.len();
        for p in &w.path {
            let e = error(p);
            assert!(e <= tol + 1e-15, "walk point off the surface by {e}");
            assert!(robot.within_limits(p, 0.0));
            out.max_surface = out.max_surface.max(e);
        }
        for pair in w.path.windows(2) {
            let d = robot.distance(&pair[0], &pair[1]).unwrap();
            assert!(d <= settings.stride + 1e-12, "step {d} > stride");
            out.max_step = out.max_step.max(d);
        }
    }
    out.stats = stats;
    out
}

fn norm(p: &[f64]) -> f64 {
    (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt()
}

#[test]
fn sphere_walks_stay_on_the_surface_and_reach() {
    let robot = common::point_robot(BOX);
    let stack = sphere_stack(&robot);
    // Pairs closer than 170 degrees apart.
    let o = run(
        &robot,
        &stack,
        sphere_error,
        21,
        200,
        Some((170.0f64).to_radians().cos()),
    );
    println!(
        "sphere: {} walks, {} reached, {} points, max surface error {:.3e}, max step {:.6} \
         (stride 0.05), sampling failure rate {:.4} ({} / {})",
        o.walks,
        o.reached,
        o.points,
        o.max_surface,
        o.max_step,
        o.stats.failure_rate(),
        o.stats.failures,
        o.stats.attempts
    );
    assert_eq!(o.reached, o.walks);
}

#[test]
fn torus_walks_stay_on_the_surface() {
    let robot = common::point_robot(BOX);
    let stack = torus_stack(&robot);
    let o = run(&robot, &stack, torus_error, 22, 200, None);
    println!(
        "torus: {} walks, {} reached, {} points, max surface error {:.3e}, max step {:.6} \
         (stride 0.05), sampling failure rate {:.4} ({} / {})",
        o.walks,
        o.reached,
        o.points,
        o.max_surface,
        o.max_step,
        o.stats.failure_rate(),
        o.stats.failures,
        o.stats.attempts
    );
    // A walk heads straight for its target, so on a torus it may stop short (NoProgress) when
    // the target is around the hole; it must still reach the nearby ones.
    assert!(o.reached > 0);
}

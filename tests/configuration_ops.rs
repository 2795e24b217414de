//! Configuration operations (integrate, difference, interpolate, distance, sampling) on a
//! robot with every joint type, checked against their defining identities and against the
//! known distribution of uniform random rotations.

use std::f64::consts::PI;

use clamber::math::pose_from_xyz_rpy;
use clamber::model::{JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use nalgebra::{Matrix3, Quaternion, UnitQuaternion, Vector3};
use proptest::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

fn lim(lower: f64, upper: f64) -> Limits {
    Limits {
        lower,
        upper,
        velocity: 1.0,
        acceleration: 2.0,
    }
}

/// world -floating-> torso -revolute(bounded)-> a -prismatic-> b -fixed-> c, and
/// torso -revolute(unbounded)-> d.
fn robot() -> Robot {
    let j =
        |name: &str, t, parent: &str, child: &str, axis: [f64; 3], limits: Vec<Limits>| JointSpec {
            name: name.into(),
            joint_type: t,
            parent: parent.into(),
            child: child.into(),
            origin: pose_from_xyz_rpy([0.1, 0.0, 0.2], [0.3, -0.2, 0.1]),
            axis: Vector3::from(axis),
            limits,
            passive: false,
        };
    let u = Limits::UNBOUNDED;
    let spec = RobotSpec {
        name: "ops".into(),
        links: ["world", "torso", "a", "b", "c", "d"]
            .iter()
            .map(|n| LinkSpec {
                name: n.to_string(),
                shapes: Vec::new(),
            })
            .collect(),
        joints: vec![
            j(
                "float",
                JointType::Floating,
                "world",
                "torso",
                [0.0; 3],
                vec![lim(-1.0, 2.0), lim(-3.0, -1.0), lim(0.0, 5.0), u, u, u],
            ),
            j(
                "rev",
                JointType::Revolute,
                "torso",
                "a",
                [0.0, 1.0, 1.0],
                vec![lim(-2.0, 2.5)],
            ),
            j(
                "pri",
                JointType::Prismatic,
                "a",
                "b",
                [1.0, 0.0, 0.0],
                vec![lim(-0.3, 0.7)],
            ),
            j("fix", JointType::Fixed, "b", "c", [0.0; 3], vec![]),
            j(
                "spin",
                JointType::Revolute,
                "torso",
                "d",
                [0.0, 0.0, 1.0],
                vec![],
            ),
        ],
        ..Default::default()
    };
    spec.build().expect("valid robot")
}

fn quat(q: &[f64], i: usize) -> UnitQuaternion<f64> {
    UnitQuaternion::new_normalize(Quaternion::new(q[i + 6], q[i + 3], q[i + 4], q[i + 5]))
}

/// Rotation angle between two unit quaternions, accurate at small angles too:
/// 2 atan2(|v|, |w|) of the relative quaternion (acos of w would lose digits near 0).
fn angle_between(a: &UnitQuaternion<f64>, b: &UnitQuaternion<f64>) -> f64 {
    let rel = a.inverse() * b;
    let c = rel.quaternion().coords;
    2.0 * Vector3::new(c[0], c[1], c[2]).norm().atan2(c[3].abs())
}

/// Largest difference between two configurations: absolute for Euclidean coordinates,
/// rotation angle for quaternions (so q and -q, the same rotation, are equal).
fn config_gap(robot: &Robot, a: &[f64], b: &[f64]) -> f64 {
    let mut gap = 0.0f64;
    for j in robot.joints() {
        let i = j.q_index;
        if j.kind.nq() == 7 {
            for k in 0..3 {
                gap = gap.max((a[i + k] - b[i + k]).abs());
            }
            gap = gap.max(angle_between(&quat(a, i), &quat(b, i)));
        } else if j.kind.nq() == 1 {
            gap = gap.max((a[i] - b[i]).abs());
        }
    }
    gap
}

fn config_strategy() -> impl Strategy<Value = Vec<f64>> {
    let r = robot();
    let nq = r.nq();
    let fi = r.joints()[0].q_index;
    prop::collection::vec(-4.0..4.0f64, nq).prop_filter_map("short quaternion", move |mut q| {
        let n = q[fi + 3..fi + 7].iter().map(|x| x * x).sum::<f64>().sqrt();
        if n < 0.1 {
            return None;
        }
        q[fi + 3..fi + 7].iter_mut().for_each(|x| *x /= n);
        Some(q)
    })
}

/// A tangent vector whose rotation part has norm below pi (where the logarithm is the
/// exact inverse of the exponential), scaled by 10^e for e in [-9, 0] so that nearby
/// configurations are covered too.
fn tangent_strategy() -> impl Strategy<Value = Vec<f64>> {
    let nv = robot().nv();
    (prop::collection::vec(-1.0..1.0f64, nv), -9i32..=0).prop_map(|(mut v, e)| {
        let w = Vector3::new(v[3], v[4], v[5]);
        if w.norm() > 0.0 {
            let s = (0.99 * PI / w.norm()).min(3.0);
            v[3..6].iter_mut().for_each(|x| *x *= s);
        }
        let scale = 10f64.powi(e);
        v.iter_mut().for_each(|x| *x *= scale);
        v
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// q ⊕ (q1 ⊖ q) = q1.
    #[test]
    fn integrate_undoes_difference(q in config_strategy(), q1 in config_strategy()) {
        let r = robot();
        let mut v = vec![0.0; r.nv()];
        let mut back = vec![0.0; r.nq()];
        r.difference(&q, &q1, &mut v).unwrap();
        r.integrate(&q, &v, &mut back).unwrap();
        let gap = config_gap(&r, &back, &q1);
        prop_assert!(gap < 1e-12, "gap {:e}: q {:?} q1 {:?} back {:?}", gap, q, q1, back);
    }

    /// q ⊕ (q1 ⊖ q) = q1 also when q1 is close to q (q1 = q ⊕ v, |v| down to 1e-9), and
    /// (q ⊕ v) ⊖ q = v for rotation parts shorter than pi.
    #[test]
    fn difference_undoes_integrate(q in config_strategy(), v in tangent_strategy()) {
        let r = robot();
        let mut q1 = vec![0.0; r.nq()];
        r.integrate(&q, &v, &mut q1).unwrap();
        let mut v_back = vec![0.0; r.nv()];
        r.difference(&q, &q1, &mut v_back).unwrap();
        let vn = v.iter().map(|x| x * x).sum::<f64>().sqrt();
        let err = v.iter().zip(&v_back).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
        prop_assert!(err <= 1e-12 * vn.max(1e-3), "err {:e} for |v| = {:e}: v {:?} back {:?}", err, vn, v, v_back);
        let mut q1_back = vec![0.0; r.nq()];
        r.integrate(&q, &v_back, &mut q1_back).unwrap();
        let gap = config_gap(&r, &q1_back, &q1);
        prop_assert!(gap < 1e-12, "gap {:e}", gap);
    }

    /// interpolate(q0, q1, 0) = q0, interpolate(q0, q1, 1) = q1.
    #[test]
    fn interpolate_hits_endpoints(q0 in config_strategy(), q1 in config_strategy()) {
        let r = robot();
        let mut out = vec![0.0; r.nq()];
        r.interpolate(&q0, &q1, 0.0, &mut out).unwrap();
        prop_assert!(config_gap(&r, &out, &q0) < 1e-12);
        r.interpolate(&q0, &q1, 1.0, &mut out).unwrap();
        prop_assert!(config_gap(&r, &out, &q1) < 1e-12, "t=1 gap {:e}", config_gap(&r, &out, &q1));
    }

    /// Interpolation is uniform along the geodesic: the rotation at t is t of the way
    /// (angle(r0, r_t) = t theta and angle(r_t, r1) = (1 - t) theta, so the midpoint is
    /// equidistant), translation and 1-DOF joints are linear, and the joint-space distance
    /// splits as t : 1 - t.
    #[test]
    fn interpolate_is_uniform_along_the_geodesic(q0 in config_strategy(), q1 in config_strategy(), t in 0.0..1.0f64) {
        let r = robot();
        let fi = r.joints()[0].q_index;
        let (r0, r1) = (quat(&q0, fi), quat(&q1, fi));
        let theta = angle_between(&r0, &r1);
        prop_assume!(theta < PI - 1e-6); // the shortest arc is unique
        for t in [0.5, t] {
            let mut mid = vec![0.0; r.nq()];
            r.interpolate(&q0, &q1, t, &mut mid).unwrap();
            let rm = quat(&mid, fi);
            prop_assert!((angle_between(&r0, &rm) - t * theta).abs() < 1e-12);
            prop_assert!((angle_between(&rm, &r1) - (1.0 - t) * theta).abs() < 1e-12);
            for j in r.joints() {
                let n = if j.kind.nq() == 7 { 3 } else { j.kind.nq() };
                for k in j.q_index..j.q_index + n {
                    prop_assert!((mid[k] - (q0[k] + t * (q1[k] - q0[k]))).abs() < 1e-12);
                }
            }
            let d = r.distance(&q0, &q1).unwrap();
            prop_assert!((r.distance(&q0, &mid).unwrap() - t * d).abs() < 1e-11);
            prop_assert!((r.distance(&mid, &q1).unwrap() - (1.0 - t) * d).abs() < 1e-11);
        }
    }
}

/// Explicit nearby pairs, so the small-angle case is always run (the property test draws
/// it only some of the time): rotations 1e-3 ... 1e-9 rad apart.
#[test]
fn difference_is_accurate_for_nearby_rotations() {
    let r = robot();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for e in 3..=9 {
        let q = r.random_configuration(&mut rng);
        let mut v = vec![0.0; r.nv()];
        v[3..6].copy_from_slice(&[0.3, -0.5, 0.8]);
        let s = 10f64.powi(-e);
        v.iter_mut().for_each(|x| *x *= s);
        let mut q1 = vec![0.0; r.nq()];
        r.integrate(&q, &v, &mut q1).unwrap();
        let mut back = vec![0.0; r.nv()];
        r.difference(&q, &q1, &mut back).unwrap();
        let wn = Vector3::new(v[3], v[4], v[5]).norm();
        let err = Vector3::new(back[3] - v[3], back[4] - v[4], back[5] - v[5]).norm();
        // The product R exp(w) is stored to ~1e-16 per quaternion component, so w is
        // recoverable to ~1e-15 absolute; 1e-12 relative covers it down to |w| ~ 1e-3
        // and 1e-15 absolute below.
        assert!(
            err <= (1e-12 * wn).max(2e-15),
            "|w| = {wn:e}: recovered with error {err:e} ({back:?})"
        );
    }
}

#[test]
fn random_configurations_are_within_limits_with_unit_quaternions() {
    let r = robot();
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let n = 20_000;
    let mut lo = vec![f64::INFINITY; r.nq()];
    let mut hi = vec![f64::NEG_INFINITY; r.nq()];
    let mut sum = vec![0.0; r.nq()];
    for _ in 0..n {
        let q = r.random_configuration(&mut rng);
        assert!(r.within_limits(&q, 0.0), "{q:?}");
        r.check_configuration(&q).unwrap();
        let qn = quat(&q, 0).quaternion().coords.norm();
        let raw = q[3..7].iter().map(|x| x * x).sum::<f64>().sqrt();
        assert!(
            (raw - 1.0).abs() < 1e-12 && (qn - 1.0).abs() < 1e-12,
            "quaternion norm {raw}"
        );
        for k in 0..r.nq() {
            lo[k] = lo[k].min(q[k]);
            hi[k] = hi[k].max(q[k]);
            sum[k] += q[k];
        }
    }
    // Every bounded coordinate fills its range (uniform: the extreme of 20000 draws is
    // within 0.1% of the span of each end with probability > 1 - 1e-8) and has the
    // midpoint as mean (5 sigma of a uniform mean: 5 span / sqrt(12 n)).
    // Unbounded revolute joints are drawn in [-pi, pi] (documented), unbounded
    // translation in [-1, 1] m.
    let mut expect = Vec::new(); // (q index, lower, upper)
    for j in r.joints() {
        match j.kind.nq() {
            7 => {
                for k in 0..3 {
                    expect.push((j.q_index + k, j.limits[k].lower, j.limits[k].upper));
                }
            }
            1 if j.limits[0].lower.is_finite() => {
                expect.push((j.q_index, j.limits[0].lower, j.limits[0].upper))
            }
            1 => expect.push((j.q_index, -PI, PI)),
            _ => {}
        }
    }
    assert_eq!(expect.len(), 6);
    for (k, a, b) in expect {
        let span = b - a;
        assert!(
            lo[k] >= a && lo[k] < a + 1e-3 * span,
            "coordinate {k}: min {} for range [{a}, {b}]",
            lo[k]
        );
        assert!(
            hi[k] <= b && hi[k] > b - 1e-3 * span,
            "coordinate {k}: max {} for range [{a}, {b}]",
            hi[k]
        );
        let mean = sum[k] / n as f64;
        let sigma = span / (12.0 * n as f64).sqrt();
        assert!(
            (mean - 0.5 * (a + b)).abs() < 5.0 * sigma,
            "coordinate {k}: mean {mean}"
        );
    }
}

/// Sanity of the uniform SO(3) sampler against properties of the Haar (uniform) measure:
/// - E[R] = 0: R and R_x(pi) R (and R_z(pi) R) have the same distribution, so
///   E[R] = R_x(pi) E[R] = R_z(pi) E[R], which forces every row of E[R] to zero
///   (elementary);
/// - E[R_ij^2] = 1/3: each column of R is uniform on the sphere, and a coordinate of a
///   uniform point on the unit sphere is uniform on [-1, 1] (Archimedes' hat-box
///   theorem), whose second moment is 1/3 (variance of R_ij^2: 1/5 - 1/9 = 4/45);
/// - the rotation angle theta has density (1 - cos theta) / pi on [0, pi], i.e.
///   P(theta <= x) = (x - sin x) / pi (stated from memory; it follows from the Haar
///   volume of SO(3) at angle theta being proportional to sin^2(theta / 2)).
///
/// Tolerances are 5 standard deviations of the sample statistic for N draws.
#[test]
fn random_rotations_are_uniform() {
    let r = robot();
    let mut rng = ChaCha8Rng::seed_from_u64(99);
    let n = 40_000;
    let mut mean = Matrix3::zeros();
    let mut second = Matrix3::zeros();
    let probes = [PI / 4.0, PI / 2.0, 3.0 * PI / 4.0, 0.95 * PI];
    let mut below = [0usize; 4];
    for _ in 0..n {
        let q = r.random_configuration(&mut rng);
        let rot = quat(&q, 0).to_rotation_matrix().into_inner();
        mean += rot;
        second += rot.component_mul(&rot);
        let theta = angle_between(&UnitQuaternion::identity(), &quat(&q, 0));
        for (c, x) in below.iter_mut().zip(probes) {
            if theta <= x {
                *c += 1;
            }
        }
    }
    let nf = n as f64;
    mean /= nf;
    second /= nf;
    let sigma_mean = (1.0 / (3.0 * nf)).sqrt();
    assert!(mean.abs().max() < 5.0 * sigma_mean, "E[R] estimate {mean}");
    let sigma_second = (4.0 / 45.0 / nf).sqrt();
    assert!(
        (second.add_scalar(-1.0 / 3.0)).abs().max() < 5.0 * sigma_second,
        "E[R_ij^2] estimate {second}"
    );
    for (c, x) in below.iter().zip(probes) {
        let p = (x - x.sin()) / PI;
        let frac = *c as f64 / nf;
        let sigma = (p * (1.0 - p) / nf).sqrt();
        assert!(
            (frac - p).abs() < 5.0 * sigma,
            "P(theta <= {x:.3}) = {frac}, expected {p:.4}"
        );
    }
}

/// The uniformity check above can fail: rotations uniform in roll-pitch-yaw are not
/// uniform on SO(3), and the same statistics reject them.
#[test]
fn uniformity_check_rejects_uniform_euler_angles() {
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    use rand::Rng;
    let n = 40_000;
    let probes = [PI / 4.0, PI / 2.0, 3.0 * PI / 4.0];
    let mut below = [0usize; 3];
    for _ in 0..n {
        let (a, b, c): (f64, f64, f64) = (
            rng.random_range(-PI..PI),
            rng.random_range(-PI / 2.0..PI / 2.0),
            rng.random_range(-PI..PI),
        );
        let rq = UnitQuaternion::from_euler_angles(a, b, c);
        let theta = angle_between(&UnitQuaternion::identity(), &rq);
        for (cnt, x) in below.iter_mut().zip(probes) {
            if theta <= x {
                *cnt += 1;
            }
        }
    }
    let rejected = below.iter().zip(probes).any(|(c, x)| {
        let p = (x - x.sin()) / PI;
        (*c as f64 / n as f64 - p).abs() > 5.0 * (p * (1.0 - p) / n as f64).sqrt()
    });
    assert!(
        rejected,
        "Euler-uniform sampling was not told apart from uniform SO(3)"
    );
}

#[test]
fn same_seed_same_configuration() {
    let r = robot();
    let a = r.random_configuration(&mut ChaCha8Rng::seed_from_u64(42));
    let b = r.random_configuration(&mut ChaCha8Rng::seed_from_u64(42));
    let c = r.random_configuration(&mut ChaCha8Rng::seed_from_u64(43));
    assert_eq!(a, b);
    assert_ne!(a, c);
}

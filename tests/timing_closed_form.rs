//! Time-optimal timing of a straight joint-space segment against the closed-form
//! trapezoidal / triangular velocity profile (common practice in motion control): with
//! distance D, path-speed limit v and path-acceleration limit a (set by the bottleneck
//! joint), T = D/v + v/a if D >= v^2/a, else T = 2 sqrt(D/a).
//!
//! Joint velocities and accelerations are then recomputed from the profile by finite
//! differences in time (independently of the solver) and compared with the limits.

use clamber::timing::{parameterize, PathSamples, Profile};

/// Fine grid used for the duration checks: 2000 intervals on the segment.
const GRID: usize = 2000;

/// Samples of the straight path q(s) = q0 + s (q1 - q0) / L, s in [0, L] (arc length).
fn straight(q0: &[f64], q1: &[f64], n: usize) -> (PathSamples, Vec<f64>, f64) {
    let d: Vec<f64> = q0.iter().zip(q1).map(|(a, b)| b - a).collect();
    let len = d.iter().map(|v| v * v).sum::<f64>().sqrt();
    let dir: Vec<f64> = d.iter().map(|v| v / len).collect();
    let s: Vec<f64> = (0..=n).map(|i| len * i as f64 / n as f64).collect();
    let samples = PathSamples {
        dq: vec![dir.clone(); n + 1],
        ddq: vec![vec![0.0; d.len()]; n + 1],
        s,
    };
    (samples, dir, len)
}

/// Closed-form minimum time (trapezoid or triangle) for path length `len` with path limits
/// from the bottleneck joint.
fn closed_form(dir: &[f64], len: f64, vmax: &[f64], amax: &[f64]) -> f64 {
    let v = dir
        .iter()
        .zip(vmax)
        .filter(|(d, _)| **d != 0.0)
        .map(|(d, v)| v / d.abs())
        .fold(f64::INFINITY, f64::min);
    let a = dir
        .iter()
        .zip(amax)
        .filter(|(d, _)| **d != 0.0)
        .map(|(d, a)| a / d.abs())
        .fold(f64::INFINITY, f64::min);
    if len >= v * v / a {
        len / v + v / a
    } else {
        2.0 * (len / a).sqrt()
    }
}

/// Worst relative limit violation (0 if none) of joint velocities and accelerations computed
/// by finite differences in time from the grid positions q(s_i) at times t_i: first divided
/// differences (mean velocity on each interval) and second divided differences on
/// non-uniform steps (a weighted mean of the accelerations on two neighbouring intervals,
/// so bounded by the acceleration limit for a motion that respects it).
fn worst_violation(q0: &[f64], dir: &[f64], p: &Profile, vmax: &[f64], amax: &[f64]) -> f64 {
    let _ = q0; // positions relative to q0: q(s_i) - q(s_k) = (s_i - s_k) dir
                // Differences of positions are taken along the path, (s_{i+1} - s_i) dir, rather than by
                // subtracting absolute positions, so that rounding stays far below the 1e-9 tolerance.
    let dq = |i: usize, j: usize| (p.s[i + 1] - p.s[i]) * dir[j];
    let mut worst: f64 = 0.0;
    let n = p.s.len() - 1;
    for j in 0..dir.len() {
        for i in 0..n {
            let h = p.t[i + 1] - p.t[i];
            let v = dq(i, j) / h;
            worst = worst.max(v.abs() / vmax[j] - 1.0);
            // Velocity at the grid point itself.
            worst = worst.max((dir[j] * p.sd[i]).abs() / vmax[j] - 1.0);
            if i > 0 {
                let h0 = p.t[i] - p.t[i - 1];
                let v0 = dq(i - 1, j) / h0;
                let acc = 2.0 * (v - v0) / (h + h0);
                worst = worst.max(acc.abs() / amax[j] - 1.0);
            }
        }
    }
    worst
}

fn check_segment(q0: &[f64], q1: &[f64], vmax: &[f64], amax: &[f64]) -> (f64, f64) {
    let (samples, dir, len) = straight(q0, q1, GRID);
    let p = parameterize(&samples, vmax, amax, 0.0, 0.0).expect("feasible segment");
    let expected = closed_form(&dir, len, vmax, amax);
    let rel = (p.duration - expected).abs() / expected;
    assert!(
        rel < 0.005,
        "duration {} vs closed form {expected} ({:.4}%)",
        p.duration,
        rel * 100.0
    );
    // The solver never beats the optimum by more than rounding.
    assert!(p.duration >= expected * (1.0 - 1e-9));
    let worst = worst_violation(q0, &dir, &p, vmax, amax);
    assert!(worst <= 1e-9, "limit exceeded by {worst:e} (relative)");
    assert_eq!(p.sd[0], 0.0);
    assert!(p.sd[GRID].abs() < 1e-9);
    eprintln!(
        "duration {:.6} closed form {:.6} rel diff {:.2e} worst violation {:e}",
        p.duration, expected, rel, worst
    );
    (rel, worst)
}

#[test]
fn one_joint_trapezoid() {
    // D = 2, v = 1, a = 2: v^2/a = 0.5 <= D, T = 2 + 0.5 = 2.5.
    check_segment(&[0.0], &[2.0], &[1.0], &[2.0]);
    let (samples, _, _) = straight(&[0.0], &[2.0], GRID);
    let p = parameterize(&samples, &[1.0], &[2.0], 0.0, 0.0).unwrap();
    assert!((p.duration - 2.5).abs() / 2.5 < 0.005, "{}", p.duration);
}

#[test]
fn one_joint_triangle() {
    // D = 0.2, v = 1, a = 2: v^2/a = 0.5 > D, T = 2 sqrt(0.1).
    check_segment(&[0.3], &[0.1], &[1.0], &[2.0]);
}

#[test]
fn several_joints_bottleneck_velocity() {
    // Joint 1 has the lowest velocity limit relative to its travel.
    check_segment(
        &[0.0, 0.0, 0.0, 0.0],
        &[1.0, -2.5, 0.5, 0.0],
        &[2.0, 1.5, 2.0, 0.1],
        &[8.0, 10.0, 4.0, 0.1],
    );
}

#[test]
fn several_joints_bottleneck_acceleration_triangle() {
    // Short move: the acceleration limit of joint 2 binds and the speed never reaches v.
    check_segment(
        &[0.2, -0.1, 0.4],
        &[0.3, 0.1, 0.35],
        &[3.0, 3.0, 3.0],
        &[5.0, 1.0, 5.0],
    );
}

#[test]
fn infinite_velocity_limits_give_a_triangle() {
    check_segment(
        &[0.0, 0.0],
        &[1.0, 1.0],
        &[f64::INFINITY, f64::INFINITY],
        &[2.0, 3.0],
    );
}

#[test]
fn coarse_grid_is_slower_but_safe() {
    // On a coarse grid the profile is feasible and no faster than the optimum.
    let (q0, q1, v, a) = ([0.0, 0.0], [1.0, 0.5], [1.0, 1.0], [2.0, 2.0]);
    let (samples, dir, len) = straight(&q0, &q1, 7);
    let p = parameterize(&samples, &v, &a, 0.0, 0.0).unwrap();
    let expected = closed_form(&dir, len, &v, &a);
    assert!(p.duration >= expected * (1.0 - 1e-9));
    assert!(worst_violation(&q0, &dir, &p, &v, &a) <= 1e-9);
}

//! Typed errors of `clamber::timing` and timing of polylines on a robot. (The comparison of
//! durations with toppra runs from `reference/toppra_check.py`, wired into
//! `reference/check_all.sh`.)

use std::path::Path;

use clamber::robot_file::load_robot;
use clamber::timing::{
    parameterize, parameterize_with, robot_limits, time_polyline, Discretization, PathSamples,
    TimingError,
};

fn line(n: usize, nv: usize) -> PathSamples {
    PathSamples {
        s: (0..=n).map(|i| i as f64 / n as f64).collect(),
        dq: vec![vec![1.0; nv]; n + 1],
        ddq: vec![vec![0.0; nv]; n + 1],
    }
}

#[test]
fn errors_are_typed() {
    let ok = line(10, 2);
    let (v, a) = ([1.0, 1.0], [1.0, 1.0]);

    let mut p = ok.clone();
    p.s.truncate(1);
    assert_eq!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::EmptyPath { points: 1 })
    );
    let empty = PathSamples {
        s: vec![],
        dq: vec![],
        ddq: vec![],
    };
    assert_eq!(
        parameterize(&empty, &v, &a, 0.0, 0.0),
        Err(TimingError::EmptyPath { points: 0 })
    );

    assert!(matches!(
        parameterize(&ok, &v, &[1.0], 0.0, 0.0),
        Err(TimingError::Length {
            what: "acceleration limits",
            got: 1,
            expected: 2
        })
    ));
    let mut p = ok.clone();
    p.ddq.pop();
    assert!(matches!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::Length { what: "ddq", .. })
    ));
    let mut p = ok.clone();
    p.dq[3] = vec![1.0];
    assert!(matches!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::SampleLength {
            what: "dq",
            index: 3,
            got: 1,
            expected: 2
        })
    ));
    let mut p = ok.clone();
    p.ddq[4][1] = f64::NAN;
    assert!(matches!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::NotFinite {
            what: "ddq",
            index: 4,
            coordinate: 1,
            ..
        })
    ));
    let mut p = ok.clone();
    p.s[5] = f64::INFINITY;
    assert!(matches!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::GridNotFinite { index: 5, .. })
    ));
    let mut p = ok.clone();
    p.s[6] = p.s[5];
    assert!(matches!(
        parameterize(&p, &v, &a, 0.0, 0.0),
        Err(TimingError::NotIncreasing { index: 6, .. })
    ));
    for bad in [0.0, -1.0, f64::NAN] {
        assert!(matches!(
            parameterize(&ok, &[1.0, bad], &a, 0.0, 0.0),
            Err(TimingError::BadLimit {
                what: "velocity",
                coordinate: 1,
                ..
            })
        ));
        assert!(matches!(
            parameterize(&ok, &v, &[bad, 1.0], 0.0, 0.0),
            Err(TimingError::BadLimit {
                what: "acceleration",
                coordinate: 0,
                ..
            })
        ));
    }
    assert!(matches!(
        parameterize(&ok, &v, &a, -0.1, 0.0),
        Err(TimingError::BadBoundarySpeed { what: "start", .. })
    ));
    assert!(matches!(
        parameterize(&ok, &v, &a, 0.0, f64::INFINITY),
        Err(TimingError::BadBoundarySpeed { what: "end", .. })
    ));
}

#[test]
fn infeasible_and_degenerate_paths() {
    let (v, a) = ([1.0, 1.0], [1.0, 1.0]);
    // End speed above the velocity limit at the last grid point (|q'| = 1, v = 1).
    assert_eq!(
        parameterize(&line(10, 2), &v, &a, 0.0, 1.5),
        Err(TimingError::Infeasible { index: 10 })
    );
    // Start speed 0.9 cannot be braked to rest within s in [0, 0.1] at a = 1:
    // 0.9^2 / (2 * 1) = 0.405 > 0.1 (kinematics of constant deceleration).
    let mut p = line(10, 2);
    p.s.iter_mut().for_each(|s| *s *= 0.1);
    assert_eq!(
        parameterize(&p, &v, &a, 0.9, 0.0),
        Err(TimingError::Infeasible { index: 0 })
    );
    // A stationary path (q' = q'' = 0) leaves the path speed unbounded.
    let still = PathSamples {
        s: vec![0.0, 0.5, 1.0],
        dq: vec![vec![0.0; 2]; 3],
        ddq: vec![vec![0.0; 2]; 3],
    };
    assert!(matches!(
        parameterize(&still, &v, &a, 0.0, 0.0),
        Err(TimingError::Unbounded { .. })
    ));
    // No finite limit at all.
    let inf = [f64::INFINITY; 2];
    assert!(matches!(
        parameterize(&line(4, 2), &inf, &inf, 0.0, 0.0),
        Err(TimingError::Unbounded { .. })
    ));
    // Rest to rest on a single interval cannot move under constant acceleration.
    assert_eq!(
        parameterize(&line(1, 2), &v, &a, 0.0, 0.0),
        Err(TimingError::Stalled { index: 0 })
    );
    // Same path with two intervals: accelerate to the midpoint, brake to the end:
    // T = 2 sqrt(D / a) = 2 (triangular profile, common practice).
    let p = parameterize_with(
        &line(2, 1),
        &[10.0],
        &[1.0],
        0.0,
        0.0,
        Discretization::Interpolation,
    )
    .unwrap();
    assert!((p.duration - 2.0).abs() < 1e-12, "{}", p.duration);
}

fn planar3() -> clamber::Robot {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("robots/planar3.toml");
    load_robot(&path).expect("robots/planar3.toml loads")
}

#[test]
fn polyline_errors_are_typed() {
    let robot = planar3();
    let q = vec![0.0; 3];
    assert_eq!(
        time_polyline(&robot, std::slice::from_ref(&q), 10),
        Err(TimingError::TooFewWaypoints { got: 1 })
    );
    assert_eq!(
        time_polyline(&robot, &[q.clone(), q.clone()], 1),
        Err(TimingError::GridTooCoarse { got: 1 })
    );
    assert!(matches!(
        time_polyline(&robot, &[q.clone(), vec![0.0; 2]], 10),
        Err(TimingError::Waypoint { index: 1, .. })
    ));
    assert!(matches!(
        time_polyline(&robot, &[vec![0.0, f64::NAN, 0.0], q.clone()], 10),
        Err(TimingError::Waypoint { index: 0, .. })
    ));
    let timed = time_polyline(&robot, &[q.clone(), vec![0.5, 0.0, 0.0]], 10).unwrap();
    assert!(matches!(
        timed.sample(&robot, f64::NAN),
        Err(TimingError::TimeNotFinite { .. })
    ));
}

#[test]
fn polyline_on_planar3_stops_at_waypoints_and_respects_limits() {
    let robot = planar3();
    let (vmax, amax) = robot_limits(&robot);
    assert_eq!(vmax, vec![2.0; 3]);
    assert_eq!(amax, vec![8.0; 3]);
    let waypoints = vec![
        vec![0.0, 0.0, 0.0],
        vec![1.2, -0.6, 0.3],
        vec![1.2, -0.6, 0.3], // repeated: zero-length segment, takes no time
        vec![-0.4, 0.8, 1.5],
        vec![-0.35, 0.8, 1.5], // short: triangular profile
    ];
    let grid = 400;
    let timed = time_polyline(&robot, &waypoints, grid).unwrap();
    let times = timed.waypoint_times().to_vec();
    assert_eq!(times.len(), waypoints.len());
    assert_eq!(times[1], times[2]);

    // Each segment against the closed-form trapezoid/triangle (common practice; bottleneck
    // joint sets the path limits), within 0.5 % on this grid.
    for k in 0..waypoints.len() - 1 {
        let d: Vec<f64> = (0..3)
            .map(|j| waypoints[k + 1][j] - waypoints[k][j])
            .collect();
        let dmax = d.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let expected = if dmax == 0.0 {
            0.0
        } else {
            // In the coordinate of the bottleneck joint (all limits equal here).
            let (v, a) = (2.0, 8.0);
            if dmax >= v * v / a {
                dmax / v + v / a
            } else {
                2.0 * (dmax / a).sqrt()
            }
        };
        let got = times[k + 1] - times[k];
        assert!(
            (got - expected).abs() <= 0.005 * expected,
            "segment {k}: {got} vs {expected}"
        );
    }

    // Endpoints and stops.
    for (k, &t) in times.iter().enumerate() {
        let (q, qd) = timed.sample(&robot, t).unwrap();
        for j in 0..3 {
            assert!((q[j] - waypoints[k][j]).abs() < 1e-9, "waypoint {k}: {q:?}");
            assert!(qd[j].abs() < 1e-9, "not at rest at waypoint {k}: {qd:?}");
        }
    }
    let (q_end, _) = timed.sample(&robot, timed.duration()).unwrap();
    assert_eq!(q_end.len(), 3);
    let (q_after, qd_after) = timed.sample(&robot, timed.duration() + 1.0).unwrap();
    assert_eq!(q_after, q_end);
    assert!(qd_after.iter().all(|v| v.abs() < 1e-9));

    // Limits by finite differences of sampled positions in time (independent of the
    // solver's grid): velocity from first differences, acceleration from second
    // differences on a uniform time step; second differences of a motion with bounded
    // acceleration are bounded by the same bound (mean value theorem).
    let h = 1e-3;
    let steps = (timed.duration() / h).floor() as usize;
    let qs: Vec<Vec<f64>> = (0..=steps)
        .map(|i| timed.sample(&robot, i as f64 * h).unwrap().0)
        .collect();
    let (mut worst_v, mut worst_a) = (0.0f64, 0.0f64);
    for i in 0..steps {
        for j in 0..3 {
            let v = (qs[i + 1][j] - qs[i][j]) / h;
            worst_v = worst_v.max(v.abs() / vmax[j] - 1.0);
            if i > 0 {
                let acc = (qs[i + 1][j] - 2.0 * qs[i][j] + qs[i - 1][j]) / (h * h);
                // Rounding of positions ~1e-16 rad over h^2 = 1e-6 s^2: ~1e-10 rad/s^2.
                worst_a = worst_a.max(acc.abs() / amax[j] - 1.0);
            }
        }
    }
    for i in 0..=steps {
        let (_, qd) = timed.sample(&robot, i as f64 * h).unwrap();
        for j in 0..3 {
            worst_v = worst_v.max(qd[j].abs() / vmax[j] - 1.0);
        }
    }
    eprintln!(
        "planar3 polyline: duration {:.6} s, worst velocity excess {worst_v:e}, \
         worst acceleration excess {worst_a:e}",
        timed.duration()
    );
    assert!(worst_v <= 1e-9, "velocity limit exceeded by {worst_v:e}");
    assert!(
        worst_a <= 1e-9,
        "acceleration limit exceeded by {worst_a:e}"
    );
}

/// A floating base that turns while it translates: its body-frame linear tangent turns along
/// the segment (q'' != 0), which exercises the curved-tangent rows. Checked: endpoints, rest
/// at the end, the sampled tangent velocity against the finite difference of sampled
/// configurations, and the limits. The limits are imposed at the grid points only; between
/// them a turning tangent component can exceed its limit by O(ds^2) (second-order term of
/// q'(s) between grid points), so the test asserts a small excess on a 400-interval grid
/// and that it shrinks like ds^2 (at least 3x when the grid is doubled).
#[test]
fn polyline_with_floating_base() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("robots/brachia.toml");
    let robot = load_robot(&path).expect("robots/brachia.toml loads");
    let q0 = robot.neutral();
    let mut q1 = q0.clone();
    // Translate 1 m in x and 0.5 m in z, turn 1.2 rad about z (quaternion x y z w).
    q1[0] += 1.0;
    q1[2] += 0.5;
    q1[5] = (0.6f64).sin();
    q1[6] = (0.6f64).cos();
    let (v400, a400) = floating_excess(&robot, &q0, &q1, 400);
    let (v800, a800) = floating_excess(&robot, &q0, &q1, 800);
    eprintln!(
        "brachia floating polyline: worst velocity excess {v400:e} (grid 400), {v800:e} (grid \
         800); worst acceleration excess {a400:e}, {a800:e}"
    );
    assert!(v400 <= 1e-5, "velocity limit exceeded by {v400:e}");
    assert!(v800 <= v400 / 3.0 || v800 <= 1e-9, "{v400:e} -> {v800:e}");
    // Acceleration from finite differences of sampled velocities on a 1 ms step.
    assert!(a400 <= 1e-3, "acceleration limit exceeded by {a400:e}");
}

fn floating_excess(robot: &clamber::Robot, q0: &[f64], q1: &[f64], grid: usize) -> (f64, f64) {
    let (vmax, amax) = robot_limits(robot);
    let timed = time_polyline(robot, &[q0.to_vec(), q1.to_vec()], grid).unwrap();
    let (qa, _) = timed.sample(robot, 0.0).unwrap();
    let (qb, qdb) = timed.sample(robot, timed.duration()).unwrap();
    assert!(robot.distance(&qa, q0).unwrap() < 1e-12);
    assert!(robot.distance(&qb, q1).unwrap() < 1e-9);
    assert!(qdb.iter().all(|v| v.abs() < 1e-9));

    let h = 1e-3;
    let steps = (timed.duration() / h).floor() as usize;
    let samples: Vec<(Vec<f64>, Vec<f64>)> = (0..=steps)
        .map(|i| timed.sample(robot, i as f64 * h).unwrap())
        .collect();
    let nv = robot.nv();
    let (mut worst_v, mut worst_a, mut worst_consistency) = (0.0f64, 0.0f64, 0.0f64);
    let mut diff = vec![0.0; nv];
    for i in 0..steps {
        let (qi, vi) = &samples[i];
        let (qn, vn) = &samples[i + 1];
        // Tangent velocity agrees with the finite difference of configurations (midpoint).
        robot.difference(qi, qn, &mut diff).unwrap();
        for j in 0..nv {
            worst_v = worst_v.max(vi[j].abs() / vmax[j] - 1.0);
            let mid = 0.5 * (vi[j] + vn[j]);
            worst_consistency = worst_consistency.max((diff[j] / h - mid).abs());
            let acc = (vn[j] - vi[j]) / h;
            worst_a = worst_a.max(acc.abs() / amax[j] - 1.0);
        }
    }
    assert!(worst_consistency < 1e-3, "{worst_consistency}");
    (worst_v, worst_a)
}

//! Time-optimal time parameterization of a joint-space path under per-coordinate velocity
//! and acceleration limits, by reachability analysis (TOPP-RA: H. Pham, Q.-C. Pham, "A New
//! Approach to Time-Optimal Path Parameterization Based on Reachability Analysis", IEEE
//! Transactions on Robotics 34(3), 2018).
//!
//! The path `q(s)` is given on a grid `s_0 < ... < s_N` by its tangent derivatives `q'(s)`
//! and `q''(s)`. The state is `x = sdot^2`, the control `u = sddot`, constant on each
//! interval, so `x_{i+1} = x_i + 2 (s_{i+1} - s_i) u_i`. At every grid point `i < N` the
//! constraints are (collocation: evaluated at the grid point)
//!
//! - velocity: `|q'_j(s_i)| sdot <= v_j`, i.e. `x <= v_j^2 / q'_j^2`;
//! - acceleration: `|q'_j(s_i) u + q''_j(s_i) x| <= a_j`;
//!
//! and at `s_N` the velocity constraint. With [`Discretization::Interpolation`] the
//! acceleration rows of `s_{i+1}` are added to stage `i` as well, written with the stage's
//! control and `x_{i+1} = x_i + 2 ds u_i`, so the limits hold at both ends of every interval
//! (the paper's first-order interpolation scheme); this matters where `q'` is near zero, where
//! collocation lets the path speed jump between grid points. A backward pass computes the controllable sets
//! `K_i` (intervals of `x` from which the end speed can be reached); a forward pass picks, at
//! each stage, the greatest `u` that keeps the next state in `K_{i+1}`. Time between grid
//! points follows the constant-acceleration rule `dt_i = 2 (s_{i+1} - s_i) / (sdot_i +
//! sdot_{i+1})`. See `docs/timing.md`.
//!
//! Acceleration of a floating joint's tangent coordinates is the time derivative of its
//! body-frame velocity (the tangent coordinates themselves).

use nalgebra::Vector3;
use thiserror::Error;

use crate::configuration::ConfigurationError;
use crate::math::so3_exp;
use crate::model::{JointKind, Robot};

/// A path given on a grid of its parameter: `s` strictly increasing, `dq[i] = q'(s_i)` and
/// `ddq[i] = q''(s_i)`, each of length nv (tangent coordinates).
#[derive(Clone, Debug, PartialEq)]
pub struct PathSamples {
    pub s: Vec<f64>,
    pub dq: Vec<Vec<f64>>,
    pub ddq: Vec<Vec<f64>>,
}

/// Where the acceleration constraints of a stage are imposed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[non_exhaustive]
pub enum Discretization {
    /// At the stage's own grid point `s_i` only.
    #[default]
    Collocation,
    /// At `s_i` and at `s_{i+1}` (with the stage's constant path acceleration).
    Interpolation,
}

/// A time parameterization of a path on its grid.
#[derive(Clone, Debug, PartialEq)]
pub struct Profile {
    /// Grid of the path parameter (copied from the samples).
    pub s: Vec<f64>,
    /// Path speed `sdot` at each grid point.
    pub sd: Vec<f64>,
    /// Path acceleration `sddot` on each interval `[s_i, s_{i+1}]` (one fewer than `s`).
    pub sdd: Vec<f64>,
    /// Time at each grid point, `t[0] = 0`.
    pub t: Vec<f64>,
    /// Total time, `t[N]`.
    pub duration: f64,
}

/// Why a path could not be time-parameterized.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum TimingError {
    #[error("the path has {points} grid points, at least 2 are needed")]
    EmptyPath { points: usize },
    #[error("{what} has length {got}, expected {expected}")]
    Length {
        what: &'static str,
        got: usize,
        expected: usize,
    },
    #[error("{what}[{index}] has length {got}, expected {expected} (one per tangent coordinate)")]
    SampleLength {
        what: &'static str,
        index: usize,
        got: usize,
        expected: usize,
    },
    #[error("{what}[{index}][{coordinate}] is not finite: {value}")]
    NotFinite {
        what: &'static str,
        index: usize,
        coordinate: usize,
        value: f64,
    },
    #[error("s[{index}] = {value} is not finite")]
    GridNotFinite { index: usize, value: f64 },
    #[error("the grid must increase strictly: s[{index}] = {value} after {previous}")]
    NotIncreasing {
        index: usize,
        previous: f64,
        value: f64,
    },
    #[error("{what} limit of coordinate {coordinate} is {value}, expected > 0 (may be infinite)")]
    BadLimit {
        what: &'static str,
        coordinate: usize,
        value: f64,
    },
    #[error("{what} path speed is {value}, expected a finite value >= 0")]
    BadBoundarySpeed { what: &'static str, value: f64 },
    #[error("no feasible path speed at grid index {index}: the limits cannot be met there")]
    Infeasible { index: usize },
    #[error("no finite limit bounds the path speed at grid index {index}")]
    Unbounded { index: usize },
    #[error(
        "the path speed is zero at both ends of interval {index}; rest to rest needs at least \
         two intervals"
    )]
    Stalled { index: usize },
    #[error("a polyline needs at least 2 waypoints, got {got}")]
    TooFewWaypoints { got: usize },
    #[error("grid_per_segment is {got}, at least 2 intervals per segment are needed")]
    GridTooCoarse { got: usize },
    #[error("waypoint {index}: {source}")]
    Waypoint {
        index: usize,
        source: ConfigurationError,
    },
    #[error("sample time is not finite: {value}")]
    TimeNotFinite { value: f64 },
    #[error("the robot does not fit the timed path: {0}")]
    Robot(ConfigurationError),
}

/// One linear constraint `cu * u + cx * x <= b` of a stage (u = sddot, x = sdot^2).
#[derive(Clone, Copy, Debug)]
struct Half {
    cu: f64,
    cx: f64,
    b: f64,
}

impl Half {
    /// Scaled so that max(|cu|, |cx|) = 1; None for a row with no variable.
    fn normalized(self) -> Option<Half> {
        let n = self.cu.abs().max(self.cx.abs());
        if n > 0.0 {
            Some(Half {
                cu: self.cu / n,
                cx: self.cx / n,
                b: self.b / n,
            })
        } else {
            None
        }
    }
}

/// The constraints of stage `i` that do not involve the next set: `x >= 0`, the velocity
/// bound and the acceleration rows (and, for interpolation, the acceleration rows of the next
/// grid point). Rows with an infinite limit are vacuous and left out.
fn stage_rows(
    samples: &PathSamples,
    i: usize,
    amax: &[f64],
    xv: f64,
    scheme: Discretization,
    rows: &mut Vec<Half>,
) {
    rows.clear();
    let (Some(dq), Some(ddq)) = (samples.dq.get(i), samples.ddq.get(i)) else {
        return;
    };
    rows.push(Half {
        cu: 0.0,
        cx: -1.0,
        b: 0.0,
    });
    if xv.is_finite() {
        rows.push(Half {
            cu: 0.0,
            cx: 1.0,
            b: xv,
        });
    }
    for ((&d, &dd), &a) in dq.iter().zip(ddq).zip(amax) {
        if !a.is_finite() {
            continue;
        }
        let up = Half {
            cu: d,
            cx: dd,
            b: a,
        };
        let down = Half {
            cu: -d,
            cx: -dd,
            b: a,
        };
        if let (Some(up), Some(down)) = (up.normalized(), down.normalized()) {
            rows.push(up);
            rows.push(down);
        }
    }
    if scheme == Discretization::Interpolation {
        let (Some(dq1), Some(ddq1), Some(s0), Some(s1)) = (
            samples.dq.get(i + 1),
            samples.ddq.get(i + 1),
            samples.s.get(i),
            samples.s.get(i + 1),
        ) else {
            return;
        };
        // q'(s1) u + q''(s1) (x + 2 ds u) = (q'(s1) + 2 ds q''(s1)) u + q''(s1) x.
        let two_ds = 2.0 * (s1 - s0);
        for ((&d, &dd), &a) in dq1.iter().zip(ddq1).zip(amax) {
            if !a.is_finite() {
                continue;
            }
            let cu = d + two_ds * dd;
            let up = Half { cu, cx: dd, b: a };
            let down = Half {
                cu: -cu,
                cx: -dd,
                b: a,
            };
            if let (Some(up), Some(down)) = (up.normalized(), down.normalized()) {
                rows.push(up);
                rows.push(down);
            }
        }
    }
}

/// Velocity bound on `x = sdot^2` at a grid point: `min_j v_j^2 / q'_j^2` (infinite when no
/// finite limit applies).
fn velocity_bound(dq: &[f64], vmax: &[f64]) -> f64 {
    dq.iter()
        .zip(vmax)
        .filter(|(d, v)| **d != 0.0 && v.is_finite())
        .map(|(d, v)| (v / d) * (v / d))
        .fold(f64::INFINITY, f64::min)
}

/// Projection onto `x` of the polygon `{(u, x) : rows}` by eliminating `u` (Fourier-Motzkin):
/// every pair of a lower and an upper bound on `u` gives one inequality in `x`. Returns the
/// interval `[lo, hi]` of `x` or None when empty.
///
/// Written by hand rather than with an LP crate: each stage is a two-variable problem with a
/// few dozen rows of a fixed shape, and the exact projection gives both ends of the
/// controllable set at once; a general LP solver would cost more (setup, dependency,
/// tolerances we do not control) than these few lines.
fn project_x(rows: &[Half]) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    let mut bound = |alpha: f64, beta: f64, scale: f64| -> bool {
        if alpha.abs() <= 1e-14 {
            // 0 * x <= beta: holds up to rounding or the polygon is empty.
            beta >= -1e-12 * scale
        } else {
            let r = beta / alpha;
            if alpha > 0.0 {
                hi = hi.min(r);
            } else {
                lo = lo.max(r);
            }
            true
        }
    };
    for p in rows {
        if p.cu == 0.0 && !bound(p.cx, p.b, 1.0 + p.b.abs()) {
            return None;
        }
    }
    for p in rows.iter().filter(|p| p.cu > 0.0) {
        for n in rows.iter().filter(|n| n.cu < 0.0) {
            let alpha = -n.cu * p.cx + p.cu * n.cx;
            let beta = -n.cu * p.b + p.cu * n.b;
            if !bound(alpha, beta, 1.0 + p.b.abs() + n.b.abs()) {
                return None;
            }
        }
    }
    let tol = 1e-9 * hi.abs().max(1.0);
    if lo > hi + tol || lo.is_nan() || hi.is_nan() {
        return None;
    }
    Some((lo.min(hi), hi))
}

/// Rows tying the stage to the next controllable set: `lo <= x + 2 ds u <= hi`.
fn next_set_rows(ds: f64, next: (f64, f64), rows: &mut Vec<Half>) {
    if next.1.is_finite() {
        rows.extend(
            Half {
                cu: 2.0 * ds,
                cx: 1.0,
                b: next.1,
            }
            .normalized(),
        );
    }
    if next.0.is_finite() && next.0 > 0.0 {
        rows.extend(
            Half {
                cu: -2.0 * ds,
                cx: -1.0,
                b: -next.0,
            }
            .normalized(),
        );
    }
}

fn check_inputs(
    samples: &PathSamples,
    vmax: &[f64],
    amax: &[f64],
    start_sd: f64,
    end_sd: f64,
) -> Result<(), TimingError> {
    let nv = vmax.len();
    let points = samples.s.len();
    if points < 2 {
        return Err(TimingError::EmptyPath { points });
    }
    if amax.len() != nv {
        return Err(TimingError::Length {
            what: "acceleration limits",
            got: amax.len(),
            expected: nv,
        });
    }
    for (what, list) in [("dq", &samples.dq), ("ddq", &samples.ddq)] {
        if list.len() != points {
            return Err(TimingError::Length {
                what,
                got: list.len(),
                expected: points,
            });
        }
        for (index, row) in list.iter().enumerate() {
            if row.len() != nv {
                return Err(TimingError::SampleLength {
                    what,
                    index,
                    got: row.len(),
                    expected: nv,
                });
            }
            if let Some((coordinate, &value)) = row.iter().enumerate().find(|(_, v)| !v.is_finite())
            {
                return Err(TimingError::NotFinite {
                    what,
                    index,
                    coordinate,
                    value,
                });
            }
        }
    }
    for (index, &value) in samples.s.iter().enumerate() {
        if !value.is_finite() {
            return Err(TimingError::GridNotFinite { index, value });
        }
        if index > 0 {
            let previous = samples.s[index - 1];
            if value <= previous {
                return Err(TimingError::NotIncreasing {
                    index,
                    previous,
                    value,
                });
            }
        }
    }
    for (what, list) in [("velocity", vmax), ("acceleration", amax)] {
        if let Some((coordinate, &value)) = list
            .iter()
            .enumerate()
            .find(|(_, v)| v.is_nan() || **v <= 0.0)
        {
            return Err(TimingError::BadLimit {
                what,
                coordinate,
                value,
            });
        }
    }
    for (what, value) in [("start", start_sd), ("end", end_sd)] {
        if !(value.is_finite() && value >= 0.0) {
            return Err(TimingError::BadBoundarySpeed { what, value });
        }
    }
    Ok(())
}

/// Time-optimal parameterization of the sampled path with per-coordinate velocity limits
/// `vmax` and acceleration limits `amax` (length nv, > 0, may be infinite), from path speed
/// `start_sd` to `end_sd` (0 for rest). Limits hold at the grid points (collocation); between
/// them the path acceleration is constant. Same as [`parameterize_with`] with
/// [`Discretization::Collocation`].
pub fn parameterize(
    samples: &PathSamples,
    vmax: &[f64],
    amax: &[f64],
    start_sd: f64,
    end_sd: f64,
) -> Result<Profile, TimingError> {
    parameterize_with(
        samples,
        vmax,
        amax,
        start_sd,
        end_sd,
        Discretization::Collocation,
    )
}

/// [`parameterize`] with a choice of where the acceleration limits are imposed.
pub fn parameterize_with(
    samples: &PathSamples,
    vmax: &[f64],
    amax: &[f64],
    start_sd: f64,
    end_sd: f64,
    scheme: Discretization,
) -> Result<Profile, TimingError> {
    check_inputs(samples, vmax, amax, start_sd, end_sd)?;
    let s = &samples.s;
    let n = s.len() - 1;
    let xv: Vec<f64> = samples.dq.iter().map(|d| velocity_bound(d, vmax)).collect();

    // Backward pass: controllable sets.
    let mut k = vec![(0.0, 0.0); n + 1];
    let x_end = end_sd * end_sd;
    if x_end > xv[n] * (1.0 + 1e-9) {
        return Err(TimingError::Infeasible { index: n });
    }
    k[n] = (x_end, x_end);
    let mut rows = Vec::with_capacity(4 + 2 * vmax.len());
    for i in (0..n).rev() {
        stage_rows(samples, i, amax, xv[i], scheme, &mut rows);
        next_set_rows(s[i + 1] - s[i], k[i + 1], &mut rows);
        k[i] = project_x(&rows).ok_or(TimingError::Infeasible { index: i })?;
    }

    // Forward pass: greatest admissible control at each stage.
    let mut x = vec![0.0; n + 1];
    let x0 = start_sd * start_sd;
    if x0 < k[0].0 - 1e-9 * k[0].0.max(1.0) || x0 > k[0].1 + 1e-9 * k[0].1.max(1.0) {
        return Err(TimingError::Infeasible { index: 0 });
    }
    x[0] = x0.clamp(k[0].0, k[0].1);
    let mut sdd = vec![0.0; n];
    for i in 0..n {
        let ds = s[i + 1] - s[i];
        stage_rows(samples, i, amax, xv[i], scheme, &mut rows);
        let u_max = rows
            .iter()
            .filter(|r| r.cu > 0.0)
            .map(|r| (r.b - r.cx * x[i]) / r.cu)
            .fold((k[i + 1].1 - x[i]) / (2.0 * ds), f64::min);
        let next = x[i] + 2.0 * ds * u_max;
        if !next.is_finite() {
            return Err(TimingError::Unbounded { index: i + 1 });
        }
        // Clamping absorbs rounding only: x[i] in K_i guarantees an admissible control.
        x[i + 1] = next.clamp(k[i + 1].0, k[i + 1].1).max(0.0);
        sdd[i] = (x[i + 1] - x[i]) / (2.0 * ds);
    }

    let sd: Vec<f64> = x.iter().map(|v| v.sqrt()).collect();
    let mut t = vec![0.0; n + 1];
    for i in 0..n {
        let v = sd[i] + sd[i + 1];
        if v <= 0.0 {
            return Err(TimingError::Stalled { index: i });
        }
        t[i + 1] = t[i] + 2.0 * (s[i + 1] - s[i]) / v;
    }
    Ok(Profile {
        s: s.clone(),
        sd,
        sdd,
        duration: t[n],
        t,
    })
}

impl Profile {
    /// Path parameter, speed and acceleration at time `t` (clamped into `[0, duration]`) by
    /// the constant-acceleration rule between grid points.
    pub fn at(&self, t: f64) -> (f64, f64, f64) {
        let n = self.s.len().saturating_sub(1);
        if n == 0 || self.t.len() != n + 1 || self.sd.len() != n + 1 || self.sdd.len() != n {
            return (self.s.first().copied().unwrap_or(0.0), 0.0, 0.0);
        }
        let t = if t.is_nan() {
            0.0
        } else {
            t.clamp(0.0, self.duration)
        };
        // Last interval whose start is <= t.
        let i = self.t.partition_point(|&ti| ti <= t).clamp(1, n) - 1;
        if t >= self.t[n] {
            return (self.s[n], self.sd[n], self.sdd[n - 1]);
        }
        let tau = t - self.t[i];
        let (v, a) = (self.sd[i], self.sdd[i]);
        let s = (self.s[i] + v * tau + 0.5 * a * tau * tau).min(self.s[i + 1]);
        (s, (v + a * tau).max(0.0), a)
    }
}

/// One straight segment of a polyline, `q(s) = from ⊕ s * dir` for `s` in `[0, length]`.
#[derive(Clone, Debug, PartialEq)]
struct TimedSegment {
    start_time: f64,
    from: Vec<f64>,
    /// Unit tangent `(q_{k+1} ⊖ q_k) / length`.
    dir: Vec<f64>,
    length: f64,
    profile: Profile,
}

/// A polyline through waypoints with a time-optimal, rest-to-rest motion on each segment.
#[derive(Clone, Debug, PartialEq)]
pub struct TimedPath {
    waypoints: Vec<Vec<f64>>,
    segments: Vec<TimedSegment>,
    waypoint_times: Vec<f64>,
    duration: f64,
}

/// Tangent derivatives of `q(s) = from ⊕ s * dir` at `s`, written into `dq` and `ddq`.
/// Euclidean coordinates: `q' = dir`, `q'' = 0`. A floating joint moves `p(s) = p0 + R0 s
/// d_lin`, `R(s) = R0 exp(s w)`, so its body-frame linear tangent is `exp(-s w) d_lin`
/// (turning with the body) and `q''_lin = -w x q'_lin`; the angular tangent is `w`.
fn segment_derivatives(robot: &Robot, dir: &[f64], s: f64, dq: &mut [f64], ddq: &mut [f64]) {
    dq.copy_from_slice(dir);
    ddq.iter_mut().for_each(|v| *v = 0.0);
    for j in robot.joints() {
        if let JointKind::Floating = j.kind {
            let vi = j.v_index;
            let lin = Vector3::new(dir[vi], dir[vi + 1], dir[vi + 2]);
            let w = Vector3::new(dir[vi + 3], dir[vi + 4], dir[vi + 5]);
            let body = so3_exp(&(-s * w)) * lin;
            let acc = -w.cross(&body);
            dq[vi..vi + 3].copy_from_slice(body.as_slice());
            ddq[vi..vi + 3].copy_from_slice(acc.as_slice());
        }
    }
}

/// Velocity and acceleration limits of every tangent coordinate of the robot.
pub fn robot_limits(robot: &Robot) -> (Vec<f64>, Vec<f64>) {
    let mut v = vec![f64::INFINITY; robot.nv()];
    let mut a = vec![f64::INFINITY; robot.nv()];
    for j in robot.joints() {
        for (k, l) in j.limits.iter().enumerate().take(j.kind.nv()) {
            v[j.v_index + k] = l.velocity;
            a[j.v_index + k] = l.acceleration;
        }
    }
    (v, a)
}

/// Time a piecewise-straight path through `waypoints` (configurations of `robot`):
/// `q(s) = q_k ⊕ (s - s_k) (q_{k+1} ⊖ q_k) / len_k` with `s` the joint-space arc length,
/// under the robot's velocity and acceleration limits, with `grid_per_segment` intervals
/// (>= 2) on each segment.
///
/// A polyline has a corner (infinite curvature) at every interior waypoint, so the
/// time-optimal motion stops there: each segment is parameterized separately from rest to
/// rest. Blending corners comes with the planner. Repeated waypoints (zero-length segments)
/// take no time.
pub fn time_polyline(
    robot: &Robot,
    waypoints: &[Vec<f64>],
    grid_per_segment: usize,
) -> Result<TimedPath, TimingError> {
    if waypoints.len() < 2 {
        return Err(TimingError::TooFewWaypoints {
            got: waypoints.len(),
        });
    }
    if grid_per_segment < 2 {
        return Err(TimingError::GridTooCoarse {
            got: grid_per_segment,
        });
    }
    for (index, q) in waypoints.iter().enumerate() {
        robot
            .check_configuration(q)
            .map_err(|source| TimingError::Waypoint { index, source })?;
    }
    let (vmax, amax) = robot_limits(robot);
    let nv = robot.nv();
    let mut segments = Vec::with_capacity(waypoints.len() - 1);
    let mut waypoint_times = vec![0.0];
    let mut time = 0.0;
    for (k, pair) in waypoints.windows(2).enumerate() {
        let (a, b) = (&pair[0], &pair[1]);
        let mut dir = vec![0.0; nv];
        robot
            .difference(a, b, &mut dir)
            .map_err(|source| TimingError::Waypoint { index: k, source })?;
        let length = dir.iter().map(|v| v * v).sum::<f64>().sqrt();
        if length > 0.0 {
            dir.iter_mut().for_each(|v| *v /= length);
            let m = grid_per_segment;
            let s: Vec<f64> = (0..=m).map(|i| length * i as f64 / m as f64).collect();
            let mut dq = vec![vec![0.0; nv]; m + 1];
            let mut ddq = vec![vec![0.0; nv]; m + 1];
            for i in 0..=m {
                segment_derivatives(robot, &dir, s[i], &mut dq[i], &mut ddq[i]);
            }
            // Interpolation: a floating joint's linear tangent turns along the segment.
            let profile = parameterize_with(
                &PathSamples { s, dq, ddq },
                &vmax,
                &amax,
                0.0,
                0.0,
                Discretization::Interpolation,
            )?;
            segments.push(TimedSegment {
                start_time: time,
                from: a.clone(),
                dir,
                length,
                profile: profile.clone(),
            });
            time += profile.duration;
        }
        waypoint_times.push(time);
    }
    Ok(TimedPath {
        waypoints: waypoints.to_vec(),
        segments,
        waypoint_times,
        duration: time,
    })
}

impl TimedPath {
    /// Total time.
    pub fn duration(&self) -> f64 {
        self.duration
    }

    /// Time at which each waypoint is reached (the motion is at rest there).
    pub fn waypoint_times(&self) -> &[f64] {
        &self.waypoint_times
    }

    /// The waypoints the path was built through.
    pub fn waypoints(&self) -> &[Vec<f64>] {
        &self.waypoints
    }

    /// Configuration `q` and tangent velocity `qdot` at time `t` (clamped into `[0,
    /// duration]`), by the constant-acceleration rule between grid points. `robot` must be
    /// the robot the path was timed for (its sizes are checked).
    pub fn sample(&self, robot: &Robot, t: f64) -> Result<(Vec<f64>, Vec<f64>), TimingError> {
        if !t.is_finite() {
            return Err(TimingError::TimeNotFinite { value: t });
        }
        let nv = robot.nv();
        let first = self
            .waypoints
            .first()
            .ok_or(TimingError::TooFewWaypoints { got: 0 })?;
        let seg = self
            .segments
            .iter()
            .take_while(|g| g.start_time <= t)
            .last();
        let Some(seg) = seg else {
            // Before the first segment, or no motion at all.
            let q = if t > 0.0 {
                self.waypoints.last().unwrap_or(first).clone()
            } else {
                first.clone()
            };
            robot.check_configuration(&q).map_err(TimingError::Robot)?;
            return Ok((q, vec![0.0; nv]));
        };
        if seg.dir.len() != nv {
            return Err(TimingError::Robot(ConfigurationError::Length {
                what: "tangent",
                got: seg.dir.len(),
                expected: nv,
            }));
        }
        let (s, sd, _) = seg.profile.at(t - seg.start_time);
        let s = s.min(seg.length);
        let step: Vec<f64> = seg.dir.iter().map(|v| v * s).collect();
        let mut q = vec![0.0; robot.nq()];
        robot
            .integrate(&seg.from, &step, &mut q)
            .map_err(TimingError::Robot)?;
        let (mut dq, mut ddq) = (vec![0.0; nv], vec![0.0; nv]);
        segment_derivatives(robot, &seg.dir, s, &mut dq, &mut ddq);
        dq.iter_mut().for_each(|v| *v *= sd);
        Ok((q, dq))
    }
}

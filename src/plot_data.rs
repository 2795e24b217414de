//! What the plots of a planned route or motion show, evaluated densely along it: joint
//! positions and velocities over time with their limits, the constraint residual along the
//! path against its tolerance, and the clearance along the path. Pure functions of the
//! scenario and the planned result; drawing is in [`crate::plot`].
//!
//! The residual and the clearance are evaluated at exactly the points the verifier checks
//! ([`crate::verify::verify_path`]): on every straight segment between two waypoints at
//! fractions `k / n`, `n = ceil(length / resolution)`, the end waypoint only on the last
//! segment. So the largest plotted residual of a leg is the largest residual its
//! verification saw. The time of a point between two waypoints is interpolated linearly in
//! the fraction (exact at the waypoints, where the motion is at rest).
//!
//! Joint positions and velocities of a route are sampled at a fixed time step from each
//! leg's time parameterization, recomputed with [`crate::timing::time_polyline`] and the
//! route's timing grid (deterministic, so the same profile the planner timed); those of a
//! single-stance motion are its timed samples.

use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch};
use crate::constraint::{ConstraintError, ConstraintStack};
use crate::model::{JointKind, Robot};
use crate::motion::Motion;
use crate::route::{collision_model, Route, RouteError, RouteSettings};
use crate::scenario::Scenario;
use crate::scene::SceneError;
use crate::timing::{robot_limits, time_polyline, TimingError};

/// Why plot data could not be computed.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum PlotDataError {
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error(transparent)]
    Scene(#[from] SceneError),
    #[error(transparent)]
    Timing(#[from] TimingError),
    #[error(transparent)]
    Route(#[from] RouteError),
    #[error("{what}: {got} times for {expected} waypoints")]
    TimesLength {
        what: &'static str,
        got: usize,
        expected: usize,
    },
    #[error("{name} must be positive and finite, got {got}")]
    NotPositive { name: &'static str, got: f64 },
}

/// A scalar over time.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Series {
    pub t: Vec<f64>,
    pub y: Vec<f64>,
}

impl Series {
    /// Largest value (`-inf` when empty; NaN values are skipped).
    pub fn max(&self) -> f64 {
        self.y.iter().copied().fold(f64::NEG_INFINITY, f64::max)
    }
    /// Smallest value (`+inf` when empty; NaN values are skipped).
    pub fn min(&self) -> f64 {
        self.y.iter().copied().fold(f64::INFINITY, f64::min)
    }
}

/// One coordinate over time with its limits (`None`: unbounded on that side).
#[derive(Clone, Debug, PartialEq)]
pub struct Track {
    pub name: String,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
    /// Values at [`JointSeries::t`].
    pub values: Vec<f64>,
}

/// Joint positions and velocities at common times.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct JointSeries {
    pub t: Vec<f64>,
    /// One track per configuration coordinate except the quaternion of a floating joint
    /// (`joint`, or `joint.x`, `joint.y`, `joint.z`), in `q` order; limits are the position
    /// limits.
    pub positions: Vec<Track>,
    /// One track per tangent coordinate ([`Robot::dof_names`]); limits are `-v_max, v_max`.
    pub velocities: Vec<Track>,
}

/// Everything the three plots of one planned result show.
#[derive(Clone, Debug, PartialEq)]
pub struct PlotData {
    /// Scenario name.
    pub title: String,
    pub joints: JointSeries,
    /// Constraint residual norm along the path.
    pub residual: Series,
    /// The residual allowed along the path (a route's path tolerance, a motion's tolerance).
    pub tolerance: f64,
    /// Smallest signed distance between checked body pairs along the path (metres); `None`
    /// when the scenario has nothing that can collide.
    pub clearance: Option<Series>,
    /// Route times of the grasp switches (empty for a motion).
    pub switch_times: Vec<f64>,
}

/// Index into `q` and name of every plotted position coordinate, with its position limits.
fn position_coordinates(robot: &Robot) -> Vec<(usize, String, Option<f64>, Option<f64>)> {
    let bound = |v: f64| v.is_finite().then_some(v);
    let mut out = Vec::new();
    for j in robot.joints() {
        let names: Vec<String> = match j.kind {
            JointKind::Floating => ["x", "y", "z"]
                .iter()
                .map(|s| format!("{}.{s}", j.name))
                .collect(),
            JointKind::Fixed => Vec::new(),
            _ => vec![j.name.clone()],
        };
        for (k, name) in names.into_iter().enumerate() {
            let (lo, hi) = j
                .limits
                .get(k)
                .map_or((None, None), |l| (bound(l.lower), bound(l.upper)));
            out.push((j.q_index + k, name, lo, hi));
        }
    }
    out
}

/// Joint series from timed samples `(t, q, qdot)`.
pub fn joint_series<'a>(
    robot: &Robot,
    samples: impl IntoIterator<Item = (f64, &'a [f64], &'a [f64])>,
) -> JointSeries {
    let coords = position_coordinates(robot);
    let (vmax, _) = robot_limits(robot);
    let mut s = JointSeries {
        t: Vec::new(),
        positions: coords
            .iter()
            .map(|(_, name, lower, upper)| Track {
                name: name.clone(),
                lower: *lower,
                upper: *upper,
                values: Vec::new(),
            })
            .collect(),
        velocities: robot
            .dof_names()
            .into_iter()
            .zip(&vmax)
            .map(|(name, &v)| Track {
                name,
                lower: v.is_finite().then_some(-v),
                upper: v.is_finite().then_some(v),
                values: Vec::new(),
            })
            .collect(),
    };
    for (t, q, qdot) in samples {
        s.t.push(t);
        for (track, (i, ..)) in s.positions.iter_mut().zip(&coords) {
            track.values.push(q.get(*i).copied().unwrap_or(f64::NAN));
        }
        for (k, track) in s.velocities.iter_mut().enumerate() {
            track.values.push(qdot.get(k).copied().unwrap_or(f64::NAN));
        }
    }
    s
}

/// Residual of `stack` (and clearance, when `collision` is given) along the straight
/// segments between `path`'s waypoints, at the verifier's points for `resolution` (see the
/// module docs). `times[i]` is the time of waypoint `i`.
pub fn along_path(
    robot: &Robot,
    stack: &ConstraintStack,
    collision: Option<&CollisionModel>,
    path: &[Vec<f64>],
    times: &[f64],
    resolution: f64,
) -> Result<(Series, Option<Series>), PlotDataError> {
    if !(resolution.is_finite() && resolution > 0.0) {
        return Err(PlotDataError::NotPositive {
            name: "resolution",
            got: resolution,
        });
    }
    if times.len() != path.len() {
        return Err(PlotDataError::TimesLength {
            what: "path",
            got: times.len(),
            expected: path.len(),
        });
    }
    let mut residual = Series::default();
    let mut clearance = collision.map(|_| Series::default());
    if path.is_empty() {
        return Ok((residual, clearance));
    }
    let mut buf = stack.buffer(robot);
    let mut scratch = CollisionScratch::new();
    let mut q = vec![0.0; robot.nq()];
    let segments = path.len().saturating_sub(1).max(1);
    for seg in 0..segments {
        let a = &path[seg];
        let b = path.get(seg + 1).unwrap_or(a);
        let (ta, tb) = (
            times[seg],
            times.get(seg + 1).copied().unwrap_or(times[seg]),
        );
        let d = robot.distance(a, b).map_err(ConstraintError::from)?;
        // The same point set as the verifier (see the module docs).
        let steps = ((d / resolution).ceil() as usize).max(1);
        let last = if seg + 1 == segments {
            steps
        } else {
            steps - 1
        };
        for k in 0..=last {
            let fraction = k as f64 / steps as f64;
            robot
                .interpolate(a, b, fraction, &mut q)
                .map_err(ConstraintError::from)?;
            let t = ta + fraction * (tb - ta);
            let r = stack.evaluate(robot, &q, &mut buf, false)?;
            residual.t.push(t);
            residual.y.push(r);
            if let (Some(model), Some(series)) = (collision, clearance.as_mut()) {
                // `evaluate` left the link poses of `q` in the buffer.
                let c = model.clearance(&buf.poses, &mut scratch)?;
                series.t.push(t);
                series.y.push(c.distance);
            }
        }
    }
    Ok((residual, clearance))
}

/// Plot data of a route: joints sampled every `dt` seconds (and at every leg's ends),
/// residual and clearance along every leg at the route's verification spacing.
pub fn route_plot_data(
    scenario: &Scenario,
    route: &Route,
    settings: &RouteSettings,
    dt: f64,
) -> Result<PlotData, PlotDataError> {
    if !(dt.is_finite() && dt > 0.0) {
        return Err(PlotDataError::NotPositive {
            name: "dt",
            got: dt,
        });
    }
    let robot = &scenario.robot;
    let collision = collision_model(scenario)?;
    let mut samples: Vec<(f64, Vec<f64>, Vec<f64>)> = Vec::new();
    let mut residual = Series::default();
    let mut clearance = collision.as_ref().map(|_| Series::default());
    for leg in &route.legs {
        let t0 = leg.times.first().copied().unwrap_or(0.0);
        if leg.path.len() >= 2 {
            let timed = time_polyline(robot, &leg.path, settings.timing_grid)?;
            let n = (timed.duration() / dt).ceil() as usize;
            for i in 0..=n {
                let t = (i as f64 * dt).min(timed.duration());
                let (q, v) = timed.sample(robot, t)?;
                samples.push((t0 + t, q, v));
            }
        } else if let Some(q) = leg.path.first() {
            samples.push((t0, q.clone(), vec![0.0; robot.nv()]));
        }
        let stack = leg
            .stance_index
            .constraints(robot, &scenario.scene, &scenario.constant)?;
        let (r, c) = along_path(
            robot,
            &stack,
            collision.as_ref(),
            &leg.path,
            &leg.times,
            route.verify_resolution,
        )?;
        residual.t.extend(r.t);
        residual.y.extend(r.y);
        if let (Some(all), Some(c)) = (clearance.as_mut(), c) {
            all.t.extend(c.t);
            all.y.extend(c.y);
        }
    }
    let joints = joint_series(
        robot,
        samples
            .iter()
            .map(|(t, q, v)| (*t, q.as_slice(), v.as_slice())),
    );
    Ok(PlotData {
        title: route.scenario.clone(),
        joints,
        residual,
        tolerance: route.path_tolerance,
        clearance,
        switch_times: route.switches.iter().map(|w| w.time).collect(),
    })
}

/// Plot data of a single-stance motion: its timed samples, and residual and clearance along
/// the straight segments between them at the motion's verification spacing.
pub fn motion_plot_data(scenario: &Scenario, motion: &Motion) -> Result<PlotData, PlotDataError> {
    let robot = &scenario.robot;
    let collision = collision_model(scenario)?;
    let stack = scenario
        .start
        .stance
        .constraints(robot, &scenario.scene, &scenario.constant)?;
    let path: Vec<Vec<f64>> = motion.samples.iter().map(|s| s.q.clone()).collect();
    let times: Vec<f64> = motion.samples.iter().map(|s| s.t).collect();
    let (residual, clearance) = along_path(
        robot,
        &stack,
        collision.as_ref(),
        &path,
        &times,
        motion.tolerances.verify_resolution,
    )?;
    let joints = joint_series(
        robot,
        motion
            .samples
            .iter()
            .map(|s| (s.t, s.q.as_slice(), s.qdot.as_slice())),
    );
    Ok(PlotData {
        title: motion.scenario.clone(),
        joints,
        residual,
        tolerance: motion.tolerances.tolerance,
        clearance,
        switch_times: Vec::new(),
    })
}

//! From a scenario to a verified, timed motion inside one stance: the pipeline
//!
//! 1. constraints: the start stance's grips plus the scenario's constant constraints
//!    (a [`ConstrainedSpace`], or a [`FreeSpace`] when there are none);
//! 2. planning ([`PlannerChoice`]: RRT-Connect or lazy PRM), then shortening on the manifold
//!    ([`crate::shortcut::shorten`]; every new piece is a checked motion of the space);
//! 3. densification: every segment of the planned path is split and the new points projected
//!    onto the manifold until the straight segment's midpoint residual is at most half the
//!    tolerance and no segment is longer than the stride (so the straight segments a
//!    controller would follow stay on the manifold);
//! 4. time parameterization (TOPP-RA, [`crate::timing`]) of the densified path, stopping at
//!    corners (waypoints where the path turns by more than `corner_angle`);
//! 5. resampling at a fixed time step; each piece between corners is slowed to an integer
//!    number of steps so every corner is a sample;
//! 6. the independent verifier ([`verify_path`]) on the densified path and on the samples at
//!    a resolution of at most a tenth of the stride. When the samples fail (their straight
//!    segments cut the curved path) the time step is halved and the samples are taken again.
//!
//! Only a motion that passed step 6 is returned. The residual along the timed trajectory is
//! kept within the tolerance by **densifying** (step 3): every sample lies on a segment of the
//! densified path, whose residual is bounded; nothing is re-projected after timing.

use std::time::{Duration, Instant};

use serde::Serialize;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch};
use crate::constraint::{ConstraintError, ConstraintStack};
use crate::cspace::{
    CSpaceError, ClearanceMargin, ConfigSpace, ConstrainedSpace, FreeSpace, SamplingBox,
    SegmentSampling,
};
use crate::kinematics::forward_kinematics;
use crate::math::Pose;
use crate::model::Robot;
use crate::planner::{lazy_prm, rrt_connect, Plan, PlanError, PlanStats, PrmSettings, RrtSettings};
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::scenario::{Goal, Scenario};
use crate::scene::SceneError;
use crate::settings::{positive, share, SettingsError};
use crate::shortcut::{shorten, ShortenError, ShortenSettings};
use crate::timing::{
    parameterize_with, robot_limits, Discretization, PathSamples, Profile, TimingError,
};
use crate::verify::{verify_path, Defect, VerifyError, VerifyReport, VerifySettings};
use crate::walk::WalkSettings;

/// Which planner finds the geometric path (shortened afterwards, see
/// [`MotionSettings::shortcut_attempts`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[non_exhaustive]
pub enum PlannerChoice {
    /// RRT-Connect ([`crate::planner::rrt_connect`]), first tried as a direct walk.
    RrtConnect,
    /// Lazy PRM ([`crate::planner::lazy_prm`]) with a fresh roadmap. The default: over 100
    /// seeds of each demo scenario it succeeded every time and was faster than RRT-Connect on
    /// all four (docs/performance.md, "Single-stance scenarios").
    #[default]
    LazyPrm,
}

/// How to plan, time and check a motion. Tolerance, stride, time limit and seed come from
/// the scenario's [`crate::scenario::ScenarioLimits`]. Build with `default()` and change
/// fields; [`MotionSettings::validate`] is called by [`plan_motion`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MotionSettings {
    pub planner: PlannerChoice,
    /// Longest planner extension toward a sample (joint-space distance).
    pub max_step: f64,
    /// Planner samples at most.
    pub max_samples: usize,
    /// Projection tolerance as a fraction of the scenario tolerance (waypoints sit well
    /// inside the band the straight segments between them must keep).
    pub projection_fraction: f64,
    /// Newton steps per projection at most.
    pub projection_iterations: usize,
    /// Output sample period (seconds) tried first.
    pub time_step: f64,
    /// Smallest sample period tried before giving up.
    pub min_time_step: f64,
    /// A waypoint where the path turns by more than this (radians, between the tangent
    /// directions of its two segments) is a corner: the timed motion stops there.
    pub corner_angle: f64,
    /// Verifier spacing as a fraction of the stride, at most 0.1.
    pub verify_fraction: f64,
    /// Collision-check spacing inside the planner as a fraction of the stride (the verifier
    /// re-checks at `verify_fraction` afterwards; coarser is faster but may be rejected).
    pub plan_fraction: f64,
    /// Clearance margin (metres) of the planner's coarse motion checks: where a checked point
    /// is nearer than this to an obstacle, the stretches on both sides of it are checked at
    /// `verify_fraction` instead ([`crate::cspace::ClearanceMargin`]). `None`: every stretch
    /// at `plan_fraction` only. A filter that keeps the verifier from rejecting coarse
    /// plans, not a proof: the verifier still checks every motion.
    pub plan_margin: Option<f64>,
    /// With `plan_margin`: points inside the planner's straight segments must keep this many
    /// metres from obstacles (the segments' ends only must not touch), so a graze the coarse
    /// checks miss is not found touching by the verifier. At least 0, below `plan_margin`.
    pub plan_clearance: f64,
    /// Translational coordinates (mobile base, floating base position) of planner samples
    /// are drawn within the hull of start and goal widened by this many metres
    /// ([`crate::cspace::SamplingBox`]); `None` samples the whole joint range.
    pub sampling_margin: Option<f64>,
    /// Draw this share of the samples near the straight segment from start to goal, offset by
    /// up to `segment_spread` per coordinate ([`crate::cspace::SegmentSampling`]); constrained
    /// spaces only. 0: every sample uniform.
    pub segment_share: f64,
    pub segment_spread: f64,
    /// Random shortcuts tried on the planned path (0: none).
    pub shortcut_attempts: usize,
    /// Smoothing passes on the planned path after the shortcuts (0: none).
    pub smoothing_passes: usize,
}

impl Default for MotionSettings {
    fn default() -> Self {
        MotionSettings {
            planner: PlannerChoice::LazyPrm,
            max_step: 0.5,
            max_samples: 20_000,
            projection_fraction: 0.1,
            projection_iterations: 50,
            time_step: 0.01,
            min_time_step: 0.000_5,
            corner_angle: 0.05,
            verify_fraction: 0.1,
            plan_fraction: 0.5,
            plan_margin: Some(0.01),
            plan_clearance: 0.001,
            sampling_margin: Some(1.0),
            segment_share: 0.0,
            segment_spread: 0.6,
            shortcut_attempts: 20,
            smoothing_passes: 0,
        }
    }
}

impl MotionSettings {
    pub fn validate(&self) -> Result<(), SettingsError> {
        positive("max_step", self.max_step)?;
        positive("time_step", self.time_step)?;
        positive("min_time_step", self.min_time_step)?;
        positive("corner_angle", self.corner_angle)?;
        let fraction = |name, v: f64, hi: f64, expected| {
            if v.is_finite() && v > 0.0 && v <= hi {
                Ok(())
            } else {
                Err(SettingsError::OutOfRange {
                    name,
                    expected,
                    got: v,
                })
            }
        };
        fraction(
            "projection_fraction",
            self.projection_fraction,
            0.5,
            "in (0, 0.5]",
        )?;
        fraction("verify_fraction", self.verify_fraction, 0.1, "in (0, 0.1]")?;
        fraction("plan_fraction", self.plan_fraction, 1.0, "in (0, 1]")?;
        positive("segment_spread", self.segment_spread)?;
        share("segment_share", self.segment_share)?;
        if let Some(m) = self.plan_margin {
            positive("plan_margin", m)?;
        }
        if !(self.plan_clearance.is_finite()
            && self.plan_clearance >= 0.0
            && self.plan_margin.is_none_or(|m| self.plan_clearance < m))
        {
            return Err(SettingsError::OutOfRange {
                name: "plan_clearance",
                expected: "at least 0 and below plan_margin",
                got: self.plan_clearance,
            });
        }
        if let Some(m) = self.sampling_margin {
            if !(m.is_finite() && m >= 0.0) {
                return Err(SettingsError::OutOfRange {
                    name: "sampling_margin",
                    expected: "finite and at least 0",
                    got: m,
                });
            }
        }
        for (name, v) in [
            ("max_samples", self.max_samples),
            ("projection_iterations", self.projection_iterations),
        ] {
            if v == 0 {
                return Err(SettingsError::OutOfRange {
                    name,
                    expected: "at least 1",
                    got: 0.0,
                });
            }
        }
        if self.min_time_step > self.time_step {
            return Err(SettingsError::OutOfRange {
                name: "min_time_step",
                expected: "at most time_step",
                got: self.min_time_step,
            });
        }
        Ok(())
    }
}

/// Why no motion was returned.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum MotionError {
    #[error(transparent)]
    Settings(#[from] SettingsError),
    #[error(transparent)]
    Scene(#[from] SceneError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Plan(#[from] PlanError),
    #[error(transparent)]
    Space(#[from] CSpaceError),
    #[error(transparent)]
    Timing(#[from] TimingError),
    #[error(transparent)]
    Shorten(#[from] ShortenError),
    #[error(transparent)]
    Verify(#[from] VerifyError),
    #[error("goal kind `{0}` is not a single-stance goal; give a goal configuration")]
    UnsupportedGoal(&'static str),
    #[error("the {which} configuration has {got} values, the robot has {expected}")]
    WrongLength {
        which: &'static str,
        got: usize,
        expected: usize,
    },
    #[error("no path found within the limits ({samples} samples, {nodes} nodes)")]
    NoPath { samples: usize, nodes: usize },
    #[error("densifying segment {segment} failed: {reason}")]
    Densify { segment: usize, reason: String },
    #[error("the verifier rejected the {what}: {first} ({count} defects)")]
    Rejected {
        what: &'static str,
        first: String,
        count: usize,
    },
}

/// One sample of the timed motion.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TimedSample {
    /// Seconds from the start.
    pub t: f64,
    pub q: Vec<f64>,
    /// Tangent velocity.
    pub qdot: Vec<f64>,
}

/// The tolerances a motion was planned and checked with.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct MotionTolerances {
    /// Largest residual norm allowed anywhere along the path and the samples (verified).
    pub tolerance: f64,
    /// Projection tolerance of every planned and densified waypoint.
    pub projection_tolerance: f64,
    pub stride: f64,
    /// Verifier spacing (joint-space distance), at most stride / 10.
    pub verify_resolution: f64,
    /// Sample period of `samples` (seconds).
    pub time_step: f64,
}

/// Wall-clock time of each stage. Not serialized: the serialized motion depends on the seed
/// only.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct StageTimes {
    pub planning: Duration,
    /// Shortening the planned path.
    pub shorten: Duration,
    pub densify: Duration,
    pub timing: Duration,
    pub verify: Duration,
    pub total: Duration,
}

/// Counts and measurements of a motion.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MotionStats {
    pub planner: PlannerChoice,
    pub planner_samples: usize,
    pub planner_nodes: usize,
    pub projections: usize,
    pub collision_checks: usize,
    /// Waypoints of the planned path before densification.
    pub planned_waypoints: usize,
    /// Projections spent densifying.
    pub densify_projections: usize,
    /// Corners (stops) of the timed motion, endpoints excluded.
    pub corners: usize,
    /// Duration of the timed motion (seconds).
    pub duration: f64,
    /// Time steps tried (halving) before the samples passed the verifier.
    pub time_step_halvings: usize,
    /// Largest residual norm at the samples.
    pub max_residual_samples: f64,
    /// Largest residual norm the verifier saw along the densified path / between samples.
    pub max_residual_path_verified: f64,
    pub max_residual_samples_verified: f64,
    /// Points the verifier checked (path + samples).
    pub verified_points: usize,
    /// Smallest clearance (metres) over the samples; infinite without obstacles or pairs.
    #[serde(serialize_with = "finite_or_null")]
    pub min_clearance: f64,
    #[serde(skip)]
    pub times: StageTimes,
}

fn finite_or_null<S: serde::Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    if v.is_finite() {
        s.serialize_f64(*v)
    } else {
        s.serialize_none()
    }
}

/// A verified, timed motion inside one stance.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Motion {
    pub scenario: String,
    pub robot: String,
    /// Name of each tangent coordinate.
    pub dof_names: Vec<String>,
    pub seed: u64,
    pub tolerances: MotionTolerances,
    /// The densified geometric path (configurations; consecutive points joined by straight
    /// segments that stay within the tolerance).
    pub path: Vec<Vec<f64>>,
    /// The timed motion at a fixed time step; every sample lies on `path`.
    pub samples: Vec<TimedSample>,
    pub stats: MotionStats,
}

impl Motion {
    /// JSON with a stable field order (the struct's); byte-identical for the same seed.
    pub fn to_json(&self) -> Result<String, serde_json::Error> {
        serde_json::to_string(self)
    }
}

/// Plan, densify, time, resample and verify a single-stance motion.
pub fn plan_motion(scenario: &Scenario, settings: &MotionSettings) -> Result<Motion, MotionError> {
    let t_start = Instant::now();
    settings.validate()?;
    let limits = &scenario.limits;
    let tolerance = positive("tolerance", limits.tolerance)?;
    let stride = positive("stride", limits.stride)?;
    let robot: &Robot = &scenario.robot;
    let goal = match &scenario.goal {
        Goal::Configuration(q) => q.clone(),
        Goal::Stance(_) => return Err(MotionError::UnsupportedGoal("stance")),
        Goal::Grip { .. } => return Err(MotionError::UnsupportedGoal("grip")),
        Goal::BodyInRegion { .. } => return Err(MotionError::UnsupportedGoal("body in region")),
    };
    let start = scenario.start.q.clone();
    for (which, q) in [("start", &start), ("goal", &goal)] {
        if q.len() != robot.nq() {
            return Err(MotionError::WrongLength {
                which,
                got: q.len(),
                expected: robot.nq(),
            });
        }
    }
    let stack = scenario
        .start
        .stance
        .constraints(robot, &scenario.scene, &scenario.constant)?;
    let model = CollisionModel::new(robot, &scenario.scene.obstacles)?;
    let projection = ProjectionSettings::new(
        tolerance * settings.projection_fraction,
        settings.projection_iterations,
        0.5,
    )?;
    let walk = WalkSettings::new(stride, 1.0, 100_000, projection)?;
    let resolution = stride * settings.verify_fraction;
    let plan_resolution = stride * settings.plan_fraction;
    let rrt = RrtSettings::new(
        settings.max_step,
        settings.max_samples,
        limits.time_limit,
        limits.seed,
    )?;

    let prm = PrmSettings {
        max_samples: settings.max_samples,
        time_limit: limits.time_limit,
        seed: limits.seed,
        ..PrmSettings::default()
    };
    let shortening = ShortenSettings::new(
        settings.shortcut_attempts,
        settings.smoothing_passes,
        0.5,
        limits.seed,
    )?;
    let clearance = settings
        .plan_margin
        .map(|m| ClearanceMargin::new(m, resolution, settings.plan_clearance))
        .transpose()?;
    let sampling_box = settings
        .sampling_margin
        .map(|m| SamplingBox::around(robot, &start, &goal, m));

    // 2. Plan and shorten.
    let job = PlanJob {
        choice: settings.planner,
        start: &start,
        goal: &goal,
        rrt: &rrt,
        prm: &prm,
        shortening: &shortening,
    };
    let (plan, planned, planning, shorten_time) = if stack.is_empty() {
        let mut space = FreeSpace::new(robot, Some(&model), plan_resolution)?;
        if let Some(b) = sampling_box {
            space = space.with_sampling_box(b);
        }
        if let Some(m) = clearance {
            space = space.with_clearance_margin(m);
        }
        job.run(&mut space)?
    } else {
        let mut space = ConstrainedSpace::new(robot, &stack, Some(&model), walk, plan_resolution)?;
        if let Some(b) = sampling_box {
            space = space.with_sampling_box(b);
        }
        if let Some(m) = clearance {
            space = space.with_clearance_margin(m);
        }
        if settings.segment_share > 0.0 {
            space = space.with_segment_sampling(SegmentSampling::new(
                robot,
                &start,
                &goal,
                settings.segment_spread,
                settings.segment_share,
            )?);
        }
        job.run(&mut space)?
    };
    let pstats: PlanStats = plan.stats;
    let Some(planned) = planned else {
        return Err(MotionError::NoPath {
            samples: pstats.samples,
            nodes: pstats.nodes,
        });
    };

    // 3. Densify.
    let t1 = Instant::now();
    let mut densify_projections = 0;
    let path = densify(
        robot,
        &stack,
        &planned,
        &projection,
        tolerance,
        stride,
        &mut densify_projections,
    )?;
    let densify_time = t1.elapsed();

    // 4. Time.
    let t2 = Instant::now();
    let timed = TimedPolyline::new(robot, &path, settings.corner_angle)?;
    let timing_time = t2.elapsed();

    // 5-6. Resample and verify.
    let t3 = Instant::now();
    let vs = VerifySettings::new(resolution, tolerance, stride * (1.0 + 1e-9))?;
    let path_report = verify_path(robot, &stack, Some(&model), &path, &vs)?;
    reject("densified path", &path_report)?;
    let mut dt = settings.time_step;
    let mut halvings = 0;
    let (samples, sample_report) = loop {
        let samples = timed.resample(robot, dt)?;
        let qs: Vec<Vec<f64>> = samples.iter().map(|s| s.q.clone()).collect();
        let report = verify_path(robot, &stack, Some(&model), &qs, &vs)?;
        if report.passed() {
            break (samples, report);
        }
        if dt * 0.5 < settings.min_time_step {
            reject("timed samples", &report)?;
        }
        dt *= 0.5;
        halvings += 1;
    };
    let verify_time = t3.elapsed();

    // Measurements along the samples.
    let mut buf = stack.buffer(robot);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut scratch = CollisionScratch::new();
    let mut max_residual_samples: f64 = 0.0;
    let mut min_clearance = f64::INFINITY;
    for s in &samples {
        max_residual_samples =
            max_residual_samples.max(stack.evaluate(robot, &s.q, &mut buf, false)?);
        forward_kinematics(robot, &s.q, &mut poses).map_err(ConstraintError::from)?;
        min_clearance = min_clearance.min(model.clearance(&poses, &mut scratch)?.distance);
    }

    let stats = MotionStats {
        planner: settings.planner,
        planner_samples: pstats.samples,
        planner_nodes: pstats.nodes,
        projections: pstats.space.projections,
        collision_checks: pstats.space.collision_checks,
        planned_waypoints: planned.len(),
        densify_projections,
        corners: timed.pieces.len().saturating_sub(1),
        duration: samples.last().map_or(0.0, |s| s.t),
        time_step_halvings: halvings,
        max_residual_samples,
        max_residual_path_verified: path_report.max_residual,
        max_residual_samples_verified: sample_report.max_residual,
        verified_points: path_report.checked + sample_report.checked,
        min_clearance,
        times: StageTimes {
            planning,
            shorten: shorten_time,
            densify: densify_time,
            timing: timing_time,
            verify: verify_time,
            total: t_start.elapsed(),
        },
    };
    Ok(Motion {
        scenario: scenario.name.clone(),
        robot: robot.name().to_string(),
        dof_names: robot.dof_names(),
        seed: limits.seed,
        tolerances: MotionTolerances {
            tolerance,
            projection_tolerance: projection.tolerance,
            stride,
            verify_resolution: resolution,
            time_step: dt,
        },
        path,
        samples,
        stats,
    })
}

/// The planning stage's inputs, run in either space.
struct PlanJob<'a> {
    choice: PlannerChoice,
    start: &'a [f64],
    goal: &'a [f64],
    rrt: &'a RrtSettings,
    prm: &'a PrmSettings,
    shortening: &'a ShortenSettings,
}

type PlanOutcome = (Plan, Option<Vec<Vec<f64>>>, Duration, Duration);

impl PlanJob<'_> {
    /// Plan, then shorten a found path; returns the plan, the (shortened) path and the time
    /// of each step.
    fn run<S: ConfigSpace>(&self, space: &mut S) -> Result<PlanOutcome, MotionError> {
        let t0 = Instant::now();
        let plan = match self.choice {
            PlannerChoice::RrtConnect => rrt_connect(space, self.start, self.goal, self.rrt)?,
            PlannerChoice::LazyPrm => lazy_prm(space, self.start, self.goal, self.prm)?,
        };
        let planning = t0.elapsed();
        let t1 = Instant::now();
        let path = match &plan.path {
            Some(p)
                if p.len() > 2
                    && self.shortening.shortcut_attempts + self.shortening.smoothing_passes > 0 =>
            {
                Some(shorten(space, p, self.shortening)?.path)
            }
            other => other.clone(),
        };
        Ok((plan, path, planning, t1.elapsed()))
    }
}

fn reject(what: &'static str, report: &VerifyReport) -> Result<(), MotionError> {
    match report.defects.first() {
        None => Ok(()),
        Some(d) => Err(MotionError::Rejected {
            what,
            first: describe(d),
            count: report.defects.len(),
        }),
    }
}

fn describe(d: &Defect) -> String {
    d.to_string()
}

/// Deepest bisection of one planned segment.
const MAX_DEPTH: usize = 24;

/// Split every segment of `planned` until it is at most `max_len` long and the residual at
/// its midpoint is at most `tolerance / 2`; new points are projected onto the manifold
/// (with an empty stack the segments are only split).
fn densify(
    robot: &Robot,
    stack: &ConstraintStack,
    planned: &[Vec<f64>],
    projection: &ProjectionSettings,
    tolerance: f64,
    max_len: f64,
    projections: &mut usize,
) -> Result<Vec<Vec<f64>>, MotionError> {
    let mut out: Vec<Vec<f64>> = Vec::with_capacity(planned.len() * 4);
    let Some(first) = planned.first() else {
        return Ok(out);
    };
    out.push(first.clone());
    let mut buf = ProjectionBuffer::new(robot, stack);
    let mut mid = vec![0.0; robot.nq()];
    for (segment, pair) in planned.windows(2).enumerate() {
        let fail = |reason: String| MotionError::Densify { segment, reason };
        // Depth-first bisection with an explicit stack of (a, b, depth); `out` gets b's.
        let mut pending = vec![(pair[0].clone(), pair[1].clone(), 0usize)];
        while let Some((a, b, depth)) = pending.pop() {
            let d = robot.distance(&a, &b).map_err(ConstraintError::from)?;
            if d == 0.0 {
                continue;
            }
            robot
                .interpolate(&a, &b, 0.5, &mut mid)
                .map_err(ConstraintError::from)?;
            let r = if stack.is_empty() {
                0.0
            } else {
                stack.evaluate(robot, &mid, &mut buf.stack, false)?
            };
            if d <= max_len && r <= 0.5 * tolerance {
                out.push(b);
                continue;
            }
            if depth >= MAX_DEPTH {
                return Err(fail(format!(
                    "still {d:.3e} long with midpoint residual {r:.3e} after {MAX_DEPTH} halvings"
                )));
            }
            let mut m = mid.clone();
            if !stack.is_empty() && r > 0.5 * projection.tolerance {
                *projections += 1;
                let rep = project(robot, stack, projection, &mut m, &mut buf)?;
                if !rep.converged() {
                    return Err(fail(format!(
                        "projection of a midpoint did not converge ({:?}, residual {:.3e})",
                        rep.stop, rep.residual
                    )));
                }
                let (da, db) = (
                    robot.distance(&a, &m).map_err(ConstraintError::from)?,
                    robot.distance(&m, &b).map_err(ConstraintError::from)?,
                );
                if da > 0.75 * d || db > 0.75 * d {
                    return Err(fail(format!(
                        "the projected midpoint left the segment ({da:.3e} and {db:.3e} from \
                         its ends, segment {d:.3e} long)"
                    )));
                }
            }
            // Second half below the first on the stack: the first half is emitted first.
            pending.push((m.clone(), b, depth + 1));
            pending.push((a, m, depth + 1));
        }
    }
    Ok(out)
}

/// One stretch between corners, timed rest to rest.
#[derive(Clone, Debug)]
struct Piece {
    /// Index of the first and last path point.
    first: usize,
    last: usize,
    /// Arc length from the piece's start at each of its points.
    cum: Vec<f64>,
    profile: Profile,
}

/// The densified path with a time-optimal profile on every piece between corners.
struct TimedPolyline {
    path: Vec<Vec<f64>>,
    /// Unit tangent direction of each segment (zero-length segments removed beforehand).
    dirs: Vec<Vec<f64>>,
    pieces: Vec<Piece>,
}

impl TimedPolyline {
    fn new(robot: &Robot, path: &[Vec<f64>], corner_angle: f64) -> Result<Self, MotionError> {
        let nv = robot.nv();
        let mut pts: Vec<Vec<f64>> = Vec::with_capacity(path.len());
        let mut dirs: Vec<Vec<f64>> = Vec::with_capacity(path.len());
        let mut lens: Vec<f64> = Vec::with_capacity(path.len());
        let mut v = vec![0.0; nv];
        for q in path {
            if let Some(prev) = pts.last() {
                robot
                    .difference(prev, q, &mut v)
                    .map_err(ConstraintError::from)?;
                let len = v.iter().map(|x| x * x).sum::<f64>().sqrt();
                if len <= 1e-12 {
                    continue;
                }
                dirs.push(v.iter().map(|x| x / len).collect());
                lens.push(len);
            }
            pts.push(q.clone());
        }
        if pts.len() == 1 {
            // Start and goal coincide: no motion.
            return Ok(TimedPolyline {
                path: pts,
                dirs,
                pieces: Vec::new(),
            });
        }
        let cos_corner = corner_angle.cos();
        let mut bounds = vec![0];
        for i in 1..dirs.len() {
            let c: f64 = dirs[i - 1].iter().zip(&dirs[i]).map(|(a, b)| a * b).sum();
            if c < cos_corner {
                bounds.push(i);
            }
        }
        bounds.push(dirs.len());
        let (vmax, amax) = robot_limits(robot);
        let mut pieces = Vec::with_capacity(bounds.len() - 1);
        for w in bounds.windows(2) {
            let (first, last) = (w[0], w[1]);
            let mut cum = vec![0.0];
            for len in &lens[first..last] {
                cum.push(cum[cum.len() - 1] + len);
            }
            // Grid: every point and every segment midpoint. At a segment midpoint the
            // tangent is the segment's direction and q'' = 0; at an interior point the
            // turn between its two segments is spread over the half segments around it
            // (q'' = (d_next - d_prev) / mean length) and each tangent coordinate takes the
            // larger magnitude of its two neighbours, so the velocity bound holds on both.
            let mut s = Vec::new();
            let mut dq = Vec::new();
            let mut ddq = Vec::new();
            for k in first..=last {
                let local = k - first;
                if k > first {
                    let seg = k - 1;
                    s.push(0.5 * (cum[local - 1] + cum[local]));
                    dq.push(dirs[seg].clone());
                    ddq.push(vec![0.0; nv]);
                }
                s.push(cum[local]);
                if k == first {
                    dq.push(dirs[k].clone());
                    ddq.push(vec![0.0; nv]);
                } else if k == last {
                    dq.push(dirs[k - 1].clone());
                    ddq.push(vec![0.0; nv]);
                } else {
                    let (p, n) = (&dirs[k - 1], &dirs[k]);
                    let h = 0.5 * (lens[k - 1] + lens[k]);
                    dq.push(
                        p.iter()
                            .zip(n)
                            .map(|(a, b)| {
                                let m = a.abs().max(b.abs());
                                if a + b < 0.0 {
                                    -m
                                } else {
                                    m
                                }
                            })
                            .collect(),
                    );
                    ddq.push(p.iter().zip(n).map(|(a, b)| (b - a) / h).collect());
                }
            }
            let profile = parameterize_with(
                &PathSamples { s, dq, ddq },
                &vmax,
                &amax,
                0.0,
                0.0,
                Discretization::Interpolation,
            )?;
            pieces.push(Piece {
                first,
                last,
                cum,
                profile,
            });
        }
        Ok(TimedPolyline {
            path: pts,
            dirs,
            pieces,
        })
    }

    /// Samples every `dt` seconds. Each piece is slowed (time scaled by `n dt / T >= 1`, which
    /// scales velocities by its inverse and accelerations by its inverse square) to the
    /// smallest whole number `n` of steps, so corners fall on samples.
    fn resample(&self, robot: &Robot, dt: f64) -> Result<Vec<TimedSample>, MotionError> {
        let nv = robot.nv();
        let mut out = Vec::new();
        let mut step = 0usize;
        let mut q = vec![0.0; robot.nq()];
        if self.pieces.is_empty() {
            if let Some(p) = self.path.first() {
                out.push(TimedSample {
                    t: 0.0,
                    q: p.clone(),
                    qdot: vec![0.0; nv],
                });
            }
            return Ok(out);
        }
        for (pi, piece) in self.pieces.iter().enumerate() {
            let duration = piece.profile.duration;
            let n = ((duration / dt) - 1e-9).ceil().max(1.0) as usize;
            let scale = n as f64 * dt / duration;
            let end = if pi + 1 == self.pieces.len() {
                n + 1
            } else {
                n
            };
            for j in 0..end {
                let (s, sd, _) = piece.profile.at(j as f64 * dt / scale);
                let sd = sd / scale;
                // Segment containing s.
                let local = piece
                    .cum
                    .partition_point(|&c| c <= s)
                    .clamp(1, piece.cum.len() - 1)
                    - 1;
                let seg = piece.first + local;
                let len = piece.cum[local + 1] - piece.cum[local];
                let frac = ((s - piece.cum[local]) / len).clamp(0.0, 1.0);
                if j + 1 == end && pi + 1 == self.pieces.len() {
                    q.clone_from(&self.path[piece.last]);
                } else {
                    robot
                        .interpolate(&self.path[seg], &self.path[seg + 1], frac, &mut q)
                        .map_err(ConstraintError::from)?;
                }
                out.push(TimedSample {
                    t: step as f64 * dt,
                    q: q.clone(),
                    qdot: self.dirs[seg].iter().map(|d| d * sd).collect(),
                });
                step += 1;
            }
        }
        Ok(out)
    }
}

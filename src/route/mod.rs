//! Multi-contact routes: which hold each effector takes next, where along a bar to grip it,
//! a switch pose for every grab and release, the legs in between, timed and verified.
//!
//! - [`graph`]: the stance graph (stances, switches, reach pruning);
//! - [`switch`]: switch poses (two stances at once) and why a switch failed;
//! - [`search`]: the search with feedback over the stance graph;
//! - `leg`: legs inside one stance (RRT-Connect on the stance's manifold);
//! - [`explain`]: why no route was found;
//! - [`feasibility`]: switch feasibility over a whole scene.
//!
//! [`plan_route`] ties them together and returns a [`Route`] only after the verifier passed
//! every leg and every switch pose. See `docs/routes.md`.

pub mod explain;
pub mod feasibility;
pub mod graph;
mod leg;
mod region;
pub mod search;
pub mod switch;

use std::collections::BTreeMap;
use std::sync::Arc;
use std::time::{Duration, Instant};

use serde::Serialize;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel};
use crate::constraint::{Constraint, ConstraintError};
use crate::model::Robot;
use crate::planner::PlanError;
use crate::projection::ProjectionSettings;
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Scene, SceneError, Stance};
use crate::settings::{positive, share, SettingsError};
use crate::timing::{time_polyline, TimingError};
use crate::verify::{verify_path, VerifyError, VerifySettings};
use crate::walk::WalkSettings;

pub use explain::Explanation;
pub use search::SearchStats;
pub use switch::{SwitchFailure, SwitchPose};

/// Version of the route JSON layout.
pub const FORMAT_VERSION: u32 = 1;

/// How to plan a route. Build with `default()` and change fields, then the planner checks them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RouteSettings {
    /// Raise a switch's weight after each failure (the search's feedback). Off: the same
    /// candidate sequence is retried until its failing switch is dropped.
    pub feedback: bool,
    /// Factor a failed switch's weight is multiplied by (> 1).
    pub failure_factor: f64,
    /// Attempts of one switch before it is dropped.
    pub attempts_per_switch: usize,
    /// Projection seeds per switch attempt: the current configuration and perturbations of it.
    pub switch_seeds: usize,
    /// Largest perturbation of a seed coordinate (radians or metres).
    pub seed_spread: f64,
    /// Grip positions scanned along a bar before the refinement.
    pub grip_scan: usize,
    /// Smallest clearance a switch pose must keep (metres).
    pub min_clearance: f64,
    /// Random samples of the leg planner per leg.
    pub leg_samples: usize,
    /// Longest extension of the leg planner (joint-space distance).
    pub leg_step: f64,
    /// Translational sampling box of a leg: the hull of its two ends widened by this much
    /// (metres; see [`crate::cspace::SamplingBox`]).
    pub leg_box_margin: f64,
    /// Share of a leg's samples drawn near the straight segment between its ends, and the
    /// largest per-coordinate offset of those samples (see [`crate::cspace::SegmentSampling`]).
    pub leg_segment_share: f64,
    pub leg_sample_spread: f64,
    /// Wall-clock limit of one leg (a failing leg is a failed switch attempt; results that
    /// hit it depend on the machine's speed).
    pub leg_time_limit: Duration,
    /// Largest residual allowed *between* waypoints of a leg, where a controller moves along
    /// straight joint-space segments (metres and radians). The waypoints themselves and every
    /// switch pose hold the scenario's tolerance.
    pub path_tolerance: f64,
    /// Grid intervals per segment for the time parameterization (>= 2).
    pub timing_grid: usize,
}

impl Default for RouteSettings {
    fn default() -> Self {
        RouteSettings {
            feedback: true,
            failure_factor: 4.0,
            attempts_per_switch: 3,
            switch_seeds: 3,
            seed_spread: 0.4,
            grip_scan: 5,
            min_clearance: 0.005,
            leg_samples: 400,
            leg_step: 0.5,
            leg_box_margin: 0.4,
            leg_segment_share: 0.8,
            leg_sample_spread: 0.6,
            leg_time_limit: Duration::from_secs(6),
            path_tolerance: 1e-3,
            timing_grid: 4,
        }
    }
}

impl RouteSettings {
    /// Check every field.
    pub fn validate(&self) -> Result<(), SettingsError> {
        positive("failure_factor", self.failure_factor - 1.0).map_err(|_| {
            SettingsError::OutOfRange {
                name: "failure_factor",
                expected: "greater than 1 and finite",
                got: self.failure_factor,
            }
        })?;
        for (name, v, min) in [
            ("attempts_per_switch", self.attempts_per_switch, 1),
            ("switch_seeds", self.switch_seeds, 1),
            ("grip_scan", self.grip_scan, 1),
            ("leg_samples", self.leg_samples, 1),
            ("timing_grid", self.timing_grid, 2),
        ] {
            if v < min {
                return Err(SettingsError::OutOfRange {
                    name,
                    expected: if min == 1 { "at least 1" } else { "at least 2" },
                    got: v as f64,
                });
            }
        }
        if !(self.seed_spread.is_finite() && self.seed_spread >= 0.0) {
            return Err(SettingsError::OutOfRange {
                name: "seed_spread",
                expected: "finite and not negative",
                got: self.seed_spread,
            });
        }
        if !(self.min_clearance.is_finite() && self.min_clearance >= 0.0) {
            return Err(SettingsError::OutOfRange {
                name: "min_clearance",
                expected: "finite and not negative",
                got: self.min_clearance,
            });
        }
        positive("leg_step", self.leg_step)?;
        positive("leg_box_margin", self.leg_box_margin)?;
        positive("leg_sample_spread", self.leg_sample_spread)?;
        share("leg_segment_share", self.leg_segment_share)?;
        positive("path_tolerance", self.path_tolerance)?;
        Ok(())
    }
}

/// Why a route could not be planned.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum RouteError {
    #[error(transparent)]
    Settings(#[from] SettingsError),
    #[error(transparent)]
    Scene(#[from] SceneError),
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error(transparent)]
    Plan(#[from] PlanError),
    #[error(transparent)]
    Timing(#[from] TimingError),
    #[error(transparent)]
    Verify(#[from] VerifyError),
    #[error("goal kind `{kind}` is not supported for multi-stance routes: {why}")]
    UnsupportedGoal {
        kind: &'static str,
        why: &'static str,
    },
    #[error("goal: {0}")]
    BadGoal(String),
    #[error("start stance: {0}")]
    BadStart(String),
    #[error("no route found: {0}")]
    NoRoute(Box<Explanation>),
    #[error("the route failed verification ({what}): {defects}")]
    VerificationFailed { what: String, defects: String },
}

/// Everything the route modules share while planning one scenario.
pub(crate) struct Context<'a> {
    pub robot: &'a Robot,
    pub scene: &'a Scene,
    pub constant: &'a [Arc<dyn Constraint>],
    pub start: &'a Start,
    pub collision: Option<&'a CollisionModel>,
    pub settings: &'a RouteSettings,
    pub limits: &'a ScenarioLimits,
    pub projection: ProjectionSettings,
    pub walk: WalkSettings,
    pub deadline: Instant,
}

impl Context<'_> {
    /// Verifier spacing: a tenth of the stride.
    pub fn verify_resolution(&self) -> f64 {
        self.limits.stride / 10.0
    }
    /// Time left before the deadline.
    pub fn remaining(&self) -> Duration {
        self.deadline.saturating_duration_since(Instant::now())
    }
}

/// A stance as effector -> hold name (for output).
pub type NamedStance = BTreeMap<String, String>;

fn named(stance: &Stance, scene: &Scene) -> NamedStance {
    stance
        .grips
        .iter()
        .map(|(e, &h)| {
            let name = scene.holds.get(h).map_or("?", |h| h.name.as_str());
            (e.clone(), name.to_string())
        })
        .collect()
}

/// A motion inside one stance.
#[derive(Clone, Debug, Serialize)]
pub struct Leg {
    pub stance: NamedStance,
    /// The stance as hold indices (not written).
    #[serde(skip)]
    pub stance_index: Stance,
    /// Waypoints; straight joint-space segments between them.
    pub path: Vec<Vec<f64>>,
    /// Route time at each waypoint (the motion rests at every waypoint and at both ends).
    pub times: Vec<f64>,
    pub duration: f64,
    /// Largest constraint residual the verifier saw along the leg (dense).
    pub max_residual: f64,
    /// Smallest clearance over the waypoints (metres).
    pub min_clearance: f64,
}

/// A grab or release between two legs.
#[derive(Clone, Debug, Serialize)]
pub struct Switch {
    /// `grab` or `release`.
    pub action: &'static str,
    pub effector: String,
    pub hold: String,
    pub from: NamedStance,
    pub to: NamedStance,
    #[serde(skip)]
    pub from_index: Stance,
    #[serde(skip)]
    pub to_index: Stance,
    pub pose: Vec<f64>,
    /// Metres from the bar's start, for a grab of a bar.
    pub grip_position: Option<f64>,
    /// Residual of the stance before and after the switch at the pose.
    pub residual_from: f64,
    pub residual_to: f64,
    pub reach_margin: f64,
    pub clearance: f64,
    /// Route time of the switch.
    pub time: f64,
}

/// What planning cost.
#[derive(Clone, Debug, Serialize)]
pub struct RouteStats {
    pub search: SearchStats,
    /// Stances reached by the search.
    pub stances_reached: usize,
    /// Wall-clock planning time (not written: it differs between runs).
    #[serde(skip)]
    pub elapsed: Duration,
}

/// A verified, timed route. Serialized with a stable field order.
#[derive(Clone, Debug, Serialize)]
pub struct Route {
    pub format_version: u32,
    pub clamber_version: &'static str,
    pub scenario: String,
    pub robot: String,
    pub seed: u64,
    /// Residual tolerance of waypoints and switch poses.
    pub tolerance: f64,
    /// Residual tolerance between waypoints.
    pub path_tolerance: f64,
    pub stride: f64,
    /// Spacing at which the verifier checked every leg.
    pub verify_resolution: f64,
    pub min_clearance: f64,
    pub feedback: bool,
    pub duration: f64,
    pub legs: Vec<Leg>,
    pub switches: Vec<Switch>,
    pub stats: RouteStats,
}

impl Route {
    /// The route as JSON (deterministic: same seed, same bytes).
    pub fn to_json(&self) -> Result<String, serde_json::Error> {
        serde_json::to_string_pretty(self)
    }
}

fn check_goal(scenario: &Scenario) -> Result<(), RouteError> {
    let robot = &scenario.robot;
    let holds = scenario.scene.holds.len();
    let check_grip = |e: &str, h: usize| -> Result<(), RouteError> {
        if robot.effector(e).is_none() {
            return Err(RouteError::BadGoal(format!("no effector named `{e}`")));
        }
        if h >= holds {
            return Err(RouteError::BadGoal(format!(
                "hold index {h}, the scene has {holds} holds"
            )));
        }
        Ok(())
    };
    match &scenario.goal {
        Goal::Stance(s) => s.grips.iter().try_for_each(|(e, &h)| check_grip(e, h)),
        Goal::Grip { effector, hold } => check_grip(effector, *hold),
        Goal::Configuration(_) => Err(RouteError::UnsupportedGoal {
            kind: "configuration",
            why: "a configuration goal belongs to single-stance motions; give a stance or a grip",
        }),
        Goal::BodyInRegion { link, min, max } => {
            region::RegionGoal::new(robot, &scenario.scene, link, *min, *max).map(|_| ())
        }
    }
}

/// Build the collision model of a scenario (`None` when nothing can collide).
pub fn collision_model(scenario: &Scenario) -> Result<Option<CollisionModel>, RouteError> {
    let m = CollisionModel::new(&scenario.robot, &scenario.scene.obstacles)?;
    Ok(if m.self_pair_count() + m.obstacle_pair_count() == 0 {
        None
    } else {
        Some(m)
    })
}

/// Projection and walk settings derived from the scenario's limits: projection converges
/// to a thousandth of the tolerance (so the verifier's check at the tolerance has room).
pub fn manifold_settings(
    limits: &ScenarioLimits,
) -> Result<(ProjectionSettings, WalkSettings), RouteError> {
    positive("tolerance", limits.tolerance)?;
    positive("stride", limits.stride)?;
    let projection = ProjectionSettings::new((limits.tolerance * 1e-3).max(1e-13), 50, 0.5)?;
    let walk = WalkSettings::new(limits.stride, 1.0, 10_000, projection)?;
    Ok((projection, walk))
}

fn check_start(scenario: &Scenario, ctx: &Context<'_>) -> Result<(), RouteError> {
    let robot = ctx.robot;
    robot
        .check_configuration(&scenario.start.q)
        .map_err(|e| RouteError::BadStart(e.to_string()))?;
    for (e, &h) in &scenario.start.stance.grips {
        if robot.effector(e).is_none() {
            return Err(RouteError::BadStart(format!("no effector named `{e}`")));
        }
        if h >= ctx.scene.holds.len() {
            return Err(RouteError::BadStart(format!("hold index {h} out of range")));
        }
    }
    let stack = scenario
        .start
        .stance
        .constraints(robot, ctx.scene, ctx.constant)?;
    let mut buf = stack.buffer(robot);
    let r = stack.evaluate(robot, &scenario.start.q, &mut buf, false)?;
    if r > ctx.limits.tolerance {
        return Err(RouteError::BadStart(format!(
            "the start configuration is {r:.3e} off its stance (tolerance {:.1e})",
            ctx.limits.tolerance
        )));
    }
    Ok(())
}

/// Plan a route for `scenario`: search the stance graph with feedback, plan every switch
/// pose and leg, time each leg, verify everything, and return the route; or
/// [`RouteError::NoRoute`] with an explanation.
pub fn plan_route(scenario: &Scenario, settings: &RouteSettings) -> Result<Route, RouteError> {
    let t0 = Instant::now();
    check_goal(scenario)?;
    with_context(scenario, settings, |ctx| {
        let search = search::Search::new(ctx);
        let graph = search.graph.clone();
        let goal = scenario.goal.clone();
        let region = match &goal {
            Goal::BodyInRegion { link, min, max } => Some(region::RegionGoal::new(
                &scenario.robot,
                &scenario.scene,
                link,
                *min,
                *max,
            )?),
            _ => None,
        };
        let is_goal = |s: &Stance| match &region {
            Some(r) => r.candidate(s),
            None => graph.is_goal(s, &goal).unwrap_or(false),
        };
        let progress = |s: &Stance| match &region {
            Some(r) => r.distance(s),
            None => graph.distance_to_goal(s, &goal),
        };
        let outcome = search.run(&is_goal, &progress, region.as_ref())?;
        let Some(goal_stance) = outcome.goal.clone() else {
            return Err(RouteError::NoRoute(Box::new(explain::explain(
                scenario, &graph, &outcome,
            ))));
        };
        // Chain of arrivals from the start to the goal.
        let mut arrivals = Vec::new();
        let mut s = goal_stance.clone();
        while let Some(a) = outcome.reached.get(&s).and_then(|r| r.arrival.as_ref()) {
            arrivals.push(a.clone());
            s = a.edge.from.clone();
        }
        arrivals.reverse();
        let final_leg = match &outcome.final_leg {
            Some(path) => path.clone(),
            None => vec![outcome
                .reached
                .get(&goal_stance)
                .map(|r| r.q.clone())
                .unwrap_or_else(|| scenario.start.q.clone())],
        };
        let mut route = assemble(ctx, scenario, &arrivals, &goal_stance, final_leg)?;
        if let Some(r) = &region {
            check_in_region(ctx, r, &route)?;
        }
        route.stats = RouteStats {
            search: outcome.stats,
            stances_reached: outcome.reached.len(),
            elapsed: t0.elapsed(),
        };
        Ok(route)
    })
}

/// The route's last configuration must hold the region goal's link inside its box.
fn check_in_region(
    ctx: &Context<'_>,
    region: &region::RegionGoal,
    route: &Route,
) -> Result<(), RouteError> {
    let Some(q) = route.legs.last().and_then(|l| l.path.last()) else {
        return Err(RouteError::VerificationFailed {
            what: "the goal region".into(),
            defects: "the route has no configuration".into(),
        });
    };
    let mut poses = vec![crate::math::Pose::identity(); ctx.robot.links().len()];
    crate::kinematics::forward_kinematics(ctx.robot, q, &mut poses)
        .map_err(ConstraintError::from)?;
    let p = nalgebra::Point3::from(poses[region.link].translation.vector);
    if region.contains(&p) {
        Ok(())
    } else {
        Err(RouteError::VerificationFailed {
            what: "the goal region".into(),
            defects: format!(
                "link `{}` ends at ({:.4}, {:.4}, {:.4}), outside the region",
                region.link_name, p.x, p.y, p.z
            ),
        })
    }
}

/// Check the settings and the scenario, build what planning shares, and run `f` with it.
pub(crate) fn with_context<T>(
    scenario: &Scenario,
    settings: &RouteSettings,
    f: impl FnOnce(&Context<'_>) -> Result<T, RouteError>,
) -> Result<T, RouteError> {
    let t0 = Instant::now();
    settings.validate()?;
    scenario.scene.check()?;
    let (projection, walk) = manifold_settings(&scenario.limits)?;
    let collision = collision_model(scenario)?;
    let ctx = Context {
        robot: &scenario.robot,
        scene: &scenario.scene,
        constant: &scenario.constant,
        start: &scenario.start,
        collision: collision.as_ref(),
        settings,
        limits: &scenario.limits,
        projection,
        walk,
        deadline: t0 + scenario.limits.time_limit,
    };
    check_start(scenario, &ctx)?;
    f(&ctx)
}

/// Time, verify and package the legs and switches.
fn assemble(
    ctx: &Context<'_>,
    scenario: &Scenario,
    arrivals: &[search::Arrival],
    goal: &Stance,
    final_leg: Vec<Vec<f64>>,
) -> Result<Route, RouteError> {
    let robot = ctx.robot;
    let finder = switch::SwitchFinder::new(ctx);
    let vs = VerifySettings::new(
        ctx.verify_resolution(),
        ctx.settings.path_tolerance,
        ctx.limits.stride * (1.0 + 1e-9),
    )?;
    let pose_vs = VerifySettings::new(ctx.verify_resolution(), ctx.limits.tolerance, 1.0)?;
    let mut legs = Vec::new();
    let mut switches = Vec::new();
    let mut time = 0.0;
    let mut pieces: Vec<(Stance, Vec<Vec<f64>>)> = arrivals
        .iter()
        .map(|a| (a.edge.from.clone(), a.leg.clone()))
        .collect();
    pieces.push((goal.clone(), final_leg));
    for (k, (stance, path)) in pieces.into_iter().enumerate() {
        let stack = stance.constraints(robot, ctx.scene, ctx.constant)?;
        let report = verify_path(robot, &stack, ctx.collision, &path, &vs)?;
        if !report.passed() {
            return Err(RouteError::VerificationFailed {
                what: format!("leg {k} in stance {}", stance.describe(ctx.scene)),
                defects: report
                    .defects
                    .iter()
                    .map(|d| d.to_string())
                    .collect::<Vec<_>>()
                    .join("; "),
            });
        }
        // Waypoints hold the scenario's tolerance.
        let mut buf = stack.buffer(robot);
        let mut min_clearance = f64::INFINITY;
        for (i, q) in path.iter().enumerate() {
            let r = stack.evaluate(robot, q, &mut buf, false)?;
            if r > ctx.limits.tolerance {
                return Err(RouteError::VerificationFailed {
                    what: format!("leg {k} waypoint {i}"),
                    defects: format!(
                        "residual {r:.3e} above tolerance {:.1e}",
                        ctx.limits.tolerance
                    ),
                });
            }
            min_clearance = min_clearance.min(finder.clearance(q)?.0);
        }
        let (times, duration) = if path.len() >= 2 {
            let timed = time_polyline(robot, &path, ctx.settings.timing_grid)?;
            (
                timed.waypoint_times().iter().map(|t| t + time).collect(),
                timed.duration(),
            )
        } else {
            (vec![time], 0.0)
        };
        time += duration;
        legs.push(Leg {
            stance: named(&stance, ctx.scene),
            stance_index: stance.clone(),
            path,
            times,
            duration,
            max_residual: report.max_residual,
            min_clearance,
        });
        if let Some(a) = arrivals.get(k) {
            // The switch pose, checked against both stances.
            let mut residuals = [0.0; 2];
            for (slot, st) in [&a.edge.from, &a.edge.to].into_iter().enumerate() {
                let stack = st.constraints(robot, ctx.scene, ctx.constant)?;
                let rep = verify_path(
                    robot,
                    &stack,
                    ctx.collision,
                    std::slice::from_ref(&a.pose.q),
                    &pose_vs,
                )?;
                if !rep.passed() {
                    return Err(RouteError::VerificationFailed {
                        what: format!("switch {k} pose against {}", st.describe(ctx.scene)),
                        defects: rep
                            .defects
                            .iter()
                            .map(|d| d.to_string())
                            .collect::<Vec<_>>()
                            .join("; "),
                    });
                }
                residuals[slot] = rep.max_residual;
            }
            switches.push(Switch {
                action: if a.edge.grab { "grab" } else { "release" },
                effector: a.edge.effector.clone(),
                hold: ctx
                    .scene
                    .holds
                    .get(a.edge.hold)
                    .map_or_else(|| "?".into(), |h| h.name.clone()),
                from: named(&a.edge.from, ctx.scene),
                to: named(&a.edge.to, ctx.scene),
                from_index: a.edge.from.clone(),
                to_index: a.edge.to.clone(),
                pose: a.pose.q.clone(),
                grip_position: a.pose.grip_position,
                residual_from: residuals[0],
                residual_to: residuals[1],
                reach_margin: a.pose.reach_margin,
                clearance: a.pose.clearance,
                time,
            });
        }
    }
    Ok(Route {
        format_version: FORMAT_VERSION,
        clamber_version: env!("CARGO_PKG_VERSION"),
        scenario: scenario.name.clone(),
        robot: robot.name().to_string(),
        seed: ctx.limits.seed,
        tolerance: ctx.limits.tolerance,
        path_tolerance: ctx.settings.path_tolerance,
        stride: ctx.limits.stride,
        verify_resolution: ctx.verify_resolution(),
        min_clearance: ctx.settings.min_clearance,
        feedback: ctx.settings.feedback,
        duration: time,
        legs,
        switches,
        stats: RouteStats {
            search: SearchStats::default(),
            stances_reached: 0,
            elapsed: Duration::ZERO,
        },
    })
}

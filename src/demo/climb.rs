//! Demo scenarios `climb`: the two-armed climber (`robots/brachia.toml`, floating torso and
//! two seven-joint arms, effectors `left_gripper` and `right_gripper`) inside an invented
//! orbital module, the "Tessel module": a box-shaped hull with a deck, two side walls, a
//! ceiling and two end bulkheads. Layouts and numbers: `docs/scenarios-climb.md`.
//!
//! World frame: x runs along the module (direction of travel), y across it, z from the deck
//! to the ceiling. The deck's surface is the plane z = 0.
//!
//! Every distance that decides reachability is computed from the robot's link geometry
//! ([`crate::reach::effector_span`]), never written down: bar spacing stays well inside it,
//! the unreachable bar and the gap are placed at the span plus a stated margin.

use std::f64::consts::FRAC_PI_2;
use std::path::Path;
use std::sync::Arc;

use nalgebra::{Point3, Rotation3, UnitQuaternion, Vector3};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch, Obstacle};
use crate::constraint::ConstraintError;
use crate::kinematics::forward_kinematics;
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::{Geometry, JointKind, Robot, Shape};
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::reach::{effector_span, hold_distance, ReachError};
use crate::robot_file::{toml_format, RobotFileError};
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, HoldKind, Scene, SceneError, Stance};

/// The climber's robot file, bundled so the demos need no files at run time.
pub const ROBOT_TOML: &str = include_str!("../../robots/brachia.toml");
/// The climber's effectors.
pub const LEFT: &str = "left_gripper";
pub const RIGHT: &str = "right_gripper";

/// Height of every bar and handhold above the surface it is mounted on (metres).
pub const STANDOFF: f64 = 0.1;
/// Length of a rung (metres).
pub const BAR_LENGTH: f64 = 0.6;
/// Distance between consecutive rungs along the route (metres).
pub const BAR_SPACING: f64 = 0.45;
/// Interior width (y) and height (z) of the module (metres).
pub const MODULE_WIDTH: f64 = 2.4;
pub const MODULE_HEIGHT: f64 = 2.4;
/// Thickness of the hull boxes (metres).
pub const HULL: f64 = 0.1;
/// The unreachable bar is at least this much farther from every other bar than the span
/// bound (metres).
pub const LURE_MARGIN: f64 = 0.25;
/// The gap's width exceeds the span bound by this much (metres).
pub const GAP_MARGIN: f64 = 0.35;
/// Fewest bars in a corridor: two to start on, two to finish on.
pub const MIN_CORRIDOR_BARS: usize = 4;

/// Name of the corridor's unreachable bar.
pub const LURE: &str = "lure_rail";
/// Names of the two bars on either side of the gap in [`gap`].
pub const GAP_NEAR: &str = "ledge_near";
pub const GAP_FAR: &str = "ledge_far";

/// Tolerance the bundled starts are projected to (metres and radians); far inside
/// [`ScenarioLimits::default`]'s tolerance.
pub const START_TOLERANCE: f64 = 1e-9;
/// Least reach margin (distance to the nearest joint limit, radians or metres) of a pose
/// returned by [`find_pose`].
pub const POSE_MIN_MARGIN: f64 = 0.05;
/// Least clearance (metres) of a pose returned by [`find_pose`].
pub const POSE_MIN_CLEARANCE: f64 = 0.01;
/// Seed of the start searches (the scenario's own seed is separate).
const START_SEED: u64 = 0x7e55e1;
/// Random starting guesses tried per pose search.
const POSE_ATTEMPTS: usize = 400;

/// A demo could not be built.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ClimbError {
    #[error("bundled climber robot: {0}")]
    Robot(#[from] RobotFileError),
    #[error(transparent)]
    Scene(#[from] SceneError),
    #[error(transparent)]
    Reach(#[from] ReachError),
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error("a corridor needs at least {min} bars, got {got}")]
    TooFewBars { got: usize, min: usize },
    #[error(
        "scenario `{scenario}`: no collision-free configuration within the limits holds stance \
         `{stance}` after {attempts} attempts"
    )]
    NoPose {
        scenario: String,
        stance: String,
        attempts: usize,
    },
    #[error("scenario `{scenario}`: layout check failed: {what}")]
    Layout { scenario: String, what: String },
}

/// The climber robot, built from the bundled robot file.
pub fn climber() -> Result<Robot, ClimbError> {
    Ok(toml_format::load_str(
        ROBOT_TOML,
        Path::new("robots/brachia.toml"),
    )?)
}

/// The effector that holds bar `k` of a hand-over-hand route: left on even bars, right on
/// odd ones (the hands alternate, each hand skipping one bar per move).
pub fn hand_for_bar(k: usize) -> &'static str {
    if k % 2 == 0 {
        LEFT
    } else {
        RIGHT
    }
}

/// The two-grip stance with hand-over-hand parity on holds `a` and `b` (bar indices `ka`,
/// `kb` of the route, which decide the hand; `a` and `b` index the scene's holds).
pub fn pair_stance(ka: usize, a: usize, kb: usize, b: usize) -> Stance {
    Stance::new()
        .with(hand_for_bar(ka), a)
        .with(hand_for_bar(kb), b)
}

fn cuboid(name: &str, min: [f64; 3], max: [f64; 3]) -> Obstacle {
    let c = [
        0.5 * (min[0] + max[0]),
        0.5 * (min[1] + max[1]),
        0.5 * (min[2] + max[2]),
    ];
    Obstacle {
        name: name.to_string(),
        shape: Shape {
            origin: pose_from_xyz_rpy(c, [0.0; 3]),
            geometry: Geometry::Cuboid {
                size: Vector3::new(max[0] - min[0], max[1] - min[1], max[2] - min[2]),
            },
            source: None,
        },
    }
}

/// The module's hull between `x0` and `x1`: deck, ceiling, port and starboard walls
/// (y = -W/2 and y = +W/2) and the two end bulkheads.
fn hull(x0: f64, x1: f64) -> Vec<Obstacle> {
    let (w, h, t) = (0.5 * MODULE_WIDTH, MODULE_HEIGHT, HULL);
    vec![
        cuboid("deck", [x0 - t, -w - t, -t], [x1 + t, w + t, 0.0]),
        cuboid("ceiling", [x0 - t, -w - t, h], [x1 + t, w + t, h + t]),
        cuboid("port_wall", [x0 - t, -w - t, 0.0], [x1 + t, -w, h]),
        cuboid("starboard_wall", [x0 - t, w, 0.0], [x1 + t, w + t, h]),
        cuboid("aft_bulkhead", [x0 - t, -w, 0.0], [x0, w, h]),
        cuboid("fore_bulkhead", [x1, -w, 0.0], [x1 + t, w, h]),
    ]
}

fn bar(name: String, start: Point3<f64>, end: Point3<f64>, approach: Vector3<f64>) -> Hold {
    Hold {
        name,
        kind: HoldKind::Bar {
            start,
            end,
            approach,
            turn_free: false,
        },
    }
}

/// A rung on the deck at `x`, across the module (along +y), centred at `y`.
fn deck_rung(name: String, x: f64, y: f64) -> Hold {
    let h = 0.5 * BAR_LENGTH;
    bar(
        name,
        Point3::new(x, y - h, STANDOFF),
        Point3::new(x, y + h, STANDOFF),
        -Vector3::z(),
    )
}

/// A rung on the starboard wall at `x`, upright (along +z), centred at height `z`.
fn wall_rung(name: String, x: f64, z: f64) -> Hold {
    let h = 0.5 * BAR_LENGTH;
    let y = 0.5 * MODULE_WIDTH - STANDOFF;
    bar(
        name,
        Point3::new(x, y, z - h),
        Point3::new(x, y, z + h),
        Vector3::y(),
    )
}

/// Centre line of the deck rungs (y): near the starboard wall, so the route can turn onto it.
const DECK_LINE_Y: f64 = 0.5 * MODULE_WIDTH - 0.55;
/// Centre height of the wall rungs (z).
const WALL_LINE_Z: f64 = 0.55;

/// The hull span of the climber: the analytic upper bound on the distance between its two
/// grip frames.
pub fn climber_span(robot: &Robot) -> Result<f64, ClimbError> {
    Ok(effector_span(robot, LEFT, RIGHT)?)
}

/// Smallest distance from hold `i` to every other hold of the scene (infinite if alone).
pub fn nearest_other_hold(scene: &Scene, i: usize) -> f64 {
    let Some(h) = scene.holds.get(i) else {
        return f64::NAN;
    };
    scene
        .holds
        .iter()
        .enumerate()
        .filter(|(k, _)| *k != i)
        .filter_map(|(_, o)| hold_distance(h, o))
        .fold(f64::INFINITY, f64::min)
}

/// **corridor**: the climber crosses the module hand over hand along `n_bars` rungs. The
/// first half (rounded up) lie across the deck one [`BAR_SPACING`] apart; the rest stand
/// upright on the starboard wall, continuing at the same spacing: the route turns the corner
/// from deck to wall partway. A rail on the ceiling near the port wall ([`LURE`]) runs along
/// the route but is farther than the climber's span from every other bar (by at least
/// [`LURE_MARGIN`]). A stowage locker stands on the deck at the port side.
///
/// Holds `0..n_bars` are the route's rungs in order (`rung_00`, ...); the lure is hold
/// `n_bars`. Start: left gripper on rung 0, right on rung 1. Goal: the stance on the last two
/// rungs with the hands alternating (left on even rungs, right on odd; see [`hand_for_bar`]).
pub fn corridor(n_bars: usize) -> Result<Scenario, ClimbError> {
    if n_bars < MIN_CORRIDOR_BARS {
        return Err(ClimbError::TooFewBars {
            got: n_bars,
            min: MIN_CORRIDOR_BARS,
        });
    }
    let name = format!("corridor_{n_bars}");
    let robot = Arc::new(climber()?);
    let span = climber_span(&robot)?;
    let n_deck = n_bars.div_ceil(2);
    let mut holds = Vec::with_capacity(n_bars + 1);
    for k in 0..n_bars {
        let x = k as f64 * BAR_SPACING;
        let name = format!("rung_{k:02}");
        holds.push(if k < n_deck {
            deck_rung(name, x, DECK_LINE_Y)
        } else {
            wall_rung(name, x, WALL_LINE_Z)
        });
    }
    let x_end = (n_bars - 1) as f64 * BAR_SPACING;
    // The lure: along the route, on the ceiling by the port wall.
    let lure_y = -0.5 * MODULE_WIDTH + STANDOFF;
    let lure_z = MODULE_HEIGHT - STANDOFF;
    holds.push(bar(
        LURE.to_string(),
        Point3::new(0.25 * x_end, lure_y, lure_z),
        Point3::new(0.75 * x_end, lure_y, lure_z),
        Vector3::z(),
    ));
    let (x0, x1) = (-0.8, x_end + 0.8);
    let mut obstacles = hull(x0, x1);
    let w = 0.5 * MODULE_WIDTH;
    obstacles.push(cuboid(
        "stowage_locker",
        [0.3 * x_end, -w, 0.0],
        [0.3 * x_end + 0.6, -w + 0.5, 0.7],
    ));
    let scene = Scene {
        obstacles,
        holds,
        mechanisms: vec![],
    };
    scene.check()?;
    let lure_gap = nearest_other_hold(&scene, n_bars);
    if lure_gap < span + LURE_MARGIN {
        return Err(ClimbError::Layout {
            scenario: name,
            what: format!(
                "the lure is {lure_gap:.3} m from the nearest bar, not beyond span {span:.3} m + \
                 margin {LURE_MARGIN} m"
            ),
        });
    }
    let start_stance = pair_stance(0, 0, 1, 1);
    let goal = Goal::Stance(pair_stance(n_bars - 2, n_bars - 2, n_bars - 1, n_bars - 1));
    finish(name, robot, scene, start_stance, goal)
}

/// **point_wall**: a grid of point handholds on the starboard wall (3 rows by 6 columns, two
/// holds missing), a [`BAR_SPACING`] apart along the module and [`POINT_ROW_SPACING`] apart
/// in height. Each handhold lets the hand turn about its approach axis. Start: left gripper
/// on the top hold of column 0, right on the bottom hold of column 1. Goal: the left gripper
/// on the middle hold of the last column.
pub fn point_wall() -> Result<Scenario, ClimbError> {
    let name = "point_wall".to_string();
    let robot = Arc::new(climber()?);
    let y = 0.5 * MODULE_WIDTH - STANDOFF;
    let mut holds = Vec::new();
    for c in 0..POINT_COLUMNS {
        for r in 0..POINT_ROWS {
            if POINT_MISSING.contains(&(c, r)) {
                continue;
            }
            let x = c as f64 * BAR_SPACING;
            let z = POINT_ROW_Z0 + r as f64 * POINT_ROW_SPACING;
            holds.push(Hold {
                name: point_name(c, r),
                kind: HoldKind::Point {
                    // z axis (approach) towards the wall (+y), x along the module.
                    pose: pose_from_xyz_rpy([x, y, z], [-FRAC_PI_2, 0.0, 0.0]),
                    turn_free: true,
                },
            });
        }
    }
    let x_end = (POINT_COLUMNS - 1) as f64 * BAR_SPACING;
    let scene = Scene {
        obstacles: hull(-0.8, x_end + 0.8),
        holds,
        mechanisms: vec![],
    };
    scene.check()?;
    let (top0, _) = scene.hold(&point_name(0, POINT_ROWS - 1))?;
    let (bottom1, _) = scene.hold(&point_name(1, 0))?;
    let (goal, _) = scene.hold(&point_name(POINT_COLUMNS - 1, 1))?;
    let stance = Stance::new().with(LEFT, top0).with(RIGHT, bottom1);
    let goal = Goal::Grip {
        effector: LEFT.to_string(),
        hold: goal,
    };
    finish(name, robot, scene, stance, goal)
}

/// Columns and rows of [`point_wall`]'s grid, the height of its lowest row and the row
/// spacing (metres), and the grid cells (column, row) left empty.
pub const POINT_COLUMNS: usize = 6;
pub const POINT_ROWS: usize = 3;
pub const POINT_ROW_Z0: f64 = 0.45;
pub const POINT_ROW_SPACING: f64 = 0.4;
pub const POINT_MISSING: [(usize, usize); 2] = [(2, 1), (3, 2)];

/// Name of the handhold in column `c`, row `r` of [`point_wall`].
pub fn point_name(c: usize, r: usize) -> String {
    format!("knob_c{c}_r{r}")
}

/// **gap**: three deck rungs, a gap, two more rungs. The gap between [`GAP_NEAR`] (the last
/// rung before it) and [`GAP_FAR`] (the first after it) is the climber's span plus
/// [`GAP_MARGIN`]: no route exists. Start: left on rung 0, right on rung 1; goal: the stance
/// on the two rungs beyond the gap.
pub fn gap() -> Result<Scenario, ClimbError> {
    let name = "gap".to_string();
    let robot = Arc::new(climber()?);
    let span = climber_span(&robot)?;
    let width = span + GAP_MARGIN;
    let names = ["ledge_0", "ledge_1", GAP_NEAR, GAP_FAR, "ledge_4"];
    let mut x = 0.0;
    let mut holds = Vec::new();
    for (k, n) in names.iter().enumerate() {
        holds.push(deck_rung(n.to_string(), x, DECK_LINE_Y));
        x += if k == 2 { width } else { BAR_SPACING };
    }
    let x_end = x - BAR_SPACING;
    let scene = Scene {
        obstacles: hull(-0.8, x_end + 0.8),
        holds,
        mechanisms: vec![],
    };
    scene.check()?;
    let goal = Goal::Stance(pair_stance(3, 3, 4, 4));
    finish(name, robot, scene, pair_stance(0, 0, 1, 1), goal)
}

/// Why a switch in [`feasibility_scene`] is expected to fail, or that it should not.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Verdict {
    /// A configuration holding both holds at once exists (the tests find one by projection).
    Feasible,
    /// The holds are farther apart than the climber's span: `excess` metres beyond it.
    OutOfReach { excess: f64 },
    /// The hold lies inside obstacle `obstacle`, at least `depth` metres from its surface:
    /// any hand on it collides.
    InsideObstacle { obstacle: String, depth: f64 },
}

/// An expected outcome of the switch "holding `held` with one gripper, grab `target` with
/// the other" in [`feasibility_scene`] (hold names).
#[derive(Clone, Debug, PartialEq)]
pub struct SwitchExpectation {
    pub held: String,
    pub target: String,
    pub verdict: Verdict,
}

/// Names of [`feasibility_scene`]'s holds.
pub const DOCK_A: &str = "dock_a";
pub const DOCK_B: &str = "dock_b";
pub const DOCK_C: &str = "dock_c";
pub const FAR_RAIL: &str = "far_rail";
pub const STOWED_RAIL: &str = "stowed_rail";
/// Name of the locker that encloses [`STOWED_RAIL`].
pub const LOCKER: &str = "sealed_locker";

/// **feasibility**: five deck rungs built to test the switch feasibility check. `dock_a`,
/// `dock_b`, `dock_c` are a [`BAR_SPACING`] apart (feasible switches between neighbours);
/// `far_rail` lies the span plus [`GAP_MARGIN`] beyond `dock_c` (out of reach of every other
/// hold); `stowed_rail` lies within reach of `dock_a` but inside a closed locker (any grip on
/// it collides). The expected verdicts are [`feasibility_expectations`]. Start: left on
/// `dock_a`, right on `dock_b`; goal: right gripper on `far_rail` (unreachable).
pub fn feasibility_scene() -> Result<Scenario, ClimbError> {
    let name = "feasibility".to_string();
    let robot = Arc::new(climber()?);
    let span = climber_span(&robot)?;
    let xs = [0.0, BAR_SPACING, 2.0 * BAR_SPACING];
    let mut holds: Vec<Hold> = [DOCK_A, DOCK_B, DOCK_C]
        .iter()
        .zip(xs)
        .map(|(n, x)| deck_rung(n.to_string(), x, DECK_LINE_Y))
        .collect();
    let far_x = xs[2] + span + GAP_MARGIN;
    holds.push(deck_rung(FAR_RAIL.to_string(), far_x, DECK_LINE_Y));
    // The stowed rail: parallel to the docks, one spacing behind dock_a, inside a locker that
    // leaves LOCKER_DEPTH of solid around it on every side.
    let sx = -BAR_SPACING;
    holds.push(deck_rung(STOWED_RAIL.to_string(), sx, DECK_LINE_Y));
    let h = 0.5 * BAR_LENGTH;
    let d = LOCKER_DEPTH;
    let mut obstacles = hull(-1.4, far_x + 0.8);
    obstacles.push(cuboid(
        LOCKER,
        [sx - d, DECK_LINE_Y - h - d, 0.0],
        [sx + d, DECK_LINE_Y + h + d, STANDOFF + d],
    ));
    let scene = Scene {
        obstacles,
        holds,
        mechanisms: vec![],
    };
    scene.check()?;
    let (far, _) = scene.hold(FAR_RAIL)?;
    let goal = Goal::Grip {
        effector: RIGHT.to_string(),
        hold: far,
    };
    finish(name, robot, scene, pair_stance(0, 0, 1, 1), goal)
}

/// Solid around the stowed rail on every side (metres). The palm's face is 0.034 m behind the
/// grip point (robot file: effector 0.085 m in front of the palm link, palm box 0.051 m deep),
/// so with more than that inside the locker the palm is in it.
pub const LOCKER_DEPTH: f64 = 0.08;

/// The expected verdicts of [`feasibility_scene`]'s switches, with the numbers computed from
/// its geometry and the climber's span.
pub fn feasibility_expectations(scenario: &Scenario) -> Result<Vec<SwitchExpectation>, ClimbError> {
    let span = climber_span(&scenario.robot)?;
    let scene = &scenario.scene;
    let (_, far) = scene.hold(FAR_RAIL)?;
    let mut out = Vec::new();
    let mut push = |held: &str, target: &str, verdict| {
        out.push(SwitchExpectation {
            held: held.to_string(),
            target: target.to_string(),
            verdict,
        })
    };
    push(DOCK_A, DOCK_B, Verdict::Feasible);
    push(DOCK_B, DOCK_C, Verdict::Feasible);
    push(DOCK_A, DOCK_C, Verdict::Feasible);
    for held in [DOCK_A, DOCK_B, DOCK_C] {
        let (_, h) = scene.hold(held)?;
        let d = hold_distance(h, far).unwrap_or(f64::INFINITY);
        push(held, FAR_RAIL, Verdict::OutOfReach { excess: d - span });
    }
    push(
        DOCK_A,
        STOWED_RAIL,
        Verdict::InsideObstacle {
            obstacle: LOCKER.to_string(),
            depth: LOCKER_DEPTH,
        },
    );
    Ok(out)
}

/// Projection settings of the bundled pose searches.
pub fn pose_settings() -> ProjectionSettings {
    ProjectionSettings {
        tolerance: START_TOLERANCE,
        max_iterations: 200,
        max_step: 0.3,
    }
}

fn finish(
    name: String,
    robot: Arc<Robot>,
    scene: Scene,
    stance: Stance,
    goal: Goal,
) -> Result<Scenario, ClimbError> {
    let q = find_pose(&robot, &scene, &stance, START_SEED, POSE_ATTEMPTS)?.ok_or_else(|| {
        ClimbError::NoPose {
            scenario: name.clone(),
            stance: stance.describe(&scene),
            attempts: POSE_ATTEMPTS,
        }
    })?;
    Ok(Scenario {
        name,
        robot,
        scene,
        start: Start { q, stance },
        goal,
        constant: vec![],
        limits: ScenarioLimits::default(),
    })
}

/// A point of each gripped hold and its approach direction (world frame).
fn grip_targets(scene: &Scene, stance: &Stance) -> Vec<(String, Point3<f64>, Vector3<f64>)> {
    stance
        .grips
        .iter()
        .filter_map(|(e, &h)| {
            let hold = scene.holds.get(h)?;
            match &hold.kind {
                HoldKind::Point { pose, .. } => Some((
                    e.clone(),
                    Point3::from(pose.translation.vector),
                    pose.rotation * Vector3::z(),
                )),
                HoldKind::Bar {
                    start,
                    end,
                    approach,
                    ..
                } => {
                    // The hand's side of the bar: left hands grip towards the end.
                    let t = if e == LEFT { 0.7 } else { 0.3 };
                    Some((e.clone(), start + (end - start) * t, *approach))
                }
                _ => None,
            }
        })
        .collect()
}

/// Search for a configuration of the climber holding `stance` in `scene`: converged to
/// [`START_TOLERANCE`], at least [`POSE_MIN_MARGIN`] inside every joint limit and at least
/// [`POSE_MIN_CLEARANCE`] from every collision (a comfortable pose, not one pinned at a limit
/// or grazing a wall). Guesses put the torso
/// facing the holds, shoulders across the line between the grips, at a random offset; arm
/// joints are random. Deterministic in `seed`. `Ok(None)` when `attempts` guesses fail.
pub fn find_pose(
    robot: &Robot,
    scene: &Scene,
    stance: &Stance,
    seed: u64,
    attempts: usize,
) -> Result<Option<Vec<f64>>, ClimbError> {
    let stack = stance.constraints(robot, scene, &[])?;
    let collision = CollisionModel::new(robot, &scene.obstacles)?;
    let mut scratch = CollisionScratch::new();
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let settings = pose_settings();
    let targets = grip_targets(scene, stance);
    if targets.is_empty() {
        return Ok(None);
    }
    let n = targets.len() as f64;
    let centre = Point3::from(targets.iter().fold(Vector3::zeros(), |s, t| s + t.1.coords) / n);
    let approach = targets.iter().fold(Vector3::zeros(), |s, t| s + t.2) / n;
    let front = approach
        .try_normalize(1e-9)
        .unwrap_or_else(|| -Vector3::z());
    // Shoulder line: from the right grip to the left one, perpendicular to the front.
    let side = {
        let l = targets.iter().find(|t| t.0 == LEFT).map(|t| t.1);
        let r = targets.iter().find(|t| t.0 == RIGHT).map(|t| t.1);
        let raw = match (l, r) {
            (Some(l), Some(r)) => l - r,
            _ => Vector3::y(),
        };
        let s = raw - front * front.dot(&raw);
        s.try_normalize(1e-9)
            .unwrap_or_else(|| front.cross(&Vector3::x()).normalize())
    };
    let Some((torso_j, arm_joints)) = climber_joints(robot) else {
        return Ok(None);
    };
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    for _ in 0..attempts {
        let jitter = Vector3::new(
            rng.random_range(-0.4..0.4),
            rng.random_range(-0.4..0.4),
            rng.random_range(-0.4..0.4),
        );
        let x_t = front;
        let y_t = side;
        let z_t = x_t.cross(&y_t);
        let base = Rotation3::from_basis_unchecked(&[x_t, y_t, z_t]);
        let rot =
            UnitQuaternion::from_scaled_axis(jitter) * UnitQuaternion::from_rotation_matrix(&base);
        let back = rng.random_range(0.3..0.6);
        let pos = centre - front * back - (rot * Vector3::z()) * rng.random_range(0.0..0.3);
        let mut q = robot.neutral();
        let qi = torso_j;
        q[qi] = pos.x;
        q[qi + 1] = pos.y;
        q[qi + 2] = pos.z;
        let c = rot.coords;
        q[qi + 3] = c.x;
        q[qi + 4] = c.y;
        q[qi + 5] = c.z;
        q[qi + 6] = c.w;
        for &(i, lo, hi) in &arm_joints {
            let (lo, hi) = (lo.max(-1.5), hi.min(1.5));
            if lo < hi {
                q[i] = rng.random_range(lo..hi);
            }
        }
        let rep = project(robot, &stack, &settings, &mut q, &mut buf)?;
        if !rep.converged() || robot.reach_margin(&q) < POSE_MIN_MARGIN {
            continue;
        }
        forward_kinematics(robot, &q, &mut poses).map_err(ConstraintError::from)?;
        if collision.in_collision_with_margin(&poses, POSE_MIN_CLEARANCE, &mut scratch)? {
            continue;
        }
        return Ok(Some(q));
    }
    Ok(None)
}

/// The floating joint's q index and (q index, lower, upper) of every revolute joint.
type ClimberJoints = (usize, Vec<(usize, f64, f64)>);

fn climber_joints(robot: &Robot) -> Option<ClimberJoints> {
    let mut floating = None;
    let mut arms = Vec::new();
    for j in robot.joints() {
        match j.kind {
            JointKind::Floating => floating = Some(j.q_index),
            JointKind::Revolute { .. } => {
                let l = j.limits.first()?;
                arms.push((j.q_index, l.lower, l.upper));
            }
            _ => {}
        }
    }
    Some((floating?, arms))
}

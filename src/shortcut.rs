//! Path shortening on the manifold: random shortcuts, then smoothing.
//!
//! Both steps only ever use the [`ConfigSpace`]'s own motion check (`extend`), so in a
//! constrained space every new piece of path is a manifold walk: its points are projected
//! (residual within the projection tolerance), at most a stride apart, within limits and
//! collision-checked along the way, exactly like the planners' output.
//!
//! - Shortcut (random shortcutting, common practice for sampling-based planners): pick two
//!   path points `i < j` at random (not neighbours), move from `i` toward `j` with the space's
//!   motion; accept if the motion arrives at `j` and is shorter than the path between them.
//! - Smoothing (discrete curve shortening, common practice): for each interior point, aim at
//!   the point `step` of the way toward the midpoint of its two neighbours, move there with
//!   the space's motion (which in a constrained space ends on the manifold, as close as the
//!   walk gets), connect both neighbours to the result with the space's motion, and accept if
//!   both connections arrive and the two pieces together are shorter than before.
//!
//! The path never gets longer: every accepted change makes it strictly shorter. Lengths are
//! the sums of [`ConfigSpace::distance`] over consecutive points. Deterministic for a seed.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use thiserror::Error;

use crate::cspace::{CSpaceError, CSpaceStats, ConfigSpace};
use crate::settings::SettingsError;

/// How much shortening to do. Build with [`ShortenSettings::new`] (checked).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ShortenSettings {
    /// Random shortcuts tried.
    pub shortcut_attempts: usize,
    /// Smoothing passes over the interior points (after the shortcuts).
    pub smoothing_passes: usize,
    /// Fraction of the way toward the neighbours' midpoint a smoothing move aims, in (0, 1].
    pub smoothing_step: f64,
    pub seed: u64,
}

impl ShortenSettings {
    pub fn new(
        shortcut_attempts: usize,
        smoothing_passes: usize,
        smoothing_step: f64,
        seed: u64,
    ) -> Result<Self, SettingsError> {
        // NaN fails this comparison too.
        if !(smoothing_step > 0.0 && smoothing_step <= 1.0) {
            return Err(SettingsError::OutOfRange {
                name: "smoothing_step",
                expected: "in (0, 1]",
                got: smoothing_step,
            });
        }
        Ok(ShortenSettings {
            shortcut_attempts,
            smoothing_passes,
            smoothing_step,
            seed,
        })
    }
}

impl Default for ShortenSettings {
    /// 200 shortcuts, 10 smoothing passes, step 0.5, seed 0.
    fn default() -> Self {
        ShortenSettings {
            shortcut_attempts: 200,
            smoothing_passes: 10,
            smoothing_step: 0.5,
            seed: 0,
        }
    }
}

/// What shortening did.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ShortenStats {
    pub length_before: f64,
    pub length_after_shortcuts: f64,
    pub length_after: f64,
    pub shortcuts_tried: usize,
    pub shortcuts_accepted: usize,
    pub smoothing_tried: usize,
    pub smoothing_accepted: usize,
    /// The space's counters (samples, projections, collision checks) during shortening.
    pub space: CSpaceStats,
}

/// A shortened path and what it cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Shortened {
    pub path: Vec<Vec<f64>>,
    pub stats: ShortenStats,
}

/// Why a path could not be shortened.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ShortenError {
    #[error("the path has no points")]
    Empty,
    #[error("path point {index} has {got} coordinates, the robot has {expected}")]
    WrongLength {
        index: usize,
        got: usize,
        expected: usize,
    },
    #[error(transparent)]
    Space(#[from] CSpaceError),
}

/// Sum of the space's distances between consecutive points.
pub fn path_length<S: ConfigSpace>(space: &S, path: &[Vec<f64>]) -> f64 {
    path.windows(2).map(|w| space.distance(&w[0], &w[1])).sum()
}

/// Length of `points` followed by `to`, starting from `from`.
fn chain_length<S: ConfigSpace>(space: &S, from: &[f64], points: &[Vec<f64>]) -> f64 {
    let mut prev = from;
    let mut sum = 0.0;
    for q in points {
        sum += space.distance(prev, q);
        prev = q;
    }
    sum
}

/// The motion from `a` to `b` if it arrives exactly at `b`: the points after `a`, ending
/// with `b`.
fn motion<S: ConfigSpace>(
    space: &mut S,
    a: &[f64],
    b: &[f64],
) -> Result<Option<Vec<Vec<f64>>>, CSpaceError> {
    let ext = space.extend(a, b, f64::INFINITY)?;
    Ok(
        if ext.reached && ext.path.last().is_some_and(|q| q.as_slice() == b) {
            Some(ext.path)
        } else {
            None
        },
    )
}

/// Shorten `path` (each consecutive pair joined by a valid motion of `space`, as planners
/// return it): shortcuts first, then smoothing. The ends stay where they are.
pub fn shorten<S: ConfigSpace>(
    space: &mut S,
    path: &[Vec<f64>],
    settings: &ShortenSettings,
) -> Result<Shortened, ShortenError> {
    if path.is_empty() {
        return Err(ShortenError::Empty);
    }
    let nq = space.robot().nq();
    if let Some((index, q)) = path.iter().enumerate().find(|(_, q)| q.len() != nq) {
        return Err(ShortenError::WrongLength {
            index,
            got: q.len(),
            expected: nq,
        });
    }
    let before = space.stats();
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let mut path = path.to_vec();
    let mut stats = ShortenStats {
        length_before: path_length(space, &path),
        ..Default::default()
    };

    for _ in 0..settings.shortcut_attempts {
        let n = path.len();
        if n < 3 {
            break;
        }
        let i = rng.random_range(0..n - 2);
        let j = rng.random_range(i + 2..n);
        stats.shortcuts_tried += 1;
        let Some(points) = motion(space, &path[i], &path[j])? else {
            continue;
        };
        let old = path_length(space, &path[i..=j]);
        let new = chain_length(space, &path[i], &points);
        if new < old {
            path.splice(i + 1..=j, points);
            stats.shortcuts_accepted += 1;
        }
    }
    stats.length_after_shortcuts = path_length(space, &path);

    let robot_nq = nq;
    let mut mid = vec![0.0; robot_nq];
    let mut target = vec![0.0; robot_nq];
    for _ in 0..settings.smoothing_passes {
        let mut k = 1;
        while k + 1 < path.len() {
            stats.smoothing_tried += 1;
            let robot = space.robot();
            let ok = robot
                .interpolate(&path[k - 1], &path[k + 1], 0.5, &mut mid)
                .and_then(|()| {
                    robot.interpolate(&path[k], &mid, settings.smoothing_step, &mut target)
                })
                .is_ok();
            if !ok {
                k += 1;
                continue;
            }
            // Move toward the target with the space's motion; in a constrained space this
            // ends on the manifold.
            let ext = space.extend(&path[k], &target, f64::INFINITY)?;
            let Some(moved) = ext.path.last().cloned() else {
                k += 1;
                continue;
            };
            let Some(first) = motion(space, &path[k - 1], &moved)? else {
                k += 1;
                continue;
            };
            let Some(second) = motion(space, &moved, &path[k + 1])? else {
                k += 1;
                continue;
            };
            let old =
                space.distance(&path[k - 1], &path[k]) + space.distance(&path[k], &path[k + 1]);
            let new =
                chain_length(space, &path[k - 1], &first) + chain_length(space, &moved, &second);
            if new < old {
                // Replace path[k] by first (ending with `moved`) and second without its last
                // point (path[k + 1], already there).
                let inserted = first.len();
                let mut piece = first;
                let mut second = second;
                second.pop();
                piece.extend(second);
                path.splice(k..=k, piece);
                stats.smoothing_accepted += 1;
                // Continue after `moved`.
                k += inserted;
            } else {
                k += 1;
            }
        }
    }
    stats.length_after = path_length(space, &path);
    stats.space = crate::planner::stats_delta(space.stats(), before);
    Ok(Shortened { path, stats })
}

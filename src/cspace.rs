//! C-spaces: what a sampling-based planner needs to know about the space it searches —
//! sampling, distance, a local planner (extend) and validity. Planners are written once
//! against [`ConfigSpace`]; [`FreeSpace`] is the joint box, [`ConstrainedSpace`] wraps
//! projection and the manifold walk so the same planner plans under constraints unchanged.

use rand::Rng;
use thiserror::Error;

use crate::collision::{CollisionError, CollisionModel, CollisionScratch, TOUCH_TOLERANCE};
use crate::constraint::{ConstraintError, ConstraintStack};
use crate::kinematics::forward_kinematics;
use crate::math::Pose;
use crate::model::Robot;
use crate::projection::{project, ProjectionBuffer};
use crate::settings::{positive, SettingsError};
use crate::walk::{walk_checked, WalkSettings};

/// A C-space query failed for a reason other than an invalid configuration.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum CSpaceError {
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
    #[error(transparent)]
    Settings(#[from] SettingsError),
}

/// Counts of the work a C-space did (for planner statistics).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct CSpaceStats {
    pub samples: usize,
    pub projections: usize,
    pub collision_checks: usize,
}

/// The result of extending from one configuration toward another: the valid configurations
/// passed through (not including the start), and whether the target was reached.
#[derive(Clone, Debug, PartialEq)]
pub struct Extension {
    pub path: Vec<Vec<f64>>,
    pub reached: bool,
}

/// The space a planner samples.
pub trait ConfigSpace {
    fn robot(&self) -> &Robot;
    /// A valid random configuration, or `None` if this attempt failed (projection did not
    /// converge, or the sample collides).
    fn sample<R: Rng + ?Sized>(&mut self, rng: &mut R) -> Result<Option<Vec<f64>>, CSpaceError>;
    fn distance(&self, a: &[f64], b: &[f64]) -> f64;
    /// Move from `from` toward `to` by at most `max_distance`, through valid configurations.
    fn extend(
        &mut self,
        from: &[f64],
        to: &[f64],
        max_distance: f64,
    ) -> Result<Extension, CSpaceError>;
    /// True if `q` is within limits, on the manifold (if constrained) and collision-free.
    fn is_valid(&mut self, q: &[f64]) -> Result<bool, CSpaceError>;
    fn stats(&self) -> CSpaceStats;
}

/// A narrower box for the translational coordinates (prismatic joints and the position of
/// floating joints) of random samples. Mobile bases often have a very wide position range
/// (tens of metres) while a motion stays near its start and goal; uniform samples over the
/// whole range then mostly land where nothing is reachable. Rotational coordinates keep
/// their full range. A heuristic: a motion that must leave the box cannot be found.
#[derive(Clone, Debug, PartialEq)]
pub struct SamplingBox {
    /// `(q index, lower, upper)` for each narrowed coordinate.
    bounds: Vec<(usize, f64, f64)>,
}

impl SamplingBox {
    /// The hull of `start` and `goal` widened by `margin` (metres) on each side, within
    /// the joint limits, for every translational coordinate.
    pub fn around(robot: &Robot, start: &[f64], goal: &[f64], margin: f64) -> Self {
        let mut bounds = Vec::new();
        for j in robot.joints() {
            let count = match j.kind {
                crate::model::JointKind::Prismatic { .. } => 1,
                crate::model::JointKind::Floating => 3,
                _ => 0,
            };
            for k in 0..count {
                let i = j.q_index + k;
                let (Some(a), Some(b), Some(lim)) = (start.get(i), goal.get(i), j.limits.get(k))
                else {
                    continue;
                };
                let lo = (a.min(*b) - margin).max(lim.lower);
                let hi = (a.max(*b) + margin).min(lim.upper);
                if lo.is_finite() && hi.is_finite() && lo <= hi {
                    bounds.push((i, lo, hi));
                }
            }
        }
        SamplingBox { bounds }
    }

    /// Replace the narrowed coordinates of `q` with uniform draws inside the box.
    fn apply<R: Rng + ?Sized>(&self, rng: &mut R, q: &mut [f64]) {
        for &(i, lo, hi) in &self.bounds {
            if let Some(v) = q.get_mut(i) {
                *v = if hi > lo {
                    rng.random_range(lo..=hi)
                } else {
                    lo
                };
            }
        }
    }
}

/// Samples concentrated around the straight joint-space segment between two configurations
/// (a leg's two ends): a random point of the segment moved by a random tangent vector with
/// every coordinate uniform in `[-spread, spread]` (radians, or metres for translations).
/// A share of the samples (`share`, 0..=1) is drawn this way, the rest over the whole space.
/// On a manifold of a many-jointed robot held at one hand, uniform samples mostly project far
/// from both ends (or not at all); samples near the segment keep the search where the motion
/// is. A heuristic (common practice for narrow local problems): a motion that must go far from
/// the segment relies on the remaining uniform share.
#[derive(Clone, Debug, PartialEq)]
pub struct SegmentSampling {
    a: Vec<f64>,
    b: Vec<f64>,
    spread: f64,
    share: f64,
}

impl SegmentSampling {
    /// Checked: `spread` finite and positive, `share` in `[0, 1]`, `a` and `b` of the robot's
    /// configuration size.
    pub fn new(
        robot: &Robot,
        a: &[f64],
        b: &[f64],
        spread: f64,
        share: f64,
    ) -> Result<Self, CSpaceError> {
        robot
            .check_configuration(a)
            .map_err(ConstraintError::from)?;
        robot
            .check_configuration(b)
            .map_err(ConstraintError::from)?;
        Ok(SegmentSampling {
            a: a.to_vec(),
            b: b.to_vec(),
            spread: positive("spread", spread)?,
            share: crate::settings::share("share", share)?,
        })
    }

    /// A sample near the segment, or `None` when this draw should be uniform instead.
    fn draw<R: Rng + ?Sized>(
        &self,
        robot: &Robot,
        rng: &mut R,
    ) -> Result<Option<Vec<f64>>, CSpaceError> {
        if rng.random::<f64>() >= self.share {
            return Ok(None);
        }
        let mut mid = vec![0.0; robot.nq()];
        robot
            .interpolate(&self.a, &self.b, rng.random::<f64>(), &mut mid)
            .map_err(ConstraintError::from)?;
        let dv: Vec<f64> = (0..robot.nv())
            .map(|_| rng.random_range(-self.spread..=self.spread))
            .collect();
        let mut q = vec![0.0; robot.nq()];
        robot
            .integrate(&mid, &dv, &mut q)
            .map_err(ConstraintError::from)?;
        robot.clamp_to_limits(&mut q);
        Ok(Some(q))
    }
}

/// A clearance margin for coarse collision checks along motions (see
/// [`FreeSpace::with_clearance_margin`]): a stretch of a motion between two checked points is
/// accepted unseen only when both points are at least `margin` metres from every obstacle;
/// otherwise its inside is checked at `fine_resolution`. Points inside a straight segment
/// (not its ends) must also keep `interior` metres from every obstacle: a shallow graze
/// between two checked points is then still clear of the obstacle itself, so a later, denser
/// check (the verifier's) does not find it touching. The ends of a segment (walk points,
/// start and goal) are judged exactly.
///
/// Written by hand: this is the planner's own adaptive spacing, which no library offers for
/// a C-space of our shape.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ClearanceMargin {
    pub margin: f64,
    pub fine_resolution: f64,
    pub interior: f64,
}

impl ClearanceMargin {
    /// `interior` must be at least 0 and below `margin`.
    pub fn new(margin: f64, fine_resolution: f64, interior: f64) -> Result<Self, CSpaceError> {
        let margin = positive("clearance margin", margin)?;
        if !(interior.is_finite() && interior >= 0.0 && interior < margin) {
            return Err(SettingsError::OutOfRange {
                name: "interior clearance",
                expected: "at least 0 and below the clearance margin",
                got: interior,
            }
            .into());
        }
        Ok(ClearanceMargin {
            margin,
            fine_resolution: positive("fine resolution", fine_resolution)?,
            interior,
        })
    }
}

/// How far a configuration is from trouble, as the coarse motion check sees it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Room {
    /// Outside the limits or in collision.
    Blocked,
    /// Collision-free but within the clearance margin of something.
    Close,
    /// Collision-free with at least the clearance margin to spare.
    Clear,
}

/// Collision and limit checks shared by both spaces.
struct Checker<'a> {
    robot: &'a Robot,
    collision: Option<&'a CollisionModel>,
    poses: Vec<Pose>,
    scratch: CollisionScratch,
    stats: CSpaceStats,
    margin: Option<ClearanceMargin>,
    /// The configuration last judged by [`Checker::room`] and its verdict (consecutive motion
    /// segments share an end).
    last_room: Option<(Vec<f64>, Room)>,
}

impl<'a> Checker<'a> {
    fn new(robot: &'a Robot, collision: Option<&'a CollisionModel>) -> Self {
        Checker {
            robot,
            collision,
            poses: vec![Pose::identity(); robot.links().len()],
            scratch: CollisionScratch::new(),
            stats: CSpaceStats::default(),
            margin: None,
            last_room: None,
        }
    }

    /// Within limits and collision-free.
    fn free(&mut self, q: &[f64]) -> Result<bool, CSpaceError> {
        if !self.robot.within_limits(q, 0.0) {
            return Ok(false);
        }
        let Some(model) = self.collision else {
            return Ok(true);
        };
        forward_kinematics(self.robot, q, &mut self.poses).map_err(ConstraintError::from)?;
        self.stats.collision_checks += 1;
        Ok(!model.in_collision(&self.poses, &mut self.scratch)?)
    }

    fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        self.robot.distance(a, b).unwrap_or(f64::INFINITY)
    }

    /// `to`, or the point `max_distance` from `from` toward it; and the distance to `to`.
    fn clip(
        &self,
        from: &[f64],
        to: &[f64],
        max_distance: f64,
    ) -> Result<(Vec<f64>, f64), CSpaceError> {
        let d = self.distance(from, to);
        let mut target = to.to_vec();
        if d > max_distance {
            self.robot
                .interpolate(from, to, max_distance / d, &mut target)
                .map_err(ConstraintError::from)?;
        }
        Ok((target, d))
    }

    /// [`Room`] of `q` under the clearance margin (`Clear` when there is no margin and `q` is
    /// free).
    fn room(&mut self, q: &[f64]) -> Result<Room, CSpaceError> {
        if let Some((last, room)) = &self.last_room {
            if last.as_slice() == q {
                return Ok(*room);
            }
        }
        let room = self.judge(q, false)?;
        match &mut self.last_room {
            Some((last, r)) if last.len() == q.len() => {
                last.copy_from_slice(q);
                *r = room;
            }
            slot => *slot = Some((q.to_vec(), room)),
        }
        Ok(room)
    }

    /// [`Room`] of `q`; `interior`: a point inside a straight segment (held to the margin's
    /// interior clearance) rather than one of its ends (held to touching only).
    fn judge(&mut self, q: &[f64], interior: bool) -> Result<Room, CSpaceError> {
        let (Some(margin), Some(model)) = (self.margin, self.collision) else {
            return Ok(if self.free(q)? {
                Room::Clear
            } else {
                Room::Blocked
            });
        };
        if !self.robot.within_limits(q, 0.0) {
            return Ok(Room::Blocked);
        }
        forward_kinematics(self.robot, q, &mut self.poses).map_err(ConstraintError::from)?;
        let block = if interior {
            margin.interior.max(TOUCH_TOLERANCE)
        } else {
            TOUCH_TOLERANCE
        };
        let (blocked, close) = model.within_margins(
            &self.poses,
            block,
            margin.margin.max(block),
            &mut self.scratch,
        )?;
        // Counted as the queries they are: the margin, then (when something is close) the
        // blocking distance.
        self.stats.collision_checks += 1 + usize::from(close);
        Ok(match (blocked, close) {
            (true, _) => Room::Blocked,
            (false, true) => Room::Close,
            (false, false) => Room::Clear,
        })
    }

    /// Every point of the straight segment a -> b at spacing <= `resolution` (excluding a) free.
    /// With a clearance margin, a stretch between two checked points is also checked inside
    /// at the margin's fine resolution unless both its ends are clear by the margin (`a` is
    /// assumed free; its room is judged when needed).
    fn segment_free(&mut self, a: &[f64], b: &[f64], resolution: f64) -> Result<bool, CSpaceError> {
        let d = self.robot.distance(a, b).map_err(ConstraintError::from)?;
        let steps = ((d / resolution).ceil() as usize).max(1);
        let mut q = vec![0.0; self.robot.nq()];
        let Some(margin) = self.margin else {
            for k in 1..=steps {
                self.robot
                    .interpolate(a, b, k as f64 / steps as f64, &mut q)
                    .map_err(ConstraintError::from)?;
                if !self.free(&q)? {
                    return Ok(false);
                }
            }
            return Ok(true);
        };
        let mut previous_clear = self.room(a)? == Room::Clear;
        // Fine points inside each stretch (ends excluded).
        let fine = ((d / steps as f64 / margin.fine_resolution).ceil() as usize).max(1);
        for k in 1..=steps {
            if k == steps {
                // `b` itself, so the next segment (which starts at `b`) finds its room cached.
                q.copy_from_slice(b);
            } else {
                self.robot
                    .interpolate(a, b, k as f64 / steps as f64, &mut q)
                    .map_err(ConstraintError::from)?;
            }
            let room = if k == steps {
                self.room(&q)?
            } else {
                self.judge(&q, true)?
            };
            if room == Room::Blocked {
                return Ok(false);
            }
            if !(previous_clear && room == Room::Clear) {
                for j in 1..fine {
                    let t = ((k - 1) as f64 + j as f64 / fine as f64) / steps as f64;
                    self.robot
                        .interpolate(a, b, t, &mut q)
                        .map_err(ConstraintError::from)?;
                    if self.judge(&q, true)? == Room::Blocked {
                        return Ok(false);
                    }
                }
            }
            previous_clear = room == Room::Clear;
        }
        Ok(true)
    }
}

/// The joint box with collisions: straight-line motions checked at `resolution`.
pub struct FreeSpace<'a> {
    checker: Checker<'a>,
    resolution: f64,
    sampling_box: Option<SamplingBox>,
}

impl<'a> FreeSpace<'a> {
    pub fn new(
        robot: &'a Robot,
        collision: Option<&'a CollisionModel>,
        resolution: f64,
    ) -> Result<Self, CSpaceError> {
        Ok(FreeSpace {
            checker: Checker::new(robot, collision),
            resolution: positive("resolution", resolution)?,
            sampling_box: None,
        })
    }
    /// Draw samples inside `sampling_box` (see [`SamplingBox`]).
    pub fn with_sampling_box(mut self, sampling_box: SamplingBox) -> Self {
        self.sampling_box = Some(sampling_box);
        self
    }
    /// Check motions coarsely where the robot is clear of obstacles by `margin` and finely
    /// elsewhere (see [`ClearanceMargin`]).
    pub fn with_clearance_margin(mut self, margin: ClearanceMargin) -> Self {
        self.checker.margin = Some(margin);
        self
    }
}

impl ConfigSpace for FreeSpace<'_> {
    fn robot(&self) -> &Robot {
        self.checker.robot
    }
    fn sample<R: Rng + ?Sized>(&mut self, rng: &mut R) -> Result<Option<Vec<f64>>, CSpaceError> {
        self.checker.stats.samples += 1;
        let mut q = self.checker.robot.random_configuration(rng);
        if let Some(b) = &self.sampling_box {
            b.apply(rng, &mut q);
        }
        Ok(if self.checker.free(&q)? {
            Some(q)
        } else {
            None
        })
    }
    fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        self.checker.distance(a, b)
    }
    fn extend(
        &mut self,
        from: &[f64],
        to: &[f64],
        max_distance: f64,
    ) -> Result<Extension, CSpaceError> {
        let (target, d) = self.checker.clip(from, to, max_distance)?;
        let reached = d <= max_distance;
        if self.checker.segment_free(from, &target, self.resolution)? {
            Ok(Extension {
                path: vec![target],
                reached,
            })
        } else {
            Ok(Extension {
                path: Vec::new(),
                reached: false,
            })
        }
    }
    fn is_valid(&mut self, q: &[f64]) -> Result<bool, CSpaceError> {
        self.checker.free(q)
    }
    fn stats(&self) -> CSpaceStats {
        self.checker.stats
    }
}

/// A C-space on the manifold of a constraint stack: samples are projected, motions are
/// manifold walks (each walk point, and the straight segments between them at `resolution`,
/// collision-checked).
pub struct ConstrainedSpace<'a> {
    checker: Checker<'a>,
    stack: &'a ConstraintStack,
    walk: WalkSettings,
    resolution: f64,
    buffer: ProjectionBuffer,
    sampling_box: Option<SamplingBox>,
    segment_sampling: Option<SegmentSampling>,
}

impl<'a> ConstrainedSpace<'a> {
    pub fn new(
        robot: &'a Robot,
        stack: &'a ConstraintStack,
        collision: Option<&'a CollisionModel>,
        walk: WalkSettings,
        resolution: f64,
    ) -> Result<Self, CSpaceError> {
        walk.validate()?;
        Ok(ConstrainedSpace {
            checker: Checker::new(robot, collision),
            stack,
            walk,
            resolution: positive("resolution", resolution)?,
            buffer: ProjectionBuffer::new(robot, stack),
            sampling_box: None,
            segment_sampling: None,
        })
    }
    /// Draw samples (before projection) inside `sampling_box` (see [`SamplingBox`]).
    pub fn with_sampling_box(mut self, sampling_box: SamplingBox) -> Self {
        self.sampling_box = Some(sampling_box);
        self
    }
    /// Draw a share of the samples near a segment (see [`SegmentSampling`]).
    pub fn with_segment_sampling(mut self, sampling: SegmentSampling) -> Self {
        self.segment_sampling = Some(sampling);
        self
    }
    /// Check motions coarsely where the robot is clear of obstacles by `margin` and finely
    /// elsewhere (see [`ClearanceMargin`]).
    pub fn with_clearance_margin(mut self, margin: ClearanceMargin) -> Self {
        self.checker.margin = Some(margin);
        self
    }
    pub fn stack(&self) -> &ConstraintStack {
        self.stack
    }
    pub fn walk_settings(&self) -> &WalkSettings {
        &self.walk
    }
}

impl ConfigSpace for ConstrainedSpace<'_> {
    fn robot(&self) -> &Robot {
        self.checker.robot
    }
    fn sample<R: Rng + ?Sized>(&mut self, rng: &mut R) -> Result<Option<Vec<f64>>, CSpaceError> {
        self.checker.stats.samples += 1;
        let robot = self.checker.robot;
        let near = match &self.segment_sampling {
            Some(s) => s.draw(robot, rng)?,
            None => None,
        };
        let mut q = match near {
            Some(q) => q,
            None => {
                let mut q = robot.random_configuration(rng);
                if let Some(b) = &self.sampling_box {
                    b.apply(rng, &mut q);
                }
                q
            }
        };
        self.checker.stats.projections += 1;
        let rep = project(
            self.checker.robot,
            self.stack,
            &self.walk.projection,
            &mut q,
            &mut self.buffer,
        )?;
        Ok(if rep.converged() && self.checker.free(&q)? {
            Some(q)
        } else {
            None
        })
    }
    fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        self.checker.distance(a, b)
    }
    fn extend(
        &mut self,
        from: &[f64],
        to: &[f64],
        max_distance: f64,
    ) -> Result<Extension, CSpaceError> {
        let robot = self.checker.robot;
        let (target, d) = self.checker.clip(from, to, max_distance)?;
        let (checker, resolution) = (&mut self.checker, self.resolution);
        // Each walk point is taken only if the straight segment to it is free, so a blocked
        // motion costs no projections past its first blocked step.
        let w = walk_checked(
            robot,
            self.stack,
            from,
            &target,
            &self.walk,
            &mut self.buffer,
            |prev, q| checker.segment_free(prev, q, resolution),
        )?;
        self.checker.stats.projections += w.projections;
        let mut path = w.path;
        path.remove(0);
        let reached = d <= max_distance && path.last().is_some_and(|q| self.distance(q, to) == 0.0);
        Ok(Extension { path, reached })
    }
    fn is_valid(&mut self, q: &[f64]) -> Result<bool, CSpaceError> {
        let r = self
            .stack
            .evaluate(self.checker.robot, q, &mut self.buffer.stack, false)?;
        Ok(r <= self.walk.projection.tolerance && self.checker.free(q)?)
    }
    fn stats(&self) -> CSpaceStats {
        self.checker.stats
    }
}

//! Collision and clearance queries for robot links and scene obstacles.
//!
//! A [`CollisionModel`] is built once from a [`Robot`] and a list of [`Obstacle`]s; it is
//! immutable and `Send + Sync`. Queries take the world pose of every link (from
//! [`crate::kinematics::forward_kinematics`]) and a caller-owned [`CollisionScratch`], so
//! nothing is allocated on the hot path except by the collision library itself.
//!
//! Conventions:
//! - Signed distance: positive is the gap between two bodies, negative the penetration
//!   depth (the shortest translation that separates them), in metres.
//! - Touching counts as collision: two bodies are *in collision* when their signed
//!   distance is at most [`TOUCH_TOLERANCE`] (1e-9 m), so exact contact computed through a
//!   chain of rounded transforms is reported consistently.
//! - Self-collision checks every pair of links that both carry shapes and are not an
//!   ignored pair of the robot ([`Robot::is_ignored_pair`]; parent-child pairs by
//!   default). Obstacles are never checked against each other.
//! - Triangle meshes are surfaces, not solids: a body wholly inside a closed triangle mesh
//!   does not touch it. Use a convex mesh for a solid part.
//! - Accuracy: exact to rounding (checked to 1e-9 m against closed forms) for sphere and
//!   capsule pairs, a sphere against anything, and a capsule against a cylinder (1-D
//!   search, see `narrow.rs`). Pairs of polytopes (box, convex mesh, triangle, capsule
//!   axis) go through the library's GJK, which ends on the exact feature in the cases
//!   tested. Pairs of a cylinder with a box, mesh or cylinder also use GJK, which can stall
//!   on curved shapes: expect errors up to about 1e-4 of the distance there (measured
//!   5e-6 m on a 0.12 m gap for the capsule-cylinder pair before it got its own solver).
//!
//! The collision library (parry3d, f64 build) uses its own math types; the only place
//! where they meet the model's nalgebra types is [`convert`].

mod collider;
pub mod convert;
mod narrow;

use nalgebra::Point3;
use parry3d_f64::bounding_volume::Aabb;
use parry3d_f64::math::Pose as PPose;
use thiserror::Error;

use crate::math::Pose;
use crate::model::{LinkId, Robot, Shape};
use collider::Collider;
use convert::{point_from_parry, pose_to_parry};

/// Signed distance at or below which two bodies count as touching, hence in collision
/// (metres). Far below any physical clearance; it absorbs the rounding of exact contacts.
pub const TOUCH_TOLERANCE: f64 = 1e-9;

/// A fixed body of the scene: one shape whose `origin` is its pose in the world.
#[derive(Clone, Debug, PartialEq)]
pub struct Obstacle {
    pub name: String,
    pub shape: Shape,
}

/// A body taking part in a collision: a robot link or an obstacle (index into the
/// obstacle list given to [`CollisionModel::new`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Body {
    Link(LinkId),
    Obstacle(usize),
}

impl std::fmt::Display for Body {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Body::Link(l) => write!(f, "link {l}"),
            Body::Obstacle(o) => write!(f, "obstacle {o}"),
        }
    }
}

/// The smallest signed distance over all checked pairs at one configuration.
#[derive(Clone, Debug, PartialEq)]
pub struct Clearance {
    /// Metres; negative is a penetration depth. `f64::INFINITY` when there is no pair to
    /// check.
    pub distance: f64,
    /// The pair that attains it (a link first), `None` when there is no pair.
    pub pair: Option<(Body, Body)>,
    /// World witness points on `pair.0` and `pair.1`: the closest points when apart, the
    /// deepest points of the contact when penetrating.
    pub points: Option<(Point3<f64>, Point3<f64>)>,
}

/// Errors building a collision model or calling a query.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum CollisionError {
    #[error("{owner} `{name}` shape {shape}: `{field}` {reason}")]
    InvalidShape {
        owner: Body,
        name: String,
        shape: usize,
        field: &'static str,
        reason: String,
    },
    #[error("{owner} `{name}` shape {shape}: convex mesh has no volume: {reason}")]
    DegenerateHull {
        owner: Body,
        name: String,
        shape: usize,
        reason: String,
    },
    #[error("pose buffer has {got} entries, the robot has {expected} links")]
    PoseBuffer { got: usize, expected: usize },
    #[error("pose of link {link} is not finite")]
    NonFinitePose { link: LinkId },
    #[error("margin must be finite and non-negative, got {margin}")]
    InvalidMargin { margin: f64 },
    #[error("the collision library has no query for the pair {first} / {second}")]
    Unsupported { first: Body, second: Body },
}

/// Per-query working memory, owned by the caller and reused across queries (one per
/// thread). Sized on first use by the model that uses it.
#[derive(Clone, Debug, Default)]
pub struct CollisionScratch {
    /// World pose of each link collider's core.
    poses: Vec<PPose>,
    /// World bounding box of each link collider.
    aabbs: Vec<Aabb>,
    /// (lower bound, pair index), for the clearance query.
    order: Vec<(f64, u32)>,
}

impl CollisionScratch {
    pub fn new() -> Self {
        Self::default()
    }
}

/// Collision geometry of a robot among fixed obstacles, with the list of pairs to check.
pub struct CollisionModel {
    n_links: usize,
    /// Link colliders first (`0..n_link_colliders`), then obstacle colliders.
    colliders: Vec<Collider>,
    n_link_colliders: usize,
    /// Owning link of each link collider.
    collider_link: Vec<LinkId>,
    /// World pose and box of each obstacle collider (obstacles do not move).
    obstacle_poses: Vec<PPose>,
    obstacle_aabbs: Vec<Aabb>,
    /// Collider index pairs to check; the first is always a link collider.
    pairs: Vec<(u32, u32)>,
    n_self_pairs: usize,
}

// The model is shared read-only between planner threads.
const _: () = {
    const fn send_sync<T: Send + Sync>() {}
    send_sync::<CollisionModel>();
};

impl std::fmt::Debug for CollisionModel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CollisionModel")
            .field("links", &self.n_links)
            .field("link_shapes", &self.n_link_colliders)
            .field("obstacles", &self.obstacle_poses.len())
            .field("self_pairs", &self.n_self_pairs)
            .field("obstacle_pairs", &(self.pairs.len() - self.n_self_pairs))
            .finish()
    }
}

/// Distance between two boxes (zero when they overlap): a lower bound on the distance of
/// anything inside them.
#[inline]
fn aabb_distance(a: &Aabb, b: &Aabb) -> f64 {
    let gap = (a.mins - b.maxs)
        .max(b.mins - a.maxs)
        .max(parry3d_f64::math::Vector::ZERO);
    gap.length()
}

#[inline]
fn aabb_overlap(a: &Aabb, b: &Aabb, margin: f64) -> bool {
    let m = parry3d_f64::math::Vector::splat(margin);
    (a.mins - m).cmple(b.maxs).all() && (b.mins - m).cmple(a.maxs).all()
}

impl CollisionModel {
    /// Prepare the shapes of `robot`'s links and of `obstacles` for queries.
    pub fn new(robot: &Robot, obstacles: &[Obstacle]) -> Result<CollisionModel, CollisionError> {
        let mut colliders = Vec::new();
        let mut collider_link = Vec::new();
        for (l, link) in robot.links().iter().enumerate() {
            for (i, s) in link.shapes.iter().enumerate() {
                colliders.push(collider::build(Body::Link(l), &link.name, i, s)?);
                collider_link.push(l);
            }
        }
        let n_link_colliders = colliders.len();
        let mut obstacle_poses = Vec::with_capacity(obstacles.len());
        let mut obstacle_aabbs = Vec::with_capacity(obstacles.len());
        for (k, o) in obstacles.iter().enumerate() {
            let c = collider::build(Body::Obstacle(k), &o.name, 0, &o.shape)?;
            // An obstacle's shape origin is its world pose: the core frame is the world.
            obstacle_aabbs.push(c.world_aabb(&c.local));
            obstacle_poses.push(c.local);
            colliders.push(c);
        }
        let mut pairs = Vec::new();
        for i in 0..n_link_colliders {
            for j in i + 1..n_link_colliders {
                let (a, b) = (collider_link[i], collider_link[j]);
                if a != b && !robot.is_ignored_pair(a, b) {
                    pairs.push((i as u32, j as u32));
                }
            }
        }
        let n_self_pairs = pairs.len();
        for i in 0..n_link_colliders {
            for j in n_link_colliders..colliders.len() {
                pairs.push((i as u32, j as u32));
            }
        }
        Ok(CollisionModel {
            n_links: robot.links().len(),
            colliders,
            n_link_colliders,
            collider_link,
            obstacle_poses,
            obstacle_aabbs,
            pairs,
            n_self_pairs,
        })
    }

    /// Number of link-link shape pairs checked for self-collision.
    pub fn self_pair_count(&self) -> usize {
        self.n_self_pairs
    }

    /// Number of link-obstacle shape pairs checked.
    pub fn obstacle_pair_count(&self) -> usize {
        self.pairs.len() - self.n_self_pairs
    }

    /// Place every link collider at `poses` (world pose per link) and compute its box.
    fn update(&self, poses: &[Pose], scratch: &mut CollisionScratch) -> Result<(), CollisionError> {
        if poses.len() != self.n_links {
            return Err(CollisionError::PoseBuffer {
                got: poses.len(),
                expected: self.n_links,
            });
        }
        scratch.poses.clear();
        scratch.aabbs.clear();
        let mut last: Option<(LinkId, PPose)> = None;
        for (c, &l) in self.colliders.iter().zip(&self.collider_link) {
            // Colliders of one link are consecutive: convert its pose once.
            let link_pose = match last {
                Some((ll, p)) if ll == l => p,
                _ => {
                    let p = poses.get(l).ok_or(CollisionError::PoseBuffer {
                        got: poses.len(),
                        expected: self.n_links,
                    })?;
                    let ok = p
                        .translation
                        .vector
                        .iter()
                        .chain(p.rotation.matrix().iter())
                        .all(|v| v.is_finite());
                    if !ok {
                        return Err(CollisionError::NonFinitePose { link: l });
                    }
                    let p = pose_to_parry(p);
                    last = Some((l, p));
                    p
                }
            };
            let world = link_pose * c.local;
            scratch.aabbs.push(c.world_aabb(&world));
            scratch.poses.push(world);
        }
        Ok(())
    }

    #[inline]
    fn placed<'a>(
        &'a self,
        scratch: &'a CollisionScratch,
        i: usize,
    ) -> (&'a Collider, &'a PPose, &'a Aabb) {
        let c = &self.colliders[i];
        if i < self.n_link_colliders {
            (c, &scratch.poses[i], &scratch.aabbs[i])
        } else {
            let k = i - self.n_link_colliders;
            (c, &self.obstacle_poses[k], &self.obstacle_aabbs[k])
        }
    }

    fn unsupported(&self, i: usize, j: usize) -> CollisionError {
        CollisionError::Unsupported {
            first: self.colliders[i].owner,
            second: self.colliders[j].owner,
        }
    }

    /// Whether any checked pair is within `margin` metres (signed distance `<= margin`).
    /// Broad phase: world boxes grown by `margin` must overlap before the exact test.
    pub fn in_collision_with_margin(
        &self,
        poses: &[Pose],
        margin: f64,
        scratch: &mut CollisionScratch,
    ) -> Result<bool, CollisionError> {
        if !(margin.is_finite() && margin >= 0.0) {
            return Err(CollisionError::InvalidMargin { margin });
        }
        self.update(poses, scratch)?;
        self.any_within(margin, scratch)
    }

    /// Two margins at one placement of the colliders: (any checked pair within `inner`, any
    /// within `outer`), the answers of two [`CollisionModel::in_collision_with_margin`] calls.
    /// The inner test runs only when the outer one finds something.
    pub fn within_margins(
        &self,
        poses: &[Pose],
        inner: f64,
        outer: f64,
        scratch: &mut CollisionScratch,
    ) -> Result<(bool, bool), CollisionError> {
        for margin in [inner, outer] {
            if !(margin.is_finite() && margin >= 0.0) {
                return Err(CollisionError::InvalidMargin { margin });
            }
        }
        self.update(poses, scratch)?;
        if !self.any_within(outer, scratch)? {
            return Ok((false, false));
        }
        Ok((self.any_within(inner, scratch)?, true))
    }

    /// Whether any checked pair, placed by the last [`CollisionModel::update`], is within
    /// `margin`.
    fn any_within(&self, margin: f64, scratch: &CollisionScratch) -> Result<bool, CollisionError> {
        for &(i, j) in &self.pairs {
            let (i, j) = (i as usize, j as usize);
            let (a, pa, ba) = self.placed(scratch, i);
            let (b, pb, bb) = self.placed(scratch, j);
            if aabb_overlap(ba, bb, margin)
                && narrow::within(a, pa, b, pb, margin).map_err(|_| self.unsupported(i, j))?
            {
                return Ok(true);
            }
        }
        Ok(false)
    }

    /// Whether any checked pair touches or penetrates (signed distance at most
    /// [`TOUCH_TOLERANCE`]).
    pub fn in_collision(
        &self,
        poses: &[Pose],
        scratch: &mut CollisionScratch,
    ) -> Result<bool, CollisionError> {
        self.in_collision_with_margin(poses, TOUCH_TOLERANCE, scratch)
    }

    /// Every pair of bodies that touches or penetrates (signed distance at most
    /// [`TOUCH_TOLERANCE`]), each once, link first, sorted. For diagnostics: it runs the
    /// exact test on every pair whose boxes overlap.
    pub fn colliding_pairs(
        &self,
        poses: &[Pose],
        scratch: &mut CollisionScratch,
    ) -> Result<Vec<(Body, Body)>, CollisionError> {
        self.update(poses, scratch)?;
        let mut out = Vec::new();
        for &(i, j) in &self.pairs {
            let (i, j) = (i as usize, j as usize);
            let (a, pa, ba) = self.placed(scratch, i);
            let (b, pb, bb) = self.placed(scratch, j);
            if aabb_overlap(ba, bb, TOUCH_TOLERANCE)
                && narrow::within(a, pa, b, pb, TOUCH_TOLERANCE)
                    .map_err(|_| self.unsupported(i, j))?
            {
                out.push((a.owner, b.owner));
            }
        }
        out.sort_unstable();
        out.dedup();
        Ok(out)
    }

    /// The smallest signed distance over all checked pairs, with the pair and witness
    /// points.
    ///
    /// Pruning: the distance between two world boxes is a lower bound on the distance of
    /// the shapes inside. Pairs are visited in increasing order of that bound and the scan
    /// stops at the first bound that cannot beat the best distance found; each exact query
    /// also gets the best distance as its cut-off so the solver can stop early. Sorting a
    /// few hundred bounds costs less than one convex-convex narrow-phase query (see
    /// `benches/collision.rs`).
    pub fn clearance(
        &self,
        poses: &[Pose],
        scratch: &mut CollisionScratch,
    ) -> Result<Clearance, CollisionError> {
        self.update(poses, scratch)?;
        let mut order = std::mem::take(&mut scratch.order);
        order.clear();
        for (k, &(i, j)) in self.pairs.iter().enumerate() {
            let (_, _, ba) = self.placed(scratch, i as usize);
            let (_, _, bb) = self.placed(scratch, j as usize);
            order.push((aabb_distance(ba, bb), k as u32));
        }
        order.sort_unstable_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
        let mut best = Clearance {
            distance: f64::INFINITY,
            pair: None,
            points: None,
        };
        let mut result = Ok(());
        for &(bound, k) in &order {
            if bound >= best.distance {
                break;
            }
            let (i, j) = self.pairs[k as usize];
            let (i, j) = (i as usize, j as usize);
            let (a, pa, _) = self.placed(scratch, i);
            let (b, pb, _) = self.placed(scratch, j);
            match narrow::signed_distance(a, pa, b, pb, best.distance) {
                Ok(Some(d)) if d.distance < best.distance => {
                    best = Clearance {
                        distance: d.distance,
                        pair: Some((a.owner, b.owner)),
                        points: Some((point_from_parry(d.point_a), point_from_parry(d.point_b))),
                    };
                }
                Ok(_) => {}
                Err(_) => {
                    result = Err(self.unsupported(i, j));
                    break;
                }
            }
        }
        scratch.order = order;
        result.map(|()| best)
    }
}

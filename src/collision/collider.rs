//! One collision shape ready for queries: the collision library's shape, its placement in
//! the owner's frame, and a bounding box rule.
//!
//! Spheres and capsules are kept as a *core* plus a radius: a capsule is the segment
//! between its cap centres dilated by its radius. For convex sets the signed distance of
//! two dilated shapes is the signed distance of their cores minus both radii (the
//! Minkowski difference of the dilated shapes is the core difference dilated by the sum of
//! radii), so capsule pairs reduce to the closed-form segment-segment distance instead of
//! the iterative GJK solver; see `narrow.rs`. Spheres stay balls: every query against a
//! ball is already a point projection in the library, which is exact for primitives.

use std::f64::consts::FRAC_PI_2;

use nalgebra::{Point3, Rotation3, Vector3};
use parry3d_f64::bounding_volume::{Aabb, BoundingVolume};
use parry3d_f64::math::{Pose as PPose, Vector as PVector};
use parry3d_f64::shape::{Ball, ConvexPolyhedron, Cuboid, Cylinder, Segment, SharedShape, TriMesh};

use super::convert::{point_to_parry, pose_to_parry, vector_to_parry};
use super::{Body, CollisionError};
use crate::model::{Geometry, Shape};

/// A shape prepared for the narrow phase.
pub(crate) struct Collider {
    pub owner: Body,
    /// The core shape (the shape itself except for capsules, where it is the segment).
    pub core: SharedShape,
    /// Dilation radius of the core (capsule radius; zero otherwise).
    pub radius: f64,
    /// The core has no interior (a segment): two such cores never penetrate.
    pub thin: bool,
    /// Core frame in the owner's frame (link frame, or world for an obstacle).
    pub local: PPose,
    /// Bounding box of the whole shape in the core frame.
    pub local_aabb: Aabb,
    /// The library's `compute_aabb` is exact and O(1) for this shape (primitives); meshes
    /// use the core-frame box transformed instead, which is conservative and O(1).
    pub exact_aabb: bool,
}

impl Collider {
    /// World bounding box of the shape when its core frame is at `world`.
    #[inline]
    pub fn world_aabb(&self, world: &PPose) -> Aabb {
        if self.exact_aabb {
            self.core.compute_aabb(world).loosened(self.radius)
        } else {
            self.local_aabb.transform_by(world)
        }
    }
}

/// Relative tolerance below which a point set counts as flat (or a line, or a point)
/// rather than a solid: distances to the best-fit line/plane are compared with the set's
/// extent. A hull flatter than this has no usable interior.
const FLATNESS: f64 = 1e-9;

fn invalid(
    owner: Body,
    name: &str,
    shape: usize,
    field: &'static str,
    reason: String,
) -> CollisionError {
    CollisionError::InvalidShape {
        owner,
        name: name.to_string(),
        shape,
        field,
        reason,
    }
}

fn check_positive(
    owner: Body,
    name: &str,
    shape: usize,
    field: &'static str,
    v: f64,
) -> Result<(), CollisionError> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(invalid(
            owner,
            name,
            shape,
            field,
            format!("must be a positive finite number, got {v}"),
        ))
    }
}

fn check_points(
    owner: Body,
    name: &str,
    shape: usize,
    pts: &[Point3<f64>],
) -> Result<(), CollisionError> {
    match pts.iter().position(|p| !p.iter().all(|v| v.is_finite())) {
        Some(i) => Err(invalid(
            owner,
            name,
            shape,
            "mesh",
            format!("vertex {i} is not finite"),
        )),
        None => Ok(()),
    }
}

/// Why `points` span less than a solid, if they do (`None` for a proper 3-D set). Picks
/// an extreme point, the farthest from it, the farthest from their line and the farthest
/// from their plane; the set is solid iff that last distance is not negligible.
fn flatness(points: &[Point3<f64>]) -> Option<&'static str> {
    let first = points.first()?;
    let far = |f: &dyn Fn(&Point3<f64>) -> f64| {
        points
            .iter()
            .map(|p| (f(p), p))
            .fold(
                (f64::NEG_INFINITY, first),
                |a, b| if b.0 > a.0 { b } else { a },
            )
    };
    let (_, p0) = far(&|p| p.x);
    let (extent, p1) = far(&|p| (p - p0).norm());
    if extent <= 0.0 {
        return Some("all points coincide");
    }
    let u = (p1 - p0) / extent;
    let (dline, p2) = far(&|p| (p - p0 - u * u.dot(&(p - p0))).norm());
    if dline <= FLATNESS * extent {
        return Some("the points are collinear");
    }
    let n = u.cross(&(p2 - p0)).normalize();
    let (dplane, _) = far(&|p| n.dot(&(p - p0)).abs());
    if dplane <= FLATNESS * extent {
        return Some("the points are coplanar");
    }
    None
}

/// Build the collider for `shape` owned by `owner` (`name` and `index` only label errors).
pub(crate) fn build(
    owner: Body,
    name: &str,
    index: usize,
    shape: &Shape,
) -> Result<Collider, CollisionError> {
    let origin = &shape.origin;
    let finite = origin
        .translation
        .vector
        .iter()
        .chain(origin.rotation.matrix().iter())
        .all(|v| v.is_finite());
    if !finite {
        return Err(invalid(
            owner,
            name,
            index,
            "origin",
            "pose is not finite".into(),
        ));
    }
    let mut local = pose_to_parry(origin);
    let mut radius = 0.0;
    let mut thin = false;
    let mut exact_aabb = true;
    let core: SharedShape = match &shape.geometry {
        Geometry::Sphere { radius: r } => {
            check_positive(owner, name, index, "radius", *r)?;
            SharedShape::new(Ball::new(*r))
        }
        Geometry::Cuboid { size } => {
            for v in size.iter() {
                check_positive(owner, name, index, "size", *v)?;
            }
            SharedShape::new(Cuboid::new(vector_to_parry(&(size * 0.5))))
        }
        Geometry::Capsule { radius: r, length } => {
            check_positive(owner, name, index, "radius", *r)?;
            check_positive(owner, name, index, "length", *length)?;
            radius = *r;
            thin = true;
            let h = 0.5 * length;
            SharedShape::new(Segment::new(
                PVector::new(0.0, 0.0, -h),
                PVector::new(0.0, 0.0, h),
            ))
        }
        Geometry::Cylinder { radius: r, length } => {
            check_positive(owner, name, index, "radius", *r)?;
            check_positive(owner, name, index, "length", *length)?;
            // The library's cylinder runs along its y axis, ours along z: a quarter turn
            // about x takes y to z.
            let turn = Rotation3::from_axis_angle(&Vector3::x_axis(), FRAC_PI_2);
            local = pose_to_parry(&(origin * turn));
            SharedShape::new(Cylinder::new(0.5 * length, *r))
        }
        Geometry::ConvexMesh { points } => {
            check_points(owner, name, index, points)?;
            if points.len() < 4 {
                return Err(CollisionError::DegenerateHull {
                    owner,
                    name: name.to_string(),
                    shape: index,
                    reason: format!(
                        "a convex mesh needs at least 4 points, got {}",
                        points.len()
                    ),
                });
            }
            if let Some(reason) = flatness(points) {
                return Err(CollisionError::DegenerateHull {
                    owner,
                    name: name.to_string(),
                    shape: index,
                    reason: reason.to_string(),
                });
            }
            let pts: Vec<PVector> = points.iter().map(point_to_parry).collect();
            let hull = ConvexPolyhedron::from_convex_hull(&pts).ok_or_else(|| {
                CollisionError::DegenerateHull {
                    owner,
                    name: name.to_string(),
                    shape: index,
                    reason: "the convex hull could not be built".into(),
                }
            })?;
            exact_aabb = false;
            SharedShape::new(hull)
        }
        Geometry::TriMesh {
            vertices,
            triangles,
        } => {
            check_points(owner, name, index, vertices)?;
            if let Some(t) = triangles
                .iter()
                .find(|t| t.iter().any(|&i| i as usize >= vertices.len()))
            {
                return Err(invalid(
                    owner,
                    name,
                    index,
                    "mesh",
                    format!(
                        "triangle {t:?} indexes past the {} vertices",
                        vertices.len()
                    ),
                ));
            }
            let pts: Vec<PVector> = vertices.iter().map(point_to_parry).collect();
            let mesh = TriMesh::new(pts, triangles.to_vec()).map_err(|e| {
                invalid(
                    owner,
                    name,
                    index,
                    "mesh",
                    format!("not a valid triangle mesh: {e:?}"),
                )
            })?;
            exact_aabb = false;
            SharedShape::new(mesh)
        }
    };
    let local_aabb = core.compute_local_aabb().loosened(radius);
    Ok(Collider {
        owner,
        core,
        radius,
        thin,
        local,
        local_aabb,
        exact_aabb,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flatness_classifies_point_sets() {
        let p = |x, y, z| Point3::new(x, y, z);
        assert_eq!(
            flatness(&[p(1.0, 1.0, 1.0); 5]),
            Some("all points coincide")
        );
        assert_eq!(
            flatness(&[
                p(0.0, 0.0, 0.0),
                p(1.0, 1.0, 1.0),
                p(2.0, 2.0, 2.0),
                p(3.0, 3.0, 3.0)
            ]),
            Some("the points are collinear")
        );
        assert_eq!(
            flatness(&[
                p(0.0, 0.0, 0.0),
                p(1.0, 0.0, 0.0),
                p(0.0, 1.0, 0.0),
                p(1.0, 1.0, 0.0)
            ]),
            Some("the points are coplanar")
        );
        assert_eq!(
            flatness(&[
                p(0.0, 0.0, 0.0),
                p(1.0, 0.0, 0.0),
                p(0.0, 1.0, 0.0),
                p(0.0, 0.0, 1.0)
            ]),
            None
        );
    }
}

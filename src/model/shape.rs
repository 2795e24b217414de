//! Collision geometry carried by links and obstacles. Plain data in our own units (metres);
//! conversion to the collision library's types lives in `crate::collision::convert`.

use std::path::PathBuf;
use std::sync::Arc;

use nalgebra::{Point3, Vector3};

use crate::math::Pose;

/// A geometric primitive or mesh, in its own frame. Cylinders and capsules run along the
/// frame's z axis and are centred on its origin (URDF convention).
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Geometry {
    Sphere {
        radius: f64,
    },
    /// Full edge lengths (not half extents), as in URDF.
    Cuboid {
        size: Vector3<f64>,
    },
    /// `length` is the distance between the centres of the two end caps.
    Capsule {
        radius: f64,
        length: f64,
    },
    Cylinder {
        radius: f64,
        length: f64,
    },
    /// Convex hull of these points.
    ConvexMesh {
        points: Arc<Vec<Point3<f64>>>,
    },
    /// A triangle surface (not necessarily closed).
    TriMesh {
        vertices: Arc<Vec<Point3<f64>>>,
        triangles: Arc<Vec<[u32; 3]>>,
    },
}

impl Geometry {
    pub fn type_name(&self) -> &'static str {
        match self {
            Geometry::Sphere { .. } => "sphere",
            Geometry::Cuboid { .. } => "box",
            Geometry::Capsule { .. } => "capsule",
            Geometry::Cylinder { .. } => "cylinder",
            Geometry::ConvexMesh { .. } => "convex mesh",
            Geometry::TriMesh { .. } => "triangle mesh",
        }
    }

    /// Radius of a sphere about the shape's own origin that contains it.
    pub fn bounding_radius(&self) -> f64 {
        match self {
            Geometry::Sphere { radius } => *radius,
            Geometry::Cuboid { size } => 0.5 * size.norm(),
            Geometry::Capsule { radius, length } => radius + 0.5 * length,
            Geometry::Cylinder { radius, length } => {
                (radius * radius + 0.25 * length * length).sqrt()
            }
            Geometry::ConvexMesh { points } => max_norm(points),
            Geometry::TriMesh { vertices, .. } => max_norm(vertices),
        }
    }
}

fn max_norm(points: &[Point3<f64>]) -> f64 {
    points.iter().map(|p| p.coords.norm()).fold(0.0, f64::max)
}

/// Where a mesh came from, kept so a loaded robot can be written back out.
#[derive(Clone, Debug, PartialEq)]
pub struct MeshSource {
    pub path: PathBuf,
    pub scale: Vector3<f64>,
}

/// A placed geometry: `origin` is the shape frame in its owner's frame (link frame for a
/// link, world frame for an obstacle).
#[derive(Clone, Debug, PartialEq)]
pub struct Shape {
    pub origin: Pose,
    pub geometry: Geometry,
    pub source: Option<MeshSource>,
}

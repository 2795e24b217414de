//! Mesh files (STL, OBJ) read into the collision geometry of a shape: the raw points of a
//! convex hull, or an indexed triangle surface.
//!
//! STL (binary and ASCII) is read with `stl_io`, OBJ with `tobj` (faces triangulated as
//! fans, points and lines ignored, materials never read). Vertices are scaled, then merged
//! when their scaled coordinates are bit-identical (`-0.0` counts as `0.0`), so a closed STL
//! surface, which repeats every corner once per facet, gives each corner once. Triangles
//! that collapse to an edge or a point after merging are dropped.

use std::collections::HashMap;
use std::io::{BufReader, Cursor};
use std::path::Path;
use std::sync::Arc;

use nalgebra::{Point3, Vector3};

use crate::model::Geometry;

/// Read a mesh file and scale it per axis.
///
/// `convex == true` gives [`Geometry::ConvexMesh`] with the merged vertices (the collision
/// module builds their hull); `false` gives [`Geometry::TriMesh`]. A negative scale product
/// mirrors the mesh, so the winding of every triangle is reversed to keep normals outward.
///
/// The error is a short human reason ("file not found", "not a valid STL: ...") that the
/// caller puts next to the file and line of the robot file that named the mesh.
pub fn load_mesh(path: &Path, scale: Vector3<f64>, convex: bool) -> Result<Geometry, String> {
    if let Some(bad) = scale.iter().find(|s| !s.is_finite() || **s == 0.0) {
        return Err(format!("scale must be finite and non-zero, got {bad}"));
    }
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase());
    let bytes = std::fs::read(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => "file not found".to_string(),
        _ => format!("cannot read the file: {e}"),
    })?;
    let mut mesh = Indexer::new(scale);
    match ext.as_deref() {
        Some("stl") => read_stl(&bytes, &mut mesh)?,
        Some("obj") => read_obj(&bytes, &mut mesh)?,
        Some(other) => {
            return Err(format!(
                "unknown mesh type `.{other}`; expected `.stl` or `.obj`"
            ))
        }
        None => return Err("mesh file has no extension; expected `.stl` or `.obj`".into()),
    }
    if mesh.triangles.is_empty() {
        return Err("the mesh has no triangles".into());
    }
    if convex {
        Ok(Geometry::ConvexMesh {
            points: Arc::new(mesh.vertices),
        })
    } else {
        Ok(Geometry::TriMesh {
            vertices: Arc::new(mesh.vertices),
            triangles: Arc::new(mesh.triangles),
        })
    }
}

/// Builds a merged, scaled, indexed triangle list from triangles given corner by corner.
struct Indexer {
    scale: Vector3<f64>,
    flip: bool,
    index: HashMap<[u64; 3], u32>,
    vertices: Vec<Point3<f64>>,
    triangles: Vec<[u32; 3]>,
}

impl Indexer {
    fn new(scale: Vector3<f64>) -> Self {
        Indexer {
            scale,
            flip: scale.x * scale.y * scale.z < 0.0,
            index: HashMap::new(),
            vertices: Vec::new(),
            triangles: Vec::new(),
        }
    }

    fn vertex(&mut self, p: [f64; 3]) -> Result<u32, String> {
        let v = Point3::new(
            p[0] * self.scale.x,
            p[1] * self.scale.y,
            p[2] * self.scale.z,
        );
        if v.iter().any(|c| !c.is_finite()) {
            return Err(format!(
                "vertex ({}, {}, {}) is not finite",
                p[0], p[1], p[2]
            ));
        }
        // `+ 0.0` turns -0.0 into 0.0 so both merge.
        let key = [
            (v.x + 0.0).to_bits(),
            (v.y + 0.0).to_bits(),
            (v.z + 0.0).to_bits(),
        ];
        if let Some(&i) = self.index.get(&key) {
            return Ok(i);
        }
        let i = u32::try_from(self.vertices.len())
            .map_err(|_| "the mesh has more than 2^32 vertices".to_string())?;
        self.vertices.push(v);
        self.index.insert(key, i);
        Ok(i)
    }

    fn triangle(&mut self, corners: [[f64; 3]; 3]) -> Result<(), String> {
        let a = self.vertex(corners[0])?;
        let b = self.vertex(corners[1])?;
        let c = self.vertex(corners[2])?;
        if a != b && b != c && a != c {
            self.triangles
                .push(if self.flip { [a, c, b] } else { [a, b, c] });
        }
        Ok(())
    }
}

fn read_stl(bytes: &[u8], mesh: &mut Indexer) -> Result<(), String> {
    let mut cursor = Cursor::new(bytes);
    let stl = stl_io::read_stl(&mut cursor).map_err(|e| format!("not a valid STL: {e}"))?;
    for face in &stl.faces {
        let mut corners = [[0.0; 3]; 3];
        for (corner, &vi) in corners.iter_mut().zip(face.vertices.iter()) {
            let v = stl
                .vertices
                .get(vi)
                .ok_or_else(|| format!("not a valid STL: vertex index {vi} out of range"))?;
            *corner = [f64::from(v[0]), f64::from(v[1]), f64::from(v[2])];
        }
        mesh.triangle(corners)?;
    }
    Ok(())
}

fn read_obj(bytes: &[u8], mesh: &mut Indexer) -> Result<(), String> {
    let options = tobj::LoadOptions {
        triangulate: true,
        ignore_points: true,
        ignore_lines: true,
        ..Default::default()
    };
    let mut reader = BufReader::new(Cursor::new(bytes));
    // Materials only colour a mesh; never open the files they name.
    let (models, _) = tobj::load_obj_buf(&mut reader, &options, |_| Ok(Default::default()))
        .map_err(|e| format!("not a valid OBJ: {e}"))?;
    for model in &models {
        let m = &model.mesh;
        let corner = |i: u32| -> Result<[f64; 3], String> {
            let at = i as usize * 3;
            match m.positions.get(at..at + 3) {
                Some(p) => Ok([p[0], p[1], p[2]]),
                None => Err(format!(
                    "not a valid OBJ: face refers to vertex {} of {}",
                    i + 1,
                    m.positions.len() / 3
                )),
            }
        };
        for t in m.indices.chunks_exact(3) {
            mesh.triangle([corner(t[0])?, corner(t[1])?, corner(t[2])?])?;
        }
    }
    Ok(())
}

//! Mesh files (STL, OBJ) read into convex hulls or triangle meshes. OWNER: urdf helper. To be written.

use std::path::Path;

use nalgebra::Vector3;

use crate::model::Geometry;

/// TEMPORARY stand-in added by the toml helper so the TOML reader compiles; the urdf
/// helper owns this file and replaces it with the real loader (same signature).
pub fn load_mesh(_path: &Path, _scale: Vector3<f64>, _convex: bool) -> Result<Geometry, String> {
    Err("mesh loading not available yet".to_string())
}

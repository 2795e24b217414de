//! Mesh files (STL, OBJ) read into convex hulls or triangle meshes. OWNER: urdf helper. To be written.

#!/usr/bin/env python3
"""Writes the small test meshes in this directory (run from anywhere; output is committed).

cube.stl        binary STL, axis-aligned cube of edge 1 centred on the origin (12 facets)
cube_ascii.stl  the same cube as ASCII STL
tetra.obj       OBJ tetrahedron with corners (0,0,0) (1,0,0) (0,1,0) (0,0,1)
octahedron.obj  OBJ octahedron with corners +-e_x, +-e_y, +-e_z (scaled by 0.5)
pyramid.obj     OBJ square pyramid whose base is one quad face (tests triangulation)
empty.stl       binary STL with zero facets
garbage.stl     five bytes that are not an STL file
"""
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))


def cube_triangles():
    h = 0.5
    tris = []
    # Each face: outward normal axis, sign; corners in counter-clockwise order seen from outside.
    for axis in range(3):
        for sign in (1.0, -1.0):
            u, v = (axis + 1) % 3, (axis + 2) % 3
            corners = []
            for a, b in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
                p = [0.0, 0.0, 0.0]
                p[axis] = sign * h
                p[u] = a * h
                p[v] = b * h * sign  # flip winding on the negative face
                corners.append(p)
            n = [0.0, 0.0, 0.0]
            n[axis] = sign
            tris.append((n, corners[0], corners[1], corners[2]))
            tris.append((n, corners[0], corners[2], corners[3]))
    return tris


def write_binary_stl(path, tris):
    with open(path, "wb") as f:
        f.write(b"clamber test mesh (binary)".ljust(80, b" "))
        f.write(struct.pack("<I", len(tris)))
        for n, a, b, c in tris:
            f.write(struct.pack("<12fH", *n, *a, *b, *c, 0))


def write_ascii_stl(path, tris):
    with open(path, "w") as f:
        f.write("solid cube\n")
        for n, a, b, c in tris:
            f.write("  facet normal %r %r %r\n    outer loop\n" % tuple(n))
            for p in (a, b, c):
                f.write("      vertex %r %r %r\n" % tuple(p))
            f.write("    endloop\n  endfacet\n")
        f.write("endsolid cube\n")


def write_obj(path, vertices, faces, comment):
    with open(path, "w") as f:
        f.write("# %s\n" % comment)
        for v in vertices:
            f.write("v %r %r %r\n" % tuple(v))
        for face in faces:
            f.write("f " + " ".join(str(i + 1) for i in face) + "\n")


tris = cube_triangles()
write_binary_stl(os.path.join(HERE, "cube.stl"), tris)
write_ascii_stl(os.path.join(HERE, "cube_ascii.stl"), tris)
write_obj(
    os.path.join(HERE, "tetra.obj"),
    [(0.0, 0.0, 0.0), (1.0, 0.0, 0.0), (0.0, 1.0, 0.0), (0.0, 0.0, 1.0)],
    [(0, 2, 1), (0, 1, 3), (0, 3, 2), (1, 2, 3)],
    "tetrahedron, corners at the origin and the unit points",
)
h = 0.5
write_obj(
    os.path.join(HERE, "octahedron.obj"),
    [(h, 0.0, 0.0), (-h, 0.0, 0.0), (0.0, h, 0.0), (0.0, -h, 0.0), (0.0, 0.0, h), (0.0, 0.0, -h)],
    [(0, 2, 4), (2, 1, 4), (1, 3, 4), (3, 0, 4), (2, 0, 5), (1, 2, 5), (3, 1, 5), (0, 3, 5)],
    "octahedron, corners at +-0.5 on each axis",
)
write_obj(
    os.path.join(HERE, "pyramid.obj"),
    [(-1.0, -1.0, 0.0), (1.0, -1.0, 0.0), (1.0, 1.0, 0.0), (-1.0, 1.0, 0.0), (0.0, 0.0, 1.0)],
    [(0, 3, 2, 1), (0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4)],
    "square pyramid: base quad (-1..1)^2 at z=0, apex (0,0,1)",
)
write_binary_stl(os.path.join(HERE, "empty.stl"), [])
with open(os.path.join(HERE, "garbage.stl"), "wb") as f:
    f.write(b"hello")

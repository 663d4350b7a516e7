"""Mesh files (STL, OBJ, DAE, ...) read for the 3-D view with trimesh.

trimesh is optional (the `view3d` extra): without it, or when a file does
not load, the caller draws the link another way and the page says why.  A
mesh with more triangles than the page can carry is replaced by its convex
hull (SciPy's Qhull through trimesh), and said so.
"""

from __future__ import annotations

import numpy as np

__all__ = ["MAX_MESH_TRIANGLES", "load_mesh"]

#: triangles one mesh may keep in the page (about 40 bytes each once encoded)
MAX_MESH_TRIANGLES = 6000


def load_mesh(path, scale=(1.0, 1.0, 1.0), *, max_triangles=MAX_MESH_TRIANGLES):
    """Vertices and triangles of a mesh file, scaled, in the file's own frame.

    Parameters
    ----------
    path : Path           the file (format from its suffix: STL, OBJ, DAE, PLY, ...)
    scale : (3,)          the URDF <mesh scale>
    max_triangles : int   above this the convex hull is kept instead

    Returns
    -------
    (vertices (n, 3) float32 m, faces (m, 3) uint32, rgba (4,) or None, note str or None)

    Raises
    ------
    ValueError   trimesh missing, the file does not load, or it holds no triangle
    """
    try:
        import trimesh
    except ImportError:
        raise ValueError("trimesh is not installed (pip install 'opspace[view3d]')") from None
    try:
        mesh = trimesh.load(str(path), force="mesh", process=True)
    except Exception as exc:  # trimesh raises many kinds for a bad or unknown file
        raise ValueError(f"{path.name} does not load ({type(exc).__name__}: {exc})") from None
    if not isinstance(mesh, trimesh.Trimesh) or len(mesh.faces) == 0:
        raise ValueError(f"{path.name} holds no triangles")
    note = None
    if len(mesh.faces) > max_triangles:
        n = len(mesh.faces)
        mesh = mesh.convex_hull
        note = f"{path.name}: {n} triangles, its convex hull ({len(mesh.faces)}) is drawn"
    rgba = _main_colour(mesh)
    vertices = (np.asarray(mesh.vertices, float) * np.asarray(scale, float)).astype(np.float32)
    return vertices, np.asarray(mesh.faces, np.uint32), rgba, note


def _main_colour(mesh):
    """The mesh's own colour (0..1 rgba) when it carries one, else None."""
    try:
        c = np.asarray(mesh.visual.main_color, float) / 255.0
    except Exception:  # texture-only visuals have no main colour
        return None
    if c.shape != (4,) or np.allclose(c[:3], 102 / 255.0):  # trimesh's default grey
        return None
    return tuple(float(v) for v in c)

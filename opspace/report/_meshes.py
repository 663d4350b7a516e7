"""Mesh files (STL, OBJ, DAE, ...) read for the 3-D view with trimesh.

trimesh is optional (the `view3d` extra): without it, or when a file does
not load, the caller draws the link another way and the page says why.  A
mesh with more triangles than the page can carry is replaced by its convex
hull (SciPy's Qhull through trimesh), or by its bounding box when the hull
is as fine, and said so.
"""

from __future__ import annotations

import numpy as np

__all__ = ["MAX_MESH_TRIANGLES", "MAX_PAGE_TRIANGLES", "load_mesh"]

#: triangles one mesh may keep in the page (about 40 bytes each once encoded)
MAX_MESH_TRIANGLES = 6000
#: triangles all the meshes of a page may keep (about 2.4 MB)
MAX_PAGE_TRIANGLES = 60000


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
        hull = mesh.convex_hull
        if len(hull.faces) <= max_triangles:
            mesh = hull
            note = f"{path.name}: {n} triangles, its convex hull ({len(mesh.faces)}) is drawn"
        else:   # a fine convex mesh: its hull is as fine
            mesh = trimesh.creation.box(bounds=mesh.bounds)
            note = f"{path.name}: {n} triangles, its bounding box is drawn"
    rgba = _main_colour(mesh)
    scale = np.asarray(scale, float) * _collada_unit(path)
    vertices = (np.asarray(mesh.vertices, float) * scale).astype(np.float32)
    return vertices, np.asarray(mesh.faces, np.uint32), rgba, note


def _collada_unit(path):
    """Metres per unit of a COLLADA file's <asset><unit meter>, which trimesh
    leaves to the caller (URDF viewers honour it); 1 for other formats."""
    if path.suffix.lower() != ".dae":
        return 1.0
    import xml.etree.ElementTree as ET

    try:
        for _, element in ET.iterparse(str(path)):
            if element.tag.rsplit("}", 1)[-1] == "unit":
                meter = float(element.get("meter", "1"))
                return meter if np.isfinite(meter) and meter > 0 else 1.0
            if element.tag.rsplit("}", 1)[-1] == "asset":
                break
    except (ET.ParseError, ValueError, OSError):
        pass
    return 1.0


def _main_colour(mesh):
    """The mesh's own colour (0..1 rgba) when it carries one, else None."""
    try:
        c = np.asarray(mesh.visual.main_color, float) / 255.0
    except Exception:  # texture-only visuals have no main colour
        return None
    if c.shape != (4,) or np.allclose(c[:3], 102 / 255.0):  # trimesh's default grey
        return None
    return tuple(float(v) for v in c)

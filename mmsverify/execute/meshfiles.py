"""Solutions written in a mesh format (VTU through meshio): fields, points and cell volumes.

A code that already writes VTK output needs no CSV writer: each level's
result may be an unstructured VTK file (``.vtu``) with the problem's
fields as point data or as cell data.

* Cell data: the points are the cell centroids and the weights the cell
  volumes (lengths, areas).
* Point data: the points are the mesh nodes and each node's weight is its
  share of the cells around it (every cell gives each of its nodes an
  equal part of its volume, the lumped vertex rule).

When a field is present as cell data, the cell data are used; point and
cell data are not mixed, since one solution has one set of points.
Supported cells: lines, triangles, quadrilaterals (planar) and
tetrahedra. The file is parsed as data only (meshio, an optional
dependency: ``pip install meshio``).
"""

import numpy as np

from mmsverify.errors import SolverError

__all__ = ["MESH_FORMATS", "read_mesh_columns", "cell_volumes"]

#: Output formats read through meshio.
MESH_FORMATS = ("vtu",)


def _simplex_measure(p, dim):
    """Length, area or volume of simplices with vertex coordinates ``p`` of shape (cells, dim+1, space)."""
    edges = p[:, 1:, :] - p[:, :1, :]
    if dim == 1:
        return np.linalg.norm(edges[:, 0], axis=1)
    if dim == 2:
        if p.shape[2] == 2:
            return 0.5 * np.abs(edges[:, 0, 0] * edges[:, 1, 1] - edges[:, 0, 1] * edges[:, 1, 0])
        return 0.5 * np.linalg.norm(np.cross(edges[:, 0], edges[:, 1]), axis=1)
    return np.abs(np.linalg.det(edges)) / 6.0


_SPLITS = {"line": (1, [[0, 1]]), "triangle": (2, [[0, 1, 2]]), "quad": (2, [[0, 1, 2], [0, 2, 3]]),
           "tetra": (3, [[0, 1, 2, 3]])}


def cell_volumes(points, cell_type, connectivity):
    """Volume of each cell of one block (quadrilaterals split into two triangles).

    >>> p = np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]])
    >>> cell_volumes(p, "quad", np.array([[0, 1, 2, 3]])).tolist()
    [2.0]
    """
    if cell_type not in _SPLITS:
        raise SolverError(f"cells of type {cell_type!r} are not supported; use "
                          f"{', '.join(_SPLITS)} cells")
    dim, parts = _SPLITS[cell_type]
    return sum(_simplex_measure(points[connectivity[:, part]], dim) for part in parts)


def read_mesh_columns(path, coords, fields):
    """Columns of a mesh file as :func:`mmsverify.execute.external.read_solution` reads them.

    Returns a dict with one array per coordinate name in ``coords``,
    ``volume``, and every point or cell data array (see the module text).
    """
    try:
        import meshio
    except ImportError:
        raise SolverError("reading .vtu solutions needs meshio; pip install meshio") from None
    try:
        mesh = meshio.read(str(path))
    except Exception as exc:   # meshio raises many kinds for a malformed file; the level fails with the reason
        raise ValueError(f"{path} is not a readable mesh file ({type(exc).__name__}: {exc})") from None
    pts = np.asarray(mesh.points, dtype=float)
    dim = len(coords)
    blocks = [b for b in mesh.cells if b.type != "vertex"]
    if not blocks:
        raise ValueError(f"{path} holds no cells; write the mesh's cells with the solution")
    volumes = [cell_volumes(pts[:, :dim], b.type, np.asarray(b.data)) for b in blocks]
    keep = [i for i, b in enumerate(mesh.cells) if b.type != "vertex"]
    if any(f in mesh.cell_data for f in fields):
        centres = np.concatenate([pts[np.asarray(b.data)].mean(axis=1) for b in blocks])
        cols = {c: centres[:, i] for i, c in enumerate(coords)}
        cols["volume"] = np.concatenate(volumes)
        for name, per_block in mesh.cell_data.items():
            cols[name] = np.concatenate([np.asarray(per_block[i]).reshape(len(blocks[j].data), -1)[:, 0]
                                         if np.ndim(per_block[i]) > 1 else np.asarray(per_block[i])
                                         for j, i in enumerate(keep)])
        return cols
    share = np.zeros(len(pts))
    for b, v in zip(blocks, volumes):
        conn = np.asarray(b.data)
        np.add.at(share, conn.ravel(), np.repeat(v / conn.shape[1], conn.shape[1]))
    cols = {c: pts[:, i] for i, c in enumerate(coords)}
    cols["volume"] = share
    cols.update({name: np.asarray(a) for name, a in mesh.point_data.items()})
    return cols

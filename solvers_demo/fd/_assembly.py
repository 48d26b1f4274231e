"""Node-centred, conservative assembly of ``-div(k grad u)`` in 1 to 3 dimensions.

Every node owns a control volume: a full cell width in each direction, half
a width at a Neumann end. The flux through the face between nodes ``i`` and
``i+1`` along an axis is ``k(x_{i+1/2}) (u_{i+1} - u_i) / h``. Rows are kept
in volume form (multiplied by the control volume), which makes the matrix
symmetric, so conjugate gradients with algebraic multigrid apply.

Boundary treatments (LeVeque 2007, Finite Difference Methods for ODEs and
PDEs, sections 2.12-2.13):

* Dirichlet: the node takes the boundary value (exact).
* Neumann ``"flux"``: the half control volume receives the given outward
  flux; for constant ``k`` this equals the centred ghost-node elimination.
  Second order.
* Neumann ``"one-sided"``: the row becomes ``k (u_b - u_in) / h = q``.
  First order.
* Neumann ``"one-sided-3pt"``: ``k (3 u_b - 4 u_1 + u_2) / (2h) = q``.
  Second order, but the row breaks symmetry.

Rows of a one-sided Neumann node are algebraic (no control volume); a
time-stepping solver must impose them at the new time level.
"""

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sps

__all__ = ["SIDES", "NodeSystem", "assemble_diffusion", "MISTAKE_EFFECTS"]

SIDES = (("x_min", "x_max"), ("y_min", "y_max"), ("z_min", "z_max"))

#: Seeded mistakes this assembly knows, with what each does.
MISTAKE_EFFECTS = {
    "dy-uses-dx": "the x spacing is used in the flux of every direction",
    "source-shifted": "the source is evaluated one node to the right (index off by one)",
    "coefficient-shifted": "k at the face's left node instead of the face midpoint",
    "coefficient-nonconservative": "k(x_i) (u_{i+1} - 2 u_i + u_{i-1}) / h^2: the k' u' term is missing",
    "dirichlet-shifted": "Dirichlet data evaluated at the first interior node instead of on the boundary",
    "neumann-sign": "Neumann flux added with the inward instead of the outward normal",
    "neumann-full-volume": "a Neumann node's source and storage use a full instead of a half cell",
}


@dataclass(frozen=True)
class NodeSystem:
    """A linear system ``K u = load`` on all nodes, with Dirichlet nodes apart.

    Attributes
    ----------
    K : scipy.sparse.csr_matrix
        Volume-form operator; rows of Dirichlet nodes are empty.
    load : ndarray
        Flat right-hand side (volume times source plus boundary fluxes).
    mass : ndarray
        Control volume per node for storage terms; 0 on algebraic rows.
    dirichlet : ndarray of bool
        Flat mask of nodes with prescribed values.
    values : ndarray
        Flat Dirichlet values (zero elsewhere).
    symmetric : bool
        Whether ``K`` restricted to the free nodes is symmetric.
    shape : tuple
        Node array shape.
    """

    K: object
    load: np.ndarray
    mass: np.ndarray
    dirichlet: np.ndarray
    values: np.ndarray
    symmetric: bool
    shape: tuple


def _face_slice(dim, axis, end):
    index = [slice(None)] * dim
    index[axis] = end
    return tuple(index)


def assemble_diffusion(case, t=None, neumann="flux", mistake="", coefficient="k", with_matrix=True):
    """Assemble the node system of ``-div(k grad u) = f`` on ``case.grid`` at time ``t``.

    Parameters
    ----------
    case : mmsverify.Case
    t : float, optional
        Time at which sources, coefficients and boundary data are taken.
    neumann : {"flux", "one-sided", "one-sided-3pt"}
    mistake : str
        One of :data:`MISTAKE_EFFECTS` or ``""``.
    coefficient : str or None
        Operator parameter used as ``k``; None for ``k = 1``.
    with_matrix : bool
        False skips the matrix (``K`` is None): a time stepper whose
        coefficients do not change in time needs only new loads.

    Returns
    -------
    NodeSystem
    """
    grid, mms = case.grid, case.mms
    field = mms.problem.field_names[0]
    dim = grid.dim
    axes = [grid.nodes(a) for a in range(dim)]
    shape = tuple(len(x) for x in axes)
    pts = np.meshgrid(*axes, indexing="ij", sparse=True)
    kinds = [tuple(mms.boundary(field, s) for s in SIDES[a]) for a in range(dim)]
    h = grid.spacing
    index = np.arange(np.prod(shape)).reshape(shape)
    tk = {} if t is None else {"t": t}

    constant = 1.0 if coefficient is None else mms.problem.parameter_constant(coefficient)

    def k_at(*coords):
        shape_k = np.broadcast_shapes(*(np.shape(c) for c in coords))
        if constant is not None:   # a constant coefficient (Poisson's k = 1): no array to evaluate
            return np.broadcast_to(np.float64(constant), shape_k)
        return np.broadcast_to(mms.parameter(coefficient, *coords, **tk), shape_k)

    # widths of the control volumes per axis (half at Neumann ends)
    widths = []
    for a in range(dim):
        w = np.full(shape[a], h[a])
        for end, kind in zip((0, -1), kinds[a]):
            if kind == "neumann":
                w[end] *= 0.5
        widths.append(w.reshape([-1 if b == a else 1 for b in range(dim)]))
    volume = np.ones(shape)
    for w in widths:
        volume = volume * w

    K = _matrix(shape, axes, pts, widths, h, index, k_at, mistake) if with_matrix else None

    src_pts = list(pts)
    if mistake == "source-shifted":
        src_pts[0] = pts[0] + h[0]
    source = np.broadcast_to(mms.source(field, *src_pts, **tk), shape)
    src_volume = volume
    if mistake == "neumann-full-volume":
        src_volume = np.prod(np.broadcast_arrays(*[np.full(shape[a], h[a]).reshape(widths[a].shape)
                                                   for a in range(dim)]), axis=0)
    load = (src_volume * source).ravel().copy()
    mass = src_volume.ravel().copy()
    dirichlet = np.zeros(shape, dtype=bool)
    values = np.zeros(shape)
    algebraic = []  # (boundary node flat indices, inner indices..., coefficients, flux values)
    for a in range(dim):
        area = np.ones(shape)
        for b, w in enumerate(widths):
            if b != a:
                area = area * w
        for end, side in zip((0, -1), SIDES[a]):
            face = _face_slice(dim, a, end)
            fpts = list(pts)
            fpts[a] = np.array(axes[a][end]).reshape((1,) * dim)
            fshape = tuple(1 if b == a else n_ for b, n_ in enumerate(shape))
            if kinds[a][end == -1] == "dirichlet":
                dpts = list(fpts)
                if mistake == "dirichlet-shifted":
                    dpts[a] = np.array(axes[a][1 if end == 0 else -2]).reshape((1,) * dim)
                dirichlet[face] = True
                values[face] = np.broadcast_to(mms.boundary_value(field, side, *dpts, **tk), fshape).reshape(
                    values[face].shape)
                continue
            q = np.broadcast_to(mms.normal_flux(field, side, *fpts, **tk), fshape).reshape(values[face].shape)
            if mistake == "neumann-sign":
                q = -q
            if neumann == "flux":
                load.reshape(shape)[face] += area[face] * q
            else:
                step = 1 if end == 0 else -1
                first = _face_slice(dim, a, end + step)
                second = _face_slice(dim, a, end + 2 * step)
                kb = np.broadcast_to(k_at(*fpts), fshape).reshape(values[face].shape)
                if neumann == "one-sided":
                    coeffs = [(face, 1.0), (first, -1.0)]
                    scale = kb / h[a]
                else:
                    coeffs = [(face, 1.5), (first, -2.0), (second, 0.5)]
                    scale = kb / h[a]
                algebraic.append((index[face].ravel(), [(index[s].ravel(), c) for s, c in coeffs],
                                  scale.ravel(), q.ravel()))
    if algebraic and K is not None:
        K = K.tolil()
        for bnodes, terms, scale, q in algebraic:
            for m, node in enumerate(bnodes):
                if dirichlet.flat[node]:
                    continue
                K.rows[node] = [int(idx[m]) for idx, _ in terms]
                K.data[node] = [float(c * scale[m]) for _, c in terms]
        K = K.tocsr()
    for bnodes, terms, scale, q in algebraic:
        keep = ~dirichlet.ravel()[bnodes]
        load[bnodes[keep]] = q[keep]
        mass[bnodes[keep]] = 0.0
    d = dirichlet.ravel()
    if K is not None:
        K.data[np.repeat(d, np.diff(K.indptr))] = 0.0   # empty the Dirichlet rows
        K.eliminate_zeros()
    load[d] = 0.0
    mass[d] = 0.0
    symmetric = not algebraic and mistake != "coefficient-nonconservative"
    return NodeSystem(K, load, mass, d, values.ravel(), symmetric, shape)


def _matrix(shape, axes, pts, widths, h, index, k_at, mistake):
    """Volume-form flux-difference matrix (before boundary rows are applied).

    Faces between neighbours along each axis fill the diagonal and two
    bands; every update is a strided view of the node array (no index
    arrays), which keeps assembly linear in memory traffic on large grids.
    """
    dim = len(shape)
    n = int(np.prod(shape))
    diagonal = np.zeros(shape)
    bands = {}
    for a in range(dim):
        ha = h[0] if mistake == "dy-uses-dx" else h[a]
        area = np.ones(())
        for b, w in enumerate(widths):
            if b != a:
                area = area * w          # broadcasts; stays lower-dimensional
        lo = _face_slice(dim, a, slice(None, -1))
        hi = _face_slice(dim, a, slice(1, None))
        mid = [p for p in pts]
        mid[a] = 0.5 * (axes[a][1:] + axes[a][:-1]).reshape([-1 if b == a else 1 for b in range(dim)])
        if mistake == "coefficient-shifted":
            mid[a] = axes[a][:-1].reshape(mid[a].shape)
        face_shape = tuple(m - 1 if b == a else m for b, m in enumerate(shape))
        area_f = np.broadcast_to(area, shape)
        if mistake == "coefficient-nonconservative":
            knode = np.broadcast_to(k_at(*pts), shape)
            a_lo = area_f[lo] * (knode[lo] / ha)
            a_hi = area_f[hi] * (knode[hi] / ha)
        else:
            c = np.broadcast_to(k_at(*mid) / ha, face_shape)
            a_lo = area_f[lo] * c
            a_hi = area_f[hi] * c
        stride = int(index.strides[a] // index.itemsize)
        diagonal[lo] += a_lo            # each node is the low end of at most one face per axis
        diagonal[hi] += a_hi
        up, down = np.zeros(shape), np.zeros(shape)
        up[lo] = -a_lo                  # entry (i, i + stride), stored at the low node i
        down[lo] = -a_hi                # entry (i + stride, i), stored at the low node i
        bands[stride] = up.ravel()[:n - stride]
        bands[-stride] = down.ravel()[:n - stride]
        del a_lo, a_hi, up, down
    K = sps.diags([diagonal.ravel()] + list(bands.values()), [0] + list(bands), shape=(n, n), format="csr")
    return K

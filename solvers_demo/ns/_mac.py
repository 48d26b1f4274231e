"""Index bookkeeping and affine stencil operators of a 2-D staggered (MAC) grid.

Pressure lives at cell centres ``(i + 1/2, j + 1/2)``, ``u`` on vertical
faces ``(i, j + 1/2)`` and ``v`` on horizontal faces ``(i + 1/2, j)`` (Harlow
& Welch 1965, Phys. Fluids 8:2182). Velocity components normal to a wall sit
on it and are known; tangential components lie half a cell inside, and a
ghost row outside the wall is extrapolated quadratically from the wall
value and two inner values, ``u_g = (8 u_w - 6 u_0 + u_1) / 3``, which keeps
the Laplacian's wall-row truncation error at O(h).

Every operator is *affine* in the unknowns: ``op(X) = M @ X + m``, stored
as a pair so Newton's method can use ``M`` directly.
"""

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sps

__all__ = ["Affine", "MacGrid"]


@dataclass(frozen=True)
class Affine:
    """``M @ x + m``."""

    M: object
    m: np.ndarray

    def __call__(self, x):
        return self.M @ x + self.m

    def __matmul__(self, other):
        """Compose with another affine map: ``self(other(x))``."""
        return Affine((self.M @ other.M).tocsr(), self.M @ other.m + self.m)

    def scaled(self, c):
        return Affine((self.M * c).tocsr(), self.m * c)

    def __sub__(self, other):
        return Affine((self.M - other.M).tocsr(), self.m - other.m)

    def __add__(self, other):
        return Affine((self.M + other.M).tocsr(), self.m + other.m)


def _select(rows, cols, n_cols):
    """Sparse 0/1 matrix picking entries ``cols`` (flat) into ``rows`` positions."""
    return sps.csr_matrix((np.ones(len(rows)), (np.arange(len(rows)), cols)), shape=(len(rows), n_cols))


class MacGrid:
    """A MAC grid on a box with ``nx`` by ``ny`` cells and its affine operators.

    Parameters
    ----------
    grid : mmsverify.Grid
    u_wall, v_wall : callable
        ``(x, y) -> value`` of the wall (Dirichlet) data of u and v.
    ghost : {"quadratic", "wall-value"}
        Tangential ghost rule; ``"wall-value"`` (the wall value copied to the
        ghost, i.e. imposed half a cell off the wall) is a seeded mistake.
    """

    def __init__(self, grid, u_wall, v_wall, ghost="quadratic"):
        (x0, y0), (x1, y1) = grid.lower, grid.upper
        self.nx, self.ny = nx, ny = grid.cells
        self.hx, self.hy = grid.spacing
        self.xn = np.linspace(x0, x1, nx + 1)
        self.yn = np.linspace(y0, y1, ny + 1)
        self.xc = 0.5 * (self.xn[1:] + self.xn[:-1])
        self.yc = 0.5 * (self.yn[1:] + self.yn[:-1])
        self.nu_ = (nx - 1) * ny         # interior u unknowns
        self.nv_ = nx * (ny - 1)         # interior v unknowns
        self.np_ = nx * ny
        self.ghost = ghost
        # full u array (nx+1, ny) with walls x = x0, x1 known; full v array (nx, ny+1)
        self.u_full = self._embed((nx + 1, ny), axis=0, wall=u_wall(self.xn[:, None], self.yc[None, :]))
        self.v_full = self._embed((nx, ny + 1), axis=1, wall=v_wall(self.xc[:, None], self.yn[None, :]))
        # extended arrays with ghost rows across the tangential walls
        self.u_ext = self._ghosts(self.u_full, (nx + 1, ny), axis=1, wall=u_wall(self.xn[:, None],
                                                                                   self.yn[[0, -1]][None, :]))
        self.v_ext = self._ghosts(self.v_full, (nx, ny + 1), axis=0, wall=v_wall(self.xn[[0, -1]][:, None],
                                                                                   self.yn[None, :]))

    # -- embedding of unknowns ---------------------------------------------------------------
    def _embed(self, shape, axis, wall):
        """Affine map from interior unknowns to the full array (walls normal to ``axis`` known)."""
        full = np.zeros(shape)
        known = np.zeros(shape, dtype=bool)
        sl_lo = [slice(None)] * 2
        sl_hi = [slice(None)] * 2
        sl_lo[axis], sl_hi[axis] = 0, -1
        known[tuple(sl_lo)] = known[tuple(sl_hi)] = True
        full[known] = np.broadcast_to(wall, shape)[known]
        free = np.flatnonzero(~known.ravel())
        M = sps.csr_matrix((np.ones(free.size), (free, np.arange(free.size))), shape=(full.size, free.size))
        return Affine(M, full.ravel())

    def _ghosts(self, full, shape, axis, wall):
        """Add one ghost layer on each side across ``axis`` (tangential walls)."""
        n_full = int(np.prod(shape))
        index = np.arange(n_full).reshape(shape)
        ext_shape = list(shape)
        ext_shape[axis] += 2
        n_ext = int(np.prod(ext_shape))
        rows, cols, vals = [], [], []
        const = np.zeros(ext_shape)
        eidx = np.arange(n_ext).reshape(ext_shape)
        inner = [slice(None)] * 2
        inner[axis] = slice(1, -1)
        rows.append(eidx[tuple(inner)].ravel())
        cols.append(index.ravel())
        vals.append(np.ones(n_full))
        for side, (g, a, b) in enumerate(((0, 0, 1), (-1, -1, -2))):
            gsl, asl, bsl = ([slice(None)] * 2 for _ in range(3))
            gsl[axis], asl[axis], bsl[axis] = g, a, b
            w = np.take(wall, side, axis=axis)
            if self.ghost == "wall-value":
                const[tuple(gsl)] = w
                continue
            for src, c in ((asl, -2.0), (bsl, 1.0 / 3.0)):
                rows.append(eidx[tuple(gsl)].ravel())
                cols.append(index[tuple(src)].ravel())
                vals.append(np.full(index[tuple(src)].size, c))
            const[tuple(gsl)] = 8.0 / 3.0 * w
        G = sps.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                           shape=(n_ext, n_full))
        return Affine(G, const.ravel()) @ full

    # -- stencils on extended arrays ------------------------------------------------------
    def pick(self, ext_shape, rows_idx, shift):
        """Select ``ext[i + di, j + dj]`` for every (i, j) in ``rows_idx`` (pairs of index arrays)."""
        i, j = rows_idx
        di, dj = shift
        flat = np.ravel_multi_index((i + di, j + dj), ext_shape)
        return _select(np.arange(i.size), flat, int(np.prod(ext_shape)))

    def u_points(self):
        """Indices of the interior u unknowns in the extended u array (shape (nx+1, ny+2))."""
        i, j = np.meshgrid(np.arange(1, self.nx), np.arange(self.ny), indexing="ij")
        return i.ravel(), j.ravel() + 1

    def v_points(self):
        """Indices of the interior v unknowns in the extended v array (shape (nx+2, ny+1))."""
        i, j = np.meshgrid(np.arange(self.nx), np.arange(1, self.ny), indexing="ij")
        return i.ravel() + 1, j.ravel()

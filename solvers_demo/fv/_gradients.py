"""Least-squares cell gradients as sparse linear operators.

For cell ``P`` with links to neighbour cells and to boundary faces with
known values, the weighted least-squares gradient minimises
``sum w_k (u_k - u_P - g . d_k)**2`` with ``w_k = 1/|d_k|**2``. It is exact
for linear fields on any mesh, hence first-order accurate in general and
second order on smooth meshes (Barth & Jespersen 1989, AIAA 89-0366;
Diskin & Thomas 2010, Notes on accuracy of finite-volume discretization
schemes on irregular grids, Appl. Numer. Math. 60:224-226).

Because the gradient is linear in the cell values it is returned as
matrices ``Gx, Gy`` and vectors ``bx, by`` (the boundary-value part):
``grad_x = Gx @ u + bx``.
"""

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sps

__all__ = ["LinearGradient", "least_squares_gradient", "face_interpolation"]


@dataclass(frozen=True)
class LinearGradient:
    """``grad u = (Gx @ u + bx, Gy @ u + by)`` for every cell."""

    Gx: object
    Gy: object
    bx: np.ndarray
    by: np.ndarray

    def __call__(self, u):
        return self.Gx @ u + self.bx, self.Gy @ u + self.by


def least_squares_gradient(mesh, boundary_mask, boundary_values):
    """The weighted least-squares gradient operator of a mesh.

    Parameters
    ----------
    mesh : QuadMesh
    boundary_mask : ndarray of bool
        Which boundary faces take part (faces with a known value).
    boundary_values : ndarray
        Known values at the midpoints of the boundary faces (used where masked).
    """
    n = mesh.n_cells
    xc = np.stack(mesh.centroids, axis=-1)
    f, b = mesh.faces, mesh.boundary_faces
    owner = np.concatenate([f["P"], f["N"], b["P"][boundary_mask]])
    target = np.concatenate([f["N"], f["P"], -np.ones(int(boundary_mask.sum()), dtype=int)])
    d = np.concatenate([xc[f["N"]] - xc[f["P"]], xc[f["P"]] - xc[f["N"]],
                        b["xf"][boundary_mask] - xc[b["P"][boundary_mask]]])
    w = 1.0 / np.sum(d * d, axis=1)
    M = np.zeros((n, 2, 2))
    np.add.at(M, owner, w[:, None, None] * d[:, :, None] * d[:, None, :])
    det = M[:, 0, 0] * M[:, 1, 1] - M[:, 0, 1] * M[:, 1, 0]
    inv = np.stack([np.stack([M[:, 1, 1], -M[:, 0, 1]], -1), np.stack([-M[:, 1, 0], M[:, 0, 0]], -1)], 1)
    inv /= det[:, None, None]
    c = np.einsum("kij,kj->ki", inv[owner], w[:, None] * d)      # d(grad_P)/d(u_target)
    cell_link = target >= 0
    rows = np.concatenate([owner[cell_link], owner])
    cols = np.concatenate([target[cell_link], owner])
    mats = []
    for comp in range(2):
        vals = np.concatenate([c[cell_link, comp], -c[:, comp]])
        mats.append(sps.csr_matrix((vals, (rows, cols)), shape=(n, n)))
    bvals = boundary_values[boundary_mask]
    bx, by = np.zeros(n), np.zeros(n)
    np.add.at(bx, owner[~cell_link], c[~cell_link, 0] * bvals)
    np.add.at(by, owner[~cell_link], c[~cell_link, 1] * bvals)
    return LinearGradient(mats[0], mats[1], bx, by)


def face_interpolation(mesh):
    """Sparse matrix taking cell values to interior-face values, weighted by distance along ``P``-``N``."""
    f = mesh.faces
    xc = np.stack(mesh.centroids, axis=-1)
    dp = np.linalg.norm(f["xf"] - xc[f["P"]], axis=1)
    dn = np.linalg.norm(xc[f["N"]] - f["xf"], axis=1)
    lam = dp / (dp + dn)
    m = len(f["P"])
    rows = np.concatenate([np.arange(m), np.arange(m)])
    cols = np.concatenate([f["P"], f["N"]])
    return sps.csr_matrix((np.concatenate([1 - lam, lam]), (rows, cols)), shape=(m, mesh.n_cells))

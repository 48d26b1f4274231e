"""Cell-centred finite volumes for steady ``-div(k grad u) = f`` on 2-D quadrilateral meshes.

The flux through a face with area vector ``S`` between cells ``P`` and
``N`` (centroid link ``d``) splits ``S = Delta + t`` with ``Delta`` along
``d`` (the over-relaxed split, Jasak 1996, Error analysis and estimation
for the finite volume method, PhD thesis, Imperial College, section 3.3.1):

* ``"two-point"``: ``F = k |Delta| (u_N - u_P) / |d|`` only. Consistent on
  orthogonal meshes (uniform, stretched), but the neglected ``t`` part makes
  it inconsistent on skewed and perturbed meshes: the error stops falling
  (Ferziger & Peric 2002, Computational Methods for Fluid Dynamics, section
  8.6.2).
* ``"corrected"``: adds ``k t . grad u`` with the least-squares cell gradients
  interpolated to the face, restoring second order.

Dirichlet faces use the centroid-to-face link with the face value; Neumann
faces take the given outward flux. The source enters at the centroid times
the area (midpoint rule). Values are reported at centroids with the cell
areas as weights.
"""

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution

from ..base import DemoSolver
from ._gradients import face_interpolation, least_squares_gradient
from .mesh import FAMILIES, quad_mesh

__all__ = ["FVDiffusion", "FLUXES"]

FLUXES = ("two-point", "corrected")


def _side_values(mesh, fn):
    """Evaluate ``fn(side, x, y)`` at every boundary face midpoint."""
    b = mesh.boundary_faces
    out = np.zeros(len(b["P"]))
    for side in np.unique(b["side"]):
        m = b["side"] == side
        out[m] = fn(str(side), b["xf"][m, 0], b["xf"][m, 1])
    return out


@dataclass(frozen=True)
class FVDiffusion(DemoSolver):
    """Cell-centred finite volumes for diffusion on quadrilateral meshes.

    Parameters
    ----------
    grid : {"uniform", "stretched", "skewed", "perturbed"}
        Mesh family (see :mod:`solvers_demo.fv.mesh`); ``case.options["grid"]`` overrides it.
    flux : {"two-point", "corrected"}
    mistake : str
        A seeded mistake from ``FVDiffusion.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("poisson", "diffusion")
    dims: ClassVar[tuple] = (2,)
    MISTAKES: ClassVar[dict] = {
        "correction-dropped": "the non-orthogonal correction is left out of a second-order flux",
        "area-uniform": "every cell's area taken as that of the uniform grid in the source term",
        "boundary-distance-full": "the centroid-to-wall distance of a Dirichlet face taken as a full cell",
        "source-at-vertex": "the source evaluated at a cell corner instead of the centroid",
    }
    CHOICES: ClassVar[dict] = {"grid": FAMILIES, "flux": FLUXES}

    grid: str = "uniform"
    seed: int = None     # another table of random displacements for grid="perturbed"
    flux: str = "corrected"

    @property
    def formal_order(self):
        return 2

    def _solve(self, case):
        mms, field = case.mms, case.problem.field_names[0]
        mesh = quad_mesh(case.grid, self.grid, self.seed)
        n = mesh.n_cells
        xc, yc = mesh.centroids
        f, b = mesh.faces, mesh.boundary_faces
        corrected = self.flux == "corrected" and self.mistake != "correction-dropped"
        kinds = np.array([mms.boundary(field, str(s)) for s in b["side"]])
        dirichlet = kinds == "dirichlet"
        ub = _side_values(mesh, lambda s, x, y: mms.boundary_value(field, s, x, y))
        qb = _side_values(mesh, lambda s, x, y: mms.normal_flux(field, s, x, y))
        grad = least_squares_gradient(mesh, dirichlet, ub)

        def k_at(points):
            return np.broadcast_to(mms.parameter("k", points[:, 0], points[:, 1]), len(points))

        # interior faces: F = k [a (u_N - u_P) + t . g_f]
        xcv = np.stack([xc, yc], axis=-1)
        d = xcv[f["N"]] - xcv[f["P"]]
        S = f["S"]
        sd = np.sum(S * d, axis=1)
        a = np.sum(S * S, axis=1) / sd
        t = S - a[:, None] * d
        kf = k_at(f["xf"])
        m = len(f["P"])
        EP = sps.csr_matrix((np.ones(m), (np.arange(m), f["P"])), shape=(m, n))
        EN = sps.csr_matrix((np.ones(m), (np.arange(m), f["N"])), shape=(m, n))
        C = sps.diags(kf * a) @ (EN - EP)
        c0 = np.zeros(m)
        if corrected:
            If = face_interpolation(mesh)
            C = C + sps.diags(kf * t[:, 0]) @ If @ grad.Gx + sps.diags(kf * t[:, 1]) @ If @ grad.Gy
            c0 = kf * (t[:, 0] * (If @ grad.bx) + t[:, 1] * (If @ grad.by))
        # boundary faces
        mb = len(b["P"])
        db = b["xf"] - xcv[b["P"]]
        if self.mistake == "boundary-distance-full":
            db = 2.0 * db
        Sb = b["S"]
        ab = np.sum(Sb * Sb, axis=1) / np.sum(Sb * db, axis=1)
        tb = Sb - ab[:, None] * db
        kb = k_at(b["xf"])
        EPb = sps.csr_matrix((np.ones(mb), (np.arange(mb), b["P"])), shape=(mb, n))
        wd = np.where(dirichlet, 1.0, 0.0)
        Cb = sps.diags(-wd * kb * ab) @ EPb
        cb = np.where(dirichlet, kb * ab * ub, np.linalg.norm(Sb, axis=1) * qb)
        if corrected:
            Cb = Cb + sps.diags(wd * kb * tb[:, 0]) @ EPb @ grad.Gx + sps.diags(wd * kb * tb[:, 1]) @ EPb @ grad.Gy
            cb = cb + wd * kb * (tb[:, 0] * grad.bx[b["P"]] + tb[:, 1] * grad.by[b["P"]])
        # -sum of outward fluxes = f * area
        D, Db = (EP - EN).T, EPb.T
        A = -(D @ C + Db @ Cb)
        area = mesh.areas
        if self.mistake == "area-uniform":
            area = np.full(n, case.grid.volume / n)
        sx, sy = (mesh.x[:-1, :-1].ravel(), mesh.y[:-1, :-1].ravel()) if self.mistake == "source-at-vertex" \
            else (xc, yc)
        rhs = np.broadcast_to(mms.source(field, sx, sy), n) * area + D @ c0 + Db @ cb
        u = spla.spsolve(A.tocsc(), rhs)
        return Solution(values={field: u}, points=(xc, yc), weights=mesh.areas,
                        info={"grid": self.grid, "flux": self.flux, "cells": n, "irregular": self.grid == "perturbed"})

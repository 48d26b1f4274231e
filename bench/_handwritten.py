"""Energy source of mmsverify/problem/bundled/compressible-2d.toml written by hand in NumPy.

What a careful person writes without a code generator: every field and its
first and second derivatives by the chain rule, then the energy equation
``div((rho E + p) u - u.tau + q)`` expanded with the product rule, on
whatever arrays the caller passes (full meshes or broadcasting axis arrays).
It is the reference of bench/evaluators.py and, being written without
sympy, a second route for the derived energy source in the tests.
"""

import numpy as np

__all__ = ["energy_source", "GAMMA", "MU", "PR"]

GAMMA, MU, PR = 1.4, 10.0, 1.0
PI = np.pi

# (constant, (amp_x, kind_x, wave_x), (amp_y, kind_y, wave_y), (amp_xy, kind_xy, wave_xy))
# as in mmsverify/problem/bundled/compressible-2d.toml
_FIELDS = {
    "rho": (1.0, (0.1, "sin", 0.75), (0.15, "cos", 1.0), (0.08, "cos", 1.25)),
    "u": (70.0, (4.0, "sin", 5 / 3), (-12.0, "cos", 1.5), (7.0, "cos", 0.6)),
    "v": (90.0, (-20.0, "cos", 1.5), (4.0, "sin", 1.0), (-11.0, "cos", 0.9)),
    "p": (1.0e5, (-0.3e5, "cos", 1.0), (0.2e5, "sin", 1.25), (-0.25e5, "sin", 0.75)),
}


def _wave(kind, s):
    """f(s), f'(s), f''(s) for f = sin or cos."""
    sn, cs = np.sin(s), np.cos(s)
    return (sn, cs, -sn) if kind == "sin" else (cs, -sn, -cs)


def _field(name, x, y):
    """Value, d/dx, d/dy, d2/dx2, d2/dy2, d2/dxdy of one manufactured field."""
    c0, (ax, kx, wx), (ay, ky, wy), (axy, kxy, wxy) = _FIELDS[name]
    kx_, ky_, kxy_ = wx * PI, wy * PI, wxy * PI
    f, f1, f2 = _wave(kx, kx_ * x)
    g, g1, g2 = _wave(ky, ky_ * y)
    h, h1, h2 = _wave(kxy, kxy_ * x * y)
    val = c0 + ax * f + ay * g + axy * h
    dx = ax * kx_ * f1 + axy * kxy_ * y * h1
    dy = ay * ky_ * g1 + axy * kxy_ * x * h1
    dxx = ax * kx_ ** 2 * f2 + axy * (kxy_ * y) ** 2 * h2
    dyy = ay * ky_ ** 2 * g2 + axy * (kxy_ * x) ** 2 * h2
    dxy = axy * (kxy_ * h1 + kxy_ ** 2 * x * y * h2)
    return val, dx, dy, dxx, dyy, dxy


def energy_source(x, y):
    """``d/dx_j [(rho E + p) u_j - u_i tau_ij + q_j]`` at the given points."""
    r, rx, ry, rxx, ryy, _ = _field("rho", x, y)
    u, ux, uy, uxx, uyy, uxy = _field("u", x, y)
    v, vx, vy, vxx, vyy, vxy = _field("v", x, y)
    p, px, py, pxx, pyy, _ = _field("p", x, y)
    g = GAMMA / (GAMMA - 1.0)
    ke = 0.5 * (u * u + v * v)
    # total enthalpy per volume H = g p + rho |u|^2 / 2 and its gradient
    h = g * p + r * ke
    hx = g * px + rx * ke + r * (u * ux + v * vx)
    hy = g * py + ry * ke + r * (u * uy + v * vy)
    div_u = ux + vy
    convective = u * hx + v * hy + h * div_u
    # Stokes stress and its divergence (constant viscosity)
    txx = MU * (4.0 / 3.0 * ux - 2.0 / 3.0 * vy)
    tyy = MU * (4.0 / 3.0 * vy - 2.0 / 3.0 * ux)
    txy = MU * (uy + vx)
    dtx = MU * (4.0 / 3.0 * uxx + uyy + 1.0 / 3.0 * vxy)
    dty = MU * (vxx + 4.0 / 3.0 * vyy + 1.0 / 3.0 * uxy)
    work = txx * ux + txy * (uy + vx) + tyy * vy + u * dtx + v * dty
    # Fourier heat flux q = -kappa grad(p / rho), kappa = gamma mu / ((gamma - 1) Pr)
    kappa = g * MU / PR
    inv = 1.0 / r
    lap_t = ((pxx + pyy) * inv - 2.0 * (px * rx + py * ry) * inv ** 2
             - p * (rxx + ryy) * inv ** 2 + 2.0 * p * (rx * rx + ry * ry) * inv ** 3)
    return convective - work - kappa * lap_t

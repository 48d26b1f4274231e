"""Discrete error norms, volume-weighted.

With weights ``w`` (the volume each point represents) and ``V = sum(w)``:

* ``L1   = sum(w |e|) / V``
* ``L2   = sqrt(sum(w e**2) / V)``
* ``Linf = max |e|``

Dividing by ``V`` makes the norms approximate the continuous ones divided
by the domain size, so they are comparable across levels and domains. With
equal weights they reduce to the mean, the root mean square and the
maximum of the pointwise errors.
"""

import functools
import string

import numpy as np

__all__ = ["NORMS", "error_norms", "magnitude_norms"]

NORMS = ("L1", "L2", "Linf")


def _sum_of_products(*arrays):
    """``sum(a * b * ...)`` over arrays of one shape, without a full-size temporary."""
    ndim = arrays[0].ndim
    if ndim > len(string.ascii_letters):  # more axes than einsum has letters for
        return np.sum(functools.reduce(np.multiply, arrays))
    axes = string.ascii_letters[:ndim]
    return np.einsum(",".join([axes] * len(arrays)) + "->", *arrays)


def magnitude_norms(e, weights=None):
    """The norms of :func:`error_norms` for a float array ``e`` that already holds ``|error|``."""
    if weights is None:
        n = e.size
        return {"L1": float(e.sum() / n), "L2": float(np.sqrt(_sum_of_products(e, e) / n)), "Linf": float(e.max())}
    w = np.broadcast_to(np.asarray(weights, dtype=float), e.shape)
    total = w.sum()
    return {
        "L1": float(_sum_of_products(w, e) / total),
        "L2": float(np.sqrt(_sum_of_products(w, e, e) / total)),
        "Linf": float(e.max()),
    }


def error_norms(error, weights=None):
    """L1, L2 and Linf norms of a pointwise error.

    Parameters
    ----------
    error : array_like
        Pointwise error (discrete minus exact).
    weights : array_like, optional
        Volume per point, broadcastable to ``error``; equal weights if None.

    Returns
    -------
    dict
        ``{"L1": ..., "L2": ..., "Linf": ...}``

    Examples
    --------
    >>> error_norms([1.0, -3.0], [3.0, 1.0])
    {'L1': 1.5, 'L2': 1.7320508075688772, 'Linf': 3.0}
    """
    return magnitude_norms(np.abs(np.asarray(error, dtype=float)), weights)

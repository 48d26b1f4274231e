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

import numpy as np

__all__ = ["NORMS", "error_norms"]

NORMS = ("L1", "L2", "Linf")


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
    e = np.abs(np.asarray(error, dtype=float))
    if weights is None:
        w = np.ones_like(e)
    else:
        w = np.broadcast_to(np.asarray(weights, dtype=float), e.shape)
    total = w.sum()
    return {
        "L1": float(np.sum(w * e) / total),
        "L2": float(np.sqrt(np.sum(w * e * e) / total)),
        "Linf": float(e.max()),
    }

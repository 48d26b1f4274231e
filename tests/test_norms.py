"""Error norms: the weighted L1, L2 and Linf definitions of mmsverify.execute.norms, on any array layout.

The definitions (volume-weighted means of |e| and e**2, and max |e|) are the
discrete norms used in order-of-accuracy studies; Roache 1998, Verification
and Validation in Computational Science and Engineering, chapter 3 (from memory).
"""

import numpy as np
import pytest

from mmsverify import error_norms


def _reference(e, w):
    e = np.abs(np.asarray(e, dtype=float))
    w = np.broadcast_to(np.asarray(w, dtype=float), e.shape)
    return {"L1": np.sum(w * e) / np.sum(w), "L2": np.sqrt(np.sum(w * e * e) / np.sum(w)), "Linf": e.max()}


def test_hand_computed_values():
    # common practice: L1 = sum(w|e|)/sum(w), L2 = sqrt(sum(w e^2)/sum(w)), Linf = max|e|
    assert error_norms([1.0, -3.0], [3.0, 1.0]) == {"L1": 1.5, "L2": np.sqrt(3.0), "Linf": 3.0}
    assert error_norms([1.0, -3.0]) == {"L1": 2.0, "L2": np.sqrt(5.0), "Linf": 3.0}
    assert error_norms(-2.5) == {"L1": 2.5, "L2": 2.5, "Linf": 2.5}


@pytest.mark.parametrize("layout", ["C", "F", "strided", "broadcast weights", "3-D", "no weights"])
def test_any_layout_matches_the_plain_formulas(layout):
    rng = np.random.default_rng(3)
    e = rng.normal(size=(37, 29))
    w = rng.uniform(0.1, 2.0, size=(37, 29))
    if layout == "F":
        e, w = np.asfortranarray(e), np.asfortranarray(w.T).T
    elif layout == "strided":
        e, w = rng.normal(size=(74, 58))[::2, ::2], rng.uniform(0.1, 2.0, size=(37, 87))[:, ::3]
    elif layout == "broadcast weights":
        w = rng.uniform(0.1, 2.0, size=(37, 1))
    elif layout == "3-D":
        e, w = rng.normal(size=(9, 11, 13)), rng.uniform(0.1, 2.0, size=(1, 11, 13))
    elif layout == "no weights":
        w = None
    ours = error_norms(e, w)
    ref = _reference(e, 1.0 if w is None else w)
    for k in ("L1", "L2", "Linf"):
        assert ours[k] == pytest.approx(ref[k], rel=1e-13)
    assert all(isinstance(v, float) for v in ours.values())


def test_input_is_left_unchanged():
    e = np.array([[-1.0, 2.0], [3.0, -4.0]])
    before = e.copy()
    error_norms(e, np.ones(2))
    np.testing.assert_array_equal(e, before)

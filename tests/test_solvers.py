"""check_solution: what a study accepts from a solver and the errors it gives otherwise.

The checks are common practice for a verification harness: every value and
point finite, one value per point, volumes finite, non-negative and not all zero.
"""

import numpy as np
import pytest

from mmsverify import Solution, SolverError, problem_from_text
from mmsverify.execute.solvers import check_solution

PROBLEM = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x*y"')
X = np.linspace(0.0, 1.0, 5)[:, None]
Y = np.linspace(0.0, 1.0, 4)[None, :]


def _check(values=None, points=(X, Y), weights=None):
    values = {"u": X * Y} if values is None else values
    return check_solution(Solution(values=values, points=points, weights=weights), PROBLEM, "here")


def test_axis_points_are_broadcast_and_equal_weights_filled_in():
    values, points, weights = _check()
    assert values["u"].shape == (5, 4)
    assert points[0].shape == points[1].shape == weights.shape == (5, 4)
    np.testing.assert_array_equal(points[0][:, 2], X[:, 0])
    np.testing.assert_array_equal(weights, 1.0)


def test_given_weights_are_broadcast():
    _, _, weights = _check(weights=np.full((1, 4), 0.05))
    assert weights.shape == (5, 4) and float(weights.sum()) == pytest.approx(1.0)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_a_non_finite_value_is_counted(bad):
    u = X * Y
    u[2, 1] = bad
    u[3, 3] = bad
    with pytest.raises(SolverError, match=r"field 'u' has 2 NaN/Inf value\(s\) of 20"):
        _check({"u": u})


def test_huge_finite_values_whose_sum_overflows_are_accepted():
    u = np.full((5, 4), 1e308)
    values, _, _ = _check({"u": u}, weights=np.full((5, 4), 0.05))
    assert np.isfinite(values["u"]).all()


def test_weights_whose_sum_overflows_are_refused():
    # a weight is the area a point stands for: 1e308 each is no area of the unit square
    with pytest.raises(SolverError, match=r"weights add up to inf, but the domain's area is 1"):
        _check(weights=np.full((5, 4), 1e308))


@pytest.mark.parametrize("which", [0, 1])
def test_non_finite_points_are_refused(which):
    pts = [X.copy(), Y.copy()]
    pts[which].flat[1] = np.nan
    with pytest.raises(SolverError, match="points contain NaN/Inf"):
        _check(points=tuple(pts))


@pytest.mark.parametrize("weights", [np.full((5, 4), -1.0), np.zeros((5, 4)), np.array([[np.nan, 1, 1, 1]]),
                                     np.array([[1.0, -0.5, 1.0, 1.0]])])
def test_bad_weights_are_refused(weights):
    with pytest.raises(SolverError, match=r"weights \(cell volumes\) must be finite, non-negative"):
        _check(weights=weights)


def test_zero_weights_somewhere_are_fine():
    _, _, weights = _check(weights=np.array([[0.0, 0.1, 0.1, 0.0]]))
    assert float(weights.sum()) == pytest.approx(1.0)


def test_shape_mismatches_name_the_shapes():
    with pytest.raises(SolverError, match=r"shape \(3,\)"):
        _check({"u": np.zeros(3)})
    with pytest.raises(SolverError, match="do not match the values' shape"):
        _check(weights=np.ones(7))


def test_non_numeric_points_are_refused_clearly():
    with pytest.raises(SolverError, match="points are not numeric"):
        _check(points=(X, object()))

"""Interpolation of coarse profiles to the fine points in mmsverify.analysis.profile.gci_profile:
cubic where the points allow, and an estimate of the linear interpolation error."""

import numpy as np
import pytest

from mmsverify.cli import main
from mmsverify.errors import AnalysisError
from mmsverify.analysis.gci import gci_profile

from _helpers import no_nan

NS = (10, 20, 40)


def _staggered(f):
    # cell centres of n uniform cells on [0, 1]: no coarse point coincides with a fine one
    x = [(np.arange(n) + 0.5) / n for n in NS]
    hs = [1.0 / n for n in NS]
    return x, [f(xi, hi) for xi, hi in zip(x, hs)], hs


def _second_order(x, h):
    # closed form: phi(x; h) = f(x) + 0.5 h^2 g(x), exactly second order at every point
    return np.sin(2 * x) + np.exp(x) + 0.5 * h ** 2 * np.cos(3 * x)


def test_cubic_interpolation_recovers_second_order_on_staggered_points():
    x, v, hs = _staggered(_second_order)
    lin = gci_profile(x, v, h=hs, interpolation="linear")
    cub = gci_profile(x, v, h=hs)
    assert cub.interpolation == "cubic" and lin.interpolation == "linear"
    # linear interpolation adds an error H^2 f''/8 of the size of the grid differences  # common practice
    mono = lin.status == "monotone"
    assert lin.count("oscillatory") + lin.count("divergent") > 0
    assert np.nanmax(np.abs(lin.p_local[mono] - 2.0)) > 0.5
    assert any("linear interpolation error" in w for w in lin.warnings)
    # the cubic spline's error is O(H^4): every point inside the coarse span is monotone with p near 2
    inside = cub.status != "outside"
    assert np.all(cub.status[inside] == "monotone")
    assert np.allclose(cub.p_local[inside], 2.0, atol=0.05)
    assert cub.p_average == pytest.approx(2.0, abs=0.01)
    assert not cub.warnings
    assert cub.interpolation_effect > 0.1  # linear would have spoiled it
    assert "cubic interpolation" in no_nan(cub)


def test_linear_data_need_no_warning():
    # closed form: linear in x, so both interpolants are exact and agree
    x, v, hs = _staggered(lambda x, h: 1 + 2 * x + 0.5 * h ** 2)
    prof = gci_profile(x, v, h=hs, interpolation="linear")
    assert prof.interpolation_effect == pytest.approx(0.0, abs=1e-6) and not prof.warnings


def test_too_few_points_and_3d_fall_back_to_linear():
    # closed form: three coarse points cannot carry a not-a-knot spline
    x = [np.linspace(0, 1, n) for n in (3, 5, 9)]
    prof = gci_profile(x, [1 + xi + 0.1 * h ** 2 for xi, h in zip(x, (0.5, 0.25, 0.125))], h=[0.5, 0.25, 0.125])
    assert prof.interpolation == "linear" and prof.interpolation_effect is None
    rng = np.random.default_rng(3)
    corners = np.array([[i, j, k] for i in (0, 1) for j in (0, 1) for k in (0, 1)], dtype=float)
    pts = [np.vstack([corners, rng.random((n, 3))]) for n in (40, 80, 160)]
    hs = [0.2, 0.1, 0.05]
    vals = [p[:, 0] + 0.3 * h ** 2 for p, h in zip(pts, hs)]
    field = gci_profile(pts, vals, h=hs)
    assert field.interpolation == "linear"
    assert any("3-D" in w for w in field.warnings)


def test_bad_interpolation_name():
    x, v, hs = _staggered(_second_order)
    with pytest.raises(AnalysisError, match="interpolation"):
        gci_profile(x, v, h=hs, interpolation="spline")


def test_cli_interpolation_option(tmp_path, capsys):
    x, v, hs = _staggered(_second_order)
    files = []
    for xi, vi, n in zip(x, v, NS):
        p = tmp_path / f"p{n}.csv"
        p.write_text("x, u\n" + "\n".join(f"{a:.17g}, {b:.17g}" for a, b in zip(xi, vi)))
        files.append(str(p))
    sizes = ",".join(repr(h) for h in hs)
    assert main(["estimate", "--profile", *files, "--h", sizes]) == 0
    assert "cubic interpolation" in capsys.readouterr().out
    main(["estimate", "--profile", *files, "--h", sizes, "--interpolation", "linear"])
    assert "linear interpolation error" in capsys.readouterr().out

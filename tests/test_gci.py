"""Tests of mmsverify.analysis.gci: Richardson extrapolation and GCI against published
worked examples, closed-form sequences, and refusal of invalid data."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from mmsverify.errors import AnalysisError
from mmsverify.analysis.gci import gci, gci_profile, plot_profile, representative_h

from _helpers import no_nan, printed


# ---------------------------------------------------------------- Celik et al. 2008, Table 1
# Values as listed in /work/shared/reference/celik2008-table1.md; 2-D grids,
# h = (1/N)^(1/2); r21 and r32 follow from N. Levels are passed coarse to fine.

def test_celik_table1_column1():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1
    res = gci([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)
    assert res.valid and res.status == "monotone"
    assert printed(res.r21, "1.5") and printed(res.r32, "1.333")  # Table 1, column 1
    assert printed(res.p, "1.53")  # Table 1, column 1: apparent order
    assert printed(res.phi_ext21, "6.1685")  # Table 1, column 1: phi_ext21
    assert printed(100 * res.e_a21, "1.5")  # Table 1, column 1: e_a21 = 1.5 %
    assert printed(100 * res.e_ext21, "1.7")  # Table 1, column 1: e_ext21 = 1.7 %
    assert printed(100 * res.gci_fine21, "2.2")  # Table 1, column 1: GCI_fine21 = 2.2 %
    no_nan(res)


def test_celik_table1_column2():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 2
    res = gci([10.6050, 10.7250, 10.7880], cells=[980, 4500, 18000], dim=2)
    assert res.valid
    assert printed(res.r21, "2.0") and printed(res.r32, "2.143")  # Table 1, column 2
    assert printed(res.p, "0.75")  # Table 1, column 2: apparent order
    assert printed(res.phi_ext21, "10.8801")  # Table 1, column 2: phi_ext21
    assert printed(100 * res.e_a21, "0.6")  # Table 1, column 2: e_a21 = 0.6 %
    # Table 1, column 2 prints e_ext21 = 0.9 %; the reference note says it
    # recomputes to about 0.85 %, which is what the formula gives.
    assert printed(100 * res.e_ext21, "0.85")
    assert printed(100 * res.gci_fine21, "1.1")  # Table 1, column 2: GCI_fine21 = 1.1 %


def test_celik_table1_column3_oscillatory_gets_the_numbers_with_a_caution():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 3: the procedure reports the numbers of
    # oscillatory data, with a caution
    res = gci([6.0909, 5.9624, 6.0042], cells=[980, 4500, 18000], dim=2)
    assert res.status == "oscillatory" and res.valid  # Table 1 note: oscillatory convergence
    assert res.convergence.kind == "oscillatory"
    assert printed(res.p, "1.51")  # Table 1, column 3: apparent order
    assert printed(res.phi_ext21, "6.0269")  # Table 1, column 3: phi_ext21
    assert printed(100 * res.e_a21, "0.7")  # Table 1, column 3: e_a21 = 0.7 %
    assert printed(100 * res.e_ext21, "0.4")  # Table 1, column 3: e_ext21 = 0.4 %
    assert printed(100 * res.gci_fine21, "0.5")  # Table 1, column 3: GCI_fine21 = 0.5 %
    assert res.formula.p == res.p
    text = no_nan(res)
    assert "VALID" in text and "oscillatory" in text
    assert any("oscillatory" in w and "caution" in w for w in res.warnings)


# ---------------------------------------------------------------- NASA Glenn tutorial example
# NASA Glenn Research Center / NPARC Alliance, "Examining Spatial (Grid)
# Convergence" tutorial, example run of its verify program on grid sizes
# 1, 2, 4 with values 0.970500, 0.968540, 0.961780 (read from a secondary copy
# of the tutorial's output). The program's digits beyond the fifth reflect
# its single precision, so checks stop there.

def test_nasa_glenn_spatial_convergence_example():
    res = gci([0.961780, 0.968540, 0.970500], h=[4.0, 2.0, 1.0])
    assert res.valid
    assert printed(res.p, "1.7862")  # NASA Glenn tutorial: p = 1.78618479
    assert printed(res.phi_ext21, "0.971300")  # NASA Glenn tutorial: f_exact = 0.971300304
    assert printed(100 * res.gci_fine21, "0.10308")  # NASA Glenn tutorial: GCI12 = 0.103080 %
    assert printed(100 * res.gci_fine32, "0.3562")  # NASA Glenn tutorial: GCI23 = 0.356244 %
    # NASA Glenn tutorial prints 0.997980 as its asymptotic-range ratio, which is
    # r^p GCI12 / GCI23 with relative errors, the reciprocal of the published-form ratio.
    assert printed(1.0 / res.asymptotic_ratio, "0.997980")
    assert res.safety_factor == 1.25  # NASA Glenn tutorial: Fs = 1.25 for three grids


def test_two_grids_use_assumed_order_and_safety_factor_3():
    # Roache (1998) via the NASA Glenn tutorial: Fs = 3 for two-grid comparisons
    res = gci([0.968540, 0.970500], h=[2.0, 1.0], formal_order=2)
    assert res.status == "two-grid" and res.valid and res.safety_factor == 3.0
    assert res.p == 2.0
    # closed form: GCI = Fs |eps|/|phi1| / (r^p - 1)
    assert res.gci_fine21 == pytest.approx(3.0 * 0.00196 / 0.9705 / 3.0, rel=1e-12)
    assert res.phi_ext21 == pytest.approx(0.9705 + 0.00196 / 3.0, rel=1e-14)
    assert any("third grid" in w for w in res.warnings)
    no_nan(res)
    with pytest.raises(AnalysisError, match="formal_order"):
        gci([0.968540, 0.970500], h=[2.0, 1.0])


# ---------------------------------------------------------------- closed form

@pytest.mark.parametrize("hs", [[0.4, 0.2, 0.1], [0.37, 0.2, 0.13], [1.0, 0.77, 0.31]],
                         ids=["constant-2", "non-constant", "strongly-non-constant"])
@pytest.mark.parametrize("p_true", [1.0, 2.0, 3.5])
def test_power_law_recovers_order_and_limit_to_round_off(hs, p_true):
    hs = np.array(hs)
    f = 1.7 - 0.9 * hs ** p_true
    res = gci(f, h=hs)
    assert res.valid
    assert res.p == pytest.approx(p_true, abs=1e-10)
    assert res.phi_ext21 == pytest.approx(1.7, abs=1e-12)
    assert res.phi_ext32 == pytest.approx(1.7, abs=1e-12)
    # exact power law: the absolute bands satisfy U32 = r21^p U21 (Celik et al. 2008, Eq. 3), so the
    # relative-GCI ratio is phi1/phi2
    assert res.asymptotic_ratio == pytest.approx(f[-1] / f[-2], rel=1e-9)


def test_higher_terms_order_tends_to_leading_order():
    # closed form: f = f0 + h^2 + h^3; the apparent order tends to 2 as h -> 0
    errs = []
    for h1 in (0.2, 0.05, 0.0125, 0.003125):
        hs = np.array([4 * h1, 2 * h1, h1])
        errs.append(abs(gci(3 + hs ** 2 + hs ** 3, h=hs).p - 2.0))
    # the deviation shrinks, approaching a factor 4 per step (like h) on fine grids
    assert all(a > b for a, b in zip(errs, errs[1:]))
    assert errs[-2] / errs[-1] > 3.8 and errs[-1] < 0.011


@settings(max_examples=60, deadline=None)
@given(st.floats(0.01, 0.95), st.floats(1e-3, 10.0), st.floats(-5, 5), st.sampled_from([1.5, 2.0, 3.0]))
def test_oscillatory_data_get_numbers_only_with_a_caution(R, scale, base, r):
    # phi2 - phi1 = R (phi3 - phi2) * (-1): the sign flips, convergence is oscillatory
    d32 = scale
    phi = [base, base + d32, base + d32 - R * d32]
    res = gci(phi, h=[r * r, r, 1.0])
    assert res.convergence.kind == "oscillatory"
    if res.valid:   # Celik et al. 2008, Table 1, column 3: the numbers, with a caution
        assert res.status == "oscillatory" and res.p > 0 and res.gci_fine21 is not None
        assert any("caution" in w for w in res.warnings)
    else:
        assert res.gci_fine21 is None and res.phi_ext21 is None and res.p is None
    no_nan(res)


@settings(max_examples=60, deadline=None)
@given(st.floats(1.05, 20.0), st.floats(1e-3, 10.0), st.booleans())
def test_divergent_data_never_get_a_valid_gci(growth, scale, flip):
    d32 = scale
    d21 = growth * d32 * (-1 if flip else 1)
    phi = [0.0, d32, d32 + d21]
    res = gci(phi, h=[4.0, 2.0, 1.0])
    assert res.status == "divergent" and not res.valid
    assert res.gci_fine21 is None and res.u_fine21 is None
    no_nan(res)


def test_common_practice_low_ratio_warns():
    # common practice: Celik et al. 2008 recommend r > 1.3
    hs = np.array([1.2 ** 2, 1.2, 1.0])
    res = gci(2 + hs ** 2, h=hs)
    assert res.valid
    assert any("below 1.3" in w for w in res.warnings)


def test_more_than_three_levels_uses_finest_three():
    hs = np.array([0.8, 0.4, 0.2, 0.1])
    f = 1 + hs ** 2
    f[0] += 0.3  # a pre-asymptotic coarse level does not spoil the finest three
    res = gci(f, h=hs)
    assert res.h == (0.4, 0.2, 0.1) and res.p == pytest.approx(2.0, abs=1e-10)
    assert any("finest three" in w for w in res.warnings)


def test_representative_h():
    # Celik et al. 2008, Eq. (1): h = [(1/N) sum dV]^(1/3) = (V/N)^(1/3) in 3-D
    assert representative_h([1000], dim=3, volume=8.0)[0] == pytest.approx(0.2)
    assert representative_h([4500, 8000, 18000], dim=2)[0] == pytest.approx(1 / math.sqrt(4500))


# ---------------------------------------------------------------- bad input

@pytest.mark.parametrize("kwargs,fragment", [
    (dict(values=[1.0], h=[0.1]), "at least two grids"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.1, 0.1, 0.05]), "strictly decrease"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.05, 0.1, 0.2]), "strictly decrease"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.2, 0.0, -0.1]), "positive"),
    (dict(values=[1.0, 1.1, 1.1], h=[0.4, 0.2, 0.1]), "same value"),
    (dict(values=[1.1, 1.1, 1.2], h=[0.4, 0.2, 0.1]), "same value"),
    (dict(values=[1.0, 1.1, 1.2]), "give the grid sizes"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.4, 0.2, 0.1], cells=[10, 20, 40]), "not both"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, 20, 40]), "dim"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, 20, 40], dim=4), "dim must be"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, 0, 40], dim=2), "positive"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, 20], dim=2), "one per level"),
])
def test_gci_rejects_bad_input(kwargs, fragment):
    with pytest.raises(AnalysisError, match=fragment):
        gci(**kwargs)


# ---------------------------------------------------------------- profiles

def _line_grids(f, ns=(11, 21, 41), hs=(0.1, 0.05, 0.025)):
    x = [np.linspace(0, 1, n) for n in ns]
    return x, [f(xi, hi) for xi, hi in zip(x, hs)], list(hs)


def test_profile_closed_form_linear_profile():
    # closed form: phi(x, h) = 1 + 2x + 0.5 h^2 (linear in x, so interpolation is exact)
    x, v, hs = _line_grids(lambda x, h: 1 + 2 * x + 0.5 * h ** 2)
    prof = gci_profile(x, v, h=hs)
    assert prof.count("monotone") == 41 and prof.share_oscillatory == 0
    assert np.allclose(prof.p_local, 2.0, atol=1e-8)
    assert prof.p_average == pytest.approx(2.0, abs=1e-8)
    assert np.allclose(prof.phi_ext, 1 + 2 * x[2], atol=1e-12)
    # GCI error bar = Fs |eps21| / (r^p - 1) = 1.25 * 0.5 * (0.05^2 - 0.025^2) / 3
    assert np.allclose(prof.error_bar, 1.25 * 0.5 * (0.05 ** 2 - 0.025 ** 2) / 3)
    no_nan(prof)


def test_profile_oscillatory_points_and_outside_points():
    # the sign of the h-term alternates between grids where x > 0.5: oscillatory there
    def f(x, h):
        sign = {0.1: 1.0, 0.05: -1.0, 0.025: 1.0}[h]
        return 1 + x + 0.5 * h ** 2 * np.where(x > 0.5, sign, 1.0)
    x, v, hs = _line_grids(f)
    x[0] = np.linspace(0, 0.9, 11)  # the coarse grid stops short of x = 1
    v[0] = f(x[0], 0.1)
    prof = gci_profile(x, v, h=hs)
    assert prof.count("outside") == 4  # x = 0.925 .. 1.0
    assert prof.count("oscillatory") == int(np.sum((x[2] > 0.5) & (x[2] <= 0.9)))
    assert prof.share_oscillatory == pytest.approx(prof.count("oscillatory") / 37)
    osc = prof.status == "oscillatory"
    assert np.all(np.isnan(prof.error_bar[osc])) and np.all(np.isnan(prof.p_local[osc]))
    avg = gci_profile(x, v, h=hs, order="average")
    assert np.all(np.isfinite(avg.error_bar[osc]))
    text = no_nan(prof)
    assert "oscillatory" in text


def test_profile_scattered_2d_field():
    rng = np.random.default_rng(1)
    corners = np.array([[0, 0], [1, 0], [0, 1], [1, 1]], dtype=float)
    pts = [np.vstack([corners, rng.random((n, 2))]) for n in (60, 120, 240)]
    hs = [0.2, 0.1, 0.05]
    # closed form: a field linear in x, y plus 0.3 h^2; linear griddata is exact for it
    vals = [2 + p[:, 0] - 3 * p[:, 1] + 0.3 * h ** 2 for p, h in zip(pts, hs)]
    prof = gci_profile(pts, vals, h=hs)
    inside = prof.status != "outside"
    assert np.all(prof.status[inside] == "monotone")
    assert np.allclose(prof.p_local[inside], 2.0, atol=1e-6)


def test_plot_profile_writes_png(tmp_path):
    x, v, hs = _line_grids(lambda x, h: np.sin(3 * x) + 0.5 * h ** 2)
    prof = gci_profile(x, v, h=hs)
    out = plot_profile(prof, tmp_path / "profile.png", label="u")
    data = (tmp_path / "profile.png").read_bytes()
    assert out.endswith("profile.png") and data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000


@pytest.mark.parametrize("points,values,fragment", [
    ([[0, 1], [0, 0.5, 1]], [[1, 2], [1, 1.5, 2]], "exactly three grids"),
    ([[0, 1], [0, 0.5, 1], [0, 0.25, 0.5, 0.75, 1]], [[1, 2], [1, 1.5], [1, 2, 3, 4, 5]], "one finite value"),
    ([[0, 0, 1], [0, 0.5, 1], [0, 0.25, 0.5, 0.75, 1]], [[1, 1, 2], [1, 1.5, 2], [1, 2, 3, 4, 5]], "repeated"),
])
def test_profile_bad_input(points, values, fragment):
    with pytest.raises(AnalysisError, match=fragment):
        gci_profile(points, values, h=[0.5, 0.25, 0.125])

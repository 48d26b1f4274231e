"""Tests of mmsverify.analysis.order: observed orders, order fits, convergence type,
asymptotic range and the least-squares procedure of Eca & Hoekstra (2014)."""

import math

import numpy as np
import pytest

from mmsverify.errors import AnalysisError
from mmsverify.analysis.order import (
    asymptotic_check,
    classify_convergence,
    eca_hoekstra,
    fit_order,
    observed_orders,
)

H4 = [0.1, 0.05, 0.025, 0.0125]


def _no_nan(record):
    text = str(record)
    assert "nan" not in text.lower(), text
    return text


# ---------------------------------------------------------------- observed orders and fits

def test_observed_orders_closed_form_non_constant_ratio():
    # closed form: e = 3 h^1.7 on irregular sizes gives p = 1.7 for every pair
    h = np.array([0.3, 0.17, 0.1, 0.041])
    p = observed_orders(h, 3 * h ** 1.7)
    assert np.allclose(p, 1.7, rtol=0, atol=1e-13)


@pytest.mark.parametrize("p_true,C_true", [(1.0, 2.5), (2.0, 0.4), (4.0, 17.0)])
def test_fit_order_recovers_power_law_to_round_off(p_true, C_true):
    # closed form: e = C h^p exactly
    h = np.array([0.2, 0.13, 0.07, 0.05, 0.021])
    fit = fit_order(h, C_true * h ** p_true)
    assert fit.p == pytest.approx(p_true, abs=1e-12)
    assert fit.C == pytest.approx(C_true, rel=1e-11)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-14)
    assert fit.p_high - fit.p_low < 1e-10
    _no_nan(fit)


def test_fit_order_interval_uses_student_t_with_n_minus_2_dof():
    # Student t critical values t(0.975, 1) = 12.706 and t(0.975, 2) = 4.303  # from memory (standard t tables)
    h = np.array([0.1, 0.05, 0.025])
    e = np.array([4e-3, 1.1e-3, 2.5e-4])
    fit = fit_order(h, e)
    x, y = np.log(h), np.log(e)
    slope, icept = np.polyfit(x, y, 1)
    se = math.sqrt(np.sum((y - (icept + slope * x)) ** 2) / 1 / np.sum((x - x.mean()) ** 2))
    assert fit.p == pytest.approx(slope, rel=1e-12)
    assert (fit.p_high - fit.p) / se == pytest.approx(12.706, abs=5e-4)
    fit4 = fit_order(H4, [4e-3, 1.1e-3, 2.5e-4, 6.4e-5])
    x4, y4 = np.log(H4), np.log([4e-3, 1.1e-3, 2.5e-4, 6.4e-5])
    s4, i4 = np.polyfit(x4, y4, 1)
    se4 = math.sqrt(np.sum((y4 - (i4 + s4 * x4)) ** 2) / 2 / np.sum((x4 - x4.mean()) ** 2))
    assert (fit4.p_high - fit4.p) / se4 == pytest.approx(4.303, abs=5e-4)
    assert fit4.p_low < 2.0 < fit4.p_high


def test_fit_order_two_levels_has_no_interval_and_says_so():
    fit = fit_order([0.1, 0.05], [4e-3, 1e-3])
    assert fit.p == pytest.approx(2.0, abs=1e-12)
    assert math.isnan(fit.p_low) and math.isnan(fit.p_high)
    assert "third level" in fit.note
    text = _no_nan(fit)
    assert "n/a" in text


@pytest.mark.parametrize("h,e,fragment", [
    ([0.1], [1e-3], "at least 2 levels"),
    ([0.1, 0.1, 0.05], [1e-2, 1e-3, 1e-4], "strictly decrease"),
    ([0.05, 0.1, 0.2], [1e-2, 1e-3, 1e-4], "strictly decrease"),
    ([0.1, 0.0, -0.1], [1e-2, 1e-3, 1e-4], "positive"),
    ([0.1, 0.05, 0.025], [1e-2, 0.0, 1e-4], "drop levels"),
    ([0.1, 0.05], [1e-2, 1e-3, 1e-4], "equal length"),
])
def test_fit_order_rejects_bad_input(h, e, fragment):
    with pytest.raises(AnalysisError, match=fragment):
        fit_order(h, e)


def test_fit_order_rejects_bad_confidence():
    with pytest.raises(AnalysisError, match="between 0 and 1"):
        fit_order(H4, [1, 0.25, 0.0625, 0.015625], confidence=95)


# ---------------------------------------------------------------- convergence type

# Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1 (values as listed in
# /work/shared/reference/celik2008-table1.md), h = (1/N)^(1/2), coarse to fine.
def _celik_h(cells):
    return [(1.0 / n) ** 0.5 for n in cells]


def test_celik_table1_columns_1_and_2_monotone_column_3_oscillatory():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, columns 1-3
    col1 = classify_convergence([5.863, 5.972, 6.063], h=_celik_h([4500, 8000, 18000]))
    col2 = classify_convergence([10.6050, 10.7250, 10.7880], h=_celik_h([980, 4500, 18000]))
    col3 = classify_convergence([6.0909, 5.9624, 6.0042], h=_celik_h([980, 4500, 18000]))
    assert col1.kind == "monotone" and col2.kind == "monotone"
    assert col3.kind == "oscillatory"  # Table 1 note: sign of (phi3-phi2)/(phi2-phi1) negative
    assert col3.ratios[0] < 0
    for c in (col1, col2, col3):
        _no_nan(c)
        assert c.advice


def test_divergence_kinds_and_advice():
    mono = classify_convergence([1.0, 1.1, 1.3])
    osc = classify_convergence([1.0, 1.1, 0.8])
    assert (mono.kind, mono.detail) == ("divergent", "monotone divergence")
    assert (osc.kind, osc.detail) == ("divergent", "oscillatory divergence")
    assert "no error estimate" in mono.advice


def test_equal_values_are_insensitive_not_an_error():
    c = classify_convergence([2.5, 2.5, 2.5, 2.5])
    assert c.kind == "insensitive"
    assert "round-off" in c.detail
    assert "more significant digits" in c.advice
    _no_nan(c)
    finest = classify_convergence([2.0, 2.4, 2.5, 2.5])
    assert finest.kind == "insensitive"


def test_more_than_three_levels_mixed_is_scattered():
    c = classify_convergence([1.0, 2.0, 2.5, 2.7, 2.6])
    assert c.kind == "scattered"
    assert c.triplets == ("monotone", "monotone", "oscillatory")


def test_non_constant_ratio_judged_with_h():
    # closed form: phi = 1 + h^2 on h = 1.1, 1.0, 0.5 converges, although the
    # finer change is larger than the coarser one (R > 1)
    h = np.array([1.1, 1.0, 0.5])
    phi = 1 + h ** 2
    assert classify_convergence(phi).kind == "divergent"  # constant-ratio test misjudges it
    assert classify_convergence(phi, h=h).kind == "monotone"


def test_classify_needs_three_levels():
    with pytest.raises(AnalysisError, match="at least three"):
        classify_convergence([1.0, 2.0])


# ---------------------------------------------------------------- asymptotic range and floors

H5 = [0.1, 0.05, 0.025, 0.0125, 0.00625]


def test_settled_second_order():
    e = 0.4 * np.asarray(H5) ** 2 * (1 + 0.01 * np.asarray(H5))  # closed form with a higher term
    chk = asymptotic_check(H5, e, formal_order=2)
    assert chk.settled and chk.near_formal and chk.floor is None
    assert chk.drop_levels == ()
    _no_nan(chk)


def test_iteration_floor_names_levels_and_tolerance():
    # errors fall at second order, then stop at 2.5e-4 (an iteration floor)
    chk = asymptotic_check(H5, [4e-3, 1e-3, 2.6e-4, 2.5e-4, 2.5e-4], formal_order=2)
    assert chk.floor == "iteration"
    assert chk.drop_levels == (3, 4)
    # expected finest error from the last falling stage: 2.6e-4 * (0.00625/0.025)^2
    assert chk.tolerance_hint == pytest.approx(2.6e-4 / 16 / 10)
    assert "0.0125" in chk.message and "0.00625" in chk.message
    assert "tighten the solver tolerance" in chk.message
    _no_nan(chk)


def test_round_off_floor_relative_to_solution_size():
    e = [4e-3, 1e-3, 2.5e-4, 3e-14, 2.9e-14]
    chk = asymptotic_check(H5, e, formal_order=2, scale=100.0)
    assert chk.floor == "round-off"
    assert chk.drop_levels == (4,)
    assert "round-off" in chk.message


def test_solution_values_orders_and_floor():
    h = np.asarray(H5)
    phi = 3.0 + 0.2 * h ** 2
    chk = asymptotic_check(h, phi, formal_order=2, kind="solution")
    assert all(abs(p - 2) < 1e-6 for p in chk.orders)
    assert chk.settled
    stuck = phi.copy()
    stuck[-1] = stuck[-2]  # the finest level repeats the previous one: a floor
    chk2 = asymptotic_check(h, stuck, formal_order=2, kind="solution")
    assert chk2.floor == "round-off" and chk2.drop_levels == (4,)


def test_asymptotic_check_bad_input():
    with pytest.raises(AnalysisError, match="at least 3 levels"):
        asymptotic_check([0.1, 0.05], [1e-2, 2.5e-3])
    with pytest.raises(AnalysisError, match="at least 4 levels"):
        asymptotic_check([0.1, 0.05, 0.025], [1.0, 1.1, 1.12], kind="solution")
    with pytest.raises(AnalysisError, match="kind"):
        asymptotic_check(H5, [1, 2, 3, 4, 5], kind="errors")
    with pytest.raises(AnalysisError, match="norms"):
        asymptotic_check([0.1, 0.05, 0.025], [1e-2, -2.5e-3, 1e-4])


# ---------------------------------------------------------------- Eca & Hoekstra (2014) least squares
# Eca & Hoekstra, J. Comput. Phys. 262 (2014) 104-130. The paper was not read here;
# the Fs rule (1.25 iff 0.5 <= p < 2.1 and sigma < data range, else 3) and the p < 0.5
# fallback fits were cross-checked against an independent port of the procedure.
# from memory: the p >= 2 branch, the anomalous (non-monotone) branch, four levels minimum.

HE = np.array([1.0, 0.8, 0.6, 0.5, 0.4, 0.3])


def test_eca_hoekstra_recovers_exact_power_law():
    # closed form: phi = 2 + 0.3 h^1.5
    res = eca_hoekstra(HE, 2 + 0.3 * HE ** 1.5)
    assert res.p == pytest.approx(1.5, abs=1e-7)
    assert res.phi0 == pytest.approx(2.0, abs=1e-9)
    assert res.fit_used == "power (p free)"
    assert res.safety_factor == 1.25  # from memory
    assert res.uncertainty_fine == pytest.approx(1.25 * 0.3 * 0.3 ** 1.5, rel=1e-6)
    _no_nan(res)


def test_eca_hoekstra_high_order_uses_second_order_fits():
    res = eca_hoekstra(HE, 2 + 0.3 * HE ** 3)
    assert res.p == pytest.approx(3.0, abs=1e-6)
    assert res.fit_used in ("p = 2", "h + h^2")
    assert res.safety_factor == 3.0  # p outside [0.5, 2.1)  # from memory


def test_eca_hoekstra_exact_second_order_picks_p2_fit_phi0():
    res = eca_hoekstra(HE, 5 - 0.7 * HE ** 2)
    assert res.phi0 == pytest.approx(5.0, abs=1e-9)


def test_eca_hoekstra_low_order_and_anomalous_use_fs_3():
    low = eca_hoekstra(HE, 2 + 0.3 * HE ** 0.3)
    assert low.p == pytest.approx(0.3, abs=1e-6) and low.safety_factor == 3.0
    assert low.fit_used in ("p = 1", "p = 2", "h + h^2")
    osc = eca_hoekstra(HE, 2 + 0.3 * HE ** 2 * np.array([1, -1, 1, -1, 1, -1]))
    assert osc.p is None and osc.safety_factor == 3.0
    assert "not monotone" in osc.behaviour
    _no_nan(osc)
    # the band covers the spread of the scattered data
    assert osc.uncertainty_fine >= abs(osc.phi[-1] - osc.phi0)


def test_eca_hoekstra_needs_four_levels_and_variation():
    with pytest.raises(AnalysisError, match="at least 4 levels"):
        eca_hoekstra([0.4, 0.2, 0.1], [1.0, 1.1, 1.12])
    with pytest.raises(AnalysisError, match="all 4 values are equal"):
        eca_hoekstra([0.4, 0.2, 0.1, 0.05], [1.0, 1.0, 1.0, 1.0])

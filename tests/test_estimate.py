"""Tests of mmsverify.analysis.estimate: solution verification of quantities without an
exact solution, level-table files, profile files and the planner."""

import math
from pathlib import Path

import numpy as np
import pytest

from mmsverify.errors import AnalysisError
from mmsverify.analysis.estimate import (
    ACCEPTANCE_LEVEL,
    assess,
    assess_table,
    load_levels,
    load_profile,
    plan,
    within_acceptance,
)
from mmsverify.analysis.gci import gci_profile

from _helpers import no_nan, printed

DATA = Path(__file__).parent / "data"


# ---------------------------------------------------------------- assess

def test_assess_celik_table1_column1():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1
    a = assess([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2, name="phi", formal_order=2)
    assert printed(a.order, "1.53")  # Table 1, column 1: apparent order
    assert printed(a.extrapolated, "6.1685")  # Table 1, column 1: phi_ext21
    assert printed(100 * a.relative_uncertainty, "2.2")  # Table 1, column 1: GCI_fine21
    assert a.convergence.kind == "monotone" and a.method.startswith("GCI_fine21")
    # common practice: ~5 % relative discretization error is a usual acceptance level
    assert a.acceptable is True and "below 5 %" in a.verdict
    # r21 = 1.5, r32 = 1.333: non-constant ratio is reported
    assert any("non-constant" in w for w in a.warnings)
    no_nan(a)


def test_assess_celik_table1_column3_gives_the_gci_with_a_caution():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 3 (oscillatory): the procedure
    # reports the numbers, with a caution
    a = assess([6.0909, 5.9624, 6.0042], cells=[980, 4500, 18000], dim=2, name="col3")
    assert a.convergence.kind == "oscillatory"
    assert "with caution" in a.method
    assert printed(a.extrapolated, "6.0269") and printed(100 * a.relative_uncertainty, "0.5")  # Table 1, col. 3
    assert any("oscillatory" in w and "caution" in w for w in a.warnings)
    no_nan(a)


def test_common_practice_acceptance_level():
    # common practice: about 5 % relative discretization error is a usual acceptance level
    assert ACCEPTANCE_LEVEL == 0.05
    assert within_acceptance(0.05) and not within_acceptance(0.0501)
    with pytest.raises(AnalysisError):
        within_acceptance(float("nan"))


def test_assess_above_acceptance_suggests_refining():
    h = np.array([0.4, 0.2, 0.1])
    a = assess(1 + 3 * h, h=h)  # closed form, first order, 30 % error on the finest grid
    assert a.order == pytest.approx(1.0, abs=1e-10)
    assert a.acceptable is False and "refine" in a.verdict


def test_assess_two_grids_uses_formal_order_and_warns():
    # Roache (1998): Fs = 3 for two grids
    a = assess([0.96854, 0.97050], h=[2.0, 1.0], formal_order=2)
    assert a.gci.safety_factor == 3.0 and a.order == 2.0
    assert any("two grids" in w for w in a.warnings)
    assert a.convergence is None
    no_nan(a)
    with pytest.raises(AnalysisError, match="formal_order"):
        assess([0.96854, 0.97050], h=[2.0, 1.0])


def test_assess_common_practice_warnings():
    # common practice: Celik et al. 2008 recommend r > 1.3; three grids with constant ratio
    h = np.array([1.2 ** 2, 1.2, 1.0])
    a = assess(2 + h ** 2, h=h)
    assert any("below 1.3" in w for w in a.warnings)
    assert not any("non-constant" in w for w in a.warnings)
    h = np.array([0.4, 0.2, 0.1])
    far = assess(2 + h ** 1.0, h=h, formal_order=2)  # first order where second is expected
    assert any("far from the formal order" in w for w in far.warnings)


def test_assess_four_levels_oscillatory_falls_back_to_least_squares():
    h = np.array([0.8, 0.4, 0.2, 0.1])
    a = assess(1 + h ** 2 * np.array([1, -1, 1, -1]), h=h)
    assert a.gci.status == "oscillatory"
    assert a.method.startswith("least squares") and a.least_squares.safety_factor == 3.0
    assert a.uncertainty is not None and a.uncertainty >= abs(a.values[-1] - 1.0)
    assert any("least-squares estimate" in w for w in a.warnings)
    no_nan(a)


def test_assess_reports_a_round_off_floor_on_fine_levels():
    # closed form: v = 1 + 0.5 h^2, exact value 1; the finest level stops changing
    h = np.array([0.4, 0.2, 0.1, 0.05, 0.025])
    v = 1 + 0.5 * h ** 2
    for step in (0.0, 1e-15):  # repeats the previous value, or differs by round-off
        v[-1] = v[-2] + step
        a = assess(v, h=h, formal_order=2)
        assert a.convergence.kind == "round-off" and a.order is None and a.extrapolated is None
        assert (a.gci is None) == (step == 0.0)  # no GCI can be formed from equal finest values
        # the band is the spread of the finest three values and covers the true error
        assert a.uncertainty == pytest.approx(np.ptp(v[-3:]), rel=1e-12)
        assert a.uncertainty >= abs(v[-1] - 1.0)
        assert any("round-off" in w for w in a.warnings)
        no_nan(a)


@pytest.mark.parametrize("kwargs,fragment", [
    (dict(values=[1.0], h=[0.1]), "at least two"),
    (dict(values=[1.0, 1.0, 1.0], h=[0.4, 0.2, 0.1]), "all 3 values are equal"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.4, 0.4, 0.1]), "strictly decrease"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.1, 0.2, 0.4]), "strictly decrease"),
    (dict(values=[1.0, 1.1, 1.2], h=[0.4, 0.0, -0.1]), "positive"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, -20, 40], dim=2), "positive"),
    (dict(values=[1.0, 1.1, 1.2], cells=[10, 20, 40]), "dim"),
])
def test_assess_bad_input_names_the_quantity(kwargs, fragment):
    with pytest.raises(AnalysisError, match=fragment) as info:
        assess(name="drag", **kwargs)
    assert "'drag'" in str(info.value)


# ---------------------------------------------------------------- level tables

def test_load_levels_csv_fine_to_coarse_is_reordered():
    t = load_levels(DATA / "celik2008_table1_col1.csv")
    assert t.reversed and t.size_column == "cells" and t.dim == 2
    assert t.sizes == (4500.0, 8000.0, 18000.0)
    assert t.values("phi") == (5.863, 5.972, 6.063)
    assert t.lines == (7, 6, 5)  # file lines of 4500, 8000, 18000
    no_nan(t)


def test_assess_table_celik_columns_2_and_3_from_toml():
    res = assess_table(DATA / "celik2008_table1_col23.toml")
    assert len(res) == 2
    c2, c3 = res["column2"], res["column3"]
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 2
    assert printed(c2.order, "0.75") and printed(c2.extrapolated, "10.8801")
    assert printed(100 * c2.relative_uncertainty, "1.1")
    # Celik et al. 2008, Table 1, column 3: oscillatory, GCI_fine21 = 0.5 % given with a caution
    assert c3.convergence.kind == "oscillatory" and printed(100 * c3.relative_uncertainty, "0.5")
    text = no_nan(res)
    assert "column2" in text and "column3" in text and "oscillatory" in text


def test_assess_table_names_and_formal_order(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("formal_order = 2\nh, a, b\n0.4, 1.16, 2.5\n0.2, 1.04, 2.25\n0.1, 1.01, 2.125\n")
    res = assess_table(f)
    assert res["a"].order == pytest.approx(2.0) and res["a"].formal_order == 2.0
    assert any("far from the formal" in w for w in res["b"].warnings)  # b is first order
    only = assess_table(f, names=["b"], formal_order=1)
    assert len(only) == 1 and not any("far from" in w for w in only[0].warnings)
    with pytest.raises(AnalysisError, match="no quantity 'c'"):
        assess_table(f, names=["c"])


@pytest.mark.parametrize("text,fragment", [
    ("cells, a\n10, 1.0\n20, 1.1\n40, 1.15\n", "add a line 'dim = 2'"),
    ("dim = 2\ncells, a\n10, 1.0\n20, x\n40, 1.15\n", "line 4, column 'a': 'x' is not a finite number"),
    ("dim = 2\ncells, a\n10, 1.0\n20, 1.1, 3\n40, 1.15\n", "line 4: 3 fields, but the header on line 2"),
    ("dims = 2\ncells, a\n10, 1.0\n20, 1.1\n", "line 1: unknown setting 'dims'"),
    ("dim = 4\ncells, a\n10, 1.0\n20, 1.1\n", "dim must be 1, 2 or 3"),
    ("dim = 2\nsize, a\n10, 1.0\n20, 1.1\n", "line 2: the first column must be 'cells'"),
    ("dim = 2\ncells, a, a\n10, 1.0, 2\n20, 1.1, 2\n", "names repeat"),
    ("dim = 2\ncells, a\n10, 1.0\n40, 1.1\n20, 1.2\n", "line 5: cells = 20 breaks the order"),
    ("dim = 2\ncells, a\n10, 1.0\n10, 1.1\n", "line 4"),
    ("h, a\n0.1, 1.0\n0, 1.1\n", "line 3: h must be positive"),
    ("h, a\n0.1, 1.0\n", "at least two levels"),
    ("# only a comment\n", "no header line"),
])
def test_load_levels_csv_errors_name_file_and_line(tmp_path, text, fragment):
    f = tmp_path / "levels.csv"
    f.write_text(text)
    with pytest.raises(AnalysisError, match=fragment) as info:
        load_levels(f)
    assert str(f) in str(info.value)


@pytest.mark.parametrize("text,fragment", [
    ("dim = 2\n", "no \\[levels\\] table"),
    ("dim = 2\n[levels]\ncells = [10, 20]\na = [1.0]\n", "'a' has 1 values but 'cells' has 2"),
    ("[levels]\nh = [0.2, 0.1]\nh2 = 'x'\n", "'h2' must be an array of numbers"),
    ("[levels]\nh = [0.2, 0.1]\ncells = [1, 2]\na = [1, 2]\n", "exactly one of 'cells' or 'h'"),
    ("dim = 2\n[levels\n", "not valid TOML"),
    ("colour = 2\n[levels]\nh = [0.2, 0.1]\na = [1, 2]\n", "unknown setting 'colour'"),
])
def test_load_levels_toml_errors(tmp_path, text, fragment):
    f = tmp_path / "levels.toml"
    f.write_text(text)
    with pytest.raises(AnalysisError, match=fragment):
        load_levels(f)


def test_load_levels_missing_file_and_dim_argument(tmp_path):
    with pytest.raises(AnalysisError, match="cannot read level table"):
        load_levels(tmp_path / "nope.csv")
    f = tmp_path / "t.csv"
    f.write_text("cells, a\n100, 1.0\n400, 1.1\n1600, 1.12\n")
    t = load_levels(f, dim=2)
    assert t.h == pytest.approx((0.1, 0.05, 0.025))
    g = tmp_path / "g.csv"
    g.write_text("dim = 3\ncells, a\n100, 1.0\n400, 1.1\n")
    with pytest.raises(AnalysisError, match="the file says dim = 3"):
        load_levels(g, dim=2)


# ---------------------------------------------------------------- profiles from files

def test_profile_from_three_files(tmp_path):
    hs = [0.1, 0.05, 0.025]
    paths = []
    for n, h in zip((11, 21, 41), hs):
        x = np.linspace(0, 1, n)
        p = tmp_path / f"u_{n}.csv"
        rows = "\n".join(f"{float(xi)!r}, {float(1 + 2 * xi + 0.5 * h * h)!r}, 0" for xi in x)
        p.write_text(f"# profile on grid {n}\nx, u, v\n{rows}\n")
        paths.append(p)
    loaded = [load_profile(p, column="u") for p in paths]
    prof = gci_profile([pt for pt, _ in loaded], [v for _, v in loaded], h=hs)
    assert prof.p_average == pytest.approx(2.0, abs=1e-8)
    with pytest.raises(AnalysisError, match="choose one with column="):
        load_profile(paths[0])


def test_load_profile_2d_and_errors(tmp_path):
    f = tmp_path / "f.csv"
    f.write_text("x, y, T\n0, 0, 1\n1, 0, 2\n0, 1, 3\n")
    pts, vals = load_profile(f)
    assert pts.shape == (3, 2) and vals.tolist() == [1.0, 2.0, 3.0]
    bad = tmp_path / "b.csv"
    bad.write_text("x, T\n0, 1\n1, q\n")
    with pytest.raises(AnalysisError, match="line 3"):
        load_profile(bad)
    nocoord = tmp_path / "n.csv"
    nocoord.write_text("T, x\n0, 1\n1, 2\n")
    with pytest.raises(AnalysisError, match="coordinate columns"):
        load_profile(nocoord)


# ---------------------------------------------------------------- planner

def test_plan_errors_closed_form():
    # closed form: e = 0.4 h^2, time = 0.01 N with N = h^-2 (2-D unit square)
    h = np.array([0.1, 0.05, 0.025])
    pl = plan(h, 0.4 * h ** 2, 0.01 * h ** -2.0, 1.6e-5, dim=2)
    assert pl.order == pytest.approx(2.0) and pl.constant == pytest.approx(0.4)
    assert pl.h_needed == pytest.approx(math.sqrt(1.6e-5 / 0.4))
    assert pl.cells_needed == pytest.approx(0.4 / 1.6e-5)
    assert pl.time_needed == pytest.approx(0.01 * 0.4 / 1.6e-5)
    assert pl.time_exponent == pytest.approx(1.0)
    assert pl.reliable and not pl.already_met
    no_nan(pl)


def test_plan_gci_target_from_solution_values():
    # closed form: phi = 2 + 0.6 h^2; GCI(h) = 1.25 * 0.6 h^2 / 2
    h = np.array([0.4, 0.2, 0.1])
    pl = plan(None, 2 + 0.6 * h ** 2, [1.0, 8.0, 64.0], 0.001, kind="solution", measure="gci",
              cells=[125, 1000, 8000], dim=3, volume=8.0)  # h = (8/N)^(1/3) = 0.4, 0.2, 0.1
    assert pl.h_needed == pytest.approx(math.sqrt(0.001 * 2 / (1.25 * 0.6)))
    assert pl.time_exponent == pytest.approx(1.0)
    assert pl.cells_needed == pytest.approx(8000 * (0.1 / pl.h_needed) ** 3)
    assert pl.reliable


def test_plan_says_when_data_are_too_weak():
    h = np.array([0.1, 0.05])
    two = plan(h, [4e-3, 1e-3], [1.0, 4.0], 1e-4)
    assert not two.reliable and any("only 2 levels" in r for r in two.reasons)
    osc = plan([0.4, 0.2, 0.1], [1.0, 1.2, 1.1], [1, 8, 64], 1e-3, kind="solution")
    assert osc.h_needed is None and not osc.reliable and "too weak" in osc.advice
    no_nan(osc)
    h5 = np.array([0.1, 0.05, 0.025, 0.0125, 0.00625])
    floor = plan(h5, [4e-3, 1e-3, 2.6e-4, 2.5e-4, 2.5e-4], 4 ** np.arange(5), 1e-5)
    assert not floor.reliable and any("tighten the solver tolerance" in r for r in floor.reasons)
    noisy_time = plan([0.1, 0.05, 0.025], [4e-3, 1e-3, 2.5e-4], [5.0, 1.0, 30.0], 1e-4)
    assert not noisy_time.reliable and any("run times" in r for r in noisy_time.reasons)
    far = plan([0.1, 0.05, 0.025], [4e-3, 1e-3, 2.5e-4], [1, 4, 16], 1e-9)
    assert not far.reliable and any("extrapolates" in r for r in far.reasons)


def test_plan_already_met():
    pl = plan([0.1, 0.05, 0.025], [4e-3, 1e-3, 2.5e-4], [1, 4, 16], 1e-3)
    assert pl.already_met and "already meets" in pl.advice


@pytest.mark.parametrize("kwargs,fragment", [
    (dict(target=-1.0), "target must be a positive"),
    (dict(target=1e-4, measure="gci"), "kind='solution'"),
    (dict(target=1e-4, times=[1.0, 2.0]), "times must be positive"),
    (dict(target=1e-4, kind="both"), "kind must be"),
])
def test_plan_bad_input(kwargs, fragment):
    args = dict(h=[0.1, 0.05, 0.025], values=[4e-3, 1e-3, 2.5e-4], times=[1.0, 4.0, 16.0])
    args.update(kwargs)
    with pytest.raises(AnalysisError, match=fragment):
        plan(**args)

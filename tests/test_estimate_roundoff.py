"""Quantities converged to round-off: no order or GCI from noise, the spread of
the finest values as the band (mmsverify.analysis.estimate.assess, classify_convergence)."""

import numpy as np
import pytest

from mmsverify.cli import main
from mmsverify.analysis.convergence import ROUNDOFF_LEVEL, classify_convergence
from mmsverify.errors import AnalysisError
from mmsverify.analysis.estimate import assess

from _helpers import no_nan

H = np.array([0.4, 0.2, 0.1, 0.05])


def test_finest_change_at_round_off_is_not_an_order():
    # closed form: phi = 5.625 + 0.1 h^2 (exact 5.625) on the coarse levels; the finest level differs from
    # the previous one by 3 ulp-sized amounts in the opposite sign, as round-off does
    phi = 5.625 + 0.1 * H ** 2
    phi[-1] = phi[-2] - 2e-15
    a = assess(phi, h=H, formal_order=2, name="rail")
    assert a.convergence.kind == "round-off"
    assert a.order is None and a.extrapolated is None and a.least_squares is None
    assert a.method.startswith("converged to round-off")
    assert a.uncertainty == pytest.approx(np.ptp(phi[-3:]), rel=1e-12)
    assert a.uncertainty >= abs(phi[-1] - 5.625)  # the band covers the true error
    assert a.acceptable
    text = no_nan(a)
    assert "round-off" in text


def test_all_three_finest_values_at_round_off():
    # closed form: a constant 2.5 perturbed by amounts of order 10 eps
    phi = 2.5 * (1 + np.array([1e-3, 4e-15, -3e-15, 1e-15]))
    a = assess(phi, h=H)
    assert a.convergence.kind == "round-off"
    assert "three" in a.convergence.detail
    # at least the noise band, never zero
    assert a.uncertainty == pytest.approx(max(np.ptp(phi[-3:]), ROUNDOFF_LEVEL * 2.5), rel=1e-12)


def test_three_levels_only_and_zero_value():
    # closed form: a quantity that drops from 1 to round-off of 1; an exact zero finest value has no
    # relative band, only the absolute one
    b = assess([1.0, 1e-11, 0.0], h=H[:3])
    assert b.uncertainty == 1.0
    assert b.convergence.kind == "round-off" and b.relative_uncertainty is None and b.acceptable is None
    no_nan(b)


def test_published_monotone_data_are_not_round_off():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1: monotone, p = 1.53
    a = assess([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)
    assert a.convergence.kind == "monotone" and round(a.order, 2) == 1.53
    # Celik et al. 2008, Table 1, column 3: oscillatory (its GCI given with a caution), not round-off
    b = assess([6.0909, 5.9624, 6.0042], cells=[980, 4500, 18000], dim=2)
    assert b.convergence.kind == "oscillatory" and "caution" in b.method


def test_solver_tolerance_raises_the_noise_level():
    # closed form: second order on the coarse levels, then a change of 1e-9 relative, as an iterative
    # solver stopped at a relative tolerance of 1e-8 leaves
    phi = 1.0 + 0.1 * H ** 2
    phi[-1] = phi[-2] * (1 + 1e-9)
    plain = assess(phi, h=H)
    assert plain.convergence.kind != "round-off"
    tight = assess(phi, h=H, noise=1e-8)
    assert tight.convergence.kind == "round-off"
    assert tight.uncertainty == pytest.approx(np.ptp(phi[-3:]), rel=1e-12)
    with pytest.raises(AnalysisError, match="noise"):
        assess(phi, h=H, noise=-1.0)
    with pytest.raises(AnalysisError, match="noise"):
        classify_convergence(phi, noise=float("nan"))


def test_classify_without_noise_is_unchanged():
    # closed form: the default 64-eps zero test still calls agreeing finest levels "insensitive"
    phi = [1.3, 1.1, 1.0, 1.0]
    assert classify_convergence(phi).kind == "insensitive"
    assert classify_convergence(phi, noise=ROUNDOFF_LEVEL).kind == "round-off"


def test_cli_noise_option_and_table(tmp_path, capsys):
    f = tmp_path / "levels.csv"
    # closed form: q = 1 + 0.1 h^2 then a 1e-9 relative change on the finest level
    f.write_text("h, q\n0.4, 1.016\n0.2, 1.004\n0.1, 1.001\n0.05, 1.001000001001\n")
    assert main(["estimate", str(f), "--noise", "1e-8"]) == 0
    out = capsys.readouterr().out
    assert "round-off" in out and "nan" not in out.lower()
    main(["estimate", str(f)])
    assert "round-off" not in capsys.readouterr().out.split("\n")[3]


def test_spreader_right_rail_converges_to_round_off():
    from solvers_demo.spreader import CHIP, LX, LY, POWER, run

    rows = run((32, 64, 128))
    cells = [r["cells"] for r in rows]
    rail = assess([r["right_rail_W"] for r in rows], cells=cells, dim=2, volume=LX * LY, formal_order=2)
    assert rail.convergence.kind == "round-off"
    # common practice (energy balance): with insulated long edges the right rail takes POWER * x_chip / LX
    exact = POWER * CHIP[0] / LX
    assert rail.uncertainty >= abs(rail.values[-1] - exact)
    assert rail.relative_uncertainty < 1e-6

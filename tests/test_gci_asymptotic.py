"""The asymptotic-range ratio of mmsverify.analysis.gci on exact power-law data that
change by a large factor between levels: reported, never a warning."""

import numpy as np
import pytest

from mmsverify.analysis.estimate import assess, plan
from mmsverify.analysis.gci import gci

from _helpers import printed


def test_exact_second_order_data_with_a_large_relative_change():
    # closed form: phi = 1/300 + h^2/600 on h = 4, 2, 1 gives 0.03, 0.01, 0.005 (p = 2, r = 2)
    res = gci([0.03, 0.01, 0.005], h=[4.0, 2.0, 1.0])
    assert res.valid and res.p == pytest.approx(2.0, abs=1e-12)
    assert res.phi_ext21 == pytest.approx(1 / 300, rel=1e-12)
    # Roache (1998), GCI_23 = r^p GCI_12 with relative GCIs (from memory): with p from these grids the
    # absolute bands agree exactly (Celik et al. 2008, Eq. 3), so the ratio is phi1/phi2 = 0.5 here
    assert res.asymptotic_ratio == pytest.approx(0.5, rel=1e-12) == res.formula.asymptotic_ratio
    assert not any("asymptotic" in w for w in res.warnings)
    assert "GCI_fine32 / (r21^p GCI_fine21) (= phi1/phi2)" in str(res)


@pytest.mark.parametrize("hs", [[0.4, 0.2, 0.1], [0.5, 0.3, 0.13]], ids=["r=2", "non-constant"])
@pytest.mark.parametrize("p_true", [1.0, 2.0, 4.0])
def test_quantity_tending_to_nearly_zero_is_in_the_asymptotic_range(hs, p_true):
    # closed form: phi = 1e-4 + 3 h^p changes by up to two orders of magnitude between levels
    hs = np.array(hs)
    phi = 1e-4 + 3 * hs ** p_true
    res = gci(phi, h=hs)
    assert res.p == pytest.approx(p_true, abs=1e-9)
    assert res.asymptotic_ratio == pytest.approx(phi[-1] / phi[-2], rel=1e-9)
    assert not any("asymptotic" in w for w in res.warnings)
    a = assess(phi, h=hs, formal_order=p_true)
    assert not any("asymptotic" in w for w in a.warnings)


def test_the_planner_no_longer_flags_exact_power_law_data():
    # closed form: phi = 1e-4 + 3 h^2 with run times growing like h^-2
    hs = np.array([0.4, 0.2, 0.1])
    pl = plan(hs, 1e-4 + 3 * hs ** 2, times=[1.0, 4.0, 16.0], target=1e-3, kind="solution", measure="gci")
    assert not any("asymptotic ratio" in r for r in pl.reasons)


def test_published_examples_keep_their_relative_ratio():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1: p = 1.53, r21 = 1.5, r32 = 1.333
    res = gci([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)
    assert printed(res.p, "1.53")
    # the ratio is phi1/phi2 (Celik et al. 2008, Eq. 3 makes the absolute bands agree)
    assert res.asymptotic_ratio == pytest.approx(6.063 / 5.972, rel=1e-9)

"""Verdicts: statements a reader can check by hand, and floors named as floors."""

from mmsverify.analysis.verdict import judge

H = [0.1, 0.05, 0.025, 0.0125, 0.00625]


def test_clean_second_order_is_confirmed_with_its_reason():
    # closed form: e = h**2 gives order exactly 2
    v = judge("u", "L2", H, [h * h for h in H], 2, 0.1)
    assert v.status == "confirmed"
    assert v.reason == "observed 2.00 on levels 3-4; formal 2; within 0.1"


def test_first_order_error_is_below():
    v = judge("u", "Linf", H, list(H), 2, 0.1)
    assert v.status == "below" and "short by 1.00" in v.reason


def test_iteration_floor_is_named_with_the_tolerance_to_tighten():
    # common practice: an error that stops falling well above round-off is iteration error
    v = judge("u", "L2", H, [4e-3, 1e-3, 2.6e-4, 2.5e-4, 2.5e-4], 2, 0.1, scale=1.0)
    assert v.status == "below"
    assert "far above round-off" in v.reason and "tighten the solver tolerance" in v.reason and "frozen error" in v.reason


def test_round_off_floor_is_inconclusive_not_a_failure():
    v = judge("u", "L2", H, [4e-3, 1e-3, 2.5e-4, 6.25e-5, 6e-14], 2, 0.1, scale=1.0)
    assert v.status == "inconclusive" and "round-off" in v.reason and "drop the level" in v.reason


def test_exact_reproduction_is_inconclusive():
    v = judge("u", "L2", H[:3], [1e-15, 2e-16, 3e-16], 2, 0.1, scale=1.0)
    assert v.status == "inconclusive" and "reproduces this solution exactly" in v.reason


def test_single_level_is_inconclusive():
    assert judge("u", "L2", [0.1], [1e-3], 2, 0.1).status == "inconclusive"


def _errors_with_orders(orders, h0=0.1, e0=1e-2):
    h, e = [h0], [e0]
    for p in orders:
        h.append(h[-1] / 2)
        e.append(e[-1] / 2 ** p)
    return h, e


def test_orders_still_closing_on_the_formal_order_are_inconclusive_not_below():
    # common practice: observed orders that rise toward the design order by more than the tolerance
    # per level mean the grids are not yet in the asymptotic range (add a level), not a wrong scheme
    h, e = _errors_with_orders([1.19, 1.70, 1.87])
    v = judge("T", "L2", h, e, 2, 0.1)
    assert v.status == "inconclusive" and not v.ok and "not yet in the asymptotic range" in v.reason
    assert abs(v.observed - 1.87) < 1e-9
    # falling away from it (a first-order boundary taking over) stays below
    h, e = _errors_with_orders([1.21, 0.95, 0.90])
    assert judge("u", "L2", h, e, 2, 0.1).status == "below"
    # rising, but by less than the tolerance per level: settled short of the formal order
    h, e = _errors_with_orders([0.90, 0.95, 0.98])
    assert judge("u", "L2", h, e, 2, 0.1).status == "below"

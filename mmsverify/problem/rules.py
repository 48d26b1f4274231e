"""Order rules for single fields, norms and quantities.

A study judges every field, norm and quantity against the formal order and
the tolerance of ``[order]``. Some need their own rule: a functional that
superconverges, nodal values of a higher-order element, a pressure one
order lower than the velocity, a maximum norm on a rough mesh. A rule is
keyed by a *selector*:

* ``"p"``: a field or a reported quantity, in every norm;
* ``"Linf"``: a norm, for every field;
* ``"u Linf"``: one field in one norm.

and sets any of ``space``, ``time`` (formal orders of that axis),
``tolerance`` and ``at_least`` (true: any order from ``formal - tolerance``
up is confirmed). For each setting the most specific selector that gives it
wins (``"u Linf"``, then ``"u"``, then ``"Linf"``, then ``[order]``).

In a problem file::

    [order.by]
    drag = {at_least = true}            # superconvergent functional
    "u Linf" = {tolerance = 0.3}
    p = {space = 1}

and in Python, ``run_study(..., rules={"drag": {"at_least": True}})``.

:func:`check_rule` bounds every rule: a tolerance at or above half the
formal order is refused (the verdict, baselines and problem files use it).
"""

import math
from dataclasses import dataclass

from mmsverify.errors import AnalysisError

__all__ = ["OrderRule", "parse_rules", "rule_for", "check_rules", "check_rule", "RULE_KEYS"]

#: Settings a rule may give.
RULE_KEYS = ("space", "time", "tolerance", "at_least")


@dataclass(frozen=True)
class OrderRule:
    """Settings of one selector; None where it leaves the wider rule in force."""

    space: float = None
    time: float = None
    tolerance: float = None
    at_least: bool = None

    def to_dict(self):
        return {k: getattr(self, k) for k in RULE_KEYS if getattr(self, k) is not None}


def check_rule(formal, tolerance, where="the order rule"):
    """Refuse an order rule that cannot tell a wrong order from the formal one.

    A tolerance at or above half the formal order would let a scheme one
    order short of a second-order design, or one that does not converge at
    all with a large enough tolerance, pass.

    Raises
    ------
    AnalysisError
        When ``formal`` is not positive, or ``tolerance`` is not in
        ``(0, formal/2)``.
    """
    formal, tolerance = float(formal), float(tolerance)
    if not (math.isfinite(formal) and formal > 0):
        raise AnalysisError(f"{where}: the formal order must be a positive number, got {formal:g}")
    if not (math.isfinite(tolerance) and 0 < tolerance < formal / 2):
        raise AnalysisError(f"{where}: tolerance {tolerance:g} must be positive and below half the formal order "
                            f"{formal:g} (that is, below {formal / 2:g}); a wider band cannot tell a scheme that "
                            "converges at the wrong order, or not at all, from a correct one. Use 0.1 to 0.3")


def _number(value, where, key):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise AnalysisError(f"{where}: {key} must be a positive number, got {value!r:.60}")
    return float(value)


def parse_rules(rules, where="order rules"):
    """``{selector: {space, time, tolerance, at_least}}`` as a tuple of ``(selector, OrderRule)``.

    Raises
    ------
    AnalysisError
        For an entry that is not a table, an unknown setting, or a value of
        the wrong type. Which selectors exist is checked by :func:`check_rules`.
    """
    if rules is None:
        return ()
    if isinstance(rules, tuple):
        return rules
    if not isinstance(rules, dict):
        raise AnalysisError(f"{where}: expected a table of selector = {{settings}}, got {type(rules).__name__}")
    out = []
    for sel, settings in rules.items():
        w = f"{where} {sel!r}"
        if isinstance(settings, OrderRule):
            out.append((str(sel), settings))
            continue
        if not isinstance(settings, dict) or not settings:
            raise AnalysisError(f"{w}: expected a table such as {{tolerance = 0.2}} or {{at_least = true}}, "
                                f"with some of {', '.join(RULE_KEYS)}")
        unknown = sorted(set(settings) - set(RULE_KEYS))
        if unknown:
            raise AnalysisError(f"{w}: unknown setting {unknown[0]!r}; a rule takes {', '.join(RULE_KEYS)}")
        at_least = settings.get("at_least")
        if at_least is not None and not isinstance(at_least, bool):
            raise AnalysisError(f"{w}: at_least must be true or false, got {at_least!r:.60}")
        out.append((str(sel), OrderRule(*(None if settings.get(k) is None else _number(settings[k], w, k)
                                          for k in ("space", "time", "tolerance")), at_least)))
    return tuple(out)


def rule_for(rules, name, norm, formal, tolerance, axis="space"):
    """``(formal, tolerance, at_least)`` for ``name`` in ``norm`` (``"value"`` for a quantity)."""
    found = {"order": None, "tolerance": None, "at_least": None}
    table = dict(rules)
    for sel in (f"{name} {norm}", name, norm):       # most specific first
        r = table.get(sel)
        if r is None:
            continue
        for key, value in (("order", getattr(r, axis)), ("tolerance", r.tolerance), ("at_least", r.at_least)):
            if found[key] is None and value is not None:
                found[key] = value
    return (float(formal if found["order"] is None else found["order"]),
            float(tolerance if found["tolerance"] is None else found["tolerance"]), bool(found["at_least"]))


def check_rules(rules, names, norms, formal, tolerance, axis="space", where="order rules"):
    """Refuse selectors that name nothing judged and rules whose tolerance is too wide.

    ``names`` maps each field or quantity name to the norms it is judged in.
    """
    valid = set(names) | set(norms) | {f"{n} {m}" for n, ms in names.items() for m in ms}
    for sel, _ in rules:
        if sel not in valid:
            raise AnalysisError(f"{where}: selector {sel!r} names no judged field, quantity or norm; use a name "
                                f"({', '.join(names)}), a norm ({', '.join(norms)}) or both, as \"u Linf\"")
    for name, ms in names.items():
        for m in ms:
            p, tol, _ = rule_for(rules, name, m, formal, tolerance, axis)
            check_rule(p, tol, f"{where}, {name} {m}")

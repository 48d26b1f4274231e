"""Rows of a reported quantity's evidence table, shared by the Markdown, HTML and CSV writers.

Mirrors :func:`mmsverify.render.wording.level_rows` for the functionals a
solver reports under ``Solution.quantities`` (declared under
``[quantities]``): one value, its exact value and the error per level.
"""

import numpy as np

from mmsverify.render.wording import fmt_num, fmt_order

__all__ = ["quantity_rows", "quantity_table"]


def quantity_rows(result, name):
    """Rows of the evidence table of one reported quantity.

    Parameters
    ----------
    result : StudyResult
    name : str
        A name in ``result.quantities``.

    Returns
    -------
    list of dict
        One per level with keys ``level``, ``grid``, ``h``, ``seconds``,
        ``status``, ``message``, ``reported`` (False where a successful
        level's solver left the quantity out), ``value``, ``exact``,
        ``error`` and ``order`` (observed order between this level and the
        previous level that reported the quantity). Numbers are None where
        there is none.
    """
    ok = [lv for lv in result.levels if lv.ok and name in lv.quantities]
    orders = result.quantity_orders(name)
    rows = []
    for lv in result.levels:
        row = {"level": lv.level, "grid": lv.grid.describe(), "h": lv.h, "seconds": lv.seconds,
               "status": lv.status, "message": lv.message, "reported": lv in ok,
               "value": None, "exact": None, "error": None, "order": None}
        if lv in ok:
            i = ok.index(lv)
            row.update({k: float(lv.quantities[name][k]) for k in ("value", "exact", "error")})
            p = orders[i - 1] if i else None
            row["order"] = float(p) if p is not None and np.isfinite(p) else None
        rows.append(row)
    return rows


def quantity_table(result, name, size, first_line=False):
    """Header, text cells and row status of one quantity's evidence table (Markdown and HTML).

    ``size`` heads the grid-size column (``"h"`` or ``"dt"``); ``first_line``
    keeps only the first line of a failed level's message.
    """
    rows, ok = [], []
    for r in quantity_rows(result, name):
        row = [r["level"], r["grid"], f"{r['h']:.4g}"]
        if r["status"] != "ok":
            message = (r["message"].splitlines() or [""])[0] if first_line else r["message"]
            row += [f"failed: {message}", "", "", ""]
        elif not r["reported"]:
            row += ["not reported", "", "", ""]
        else:
            row += [fmt_num(r["value"], ".8g"), fmt_num(r["exact"], ".8g"), fmt_num(r["error"]),
                    fmt_order(r["order"])]
        rows.append(row + [f"{r['seconds']:.3g}"])
        ok.append(r["status"] == "ok")
    return ["Level", "Grid", size, "Value", "Exact", "Error", "Order", "Run time (s)"], rows, ok

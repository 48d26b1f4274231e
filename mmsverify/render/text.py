"""Plain-text tables of a study for the terminal."""

import textwrap

import numpy as np

from mmsverify.execute.resolutions import describe_level
from mmsverify.render.wording import notes, shown_norms

__all__ = ["format_study", "CAUTION"]

CAUTION = ("Verification shows that the equations are solved right, not that they are the right equations "
           "(that is validation). Safety-critical work follows the applicable codes and licensed engineering review.")


def _num(x, fmt="{:.3e}"):
    return "-" if x is None or not np.isfinite(x) else fmt.format(x)


WIDTH = 100


def _wrapped(text, first="  ", rest="    "):
    """A long message as lines of at most WIDTH characters (words are never split)."""
    return textwrap.wrap(text, WIDTH, initial_indent=first, subsequent_indent=rest, break_long_words=False,
                         break_on_hyphens=False) or [first.rstrip()]


def format_study(result, caution=True):
    """The study as a text table: verdict first, then levels, errors and orders.

    ``caution=False`` leaves out the closing caution (for a caller that
    prints several studies and the caution once).
    """
    lines = []
    overall = result.outcome.upper()
    failed = [str(lv.level) for lv in result.failed_levels]
    none_ran = bool(result.levels) and len(failed) == len(result.levels)
    if none_ran:
        note = "  (every level failed; nothing to judge)"
    elif failed:
        note = (f"  (level{'s' if len(failed) > 1 else ''} {', '.join(failed)} failed; the orders are judged on "
                "the others)")
    else:
        note = ""
    lines.append(f"{overall}  {result.problem}  solved by  {result.solver}{note}")
    stated = {"solver": ", stated by the solver", "caller": ", given by the caller"}.get(
        getattr(result, "order_source", "problem"), "")
    lines.append(f"  formal order {result.formal_order:g} ({result.mode} refinement{stated}), "
                 f"tolerance {result.tolerance:g}")
    size = "dt" if result.mode == "time" else "h"
    gw = max([23] + [len(describe_level(lv)) for lv in result.levels])
    width = max([12] + [len(f"{v.field} {v.norm}") for v in result.verdicts])
    for v in result.verdicts:
        mark = "ok " if v.ok else "!! "
        label = f"{v.field} {v.norm}"
        lines.append(f"  {mark}{label:<{width}} {v.status:<12} {v.reason}")
    lines += [f"  note: {n}" for n in notes(result)]
    lines.append("")
    for f in result.fields:
        head = f"  field {f}"
        lines.append(head)
        ok = [lv for lv in result.levels if lv.ok and f in lv.errors]
        shown = shown_norms(result, f)  # gradient norms get columns when every successful level measured them
        lines.append((f"  level  {'grid':<{gw}} {size:<10} " +
                      "".join(f"{n + ' error':<13}{'order':<8}" for n in shown)).rstrip())
        orders = {n: result.orders(f, n) for n in shown}
        for lv in result.levels:
            row = f"  {lv.level:<6} {describe_level(lv):<{gw}} {lv.h:<10.6g} "
            if not lv.ok:
                row += "failed: " + lv.message.splitlines()[0]
            elif f in lv.errors:
                i = ok.index(lv)
                for n in shown:
                    p = orders[n][i - 1] if i > 0 else None
                    row += f"{_num(lv.errors[f][n]):<13}{_num(p, '{:.2f}'):<8}"
            lines.append(row.rstrip())
        lines.append("")
    for q in result.quantities:
        lines.append(f"  quantity {q}")
        lines.append(f"  level  {'grid':<{gw}} {size:<10} value           exact           error        order")
        ok = [lv for lv in result.levels if lv.ok and q in lv.quantities]
        orders = result.quantity_orders(q)
        for i, lv in enumerate(ok):
            d = lv.quantities[q]
            p = orders[i - 1] if i > 0 else None
            lines.append(f"  {lv.level:<6} {lv.grid.describe():<{gw}} {lv.h:<10.6g} {d['value']:<15.8g} "
                         f"{d['exact']:<15.8g} {_num(d['error']):<12} {_num(p, '{:.2f}')}")
        lines.append("")
    lines += _failures(result)
    if caution:
        lines += _wrapped(CAUTION, "  ", "  ")
    return "\n".join(lines)


def _failures(result):
    """Lines telling why levels failed: one per level, or one in all when every level failed alike."""
    failed = result.failed_levels
    where = getattr(result, "level_where", None)
    if where and len(failed) > 1 and len(failed) == len(result.levels):
        rests = {lv.message[len(where(lv)):] if lv.message.startswith(where(lv)) else None for lv in failed}
        rest = rests.pop()
        if rest is not None and not rests:  # the same message but for the level's own location
            return [f"  every level failed: problem {result.problem}, solver {result.solver}{rest}"]
    return [f"  level {lv.level} failed: {lv.message}" for lv in failed]

"""Text of the analysis records: numbers, percentages, tables and label lists.

Shared by :mod:`mmsverify.analysis.order`, :mod:`mmsverify.analysis.convergence`,
:mod:`mmsverify.analysis.lsq`, :mod:`mmsverify.analysis.gci`, :mod:`mmsverify.analysis.profile`,
:mod:`mmsverify.analysis.estimate` and :mod:`mmsverify.plan`, so that every record
prints a missing number the same way (``n/a``).
"""

import math

__all__ = ["fmt_num", "fmt_pct", "fmt_table", "fmt_kv"]


def fmt_num(x, spec=".6g"):
    """Format a number for a report; ``None`` and NaN print as ``n/a``.

    >>> fmt_num(None), fmt_num(float("nan")), fmt_num(2.0 / 3.0, ".3g"), fmt_num("text")
    ('n/a', 'n/a', '0.667', 'text')
    """
    if x is None:
        return "n/a"
    try:
        xf = float(x)
    except (TypeError, ValueError):
        return str(x)
    if math.isnan(xf):
        return "n/a"
    return format(xf, spec)


def fmt_pct(x, spec=".3g"):
    """Format a fraction as a percentage; ``None`` prints as ``n/a``.

    >>> fmt_pct(0.0224), fmt_pct(None)
    ('2.24 %', 'n/a')
    """
    return "n/a" if x is None or (isinstance(x, float) and math.isnan(x)) else format(100.0 * x, spec) + " %"


def fmt_table(header, rows):
    """Plain-text table with columns padded to their widest cell.

    >>> print(fmt_table(("h", "value"), [("0.1", "4e-3"), ("0.05", "1e-3")]))
       h  value
    ----  -----
     0.1   4e-3
    0.05   1e-3
    """
    cells = [list(map(str, header))] + [[str(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(header))]
    lines = ["  ".join(c.rjust(w) for c, w in zip(r, widths)) for r in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def fmt_kv(rows):
    """Label-value lines with the labels padded to one width.

    >>> print(fmt_kv([("order", "2"), ("finest value", "6.063")]))
    order         2
    finest value  6.063
    """
    w = max(len(k) for k, _ in rows)
    return "\n".join(f"{k.ljust(w)}  {v}" for k, v in rows)

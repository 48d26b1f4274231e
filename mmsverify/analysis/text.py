"""Text of the analysis records: numbers, percentages, tables and label lists.

Shared by :mod:`mmsverify.analysis.order`, :mod:`mmsverify.analysis.convergence`,
:mod:`mmsverify.analysis.lsq`, :mod:`mmsverify.analysis.gci`, :mod:`mmsverify.analysis.profile`,
:mod:`mmsverify.analysis.estimate` and :mod:`mmsverify.plan`, so that every record
prints a missing number the same way (``n/a``).
"""

import math

__all__ = []


def _fmt(x, spec=".6g"):
    """Format a number for a report; ``None`` and NaN print as ``n/a``.

    >>> _fmt(None), _fmt(float("nan")), _fmt(2.0 / 3.0, ".3g"), _fmt("text")
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


def _pct(x, spec=".3g"):
    """Format a fraction as a percentage; ``None`` prints as ``n/a``.

    >>> _pct(0.0224), _pct(None)
    ('2.24 %', 'n/a')
    """
    return "n/a" if x is None or (isinstance(x, float) and math.isnan(x)) else format(100.0 * x, spec) + " %"


def _table(header, rows):
    """Plain-text table with columns padded to their widest cell.

    >>> print(_table(("h", "value"), [("0.1", "4e-3"), ("0.05", "1e-3")]))
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


def _kv(rows):
    """Label-value lines with the labels padded to one width.

    >>> print(_kv([("order", "2"), ("finest value", "6.063")]))
    order         2
    finest value  6.063
    """
    w = max(len(k) for k, _ in rows)
    return "\n".join(f"{k.ljust(w)}  {v}" for k, v in rows)

"""Figures of a study: convergence, observed order, cost and the error map.

Every function returns a :class:`matplotlib.figure.Figure` built without
pyplot (no global state, no display needed; files are drawn by the Agg
renderer). Colours are the Okabe-Ito palette, safe for the common forms of
colour blindness, and every series also differs by marker, so the plots
read in greyscale. Each line carries a ``gid`` (``"error-u-L2"``,
``"order-u-L2"``, ``"reference-u-L2"``, ``"cost-u-L2"``, ``"formal-u"``, ``"map-u"``)
that survives into SVG files, so tests and scripts can find the series.

Problem files carry no units, so axes say "units of x" and "units of u":
the error has the units of its field, h those of the coordinates.
"""

import io

import numpy as np

from mmsverify.execute.norms import NORMS
from mmsverify.render.wording import axis_name

__all__ = ["OKABE_ITO", "NORM_STYLE", "error_figure", "order_figure", "cost_figure", "error_map_figure",
           "study_figures", "figure_bytes", "save_figure"]

#: Okabe & Ito (2008), "Color Universal Design", colour-blind-safe palette.
OKABE_ITO = {"black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "green": "#009E73",
             "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7"}

#: Colour, marker and legend label of each norm.
NORM_STYLE = {"L1": (OKABE_ITO["blue"], "o", "L1 norm"), "L2": (OKABE_ITO["vermillion"], "s", "L2 norm"),
              "Linf": (OKABE_ITO["green"], "^", "max norm (Linf)")}

_PANEL = (4.8, 3.8)


def _figure(n_panels, title):
    """A figure of ``n_panels`` side by side; the title may hold a second line."""
    from matplotlib.figure import Figure
    fig = Figure(figsize=(_PANEL[0] * n_panels, _PANEL[1] + 0.4), layout="constrained")
    axes = fig.subplots(1, n_panels, squeeze=False)[0]
    fig.suptitle(title, fontsize=11)
    return fig, list(axes)


def _style(ax, ticks=None):
    """Light grid; on a log x axis, ticks at the levels' sizes with plain labels."""
    ax.grid(True, which="major", color="#bbbbbb", linewidth=0.6)
    ax.grid(True, which="minor", color="#e3e3e3", linewidth=0.4)
    ax.set_axisbelow(True)
    if ticks is not None and len(ticks):
        from matplotlib.ticker import FixedLocator, NullFormatter
        ax.xaxis.set_major_locator(FixedLocator(sorted(set(float(t) for t in ticks))))
        ax.xaxis.set_major_formatter(lambda v, _: f"{v:.3g}")
        ax.xaxis.set_minor_formatter(NullFormatter())


def _size_label(result, extra=""):
    if axis_name(result) == "dt":
        return "time step dt (units of t)" + extra
    return "grid size h (units of x)" + extra


def _series(result, field_name, norm):
    ok = [lv for lv in result.levels if lv.ok and field_name in lv.errors]
    return (np.array([lv.h for lv in ok]), np.array([lv.errors[field_name][norm] for lv in ok]),
            [lv for lv in ok])


def _who(result):
    return f"problem {result.problem}, solver {result.solver}"


def error_figure(result, fields=None):
    """Error norms against h on log-log axes, one panel per field.

    Each panel has one series per norm and, per norm, a dashed reference
    line of the formal order's slope through the finest point: where the
    data bend away from it, the order is off.
    """
    fields = list(fields or result.fields)
    fig, axes = _figure(max(len(fields), 1), f"Error against {axis_name(result)}\n{_who(result)}")
    p = result.formal_order
    for ax, f in zip(axes, fields):
        first_ref = True
        sizes = []
        for n in NORMS:
            h, e, _ = _series(result, f, n)
            colour, marker, label = NORM_STYLE[n]
            keep = e > 0
            if not keep.any():
                continue
            (line,) = ax.loglog(h[keep], e[keep], marker=marker, color=colour, label=label, linewidth=1.6)
            line.set_gid(f"error-{f}-{n}")
            sizes.extend(h[keep])
            hh = np.array([h.min(), h.max()])
            c = e[keep][-1] / h[keep][-1] ** p
            (ref,) = ax.loglog(hh, c * hh ** p, linestyle="--", color=colour, alpha=0.55, linewidth=1.0)
            ref.set_gid(f"reference-{f}-{n}")
            if first_ref:  # one legend entry for all reference lines
                ax.plot([], [], linestyle="--", color="#555555", label=f"slope {p:g} (formal order)")
            first_ref = False
        ax.set_xlabel(_size_label(result))
        ax.set_ylabel(f"error of {f} (units of {f})")
        ax.set_title(f"field {f}", fontsize=10)
        _style(ax, sizes)
        ax.legend(fontsize=8, loc="best")
    return fig


def order_figure(result, fields=None):
    """Observed order of each consecutive pair of levels against h.

    The order of a pair is drawn at the finer level's h. The formal order
    is the solid line, the tolerance band is shaded; a converging solver's
    points settle into the band as h falls.
    """
    fields = list(fields or result.fields)
    fig, axes = _figure(max(len(fields), 1), f"Observed order against {axis_name(result)}\n{_who(result)}")
    p, tol = result.formal_order, result.tolerance
    for ax, f in zip(axes, fields):
        ax.axhspan(p - tol, p + tol, color=OKABE_ITO["sky_blue"], alpha=0.25, linewidth=0,
                   label=f"tolerance \u00b1{tol:g}")
        formal = ax.axhline(p, color=OKABE_ITO["black"], linewidth=1.2, label=f"formal order {p:g}")
        formal.set_gid(f"formal-{f}")
        values, sizes = [p], []
        for n in NORMS:
            h, _, _ = _series(result, f, n)
            q = result.orders(f, n)
            good = np.isfinite(q)
            if len(q) == 0 or not good.any():
                continue
            colour, marker, label = NORM_STYLE[n]
            (line,) = ax.semilogx(h[1:][good], q[good], marker=marker, color=colour, label=label, linewidth=1.4)
            line.set_gid(f"order-{f}-{n}")
            values.extend(q[good])
            sizes.extend(h[1:][good])
        lo, hi = min(values), max(values)
        pad = max(0.25, 0.15 * (hi - lo))
        ax.set_ylim(min(lo, p - tol) - pad, max(hi, p + tol) + pad)
        ax.set_xlabel(_size_label(result, ", finer level of each pair"))
        ax.set_ylabel("observed order")
        ax.set_title(f"field {f}", fontsize=10)
        _style(ax, sizes)
        ax.legend(fontsize=8, loc="best")
    return fig


def cost_figure(result, fields=None):
    """Error against the solver's run time per level, log-log.

    Returns None when fewer than two successful levels have a run time.
    """
    fields = list(fields or result.fields)
    timed = [lv for lv in result.levels if lv.ok and lv.seconds > 0]
    if len(timed) < 2 or not fields:
        return None
    fig, axes = _figure(len(fields), f"Error against solver run time\n{_who(result)}")
    for ax, f in zip(axes, fields):
        levels = [lv for lv in timed if f in lv.errors]
        t = np.array([lv.seconds for lv in levels])
        for n in NORMS:
            e = np.array([lv.errors[f][n] for lv in levels])
            keep = e > 0
            if keep.sum() < 1:
                continue
            colour, marker, label = NORM_STYLE[n]
            (line,) = ax.loglog(t[keep], e[keep], marker=marker, color=colour, label=label, linewidth=1.4)
            line.set_gid(f"cost-{f}-{n}")
        if levels:
            e_top = np.array([max(lv.errors[f].values()) for lv in levels])
            for lv, x, y in zip(levels, t, e_top):
                ax.annotate(f"level {lv.level}", (x, y), textcoords="offset points", xytext=(4, 5), fontsize=7,
                            color="#333333")
        ax.set_xlabel("solver run time per level (s)")
        ax.set_ylabel(f"error of {f} (units of {f})")
        ax.set_title(f"field {f}", fontsize=10)
        _style(ax)
        ax.legend(fontsize=8, loc="best")
    return fig


def _tensor_axes(points):
    """Axis vectors when 2-D points form a tensor grid (``x[i, j] = x[i]``), else None."""
    x, y = points
    if x.ndim != 2:
        return None
    if np.allclose(x, x[:, :1]) and np.allclose(y, y[:1, :]):
        return x[:, 0], y[0, :], False
    if np.allclose(x, x[:1, :]) and np.allclose(y, y[:, :1]):
        return x[0, :], y[:, 0], True
    return None


def error_map_figure(pointwise, title=None):
    """Where the error lives: pointwise error on one level, one panel per field.

    Parameters
    ----------
    pointwise : dict of str to PointwiseError
        From :func:`mmsverify.render.pointwise.finest_error`.
    title : str, optional

    Returns
    -------
    Figure or None
        A map with a diverging colour scale centred on zero for 2-D
        problems, a line for 1-D ones; None for 3-D or no data.
    """
    from matplotlib.colors import TwoSlopeNorm
    items = list(pointwise.values())
    if not items or items[0].dim > 2:
        return None
    any_item = items[0]
    when = f", t = {any_item.time:g}" if any_item.time is not None else ""
    fig, axes = _figure(len(items), title or f"Pointwise error (discrete \u2212 exact)\nlevel {any_item.level}: "
                                             f"{any_item.grid.describe()}{when}")
    for ax, pe in zip(axes, items):
        e = np.asarray(pe.error, dtype=float)
        worst = pe.worst
        if pe.dim == 1:
            x = np.ravel(pe.points[0])
            order = np.argsort(x)
            (line,) = ax.plot(x[order], np.ravel(e)[order], color=OKABE_ITO["blue"], marker=".", linewidth=1.2,
                              label=f"error of {pe.field}")
            line.set_gid(f"map-{pe.field}")
            ax.axhline(0.0, color="#777777", linewidth=0.6)
            ax.set_xlabel("x (units of x)")
            ax.set_ylabel(f"error of {pe.field} (units of {pe.field})")
            _style(ax)
        else:
            limit = float(np.max(np.abs(e))) or 1.0
            norm = TwoSlopeNorm(vcenter=0.0, vmin=-limit, vmax=limit)
            tensor = _tensor_axes(pe.points)
            if tensor is not None:
                x, y, transposed = tensor
                art = ax.pcolormesh(x, y, e if transposed else e.T, shading="nearest", cmap="PuOr_r", norm=norm,
                                    rasterized=True)  # an image inside SVG: small files, text stays vector
            else:
                art = ax.scatter(np.ravel(pe.points[0]), np.ravel(pe.points[1]), c=np.ravel(e), s=12,
                                 cmap="PuOr_r", norm=norm, rasterized=True)
            art.set_gid(f"map-{pe.field}")
            bar = fig.colorbar(art, ax=ax, shrink=0.9)
            bar.set_label(f"error of {pe.field} (units of {pe.field})")
            ax.plot([worst[0]], [worst[1]], marker="x", color=OKABE_ITO["black"], markersize=10, linestyle="none",
                    markeredgewidth=2, clip_on=False)
            ax.set_aspect("equal")
            ax.set_xlabel("x (units of x)")
            ax.set_ylabel("y (units of y)")
        at = " at \u00d7" if pe.dim == 2 else ""
        ax.set_title(f"field {pe.field}: max |error| {np.max(np.abs(e)):.2e}{at}", fontsize=10)
    return fig


def study_figures(result, pointwise=None):
    """Every figure that applies to a study, by name, in report order.

    Keys: ``"error"``, ``"order"``, ``"cost"`` (when run times exist),
    ``"map"`` (when ``pointwise`` is given for a 1-D or 2-D problem).
    """
    figs = {}
    if not result.fields:
        return figs
    figs["error"] = error_figure(result)
    figs["order"] = order_figure(result)
    cost = cost_figure(result)
    if cost is not None:
        figs["cost"] = cost
    if pointwise:
        m = error_map_figure(pointwise)
        if m is not None:
            figs["map"] = m
    return figs


def _save(fig, target, fmt, dpi):
    import matplotlib
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "mmsverify"}):
        fig.savefig(target, format=fmt, dpi=dpi, metadata={"Date": None} if fmt == "svg" else None)


def figure_bytes(fig, fmt="png", dpi=110):
    """The figure as PNG or SVG bytes (SVG keeps text as text and is reproducible)."""
    buf = io.BytesIO()
    _save(fig, buf, fmt, dpi)
    return buf.getvalue()


def save_figure(fig, path, dpi=110):
    """Write the figure; the format follows the suffix (``.png``, ``.svg``, ``.pdf``)."""
    from pathlib import Path
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    _save(fig, path, path.suffix.lstrip(".").lower() or "png", dpi)
    return path

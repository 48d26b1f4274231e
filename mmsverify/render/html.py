"""A study as one self-contained HTML file.

Figures are embedded as base64 ``data:`` URIs (SVG by default, PNG on
request) and the style sheet is inline, so the file opens in any browser
with no server, no network and no scripts. Order: verdict, evidence,
cautions; outcome is stated in words, never by colour alone.
"""

import base64
from html import escape
from pathlib import Path

from mmsverify.render.wording import (CAPTIONS, TITLES, axis_name, extra_cautions, fmt_order, headline, level_cells,
                                      level_header, level_rows, notes, shown_norms, study_facts)
from mmsverify.render.quantities import quantity_table
from mmsverify.render.text import CAUTION

__all__ = ["html_text", "write_html", "data_uri"]

# Okabe-Ito bluish green, vermillion and orange, with dark text on light tints.
_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;max-width:72rem;margin:2rem auto;
padding:0 1.2rem;color:#1d1d1d;line-height:1.45}
h1{font-size:1.5rem;margin-bottom:.3rem}h2{border-bottom:1px solid #ccc;padding-bottom:.2rem;margin-top:2rem}
.verdict{padding:.8rem 1rem;border-left:.5rem solid;border-radius:.2rem;font-size:1.05rem}
.pass{background:#e3f4ee;border-color:#009E73}.fail{background:#fbe6da;border-color:#D55E00}
.inconclusive{background:#fdf1d8;border-color:#E69F00}
.tag{font-weight:700;letter-spacing:.05em}
table{border-collapse:collapse;margin:.6rem 0;font-size:.92rem}
th,td{border:1px solid #d4d4d4;padding:.25rem .55rem;text-align:left;vertical-align:top}
th{background:#f2f2f2}td.num{text-align:right;font-variant-numeric:tabular-nums;font-family:ui-monospace,monospace}
tr.failed td{background:#fbe6da}
figure{margin:1.2rem 0}figure img{width:min(100%,46rem);height:auto;border:1px solid #e4e4e4}
figcaption{font-size:.9rem;color:#444;max-width:50rem}
pre{background:#f6f6f6;padding:.6rem;overflow-x:auto;font-size:.85rem}
.cautions li{margin:.3rem 0}footer{margin-top:2rem;font-size:.8rem;color:#666}
"""

_MIME = {"svg": "image/svg+xml", "png": "image/png"}


def _table(header, rows, numeric=(), row_class=None):
    out = ["<table>", "<tr>" + "".join(f"<th>{escape(str(h))}</th>" for h in header) + "</tr>"]
    for i, row in enumerate(rows):
        cls = f' class="{row_class[i]}"' if row_class and row_class[i] else ""
        cells = "".join(f'<td{" class=num" if j in numeric else ""}>{escape(str(c))}</td>'
                        for j, c in enumerate(row))
        out.append(f"<tr{cls}>{cells}</tr>")
    out.append("</table>")
    return "\n".join(out)


def data_uri(payload, fmt):
    """A base64 ``data:`` URI for image bytes of format ``"svg"`` or ``"png"``."""
    return f"data:{_MIME[fmt]};base64,{base64.b64encode(payload).decode('ascii')}"


def html_text(result, pointwise=None, fmt="svg", figures=True):
    """The report as a complete HTML document.

    Parameters
    ----------
    result : StudyResult
    pointwise : dict, optional
        Pointwise errors for the error map.
    fmt : {"svg", "png"}
        Format of the embedded figures.
    figures : bool
        Draw and embed the figures (False gives a text-only page, fast).

    Returns
    -------
    str
    """
    if fmt not in _MIME:
        raise ValueError(f"figure format {fmt!r} is not supported; use 'svg' or 'png'")
    from mmsverify import __version__
    kind = result.outcome
    size = axis_name(result)
    title = f"Order verification: {result.problem} solved by {result.solver}"
    body = [f"<h1>{escape(title)}</h1>",
            f'<p class="verdict {kind}" id="verdict"><span class="tag">Verdict: {kind.upper()}.</span> '
            f"{escape(headline(result))}</p>"]
    body.append(_table(["Field", "Norm", "Outcome", "Observed order", "Formal order", "Reason"],
                       [[v.field, v.norm, v.status, fmt_order(v.observed), f"{v.formal:g}", v.reason]
                        for v in result.verdicts], numeric=(3, 4),
                       row_class=["" if v.ok else "failed" for v in result.verdicts]))
    if notes(result):
        body.append('<ul class="notes" id="notes">' + "".join(f"<li>Note: {escape(n)}</li>" for n in notes(result))
                    + "</ul>")
    body.append('<h2 id="evidence">Evidence</h2>')
    body.append(_table(["Study", ""], study_facts(result)))
    for f in result.fields:
        body.append(f"<h3>Field {escape(f)}</h3>")
        norms = shown_norms(result, f)
        header = level_header(norms, size) + ["Run time (s)"]
        rows, classes = [], []
        for r in level_rows(result, f):
            rows.append(level_cells(r, norms) + [f"{r['seconds']:.3g}"])
            classes.append("" if r["status"] == "ok" else "failed")
        body.append(_table(header, rows, numeric=tuple(range(2, 4 + 2 * len(norms))), row_class=classes))
    for q in result.quantities:
        body.append(f"<h3>Quantity {escape(q)}</h3>")
        header, rows, ok = quantity_table(result, q, size, first_line=True)
        body.append(_table(header, rows, numeric=tuple(range(2, 8)),
                           row_class=["" if good else "failed" for good in ok]))
    if figures:
        from mmsverify.render.plots import figure_bytes, study_figures
        for name, fig in study_figures(result, pointwise).items():
            uri = data_uri(figure_bytes(fig, fmt), fmt)
            body.append(f'<figure id="figure-{name}"><img alt="{escape(TITLES.get(name, name))}" src="{uri}">'
                        f"<figcaption><b>{escape(TITLES.get(name, name))}.</b> "
                        f"{escape(CAPTIONS.get(name, ''))}</figcaption></figure>")
    if result.failed_levels:
        body.append("<h3>Failed levels</h3>")
        for lv in result.failed_levels:
            body.append(f"<p>Level {lv.level} ({escape(lv.grid.describe())}):</p><pre>{escape(lv.message)}</pre>")
    body.append('<h2 id="cautions">Cautions</h2><ul class="cautions">'
                + "".join(f"<li>{escape(c)}</li>" for c in [CAUTION] + extra_cautions(result)) + "</ul>")
    body.append(f"<footer>Written by mmsverify {escape(__version__)}. Every number is also in the JSON "
                "and CSV files of the same study.</footer>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{escape(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")


def write_html(result, path, pointwise=None, fmt="svg"):
    """Write :func:`html_text` to ``path``; returns the Path."""
    from mmsverify.fileio import write_atomic
    return write_atomic(Path(path), html_text(result, pointwise, fmt))

"""Rich display of discretization-error assessments in notebooks (``_repr_html_``, ``_repr_markdown_``).

An :class:`~mmsverify.analysis.estimate.Assessment` shows its verdict, the
values per level, the estimate and a figure of the values against h with
the extrapolated value; an ``AssessmentTable`` shows one after the other.
The HTML is a fragment (no page styles), and every name and message in it
is escaped. The table helpers here also serve the display of a study.
"""

import base64
from html import escape
import io

__all__ = ["html_table", "md_cell", "md_table", "png_tag", "verdict_line", "assessment_html",
           "assessment_markdown", "assessments_html", "assessments_markdown"]

_COLOURS = {"pass": "#1a7f37", "fail": "#cf222e", "inconclusive": "#9a6700"}


def html_table(header, rows):
    """An HTML table, every cell escaped."""
    head = "".join(f"<th>{escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{escape(str(c))}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def md_cell(text):
    """Text safe in a Markdown table cell (pipes and backslashes escaped, one line)."""
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def md_table(header, rows):
    """A Markdown table."""
    lines = ["| " + " | ".join(md_cell(h) for h in header) + " |", "|" + "---|" * len(header)]
    return "\n".join(lines + ["| " + " | ".join(md_cell(c) for c in row) + " |" for row in rows])


def png_tag(png):
    """An ``<img>`` with PNG bytes inline."""
    return f'<img alt="figure" src="data:image/png;base64,{base64.b64encode(png).decode("ascii")}">'


def verdict_line(kind, text):
    """The verdict in colour, then its sentence."""
    colour = _COLOURS.get(kind, "#444444")
    return f'<p><b style="color:{colour}">{escape(kind.upper())}</b> {escape(text)}</p>'


def _fmt(x, spec):
    return "n/a" if x is None else format(x, spec)


def _assessment_rows(a):
    return (["h", "value"], [[f"{h:.6g}", f"{v:.8g}"] for h, v in zip(a.h, a.values)])


def _assessment_facts(a):
    return [["observed order", _fmt(a.order, ".3g")], ["extrapolated value", _fmt(a.extrapolated, ".8g")],
            ["uncertainty of the finest value", _fmt(a.uncertainty, ".3g")],
            ["relative uncertainty", _fmt(a.relative_uncertainty, ".2%")], ["method", a.method or "none valid"]]


def _assessment_kind(a):
    return {True: "pass", False: "fail"}.get(a.acceptable, "inconclusive")


def _value_figure(a):
    from matplotlib.figure import Figure   # a bare Figure: no pyplot state, no window
    fig = Figure(figsize=(4.5, 3.2))
    ax = fig.subplots()
    ax.plot(a.h, a.values, "o-", label=a.name)
    if a.extrapolated is not None:
        ax.axhline(a.extrapolated, linestyle="--", color="#555555", label="extrapolated")
    ax.set_xscale("log")
    ax.set_xlabel("h")
    ax.set_ylabel(a.name)
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def assessment_html(a, figure=True):
    """An HTML fragment of an Assessment: verdict, values per level, estimate, values against h."""
    out = [f"<h4>discretization error of {escape(a.name)}</h4>", verdict_line(_assessment_kind(a), a.verdict),
           html_table(*_assessment_rows(a)), html_table(["", ""], _assessment_facts(a))]
    out += [f"<ul>{''.join(f'<li>warning: {escape(w)}</li>' for w in a.warnings)}</ul>"] if a.warnings else []
    if figure:
        buf = io.BytesIO()
        _value_figure(a).savefig(buf, format="png", dpi=80)
        out.append(png_tag(buf.getvalue()))
    return "\n".join(out)


def assessment_markdown(a):
    """Markdown of an Assessment."""
    out = [f"**{_assessment_kind(a).upper()}** {md_cell(a.verdict)}", "", md_table(*_assessment_rows(a)), "",
           md_table(["", ""], _assessment_facts(a))]
    out += [""] + [f"- warning: {md_cell(w)}" for w in a.warnings] if a.warnings else []
    return "\n".join(out) + "\n"


def assessments_html(table):
    """An HTML fragment of an AssessmentTable: one assessment after the other."""
    return f"<p>{escape(table.source)}</p>\n" + "\n<hr>\n".join(assessment_html(a) for a in table)


def assessments_markdown(table):
    """Markdown of an AssessmentTable."""
    return f"{md_cell(table.source)}\n\n" + "\n---\n\n".join(assessment_markdown(a) for a in table)

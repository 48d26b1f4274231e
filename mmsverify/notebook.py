"""Rich display in notebooks: ``_repr_html_`` and ``_repr_markdown_`` of the result records.

Jupyter calls these methods on the last value of a cell. A study shows its
verdict, the verdict table, the error table of each field and the error
figure inline; a discretization-error assessment shows its verdict, the
values per level and a figure of the values against h with the
extrapolated value. The HTML is a fragment (no page styles), and every
name and message in it is escaped.
"""

from html import escape

__all__ = ["study_html", "study_markdown", "assessment_html", "assessment_markdown", "assessments_html",
           "assessments_markdown"]

_COLOURS = {"pass": "#1a7f37", "fail": "#cf222e", "inconclusive": "#9a6700"}


def _html_table(header, rows):
    head = "".join(f"<th>{escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{escape(str(c))}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _md_cell(text):
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def _md_table(header, rows):
    lines = ["| " + " | ".join(_md_cell(h) for h in header) + " |", "|" + "---|" * len(header)]
    return "\n".join(lines + ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in rows])


def _png(fig):
    from .report.html import data_uri
    from .report.plots import figure_bytes
    return f'<img alt="figure" src="{data_uri(figure_bytes(fig, "png", dpi=80), "png")}">'


def _verdict_line(kind, text):
    colour = _COLOURS.get(kind, "#444444")
    return (f'<p><b style="color:{colour}">{escape(kind.upper())}</b> {escape(text)}</p>')


def _study_tables(result):
    from .norms import NORMS
    from .report._common import fmt_num, fmt_order, level_rows
    verdicts = (["field", "norm", "outcome", "observed order", "formal order", "reason"],
                [[v.field, v.norm, v.status, fmt_order(v.observed), f"{v.formal:g}", v.reason]
                 for v in result.verdicts])
    levels = {}
    for f in result.fields:
        rows = []
        for r in level_rows(result, f):
            row = [r["level"], r["grid"], f"{r['h']:.4g}"]
            if r["status"] != "ok":
                row += ["failed: " + (r["message"].splitlines() or [""])[0]] + [""] * (2 * len(NORMS) - 1)
            else:
                row += [c for n in NORMS for c in (fmt_num(r[f"error_{n}"]), fmt_order(r[f"order_{n}"]))]
            rows.append(row)
        levels[f] = (["level", "grid", "h"] + [c for n in NORMS for c in (f"{n} error", f"{n} order")], rows)
    return verdicts, levels


def study_html(result, figure=True):
    """An HTML fragment of a StudyResult: verdict, verdict table, error tables, error figure."""
    from .report._common import headline, notes, outcome
    verdicts, levels = _study_tables(result)
    out = [f"<h4>{escape(result.problem)} solved by {escape(result.solver)}</h4>",
           _verdict_line(outcome(result), headline(result)), _html_table(*verdicts)]
    out += [f"<ul>{''.join(f'<li>note: {escape(n)}</li>' for n in notes(result))}</ul>"] if notes(result) else []
    for f, table in levels.items():
        out += [f"<p>field <b>{escape(f)}</b></p>", _html_table(*table)]
    if figure and any(lv.ok for lv in result.levels):
        from .report.plots import error_figure
        out.append(_png(error_figure(result)))
    return "\n".join(out)


def study_markdown(result):
    """Markdown of a StudyResult: verdict, verdict table and error tables."""
    from .report._common import headline, notes, outcome
    verdicts, levels = _study_tables(result)
    out = [f"**{outcome(result).upper()}** {_md_cell(headline(result))}", "", _md_table(*verdicts)]
    out += [""] + [f"- note: {_md_cell(n)}" for n in notes(result)] if notes(result) else []
    for f, table in levels.items():
        out += ["", f"field **{_md_cell(f)}**", "", _md_table(*table)]
    return "\n".join(out) + "\n"


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
    out = [f"<h4>discretization error of {escape(a.name)}</h4>", _verdict_line(_assessment_kind(a), a.verdict),
           _html_table(*_assessment_rows(a)), _html_table(["", ""], _assessment_facts(a))]
    out += [f"<ul>{''.join(f'<li>warning: {escape(w)}</li>' for w in a.warnings)}</ul>"] if a.warnings else []
    if figure:
        out.append(_png(_value_figure(a)))
    return "\n".join(out)


def assessment_markdown(a):
    """Markdown of an Assessment."""
    out = [f"**{_assessment_kind(a).upper()}** {_md_cell(a.verdict)}", "", _md_table(*_assessment_rows(a)), "",
           _md_table(["", ""], _assessment_facts(a))]
    out += [""] + [f"- warning: {_md_cell(w)}" for w in a.warnings] if a.warnings else []
    return "\n".join(out) + "\n"


def assessments_html(table):
    """An HTML fragment of an AssessmentTable: one assessment after the other."""
    return f"<p>{escape(table.source)}</p>\n" + "\n<hr>\n".join(assessment_html(a) for a in table)


def assessments_markdown(table):
    """Markdown of an AssessmentTable."""
    return f"{_md_cell(table.source)}\n\n" + "\n---\n\n".join(assessment_markdown(a) for a in table)

"""Rich display of a study in notebooks: ``StudyResult._repr_html_`` and ``_repr_markdown_``.

Jupyter calls these methods on the last value of a cell. A study shows its
verdict, the verdict table, the error table of each field and the error
figure inline. The HTML is a fragment (no page styles), and every name and
message in it is escaped. Assessments of real simulations show themselves
through :mod:`mmsverify.analysis.display`, whose table helpers this module
shares.
"""

from html import escape

from mmsverify.analysis.display import html_table, md_cell, md_table, png_tag, verdict_line

__all__ = ["study_html", "study_markdown"]


def _study_tables(result):
    from mmsverify.render.wording import fmt_order, level_cells, level_header, level_rows, shown_norms
    verdicts = (["field", "norm", "outcome", "observed order", "formal order", "reason"],
                [[v.field, v.norm, v.status, fmt_order(v.observed), f"{v.formal:g}", v.reason]
                 for v in result.verdicts])
    levels = {}
    for f in result.fields:
        norms = shown_norms(result, f)
        levels[f] = ([c.lower() if c in ("Level", "Grid") else c for c in level_header(norms)],
                     [level_cells(r, norms) for r in level_rows(result, f)])
    return verdicts, levels


def study_html(result, figure=True):
    """An HTML fragment of a StudyResult: verdict, verdict table, error tables, error figure."""
    from mmsverify.render.wording import headline, notes
    verdicts, levels = _study_tables(result)
    out = [f"<h4>{escape(result.problem)} solved by {escape(result.solver)}</h4>",
           verdict_line(result.outcome, headline(result)), html_table(*verdicts)]
    out += [f"<ul>{''.join(f'<li>note: {escape(n)}</li>' for n in notes(result))}</ul>"] if notes(result) else []
    for f, table in levels.items():
        out += [f"<p>field <b>{escape(f)}</b></p>", html_table(*table)]
    if figure and any(lv.ok for lv in result.levels):
        from mmsverify.render.plots import error_figure, figure_bytes
        out.append(png_tag(figure_bytes(error_figure(result), "png", dpi=80)))
    return "\n".join(out)


def study_markdown(result):
    """Markdown of a StudyResult: verdict, verdict table and error tables."""
    from mmsverify.render.wording import headline, notes
    verdicts, levels = _study_tables(result)
    out = [f"**{result.outcome.upper()}** {md_cell(headline(result))}", "", md_table(*verdicts)]
    out += [""] + [f"- note: {md_cell(n)}" for n in notes(result)] if notes(result) else []
    for f, table in levels.items():
        out += ["", f"field **{md_cell(f)}**", "", md_table(*table)]
    return "\n".join(out) + "\n"



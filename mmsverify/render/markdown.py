"""A study as a Markdown report: verdict, evidence (tables, figures), cautions.

:func:`markdown_text` builds the text with links to image files;
:func:`write_markdown` also draws the figures into a folder beside the
report (``<name>_figures/``), so the pair can be committed or attached.
"""

from pathlib import Path

from mmsverify.render.wording import (CAPTIONS, TITLES, axis_name, extra_cautions, fmt_order, headline, level_cells,
                                      level_header, level_rows, notes, shown_norms, study_facts)
from mmsverify.render.quantities import quantity_table
from mmsverify.render.text import CAUTION

__all__ = ["markdown_text", "write_markdown"]


# Characters that Markdown reads as markup inside a line: emphasis, code, links, raw HTML and entities,
# table pipes, strike-through. Names and messages come from files and solvers: each is escaped.
_MARKUP = str.maketrans({c: "\\" + c for c in "\\`*_[]<>|~&"})


def _md(text):
    """Inline text with every markup character escaped, so that it shows as written."""
    return str(text).translate(_MARKUP)


def _cell(text):
    """Table-safe text: one line, markup (pipes included) escaped."""
    return _md(str(text).splitlines()[0]) if str(text) else ""


def _fenced(text):
    """A code block that ``text`` cannot close: the fence is longer than any run of backquotes in it."""
    run, longest = 0, 0
    for c in str(text):
        run = run + 1 if c == "`" else 0
        longest = max(longest, run)
    fence = "`" * max(3, longest + 1)
    return [fence + "text", str(text), fence]


def _table(header, rows):
    lines = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    lines += ["| " + " | ".join(_cell(c) for c in row) + " |" for row in rows]
    return lines


def markdown_text(result, images=None):
    """The report as Markdown.

    Parameters
    ----------
    result : StudyResult
    images : dict of str to str, optional
        Figure name (``"error"``, ``"order"``, ``"cost"``, ``"map"``) to the
        path or URL the report links to.

    Returns
    -------
    str
    """
    kind = result.outcome
    size = axis_name(result)
    out = [f"# Order verification: {_md(result.problem)} solved by {_md(result.solver)}", "",
           f"**Verdict: {kind.upper()}.** {_md(headline(result))}", ""]
    out += _table(["Field", "Norm", "Outcome", "Observed order", "Formal order", "Reason"],
                  [[v.field, v.norm, v.status, fmt_order(v.observed), f"{v.formal:g}", v.reason]
                   for v in result.verdicts])
    if notes(result):
        out += [""] + [f"- Note: {_md(n)}" for n in notes(result)]
    out += ["", "## Evidence", ""]
    out += _table(["Study", ""], study_facts(result))
    for f in result.fields:
        out += ["", f"### Field {_md(f)}", ""]
        norms = shown_norms(result, f)
        header = level_header(norms, size) + ["Run time (s)"]
        rows = [level_cells(r, norms) + [f"{r['seconds']:.3g}"] for r in level_rows(result, f)]
        out += _table(header, rows)
    for q in result.quantities:
        out += ["", f"### Quantity {_md(q)}", ""]
        header, rows, _ = quantity_table(result, q, size)
        out += _table(header, rows)
    if images:
        out += ["", "### Figures"]
        for name, target in images.items():
            out += ["", f"![{TITLES.get(name, name)}]({target})", "", f"*{CAPTIONS.get(name, '')}*"]
    if result.failed_levels:
        out += ["", "### Failed levels", ""]
        for lv in result.failed_levels:
            out += [f"Level {lv.level} ({lv.grid.describe()}):", "", *_fenced(lv.message), ""]
    out += ["", "## Cautions", ""]
    out += [f"- {_md(c)}" for c in [CAUTION] + extra_cautions(result)]
    return "\n".join(out).rstrip() + "\n"


def write_markdown(result, path, pointwise=None, fmt="png"):
    """Write the Markdown report and its figures.

    Parameters
    ----------
    result : StudyResult
    path : path-like
        The ``.md`` file; figures go to ``<stem>_figures/`` beside it.
    pointwise : dict, optional
        Pointwise errors for the error map (see :func:`~mmsverify.render.pointwise.finest_error`).
    fmt : {"png", "svg"}

    Returns
    -------
    Path
    """
    from mmsverify.fileio import write_atomic
    from mmsverify.render.plots import save_figure, study_figures
    path = Path(path)
    folder = path.parent / f"{path.stem}_figures"
    images = {}
    for name, fig in study_figures(result, pointwise).items():
        save_figure(fig, folder / f"{name}.{fmt}")
        images[name] = f"{folder.name}/{name}.{fmt}"
    return write_atomic(path, markdown_text(result, images))

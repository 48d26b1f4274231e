"""Report files of a study: Markdown, HTML, JSON and CSV in one folder.

Every report states the verdict first, then the evidence, then the cautions.
:func:`write_reports` writes any set of formats into one folder; the
views are drawn by :mod:`mmsverify.render` (text, Markdown, HTML, figures,
error maps) and the data files by :mod:`mmsverify.outputs.studyfile`.
"""

from pathlib import Path

__all__ = ["FORMATS", "write_reports"]

#: File formats :func:`write_reports` knows, by suffix.
FORMATS = ("md", "html", "json", "csv")


def write_reports(result, folder, formats=FORMATS, pointwise=None, stem=None):
    """Write the study in several formats into ``folder``.

    Parameters
    ----------
    result : StudyResult
    folder : path-like
    formats : sequence of str
        Any of :data:`FORMATS`.
    pointwise : dict, optional
        Pointwise errors for the error map (Markdown and HTML).
    stem : str, optional
        File name without suffix; default ``<problem>_<solver>`` made file-safe.

    Returns
    -------
    dict of str to Path
    """
    unknown = [f for f in formats if f not in FORMATS]
    if unknown:
        from mmsverify.errors import MMSError
        raise MMSError(f"unknown report format(s) {', '.join(unknown)}; choose from {', '.join(FORMATS)}")
    folder = Path(folder)
    if stem is None:
        stem = "".join(c if c.isalnum() or c in "-_." else "_" for c in f"{result.problem}_{result.solver}").strip("_")
    written = {}
    for fmt in formats:
        path = folder / f"{stem}.{fmt}"
        if fmt == "md":
            from mmsverify.render.markdown import write_markdown
            written[fmt] = write_markdown(result, path, pointwise)
        elif fmt == "html":
            from mmsverify.render.html import write_html
            written[fmt] = write_html(result, path, pointwise)
        elif fmt == "json":
            from mmsverify.outputs.studyfile import write_json
            written[fmt] = write_json(result, path)
        else:
            from mmsverify.outputs.studyfile import write_csv
            written[fmt] = write_csv(result, path)
    return written

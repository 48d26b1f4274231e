"""Reports of studies: terminal text, Markdown, HTML, JSON, CSV and figures.

Every report states the verdict first, then the evidence, then the cautions.
:func:`write_reports` writes any set of formats into one folder; the
modules ``text``, ``markdown``, ``html``, ``files`` (JSON, CSV), ``plots``
and ``pointwise`` do one format or task each.
"""

from pathlib import Path

from mmsverify.outputs.report.text import CAUTION, format_study

__all__ = ["format_study", "CAUTION", "FORMATS", "write_reports"]

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
            from mmsverify.outputs.report.markdown import write_markdown
            written[fmt] = write_markdown(result, path, pointwise)
        elif fmt == "html":
            from mmsverify.outputs.report.html import write_html
            written[fmt] = write_html(result, path, pointwise)
        elif fmt == "json":
            from mmsverify.outputs.report.files import write_json
            written[fmt] = write_json(result, path)
        else:
            from mmsverify.outputs.report.files import write_csv
            written[fmt] = write_csv(result, path)
    return written

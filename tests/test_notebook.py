"""Notebook display of the result records, by calling the methods Jupyter calls."""

import base64

from mmsverify import assess, run_study
from mmsverify.study.settings import Refinement


def _images(html):
    return [base64.b64decode(part.split('"', 1)[0]) for part in html.split('src="data:image/png;base64,')[1:]]


def test_a_study_shows_its_verdict_tables_and_error_figure():
    result = run_study("plate-poisson", "poisson2d-neumann1", refinement=Refinement(levels=3))
    html = result._repr_html_()
    assert ">FAIL</b>" in html and "<table>" in html and "L2 error" in html
    assert "observed order" in html and "poisson2d-neumann1" in html
    images = _images(html)
    assert len(images) == 1 and images[0].startswith(b"\x89PNG")
    md = result._repr_markdown_()
    assert md.startswith("**FAIL**") and "| field | norm | outcome |" in md and "L2 error" in md


def test_names_in_the_display_are_escaped():
    result = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=3))
    import dataclasses
    odd = dataclasses.replace(result, solver="<script>alert(1)</script>|x")
    html = odd._repr_html_()
    assert "<script>" not in html and "&lt;script&gt;" in html


def test_an_assessment_shows_its_verdict_values_and_figure():
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1 (values coarse to fine)
    a = assess([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2, name="lift")
    html = a._repr_html_()
    assert "discretization error of lift" in html and "extrapolated value" in html
    assert len(_images(html)) == 1
    md = a._repr_markdown_()
    assert "| h | value |" in md and "extrapolated value" in md and "6.063" in md

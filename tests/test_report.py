"""Reports: JSON/CSV with every number, figures with the right series, Markdown and HTML."""

import base64
import csv
import dataclasses
import io
import json
import re
from pathlib import Path

import numpy as np
import pytest

from mmsverify import run_study
from mmsverify.errors import MMSError
from mmsverify.execute.norms import NORMS
from mmsverify.outputs.reports import write_reports
from mmsverify.render.text import CAUTION, format_study
from mmsverify.outputs.studyfile import (CSV_COLUMNS, csv_text, read_json, study_from_data, study_to_data,
                                    write_csv, write_json)
from mmsverify.render.html import html_text
from mmsverify.render.markdown import markdown_text, write_markdown
from mmsverify.render.plots import (NORM_STYLE, OKABE_ITO, cost_figure, error_figure, error_map_figure,
                                    figure_bytes, order_figure, study_figures)
from mmsverify.render.pointwise import finest_error, pointwise_error
from solvers_demo.fd import poisson

DOCS = Path(__file__).resolve().parents[1] / "docs"


@pytest.fixture(scope="module")
def good():
    return run_study("plate-poisson", "poisson2d", levels=4)


@pytest.fixture(scope="module")
def bad():
    return run_study("plate-poisson", "poisson2d-neumann1", levels=3)


def _crash_on_fine(case):
    """The correct solver, except that it crashes on grids finer than 16 cells (fields only reported:
    on 8 and 16 cells the edge flux is not yet in its asymptotic range)."""
    if case.grid.cells[0] > 16:
        raise MemoryError("pretend the <finest> grid does not fit")
    sol = poisson.solve(case)
    return dataclasses.replace(sol, quantities={})


@pytest.fixture(scope="module")
def partial():
    return run_study("plate-poisson", _crash_on_fine, levels=3)


def _lines(fig):
    return {line.get_gid(): line for ax in fig.axes for line in ax.get_lines() if line.get_gid()}


# -- JSON and CSV ----------------------------------------------------------

def test_json_round_trip_keeps_every_number(good, tmp_path):
    path = write_json(good, tmp_path / "study.json")
    back = read_json(path)
    assert study_to_data(back) == json.loads(path.read_text())
    assert back.levels == good.levels and back.verdicts == good.verdicts
    assert format_study(back) == format_study(good)


def test_json_is_a_superset_of_to_dict(good):
    data = study_to_data(good)
    plain = json.loads(json.dumps(good.to_dict()))
    for key, value in plain.items():
        if key == "levels":
            for mine, theirs in zip(data["levels"], value):
                assert {k: mine[k] for k in theirs} == theirs
        elif key == "verdicts":
            for mine, theirs in zip(data["verdicts"], value):
                assert {k: mine[k] for k in theirs} == theirs
        else:
            assert data[key] == value, key


def test_json_is_strict_and_round_trips_failed_levels(partial, tmp_path):
    path = write_json(partial, tmp_path / "p.json")
    text = path.read_text()
    json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))
    back = read_json(path)
    assert [lv.status for lv in back.levels] == ["ok", "ok", "failed"]
    assert "MemoryError" in back.levels[2].message
    assert study_to_data(back) == json.loads(text)


def _with_order_conflict(result):
    """The study as if its solver had stated first order against the file's second."""
    return dataclasses.replace(result, formal_order=1.0, order_source="solver", order_conflicts=(
        {"axis": "space", "solver": 1.0, "problem": 2.0, "used_for": "verdicts"},))


def test_json_matches_schema_and_schema_is_documented(good, partial):
    import jsonschema  # in the [test] extra
    schema = json.loads((DOCS / "study.schema.json").read_text())
    for r in (good, partial, _with_order_conflict(good)):
        jsonschema.validate(study_to_data(r), schema)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(dict(study_to_data(good), order_conflicts=[{"axis": "space"}]), schema)
    doc = (DOCS / "json-schema.md").read_text()
    names = set(schema["properties"]) | set(schema["properties"]["levels"]["items"]["properties"])
    names |= set(schema["properties"]["verdicts"]["items"]["properties"]) | set(CSV_COLUMNS)
    names |= set(schema["properties"]["order_conflicts"]["items"]["properties"])
    missing = sorted(n for n in names if f"`{n}`" not in doc)
    assert not missing, f"undocumented keys in docs/json-schema.md: {missing}"


def test_reading_other_json_says_what_to_do(tmp_path, good):
    p = tmp_path / "run.json"
    p.write_text(json.dumps(good.to_dict()))
    with pytest.raises(MMSError, match="mmsverify report"):
        read_json(p)
    with pytest.raises(MMSError, match="format version"):
        study_from_data(dict(study_to_data(good), format_version=99))
    (tmp_path / "broken.json").write_text("{")
    with pytest.raises(MMSError, match="broken.json"):
        read_json(tmp_path / "broken.json")


def test_csv_holds_every_error_and_order(good, tmp_path):
    rows = list(csv.DictReader(io.StringIO(write_csv(good, tmp_path / "s.csv").read_text())))
    # one row per level and norm of u, then one per level of each of the 2 reported quantities
    assert len(rows) == len(good.levels) * (len(NORMS) + 2)
    assert tuple(rows[0]) == CSV_COLUMNS
    for n in NORMS:
        mine = [r for r in rows if r["norm"] == n]
        assert [float(r["error"]) for r in mine] == [lv.errors["u"][n] for lv in good.levels]
        assert mine[0]["order"] == ""
        assert [float(r["order"]) for r in mine[1:]] == list(good.orders("u", n))
        assert {r["verdict"] for r in mine} == {"confirmed"}


def test_csv_marks_failed_levels(partial):
    rows = list(csv.DictReader(io.StringIO(csv_text(partial))))
    failed = [r for r in rows if r["status"] == "failed"]
    assert len(failed) == 1 and failed[0]["level"] == "2" and failed[0]["error"] == ""
    assert "MemoryError" in failed[0]["message"]


# -- figures -----------------------------------------------------------------

def test_error_figure_plots_the_errors_with_formal_slopes(good):
    lines = _lines(error_figure(good))
    h = [lv.h for lv in good.levels]
    for n in NORMS:
        line = lines[f"error-u-{n}"]
        assert list(line.get_xdata()) == h
        assert list(line.get_ydata()) == [lv.errors["u"][n] for lv in good.levels]
        assert line.get_color().lower() == NORM_STYLE[n][0].lower()
        ref = lines[f"reference-u-{n}"]
        x, y = np.asarray(ref.get_xdata()), np.asarray(ref.get_ydata())
        assert np.log(y[1] / y[0]) / np.log(x[1] / x[0]) == pytest.approx(good.formal_order)
        # the reference passes through the finest point
        assert y[0] == pytest.approx(good.levels[-1].errors["u"][n])


def test_order_figure_shows_orders_and_formal_line(bad):
    fig = order_figure(bad)
    lines = _lines(fig)
    for n in NORMS:
        line = lines[f"order-u-{n}"]
        assert list(line.get_xdata()) == [lv.h for lv in bad.levels[1:]]
        assert np.allclose(line.get_ydata(), bad.orders("u", n))
    assert list(lines["formal-u"].get_ydata()) == [2.0, 2.0]
    lo, hi = fig.axes[0].get_ylim()
    assert lo < 1.0 < 2.1 < hi  # the seeded mistake's order ~1 and the band are both in view


def test_cost_figure_needs_run_times(good):
    lines = _lines(cost_figure(good))
    assert list(lines["cost-u-L2"].get_xdata()) == [lv.seconds for lv in good.levels]
    untimed = dataclasses.replace(good, levels=tuple(dataclasses.replace(lv, seconds=0.0) for lv in good.levels))
    assert cost_figure(untimed) is None
    assert "cost" not in study_figures(untimed)


def test_palette_is_okabe_ito():
    # Okabe & Ito 2008, "Color Universal Design (CUD)", https://jfly.uni-koeln.de/color/
    assert OKABE_ITO["orange"] == "#E69F00" and OKABE_ITO["sky_blue"] == "#56B4E9"
    assert OKABE_ITO["green"] == "#009E73" and OKABE_ITO["blue"] == "#0072B2"
    assert OKABE_ITO["vermillion"] == "#D55E00" and OKABE_ITO["purple"] == "#CC79A7"


def test_error_map_shows_the_boundary_mistake(good, bad):
    # the seeded mistake is a first-order difference on the Neumann side x_max = 1
    # (solvers_demo/fd/poisson.py); its largest error sits on that side
    pw_bad = finest_error(bad)["u"]
    assert pw_bad.worst[0] == pytest.approx(1.0)
    pw_good = finest_error(good)["u"]
    assert 0.0 < pw_good.worst[0] < 1.0 and 0.0 < pw_good.worst[1] < 1.0
    assert np.max(np.abs(pw_good.error)) == pytest.approx(good.levels[-1].errors["u"]["Linf"])
    fig = error_map_figure({"u": pw_bad})
    mesh = [c for c in fig.axes[0].collections if c.get_gid() == "map-u"][0]
    assert np.allclose(np.sort(np.ravel(mesh.get_array())), np.sort(np.ravel(pw_bad.error)))


def test_error_map_one_dimensional_is_a_line(tmp_path):
    problem = tmp_path / "rod.toml"
    problem.write_text('[domain]\nx = [0, 1]\n[fields]\nu = "sin(2*x) + x"\n[operator]\nkind = "poisson"\n')
    from mmsverify.execute.grids import Grid
    pw = pointwise_error(problem, poisson.solve, Grid(0, (0.0,), (1.0,), (16,)))
    line = _lines(error_map_figure(pw))["map-u"]
    assert np.allclose(np.sort(line.get_ydata()), np.sort(pw["u"].error))


def test_svg_keeps_series_ids_and_text(good):
    svg = figure_bytes(error_figure(good), "svg").decode()
    for n in NORMS:
        assert f'id="error-u-{n}"' in svg
    assert "grid size h" in svg  # text stays text (svg.fonttype none)
    assert figure_bytes(error_figure(good), "svg") == figure_bytes(error_figure(good), "svg")


# -- Markdown and HTML -------------------------------------------------------

def _order_of(text, *needles):
    return [text.index(n) for n in needles]


def test_markdown_states_verdict_evidence_cautions(bad, tmp_path):
    path = write_markdown(bad, tmp_path / "report.md")
    text = path.read_text()
    pos = _order_of(text, "**Verdict: FAIL.**", "## Evidence", "## Cautions", CAUTION)
    assert pos == sorted(pos)
    for link in re.findall(r"!\[[^\]]*\]\(([^)]+)\)", text):
        assert (tmp_path / link).is_file() and (tmp_path / link).read_bytes()[:4] == b"\x89PNG"
    assert len(re.findall(r"!\[", text)) == 3  # error, order, cost; no map without pointwise data
    assert f"{bad.levels[-1].errors['u']['L2']:.3e}" in text


def test_markdown_lists_failed_levels(partial):
    text = markdown_text(partial)
    assert "failed: " in text and "### Failed levels" in text and "MemoryError" in text


def test_html_is_self_contained_with_verdict_and_images(bad):
    pw = finest_error(bad)
    page = html_text(bad, pw)
    pos = _order_of(page, 'id="verdict"', "Verdict: FAIL.", 'id="evidence"', 'id="cautions"')
    assert pos == sorted(pos)
    assert "<script" not in page and 'src="http' not in page and "href=" not in page
    images = re.findall(r'src="data:image/svg\+xml;base64,([^"]+)"', page)
    assert len(images) == 4
    svgs = [base64.b64decode(i).decode() for i in images]
    assert 'id="error-u-L2"' in svgs[0] and 'id="order-u-L2"' in svgs[1] and 'id="cost-u-L2"' in svgs[2]
    assert "<image" in svgs[3] and "max |error|" in svgs[3]  # the map is a raster inside the SVG
    png_page = html_text(bad, fmt="png")
    pngs = re.findall(r'src="data:image/png;base64,([^"]+)"', png_page)
    assert len(pngs) == 3 and all(base64.b64decode(p)[:4] == b"\x89PNG" for p in pngs)


def test_html_escapes_messages_and_can_skip_figures(partial):
    page = html_text(partial, figures=False)
    assert "&lt;finest&gt;" in page and "<finest>" not in page
    assert "<img" not in page
    assert "Verdict: FAIL." in page  # two levels confirm order 2, but a failed level is a defect
    assert "the study is not a pass until every level runs" in page
    assert "Only two levels succeeded" in page


def test_write_reports_writes_every_format(good, tmp_path):
    out = write_reports(good, tmp_path, stem="s")
    assert sorted(out) == ["csv", "html", "json", "md"]
    assert all(p.is_file() and p.stat().st_size > 0 for p in out.values())
    with pytest.raises(MMSError, match="unknown report format"):
        write_reports(good, tmp_path, formats=["pdf"])


def test_text_report_names_inconclusive_outcome(good):
    flat = dataclasses.replace(good, verdicts=tuple(dataclasses.replace(v, status="inconclusive")
                                                    for v in good.verdicts))
    assert format_study(flat).startswith("INCONCLUSIVE")


def test_report_command_runs_and_redraws_from_json(tmp_path, capsys):
    from mmsverify.cli import main
    out = tmp_path / "rep"
    assert main(["report", "plate-poisson", "poisson2d-neumann1", "--levels", "3", "-o", str(out), "--quiet"]) == 1
    # with three levels the 95 % interval of L1 and edge_slope (one degree of freedom) reaches the formal order
    assert capsys.readouterr().out.startswith("FAIL: 3 of 5 checks miss the formal order 2")
    stem = "plate-poisson_poisson2d-neumann1"
    assert sorted(p.name for p in out.iterdir()) == sorted([f"{stem}.{s}" for s in ("csv", "html", "json", "md")]
                                                           + [f"{stem}_figures"])
    assert (out / f"{stem}_figures" / "map.png").is_file()
    again = tmp_path / "again"
    assert main(["report", "--from", str(out / f"{stem}.json"), "-o", str(again), "--formats", "md", "--quiet"]) == 1
    assert sorted(p.name for p in (again / f"{stem}_figures").iterdir()) == ["cost.png", "error.png", "order.png"]
    assert main(["report", "plate-poisson", "poisson2d", "--formats", "pdf"]) == 2
    assert "unknown format(s) pdf" in capsys.readouterr().err


def test_notes_reach_every_format_and_survive_json(good, tmp_path):
    # plate-poisson declares two quantities that a fields-only solver does not report: one note, in every format
    r = _with_order_conflict(run_study("plate-poisson", _crash_on_fine, levels=2))
    assert len(r.notes) == 2
    back = read_json(write_json(r, tmp_path / "n.json"))
    assert back.order_conflicts == r.order_conflicts and back.notes == r.notes
    assert format_study(back) == format_study(r)
    md, page = markdown_text(r), html_text(r, figures=False)
    for n in r.notes:
        assert f"  note: {n}" in format_study(r).splitlines()
        assert f"- Note: {n}" in md.splitlines()
        assert f"<li>Note: {n.replace(chr(39), '&#x27;')}</li>" in page
    # notes come with the verdict, ahead of the evidence
    assert md.index("- Note:") < md.index("## Evidence") and page.index('id="notes"') < page.index('id="evidence"')
    with pytest.raises(MMSError, match="order_conflicts entry 0: missing key 'used_for'"):
        study_from_data(dict(study_to_data(r), order_conflicts=[{"axis": "space", "solver": 1, "problem": 2}]))


def test_reports_without_notes_have_no_notes_section(tmp_path):
    r = run_study("slab-heat", "fd-heat-euler", levels=2)
    assert r.notes == ()
    assert "note:" not in format_study(r) and "Note:" not in markdown_text(r)
    assert 'id="notes"' not in html_text(r, figures=False) and study_to_data(r)["notes"] == []


# -- reported quantities -------------------------------------------------------

def test_csv_holds_every_quantity_value_exact_error_and_order(good):
    rows = list(csv.DictReader(io.StringIO(csv_text(good))))
    assert {r["value"] for r in rows if r["norm"] in NORMS} == {""}
    verdicts = {v.field: v for v in good.verdicts if v.norm == "value"}
    for q in ("deflection", "edge_slope"):
        mine = [r for r in rows if r["field"] == q]
        assert {r["norm"] for r in mine} == {"value"} and [int(r["level"]) for r in mine] == [0, 1, 2, 3]
        for key in ("value", "exact", "error"):
            assert [float(r[key]) for r in mine] == [lv.quantities[q][key] for lv in good.levels]
        assert mine[0]["order"] == "" and [float(r["order"]) for r in mine[1:]] == list(good.quantity_orders(q))
        assert {r["verdict"] for r in mine} == {verdicts[q].status}
        assert {float(r["observed_order"]) for r in mine} == {verdicts[q].observed}


def _without_quantity_on(result, name, level):
    """The study as if the solver had left quantity ``name`` out on one level."""
    levels = tuple(dataclasses.replace(lv, quantities={q: d for q, d in lv.quantities.items()
                                                       if not (q == name and lv.level == level)})
                   for lv in result.levels)
    return dataclasses.replace(result, levels=levels)


def test_markdown_and_html_have_a_table_per_quantity(good):
    md, page = markdown_text(good), html_text(good, figures=False)
    for q in ("deflection", "edge_slope"):
        section = md[md.index(f"### Quantity {q}"):]
        lines = section.splitlines()
        assert lines[2] == "| Level | Grid | h | Value | Exact | Error | Order | Run time (s) |"
        orders = good.quantity_orders(q)
        for i, lv in enumerate(good.levels):
            d = lv.quantities[q]
            cells = [c.strip() for c in lines[4 + i].strip("|").split("|")]
            assert float(cells[3]) == pytest.approx(d["value"], rel=1e-7)
            assert float(cells[4]) == pytest.approx(d["exact"], rel=1e-7)
            assert float(cells[5]) == pytest.approx(d["error"], rel=1e-3)
            assert cells[6] == ("-" if i == 0 else f"{orders[i - 1]:.2f}")
        assert f"<h3>Quantity {q}</h3>" in page
        table = page[page.index(f"<h3>Quantity {q}</h3>"):].split("</table>")[0]
        assert table.count("<tr>") == 1 + len(good.levels)
        assert f"<td class=num>{good.levels[-1].quantities[q]['value']:.8g}</td>" in table
        assert f"<td class=num>{orders[-1]:.2f}</td>" in table
    # quantities come after the fields' evidence and before the cautions
    assert md.index("### Field u") < md.index("### Quantity deflection") < md.index("## Cautions")
    # a level whose solver left the quantity out says so instead of showing numbers
    gap = _without_quantity_on(good, "edge_slope", 1)
    row = markdown_text(gap).split("### Quantity edge_slope")[1].splitlines()[5]
    assert row.startswith("| 1 | 16x16 cells |") and "not reported" in row
    assert "<td class=num>not reported</td>" in html_text(gap, figures=False)


def test_fields_only_study_has_no_quantity_tables(partial):
    assert partial.quantities == ()
    assert "### Quantity" not in markdown_text(partial) and "Quantity" not in html_text(partial, figures=False)
    assert {r["norm"] for r in csv.DictReader(io.StringIO(csv_text(partial)))} <= set(NORMS) | {""}


def test_report_from_json_writes_beside_it_by_default(good, tmp_path, monkeypatch, capsys):
    from mmsverify.cli import main
    saved = tmp_path / "runs" / "study.json"
    write_json(good, saved)
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    assert main(["report", "--from", str(saved), "--formats", "csv,md", "--quiet"]) == 0
    stem = "plate-poisson_poisson2d"
    assert sorted(p.name for p in saved.parent.iterdir()) == sorted(
        ["study.json", f"{stem}.csv", f"{stem}.md", f"{stem}_figures"])
    assert list(elsewhere.iterdir()) == []
    # -o still chooses the folder, and a study that is run (not read) still defaults to ./mmsverify-report
    assert main(["report", "--from", str(saved), "-o", "out", "--formats", "csv", "--quiet"]) == 0
    assert (elsewhere / "out" / f"{stem}.csv").is_file()
    assert main(["report", "plate-poisson", "poisson2d", "--levels", "4", "--formats", "csv", "--quiet"]) == 0
    assert (elsewhere / "mmsverify-report" / f"{stem}.csv").is_file()
    capsys.readouterr()

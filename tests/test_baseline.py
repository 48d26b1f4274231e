"""Regression mode: baselines are saved, read back, and checks catch regressions."""

import dataclasses
import json
import re
import shutil

import numpy as np
import pytest

from mmsverify import Solution, run_study
from mmsverify.outputs.baseline import (Baseline, baseline_from_study, check_baseline, compare, load_baseline,
                                save_baseline)
from mmsverify.cli import main
from mmsverify.errors import MMSError, ProblemError
from mmsverify.problem.record import PROBLEM_DIR
from solvers_demo.fd import poisson
from mmsverify.study.settings import Refinement


@pytest.fixture(scope="module")
def good():
    return run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=4))


def _scaled(result, factor):
    """The same study with every error multiplied by ``factor`` (orders unchanged)."""
    levels = tuple(dataclasses.replace(lv, errors={f: {n: e * factor for n, e in d.items()}
                                                   for f, d in lv.errors.items()}) for lv in result.levels)
    return dataclasses.replace(result, levels=levels)


def test_cli_check_passes_on_correct_solver_and_catches_seeded_mistake(tmp_path, capsys):
    base = tmp_path / "ci" / "plate.json"
    assert main(["baseline", "save", "plate-poisson", "poisson2d", "-o", str(base), "--levels", "4", "--quiet"]) == 0
    capsys.readouterr()
    assert main(["baseline", "check", str(base)]) == 0
    assert capsys.readouterr().out.startswith("NO REGRESSION")
    # the seeded mistake: first-order differences on the Neumann side (solvers_demo/fd/poisson.py)
    assert main(["baseline", "check", str(base), "poisson2d-neumann1"]) == 1
    out = capsys.readouterr().out
    assert out.startswith("REGRESSION  plate-poisson: solver poisson2d-neumann1 against the baseline recorded "
                          "with poisson2d")
    # a first-order boundary difference makes the scheme first order: the observed order is 1 (common practice)
    observed = re.search(r"u L2: observed order (-?[0-9.]+) is below 1\.9 \(formal 2 - tolerance 0\.1\)", out)
    assert observed and abs(float(observed.group(1)) - 1.0) <= 0.1
    assert "record a new baseline" in out


def test_cli_check_reports_bad_input(tmp_path, capsys):
    assert main(["baseline", "check", str(tmp_path / "missing.json")]) == 2
    assert "no such baseline file" in capsys.readouterr().err
    (tmp_path / "study.json").write_text('{"format": "mmsverify.study"}')
    assert main(["baseline", "check", str(tmp_path / "study.json")]) == 2
    assert "not an mmsverify baseline" in capsys.readouterr().err


def test_file_round_trip_and_portable_problem_path(good, tmp_path):
    saved = save_baseline(good, tmp_path / "b.json", error_factor=1.5)
    back = load_baseline(tmp_path / "b.json")
    assert back.source == ""  # a bundled problem is recorded by name only
    assert dataclasses.replace(back, source=saved.source) == saved
    assert back.grids == tuple(lv.grid for lv in good.levels)
    assert back.errors["u"]["L2"] == [lv.errors["u"]["L2"] for lv in good.levels]
    # a problem file of the user's own is recorded relative to the baseline, so the pair can move together
    proj = tmp_path / "proj"
    (proj / "ci").mkdir(parents=True)
    shutil.copy(PROBLEM_DIR / "plate-poisson.toml", proj / "plate.toml")
    save_baseline(run_study(proj / "plate.toml", "poisson2d", refinement=Refinement(levels=4)), proj / "ci" / "b.json")
    assert json.loads((proj / "ci" / "b.json").read_text())["problem"]["source"] == "../plate.toml"
    moved = shutil.copytree(proj, tmp_path / "elsewhere")
    assert check_baseline(moved / "ci" / "b.json").passed


def test_error_rule_uses_the_stated_factor(good):
    base = baseline_from_study(good, error_factor=2.0)
    worse = compare(base, _scaled(good, 3.0))
    assert not worse.passed
    assert {f.kind for f in worse.findings} == {"error"}
    assert len(worse.findings) == 4 * 3  # every level, every norm
    assert "3.0 x the baseline's" in worse.findings[0].message and "allowed 2 x" in worse.findings[0].message
    assert compare(base, _scaled(good, 3.0), error_factor=4.0).passed
    assert compare(base, _scaled(good, 1.9)).passed


def test_note_when_errors_fell(good):
    check = compare(baseline_from_study(good), _scaled(good, 1 / 3))
    assert check.passed and "save a new baseline" in check.notes[0]


def test_order_rule_is_formal_minus_tolerance(good):
    # common practice: the observed order must reach the formal order within the tolerance
    base = baseline_from_study(good)
    low = dataclasses.replace(good, verdicts=tuple(dataclasses.replace(v, observed=1.85) for v in good.verdicts))
    check = compare(base, low)
    assert [f.kind for f in check.findings] == ["order"] * 5  # u in 3 norms, then the 2 reported quantities
    assert [(f.field, f.norm) for f in check.findings[3:]] == [("deflection", "value"), ("edge_slope", "value")]
    assert "observed order 1.85 is below 1.9" in check.findings[0].message
    assert compare(base, low, tolerance=0.2).passed
    assert compare(base, low, norms=["L2"]).findings[0].norm == "L2"
    with pytest.raises(MMSError, match="unknown norm"):
        compare(base, low, norms=["H1"])


def _interior_only(case):
    """Another implementation's output: the same scheme reported on interior nodes only (with its quantities,
    which the baseline of plate-poisson holds too)."""
    sol = poisson.solve(case)
    inner = (slice(1, -1), slice(1, -1))
    return Solution(values={"u": sol.values["u"][inner]},
                    points=tuple(np.broadcast_to(p, sol.values["u"].shape)[inner] for p in sol.points),
                    weights=np.asarray(sol.weights)[inner], quantities=sol.quantities)


def test_baseline_is_solver_agnostic(good):
    check = check_baseline(baseline_from_study(good), _interior_only)
    assert check.result.solver.endswith("_interior_only")
    assert check.passed, str(check)
    assert any(e0 != e1 for _, _, _, e0, e1 in check.comparisons)  # really another run, errors differ


def _crash_on_fine(case):
    if case.grid.cells[0] > 16:
        raise MemoryError("pretend the finest grid does not fit")
    return poisson.solve(case)


def test_failed_level_fails_the_check(good):
    check = check_baseline(baseline_from_study(good), _crash_on_fine)
    assert not check.passed
    assert check.findings[0].kind == "level" and check.findings[0].level == 2
    assert "MemoryError" in check.findings[0].message


def test_changed_problem_is_refused(good, tmp_path):
    base = baseline_from_study(run_study(PROBLEM_DIR / "plate-poisson.toml", "poisson2d", refinement=Refinement(levels=4)))
    edited = tmp_path / "plate.toml"
    edited.write_text((PROBLEM_DIR / "plate-poisson.toml").read_text().replace("a = 0.7", "a = 0.75"))
    with pytest.raises(ProblemError, match="changed since the baseline was saved"):
        check_baseline(base, problem=edited)
    other = run_study(edited, "poisson2d", refinement=Refinement(levels=4))
    assert compare(base, other).findings[0].kind == "problem"


def test_other_grids_are_a_finding(good):
    base = baseline_from_study(good)
    check = compare(base, run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2)))
    assert [f.kind for f in check.findings] == ["grid"]


def test_refuses_to_record_a_failing_study(tmp_path):
    bad = run_study("plate-poisson", "poisson2d-neumann1", refinement=Refinement(levels=3))
    with pytest.raises(MMSError, match="did not pass"):
        baseline_from_study(bad)
    assert isinstance(baseline_from_study(bad, allow_failing=True), Baseline)
    with pytest.raises(MMSError, match="must exceed 1"):
        baseline_from_study(bad, error_factor=0.5, allow_failing=True)


def test_damaged_file_is_named(tmp_path, good):
    path = tmp_path / "b.json"
    save_baseline(good, path)
    data = json.loads(path.read_text())
    del data["grids"][0]["cells"]
    path.write_text(json.dumps(data))
    with pytest.raises(MMSError, match=r"b\.json: damaged baseline"):
        load_baseline(path)


def test_every_key_of_the_file_is_documented(good):
    from pathlib import Path
    doc = (Path(__file__).resolve().parents[1] / "docs" / "json-schema.md").read_text()
    section = doc[doc.index("## Baseline"):]
    missing = [k for k in baseline_from_study(good).to_data() if f"`{k}`" not in section]
    assert not missing, f"baseline keys not documented in docs/json-schema.md: {missing}"


def _quantity_errors_scaled(result, name, factor):
    """The same study with one quantity's error (and value's distance from exact) multiplied by ``factor``."""
    def scaled(d):
        return dict(d, value=d["exact"] + factor * (d["value"] - d["exact"]), error=factor * d["error"])
    levels = tuple(dataclasses.replace(lv, quantities={q: scaled(d) if q == name else d
                                                       for q, d in lv.quantities.items()}) for lv in result.levels)
    return dataclasses.replace(result, levels=levels)


def test_reported_quantities_are_recorded_and_checked(good, tmp_path):
    base = save_baseline(good, tmp_path / "q.json")
    back = load_baseline(tmp_path / "q.json")
    assert back.quantities == base.quantities
    assert back.quantities["deflection"] == [lv.quantities["deflection"]["error"] for lv in good.levels]
    check = compare(back, good)
    # the 3 norms of u and the 2 quantities: 5 order checks, (3 + 2) x 4 levels error comparisons
    assert check.passed and "5 order checks and 20 error comparisons" in str(check)
    assert {c[0] for c in check.comparisons} == {"u", "deflection", "edge_slope"}
    # error rule with the baseline's factor (2): a quantity 3 x worse on every level is caught, 1.9 x is not
    worse = compare(back, _quantity_errors_scaled(good, "edge_slope", 3.0))
    assert [(f.kind, f.field, f.norm) for f in worse.findings] == [("error", "edge_slope", "value")] * 4
    assert "edge_slope value on level 0" in worse.findings[0].message and "allowed 2 x" in worse.findings[0].message
    assert compare(back, _quantity_errors_scaled(good, "edge_slope", 1.9)).passed


def test_quantity_order_and_absence_are_findings(good):
    base = baseline_from_study(good)
    # common practice: a functional of a second-order solution is held to the same order rule as the fields
    slow = dataclasses.replace(good, verdicts=tuple(dataclasses.replace(v, observed=1.5) if v.norm == "value" else v
                                                    for v in good.verdicts))
    check = compare(base, slow)
    assert [(f.kind, f.field) for f in check.findings] == [("order", "deflection"), ("order", "edge_slope")]
    was = base.observed["deflection"]["value"]
    assert f"observed order 1.50 is below 1.9" in check.findings[0].message
    assert f"the baseline observed {was:.2f}" in check.findings[0].message
    # a solver that stops reporting the quantities fails the check, naming them
    fields_only = check_baseline(base, lambda case: dataclasses.replace(poisson.solve(case), quantities={}))
    assert [(f.kind, f.field) for f in fields_only.findings] == [("quantity", "deflection"), ("quantity", "edge_slope")]
    assert "quantity deflection is missing from the run" in str(fields_only)


def test_baseline_without_quantities_still_checks(good, tmp_path):
    path = tmp_path / "old.json"
    save_baseline(good, path)
    data = json.loads(path.read_text())
    del data["quantity_errors"]  # as written before quantities were recorded
    path.write_text(json.dumps(data))
    old = load_baseline(path)
    assert old.quantities == {}
    check = compare(old, _quantity_errors_scaled(good, "deflection", 10.0))
    assert check.passed and "3 order checks and 12 error comparisons" in str(check)
    data["quantity_errors"] = {"deflection": [1e-3]}  # one entry for three levels
    path.write_text(json.dumps(data))
    with pytest.raises(MMSError, match=r"old\.json: damaged baseline.*one entry per grid level"):
        load_baseline(path)


def test_order_rule_follows_the_norms_the_study_judged():
    """A solver that states its order holds in L1/L2 for p (staggered Navier-Stokes) is not held to
    Linf by a baseline check, while every error is still compared; naming the norms still holds it."""
    result = run_study("cavity-flow", "ns-staggered", refinement=Refinement(levels=4))
    assert result.passed and result.judged_norms["p"] == ("L1", "L2")
    base = baseline_from_study(result)
    check = compare(base, result)
    assert check.passed and not check.findings
    assert any(c[:2] == ("p", "Linf") for c in check.comparisons)          # errors still compared in Linf
    strict = compare(base, result, norms=("L1", "L2", "Linf"))
    assert [(f.field, f.norm) for f in strict.findings if f.kind == "order"] == [("p", "Linf")]

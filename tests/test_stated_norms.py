"""A solver states the norms its order claim holds in (``judged_norms``); the caller's norms win."""

import json

import pytest

from mmsverify import AnalysisError, MMSError, SolverError, run_study
from mmsverify.cli import main
from mmsverify.execute.norms import NORMS
from mmsverify.outputs.studyfile import read_json, study_from_data, study_to_data, write_json
from mmsverify.study.refinement import judged_norms
from solvers_demo.ns.staggered import StaggeredNS

LINE = "p judged in L1, L2 as the solver states (Linf measured, not judged)"


@pytest.fixture(scope="module")
def cavity():
    # cavity-flow plans 8x8 to 64x64 cells over four levels: about half a second
    return run_study("cavity-flow", "ns-staggered", levels=4)


def _judged(result):
    out = {}
    for v in result.verdicts:
        out.setdefault(v.field, []).append(v.norm)
    return out


def _poisson(**attrs):
    """The 5-point Poisson solver with attributes (a statement) attached."""
    from solvers_demo.fd.poisson import solve

    def solver(case):
        return solve(case)
    for k, v in attrs.items():
        setattr(solver, k, v)
    return solver


def test_staggered_ns_is_judged_in_the_norms_it_states(cavity):
    # Harlow & Welch 1965, Phys. Fluids 8:2182; Ferziger & Peric 2002, section 7.5: the MAC scheme is
    # second order in velocity and pressure; its pressure max-norm order nears 2 only slowly
    # (common practice; measured in the module notes of solvers_demo/ns/staggered.py)
    assert cavity.passed, str(cavity)
    assert _judged(cavity) == {"u": list(NORMS), "v": list(NORMS), "p": ["L1", "L2"]}
    assert cavity.judged_norms == {"u": NORMS, "v": NORMS, "p": ("L1", "L2")}
    assert cavity.norms_source == "solver"
    # Linf of p is still measured and tabled
    assert all("Linf" in lv.errors["p"] for lv in cavity.levels)
    assert len(cavity.orders("p", "Linf")) == 3
    text = str(cavity)
    assert [ln.strip() for ln in text.splitlines()].count("note: " + LINE) == 1
    assert cavity.notes == (LINE,)


def test_other_formats_carry_the_line(cavity):
    from mmsverify.render.html import html_text
    from mmsverify.render.markdown import markdown_text
    assert f"- Note: {LINE}" in markdown_text(cavity)
    assert f"<li>Note: {LINE}</li>" in html_text(cavity, figures=False)


def test_the_callers_norms_win():
    # common practice: an explicit choice of the caller overrides what the solver states
    r = run_study("cavity-flow", "ns-staggered", levels=4, norms=("L1", "L2", "Linf"))
    assert not r.passed and r.norms_source == "caller"
    off = [(v.field, v.norm, v.status) for v in r.verdicts if not v.ok]
    assert off == [("p", "Linf", "below")]
    assert r.notes == ()        # every norm judged: nothing to say


def test_a_caller_restriction_is_told_too():
    r = run_study("plate-poisson", "poisson2d", levels=2, norms="L2")   # one name is one norm
    assert r.norms_source == "caller" and r.judged_norms == {"u": ("L2",)}
    assert r.notes == ("u judged in L2 as the caller chose (L1, Linf measured, not judged)",)


def test_solvers_that_state_nothing_are_judged_in_every_norm():
    r = run_study("plate-poisson", "poisson2d", levels=2)
    assert r.norms_source == "default" and r.judged_norms == {"u": NORMS}
    assert {v.norm for v in r.verdicts if v.field == "u"} == set(NORMS)
    assert judged_norms("cavity-flow", lambda case: None) == ({"u": NORMS, "v": NORMS, "p": NORMS}, "default")
    assert judged_norms("plate-poisson", _poisson(judged_norms={})) == ({"u": NORMS}, "default")   # says nothing


def test_stated_norms_come_in_the_usual_order_and_other_fields_get_all():
    judged, source = judged_norms("cavity-flow", StaggeredNS(report="u"))
    assert source == "solver" and judged == {"u": NORMS, "v": NORMS, "p": ("L1", "L2")}
    judged, _ = judged_norms("plate-poisson", _poisson(judged_norms={"u": ["Linf", "L1", "L1"]}))
    assert judged == {"u": ("L1", "Linf")}


def test_statement_is_read_from_the_configured_solver():
    class Configurable:
        judged_norms = {}

        def __init__(self, norms=None):
            if norms is not None:
                self.judged_norms = {"u": norms}

        def configured(self, options):
            return Configurable(options.get("norms"))

        def __call__(self, case):
            from solvers_demo.fd.poisson import solve
            return solve(case)

    r = run_study("plate-poisson", Configurable(), levels=2, options={"norms": ("L2",)})
    assert r.norms_source == "solver" and _judged(r)["u"] == ["L2"]


def test_unknown_norm_is_refused_naming_solver_and_fix():
    solver = _poisson(judged_norms={"u": ("L1", "H1")})
    with pytest.raises(SolverError, match=r"judged_norms for field u names unknown norm\(s\) 'H1'; use some of "
                                          r"L1, L2, Linf") as info:
        run_study("plate-poisson", solver, levels=2)
    assert "test_stated_norms" in str(info.value)      # the solver's name
    with pytest.raises(SolverError, match="names no norm"):
        run_study("plate-poisson", _poisson(judged_norms={"u": ()}), levels=2)


def test_fields_the_problem_lacks_are_left_out_and_the_solver_explains_itself():
    r = run_study("plate-poisson", _poisson(judged_norms={"P": ("L1",)}), levels=2)
    assert r.norms_source == "default" and _judged(r)["u"] == ["L1", "L2", "Linf"]   # nothing of it applies
    wrong = run_study("plate-poisson", "ns-staggered", levels=2)   # a Navier-Stokes solver stating p
    assert not any(lv.ok for lv in wrong.levels)
    assert "pick a solver for that operator" in wrong.levels[0].message
    with pytest.raises(SolverError, match="must be a dict of field name to norms, got list"):
        run_study("plate-poisson", _poisson(judged_norms=["L1"]), levels=2)


def test_the_callers_norms_do_not_need_a_valid_statement():
    r = run_study("plate-poisson", _poisson(judged_norms={"P": ("L1",)}), levels=2, norms=("L2",))
    assert r.norms_source == "caller" and [v.norm for v in r.verdicts if v.field == "u"] == ["L2"]
    with pytest.raises(AnalysisError, match="among L1, L2, Linf"):
        run_study("plate-poisson", "poisson2d", levels=2, norms=("L2", "H1"))


def test_json_round_trip_keeps_the_judged_norms(cavity, tmp_path):
    path = write_json(cavity, tmp_path / "s.json")
    data = json.loads(path.read_text())
    assert data["judged_norms"] == {"u": list(NORMS), "v": list(NORMS), "p": ["L1", "L2"]}
    assert data["norms_source"] == "solver" and LINE in data["notes"]
    back = read_json(path)
    assert back.judged_norms == cavity.judged_norms and back.norms_source == "solver"
    assert back.notes == cavity.notes and back.passed


def test_json_written_before_the_judged_norms_still_reads(cavity):
    data = study_to_data(cavity)
    del data["judged_norms"], data["norms_source"]
    data["notes"] = []
    old = study_from_data(data)
    assert old.judged_norms == {} and old.norms_source == "default"
    assert old.notes == () and old.passed                    # as before: the verdicts say what was judged
    assert [(v.field, v.norm) for v in old.verdicts] == [(v.field, v.norm) for v in cavity.verdicts]


def test_broken_judged_norms_in_a_file_are_refused(cavity):
    data = study_to_data(cavity)
    data["judged_norms"]["p"] = ["L3"]
    with pytest.raises(MMSError, match="judged_norms of field p must be a list of norms"):
        study_from_data(data, "s.json")
    data = study_to_data(cavity)
    data["norms_source"] = "someone"
    with pytest.raises(MMSError, match="s.json: .*norms_source be one of solver, caller, default"):
        study_from_data(data, "s.json")


def test_command_line_uses_the_statement_and_norms_overrides(capsys):
    assert main(["run", "cavity-flow", "ns-staggered", "--levels", "4"]) == 0
    assert "note: " + LINE in capsys.readouterr().out
    assert main(["run", "cavity-flow", "ns-staggered", "--levels", "4", "--norms", "L1,L2,Linf"]) == 1
    assert "!! p Linf" in capsys.readouterr().out

"""The problem a saved study or baseline was made with is found again and checked by content hash."""

from types import SimpleNamespace

import pytest

from mmsverify import run_study
from mmsverify.problem.origin import problem_of_record
from mmsverify.errors import ProblemError
from mmsverify.problem.derive import load_problem
from mmsverify.problem.record import PROBLEM_DIR
from mmsverify.render.pointwise import finest_error
from mmsverify.study.settings import Refinement

_TEMPLATE = "{source} | {name} | {hash} | {recorded}"


def _copy(tmp_path, edit=None):
    text = (PROBLEM_DIR / "plate-poisson.toml").read_text()
    path = tmp_path / "plate.toml"
    path.write_text(text if edit is None else text.replace(*edit))
    return path


def _record(source, name="plate-poisson", problem_hash=None):
    if problem_hash is None:
        problem_hash = load_problem(PROBLEM_DIR / "plate-poisson.toml").content_hash()
    return SimpleNamespace(source=str(source), problem=name, problem_hash=problem_hash)


def test_recorded_file_is_preferred_when_it_exists(tmp_path):
    path = _copy(tmp_path)
    problem = problem_of_record(_record(path), mismatch=_TEMPLATE)
    assert problem.source == str(path)


def test_missing_file_falls_back_to_the_recorded_name(tmp_path):
    problem = problem_of_record(_record(tmp_path / "gone.toml"), mismatch=_TEMPLATE)
    assert problem.source == str(PROBLEM_DIR / "plate-poisson.toml")


def test_given_problem_wins_but_is_still_checked(tmp_path):
    same = _copy(tmp_path)
    record = _record(tmp_path / "gone.toml", name="no-such-bundled-problem")
    assert problem_of_record(record, same, mismatch=_TEMPLATE).source == str(same)
    edited = tmp_path / "edited.toml"
    edited.write_text(same.read_text().replace("a = 0.7", "a = 0.75"))
    with pytest.raises(ProblemError) as err:
        problem_of_record(record, edited, mismatch=_TEMPLATE)
    source, name, now, recorded = str(err.value).split(" | ")
    assert source == str(edited) and name == "no-such-bundled-problem"
    assert now == load_problem(edited).content_hash()[:12] and recorded == record.problem_hash[:12]
    assert now != recorded


def test_empty_recorded_hash_checks_nothing(tmp_path):
    edited = _copy(tmp_path, ("a = 0.7", "a = 0.75"))
    assert problem_of_record(_record(edited, problem_hash=""), mismatch=_TEMPLATE).source == str(edited)


def test_pointwise_refuses_a_problem_file_edited_after_the_study(tmp_path):
    path = _copy(tmp_path)
    result = run_study(path, "poisson2d", refinement=Refinement(levels=2))
    path.write_text(path.read_text().replace("a = 0.7", "a = 0.75"))
    with pytest.raises(ProblemError, match=r"differs from the one the study of plate\S* ran on .*"
                                           r"pass the problem file the study used"):
        finest_error(result)
    original = PROBLEM_DIR / "plate-poisson.toml"
    assert set(finest_error(result, problem=original)) == {"u"}

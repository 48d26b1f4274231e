"""Hostile baselines and level-cache records: each run generates several hundred damaged files.

Every one must be refused with a message that names the file (exit 2 for a
baseline, a warning and a recomputed level for a record), with no traceback,
and nothing named in a file may run: a canary module that writes a file when
imported sits in the current folder, and baselines name it as their solver.
"""

import json
import math
import os
from pathlib import Path
import random
import warnings

import pytest

from mmsverify import run_study
from mmsverify.outputs.baseline import load_baseline, save_baseline
from mmsverify.execute.cache import LevelCache, solver_identity
from mmsverify.cli import main
from mmsverify.errors import MMSError
from mmsverify.study.settings import Refinement, Running

SEED = 20261204
CASES = 320          # per kind; about 9 in 10 are hostile after the mutation (the rest happen to stay valid)
DEEP = "@@deep@@"

CANARY = """
from pathlib import Path
Path(__file__).with_name("CANARY-RAN").write_text("imported")
def solve(case):
    Path(__file__).with_name("CANARY-RAN").write_text("called")
"""

# Values put in place of an entry: wrong types, non-finite numbers, unknown words, huge or deep values.
HOSTILE = [float("nan"), float("inf"), -float("inf"), -1, -1e300, 0, True, None, "2", "", "sideways", [], {},
           [None], [float("nan")], {"a": 1}, "x" * 5000, 10 ** 400, DEEP, [[[[[[[[[[[[1]]]]]]]]]]]],
           {"__class__": "os.system"}, "canary_solver:solve"]


def _paths(node, prefix=()):
    """Every (path, value) in a JSON tree."""
    yield prefix, node
    items = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(node, list) else ()
    for k, v in items:
        yield from _paths(v, prefix + (k,))


def _mutate(data, rng):
    """A deep copy of ``data`` with one to three entries replaced, deleted, shortened or renamed."""
    data = json.loads(json.dumps(data))
    for _ in range(rng.randint(1, 3)):
        paths = [p for p, _ in _paths(data) if p]
        path = rng.choice(paths)
        parent = data
        for k in path[:-1]:
            parent = parent[k]
        key = path[-1]
        action = rng.random()
        if action < 0.6:
            parent[key] = rng.choice(HOSTILE)
        elif action < 0.75 and isinstance(parent, dict):
            del parent[key]
        elif action < 0.9 and isinstance(parent[key], list) and parent[key]:
            parent[key] = parent[key][:-1]          # a list one entry short
        elif isinstance(parent, dict):
            parent["unknown-" + str(key)] = parent.pop(key)
        else:
            parent[key] = rng.choice(HOSTILE)
    return data


def _text(data):
    text = json.dumps(data, allow_nan=True)
    return text.replace(json.dumps(DEEP), "[" * 100_000 + "]" * 100_000)


@pytest.fixture
def canary(tmp_path, monkeypatch):
    (tmp_path / "canary_solver.py").write_text(CANARY)
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(tmp_path))
    yield tmp_path / "CANARY-RAN"
    import sys
    sys.modules.pop("canary_solver", None)


@pytest.mark.slow
def test_hostile_baselines_are_refused_with_exit_2_and_run_nothing(canary, tmp_path, capsys):
    good = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=4))
    save_baseline(good, tmp_path / "good.json", run={"solver": "canary_solver:solve", "external": None,
                                                     "options": {}, "timeout": None})
    data = json.loads((tmp_path / "good.json").read_text())
    # a file that names a module is refused as it is: a baseline does not choose the code that runs
    assert main(["baseline", "check", str(tmp_path / "good.json")]) == 2
    assert "--rerun-recorded" in capsys.readouterr().err
    rng = random.Random(SEED)
    files = [("bom.json", "\ufeff" + json.dumps(data)), ("empty.json", ""), ("garbage.json", "\x00\xff{"),
             ("list.json", "[]"), ("nan.json", json.dumps(data).replace('"format_version": 2', '"format_version": NaN'))]
    files += [(f"m{i}.json", _text(_mutate(data, rng))) for i in range(CASES)]
    refused = 0
    for name, text in files:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8", errors="surrogateescape")
        try:
            load_baseline(path)
        except MMSError as exc:
            assert name in str(exc), exc
        else:
            continue   # the mutation left a valid baseline (a renamed note, an equal value)
        code = main(["baseline", "check", str(path), "poisson2d"])
        err = capsys.readouterr().err
        assert code == 2, (name, err)
        assert "Traceback" not in err and err.startswith("mmsverify: error: ") and name in err, err
        refused += 1
    assert refused >= 0.8 * CASES
    assert not canary.exists()


def test_special_files_and_huge_baselines_are_refused_unread(tmp_path, capsys):
    os.mkfifo(tmp_path / "pipe.json")
    (tmp_path / "folder.json").mkdir()
    (tmp_path / "zero.json").symlink_to("/dev/zero")
    (tmp_path / "huge.json").write_text(" " * (5 << 20))
    for name in ("pipe.json", "folder.json", "zero.json", "huge.json"):
        assert main(["baseline", "check", str(tmp_path / name), "poisson2d"]) == 2
        err = capsys.readouterr().err
        assert name in err and "Traceback" not in err


@pytest.mark.slow
def test_hostile_level_records_are_recomputed_with_a_warning(tmp_path):
    run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2), running=Running(cache_dir=tmp_path))
    cache = LevelCache(tmp_path)
    grid = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2)).levels[0].grid
    from solvers_demo.fd.poisson import solve
    from mmsverify import Case, derive
    key = cache.key(Case(grid, derive("plate-poisson"), {"mode": "combined"}), solver_identity(solve))
    path = cache.path(key)
    data = json.loads(path.read_text())
    rng = random.Random(SEED + 1)
    refused = 0
    for i in range(CASES):
        path.write_text(_text(_mutate(data, rng)))
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            level = cache.load(key, grid)
        if level is None:
            assert caught and str(path) in str(caught[0].message), i
            refused += 1
        else:   # what is served is checked data: finite errors of the right types
            assert all(math.isfinite(e) and e >= 0 for d in level.errors.values() for e in d.values())
            assert math.isfinite(level.h) and isinstance(level.n_points, int)
    assert refused >= 0.8 * CASES
    # a record copied over another key is refused, not served as another level's result
    other = cache.path("0" * 64)
    other.write_text(json.dumps(data))
    with pytest.warns(RuntimeWarning, match="does not match"):
        assert cache.load("0" * 64, grid) is None


def test_a_record_of_another_user_or_writable_by_others_is_refused(tmp_path):
    run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2), running=Running(cache_dir=tmp_path))
    cache = LevelCache(tmp_path)
    record = next(Path(tmp_path, "levels").glob("*.json"))
    record.chmod(0o666)
    grid = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2)).levels[0].grid
    with pytest.warns(RuntimeWarning, match="writable by other users"):
        assert cache.load(record.stem, grid) is None

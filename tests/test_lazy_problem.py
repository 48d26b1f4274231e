"""A problem read back from the derivation cache builds its sympy tables only when asked.

A warm study (problem and evaluator code cached) needs names, hashes and
generated code, never the expressions; building them (sympy sums, and
sympy's deferred imports with the first one) was most of a warm start.
"""

import pickle
import subprocess
import sys

import pytest
import sympy as sp

from mmsverify.problem.record import load_problem


def _warm(tmp_path, monkeypatch, name="plate-poisson"):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path / "cache"))
    cold = load_problem(name)
    warm = load_problem(name)
    return cold, warm


def _lazy(problem):
    """True while the symbolic tables are held pickled (sympy ones, or symengine ones of the fast engine)."""
    return ("_symbolic" in problem.__dict__ or "_fast_blob" in problem.__dict__) and "fields" not in problem.__dict__


@pytest.mark.parametrize("name", ["plate-poisson", "compressible-2d"])   # fast engine, sympy engine
def test_cached_problem_answers_names_without_building(tmp_path, monkeypatch, name):
    cold, warm = _warm(tmp_path, monkeypatch, name)
    assert _lazy(warm)
    assert warm.field_names == cold.field_names
    assert warm.names("quantities") == tuple(cold.quantities)
    if name == "plate-poisson":
        assert warm.field_names == ("u",)
        assert warm.quantity_info("edge_slope") == ("flux", "y_min", "u")
    assert warm.parameter_constant("k", 1.0) == cold.parameter_constant("k", 1.0)
    assert warm.content_hash() == cold.content_hash()
    assert warm.parameters_hash() == cold.parameters_hash()
    assert _lazy(warm)          # still nothing built


def test_cached_problem_builds_the_same_tables_on_first_use(tmp_path, monkeypatch):
    cold, warm = _warm(tmp_path, monkeypatch, "kiln-conduction")
    for table in ("fields", "parameters", "equations", "fluxes", "bounds"):
        a, b = getattr(cold, table), getattr(warm, table)
        assert a.keys() == b.keys()
        for key in a:
            assert sp.srepr(a[key]) == sp.srepr(b[key]), (table, key)
    assert "_symbolic" not in warm.__dict__
    assert warm.parameter_constant("k") is None and warm.parameter_symbols("k") == ("t", "x", "y")
    assert warm.parameter_constant("rho_c") == 20.0 and warm.parameter_symbols("rho_c") == ()


def test_lazy_problem_pickles_and_renames(tmp_path, monkeypatch):
    cold, warm = _warm(tmp_path, monkeypatch)
    again = pickle.loads(pickle.dumps(warm))
    assert _lazy(again) and again.content_hash() == cold.content_hash()
    moved = warm.renamed("other-name", "elsewhere.toml")
    assert (moved.name, moved.source) == ("other-name", "elsewhere.toml")
    assert moved.content_hash() == cold.content_hash() and _lazy(moved)
    assert sp.srepr(moved.fields["u"]) == sp.srepr(cold.fields["u"])
    assert (warm.name, warm.source) == (cold.name, cold.source)


def test_unknown_attribute_is_still_an_attribute_error(tmp_path, monkeypatch):
    _, warm = _warm(tmp_path, monkeypatch)
    try:
        warm.no_such_thing
    except AttributeError as exc:
        assert "no_such_thing" in str(exc)
    else:
        raise AssertionError("expected AttributeError")


def test_warm_study_never_builds_sympy_expressions(tmp_path):
    """Second run of a study: no symbolic table is built and sympy.tensor is never imported."""
    script = (
        "import sys\n"
        "from mmsverify import run_study\n"
        "from mmsverify.problem.record import Problem\n"
        "built = []\n"
        "orig = Problem.__getattr__\n"
        "def spy(self, name):\n"
        "    if name in Problem._SYMBOLIC and ('_symbolic' in self.__dict__ or '_text' in self.__dict__):\n"
        "        built.append(name)\n"
        "    return orig(self, name)\n"
        "Problem.__getattr__ = spy\n"
        "r = run_study('plate-poisson', 'poisson2d', levels=4, base_cells=8)\n"
        "print(r.passed, built, 'sympy.tensor.tensor' in sys.modules)\n")
    env = {"MMSVERIFY_CACHE": str(tmp_path / "cache"), "PATH": "/usr/bin:/bin"}
    import os
    env = {**os.environ, **env}
    first = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, timeout=120)
    second = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, timeout=120)
    assert first.returncode == 0 and second.returncode == 0, first.stderr + second.stderr
    assert first.stdout.split()[0] == "True"
    assert second.stdout.strip() == "True [] False", second.stdout

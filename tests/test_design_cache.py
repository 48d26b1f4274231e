"""The design warnings `mmsverify run` prints come from the derivation cache when seen before."""

import argparse
from pathlib import Path

import pytest

import mmsverify.design.checks as design
from mmsverify import _diskcache
from mmsverify._designcache import _key, cached_design_warnings
from mmsverify.cli._run import print_design_warnings
from mmsverify.problem.record import load_problem, problem_from_text

DATA = Path(__file__).parent / "data"

# A smooth 1-D field between 0.5 and 1.5; only [bounds] differs between the variants below.
_BOUNDED = """name = "bounded"
[domain]
x = [0.0, 1.0]
[fields]
u = "1 + 0.5*sin(3*x)"
[operator]
kind = "diffusion"
[bounds]
u = {min = %s}
[order]
space = 2
"""


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path / "cache"))
    return tmp_path / "cache"


@pytest.fixture
def audits(monkeypatch):
    """Counts the runs of the design checks (design.audit)."""
    calls = []
    real = design.audit

    def counted(*a, **k):
        calls.append(a)
        return real(*a, **k)

    monkeypatch.setattr(design, "audit", counted)
    return calls


def design_warnings_uncached(problem, **kw):
    return design.design_warnings(problem, **kw)


def _refuse(*a, **k):
    raise AssertionError("the design checks ran again")


def test_second_call_reads_the_cache_and_gives_the_same_warnings(cache, audits, monkeypatch):
    p = load_problem(DATA / "quadratic-poisson.toml")
    first = cached_design_warnings(p)
    assert first == design_warnings_uncached(p) and len(first) == 1
    # the five-point Laplacian's error (h**2/12)(u_xxxx + u_yyyy) vanishes for a quadratic
    # LeVeque 2007, Finite Difference Methods for ODEs and PDEs, sec. 3.2 (from memory)
    assert first[0].startswith("design: every leading truncation-error derivative vanishes")
    assert len(audits) == 2                                   # the cached call and the reference
    monkeypatch.setattr(design, "audit", _refuse)
    assert cached_design_warnings(p) == first
    assert _diskcache.flush() and any(f.name.startswith("design-") for f in cache.iterdir())


def test_warm_problem_is_keyed_without_building_its_sympy_tables(cache, audits, monkeypatch):
    cold = load_problem("plate-poisson")
    expected = cached_design_warnings(cold)
    assert len(audits) == 1
    warm = load_problem("plate-poisson")        # read back from the derivation cache, tables packed
    assert "_fast_blob" in warm.__dict__ and "fields" not in warm.__dict__
    monkeypatch.setattr(design, "audit", _refuse)
    assert cached_design_warnings(warm) == expected
    assert "_fast_blob" in warm.__dict__ and "fields" not in warm.__dict__   # the hit built no expression


def test_bounds_hash_is_kept_with_the_cached_problem(cache):
    cold = load_problem(DATA / "narrow-dip.toml")
    warm = load_problem(DATA / "narrow-dip.toml")
    assert "_fast_blob" in warm.__dict__ and warm.bounds_hash() == cold.bounds_hash()
    assert "fields" not in warm.__dict__ and _key(warm, None, None) == _key(cold, None, None)


def test_changed_bounds_give_fresh_warnings(cache, audits):
    loose, tight = problem_from_text(_BOUNDED % 0), problem_from_text(_BOUNDED % 1.2)
    assert loose.content_hash() == tight.content_hash()      # bounds are not part of the content hash
    assert loose.bounds_hash() != tight.bounds_hash() and _key(loose, None, None) != _key(tight, None, None)
    assert cached_design_warnings(loose) == []
    warnings = cached_design_warnings(tight)
    assert warnings == design_warnings_uncached(tight)
    # 1 + 0.5 sin(3x) on [0, 1] has its least value 1 at x = 0 (sin >= 0 on [0, 3])  # common practice
    assert len(warnings) == 1 and "u reaches 1 at x=0" in warnings[0] and "1.2" in warnings[0]
    assert cached_design_warnings(loose) == [] and len(audits) == 3


def test_changed_fields_and_orders_give_fresh_warnings(cache, audits):
    p = load_problem(DATA / "quadratic-poisson.toml")
    assert len(cached_design_warnings(p)) == 1
    # order 0 would need the second derivatives, which a quadratic has  # common practice
    assert cached_design_warnings(p, formal_order=0) == design_warnings_uncached(p, formal_order=0) == []
    smooth = problem_from_text((DATA / "quadratic-poisson.toml").read_text().replace(
        '"1 + 0.5*x**2 - 0.3*y**2 + 0.2*x*y + 0.1*x"', '"1 + sin(x)*cos(y)"'))
    assert smooth.content_hash() != p.content_hash()
    assert cached_design_warnings(smooth) == []
    assert len(audits) == 4


def test_cache_off_runs_the_checks_every_time(monkeypatch, audits):
    monkeypatch.setenv("MMSVERIFY_CACHE", "off")
    p = load_problem(DATA / "quadratic-poisson.toml")
    assert cached_design_warnings(p) == cached_design_warnings(p)
    assert len(audits) == 2


def test_checks_that_could_not_run_are_not_kept(cache, monkeypatch):
    p = load_problem(DATA / "quadratic-poisson.toml")

    def broken(problem):
        raise RuntimeError("boom")

    monkeypatch.setattr(design, "model_from_problem", broken)
    assert cached_design_warnings(p) == ["design checks could not run: RuntimeError: boom"]
    monkeypatch.undo()
    assert cached_design_warnings(p)[0].startswith("design: every leading truncation-error derivative")


def test_an_entry_of_the_wrong_kind_is_recomputed(cache, audits):
    p = load_problem(DATA / "quadratic-poisson.toml")
    assert _diskcache.store("design", _key(p, None, None), {"not": "a list"})
    assert cached_design_warnings(p) == design_warnings_uncached(p)
    assert len(audits) == 2


def test_run_prints_the_cached_warnings(cache, capsys, monkeypatch):
    args = argparse.Namespace(problem=str(DATA / "quadratic-poisson.toml"), formal_order=None, mode="combined")
    pending = print_design_warnings(args)     # not cached yet: worked out beside the study (a child process)
    if pending is not None:
        pending.finish()
    first = capsys.readouterr().err
    assert first.startswith("warning: design: every leading truncation-error derivative vanishes")
    monkeypatch.setattr(design, "audit", _refuse)
    assert print_design_warnings(args) is None       # cached: printed at once, ahead of the study
    assert capsys.readouterr().err == first

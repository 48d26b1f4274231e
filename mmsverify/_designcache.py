"""Internal: the design warnings a study prints, kept in the derivation cache.

:func:`mmsverify.design.checks.design_warnings` samples and optimises over the
domain (0.04-0.07 s, and a first call in a process imports ``scipy.special``
for the generated NumPy code). Its result depends only on the problem and
the code, so ``mmsverify run`` keeps it in :mod:`mmsverify._diskcache`
(``MMSVERIFY_CACHE=off`` disables it) and a rerun of the same problem reads
a short list of texts instead. This module stays light: on a hit it imports
neither :mod:`mmsverify.design.checks` nor SciPy.

The key holds everything the checks read that
:meth:`~mmsverify.problem.record.Problem.content_hash` leaves out (operator,
custom equation text, constants, ``[bounds]``, ``[order]``), the formal
orders asked for, and a fingerprint of the design code (``design.py``,
``_designmodel.py``, this module) and of the NumPy and SciPy versions;
:func:`mmsverify._diskcache.make_key` adds the version of the package, of
sympy and of the modules that read and derive problems. The problem's name
is left out: no warning names the problem. Checks that could not run are
not kept, so a transient failure is not repeated from the cache.

The bounds enter through :meth:`~mmsverify.problem.record.Problem.bounds_hash`,
kept with a problem in the derivation cache, so a warm problem is keyed
without building its sympy tables.
"""

from functools import lru_cache
import hashlib
import importlib.util
import json
from pathlib import Path

from mmsverify import _diskcache

__all__ = ["cached_design_warnings", "cached_only"]

_KIND = "design"
_CODE = ("design/checks.py", "design/model.py", "_designcache.py")


@lru_cache(maxsize=1)
def _code_fingerprint():
    """Hash of the design code and of the NumPy and SciPy installations (no SciPy import)."""
    import numpy
    h = hashlib.sha256(f"numpy {numpy.__version__}".encode())
    here = Path(__file__).resolve().parent
    for name in _CODE:
        h.update((here / name).read_bytes())
    try:
        spec = importlib.util.find_spec("scipy")
        h.update(Path(spec.origin).with_name("version.py").read_bytes())  # version and git revision
    except (ImportError, AttributeError, TypeError, OSError):
        h.update(b"scipy version unknown")
    return h.hexdigest()


def _key(problem, formal_order, time_order):
    plain = json.dumps({
        "operator": problem.operator, "equation_text": problem.equation_text, "constants": problem.constants,
        "order": [problem.space_order, problem.time_order], "asked": [formal_order, time_order],
    }, sort_keys=True, default=repr)
    return _diskcache.make_key("design-warnings", _code_fingerprint(), problem.content_hash(),
                               problem.bounds_hash(), plain)


def _valid(entry):
    return isinstance(entry, list) and all(isinstance(w, str) for w in entry)


def cached_design_warnings(problem, formal_order=None, time_order=None):
    """:func:`~mmsverify.design.checks.design_warnings` of a Problem, read from the derivation cache when seen before.

    Parameters
    ----------
    problem : Problem
        Anything else is checked without the cache.
    formal_order, time_order : float, optional
        As for :func:`~mmsverify.design.checks.design_warnings`.

    Returns
    -------
    list of str
        The same texts :func:`~mmsverify.design.checks.design_warnings` returns.
    """
    key, hit = _lookup(problem, formal_order, time_order)
    if hit is not None:
        return hit
    from mmsverify.design.checks import _fast_warnings
    checked, warnings = _fast_warnings(problem, formal_order, time_order)
    if checked and key is not None:
        _diskcache.store(_KIND, key, warnings)
    return warnings


def cached_only(problem, formal_order=None, time_order=None):
    """The warnings of :func:`cached_design_warnings` when the cache has them, else None (nothing is checked)."""
    return _lookup(problem, formal_order, time_order)[1]


def _lookup(problem, formal_order, time_order):
    """``(key, warnings or None)``; key None when the cache is off or the problem cannot be keyed."""
    if _diskcache.cache_dir() is None:
        return None, None
    try:
        key = _key(problem, formal_order, time_order)
    except Exception:  # not a Problem, or a part that cannot be printed: check without the cache
        return None, None
    hit = _diskcache.load(_KIND, key)
    return key, (hit if _valid(hit) else None)

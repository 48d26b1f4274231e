"""Internal: the design warnings a study prints, kept in the derivation cache.

:func:`mmsverify.design.design_warnings` samples and optimises over the
domain (0.04-0.07 s, and a first call in a process imports ``scipy.special``
for the generated NumPy code). Its result depends only on the problem and
the code, so ``mmsverify run`` keeps it in :mod:`mmsverify._diskcache`
(``MMSVERIFY_CACHE=off`` disables it) and a rerun of the same problem reads
a short list of texts instead. This module stays light: on a hit it imports
neither :mod:`mmsverify.design` nor SciPy.

The key holds everything the checks read that
:meth:`~mmsverify.problem.Problem.content_hash` leaves out (operator,
custom equation text, constants, ``[bounds]``, ``[order]``), the formal
orders asked for, and a fingerprint of the design code (``design.py``,
``_designmodel.py``, this module) and of the NumPy and SciPy versions;
:func:`mmsverify._diskcache.make_key` adds the version of the package, of
sympy and of the modules that read and derive problems. The problem's name
is left out: no warning names the problem. Checks that could not run are
not kept, so a transient failure is not repeated from the cache.

The bounds are sympy expressions, and a problem read back from the
derivation cache builds its sympy tables only when asked (a warm study
never needs them). The key therefore takes the bounds from the hash of the
pickled tables the derivation cache keeps (for a problem just derived:
the record the cache was given), which contain them; pickling is not
promised to give the same bytes twice, so on a miss the printed bounds are
tried too (building the tables, which the checks need anyway) and the
result is kept under both keys. Only a real change of the problem misses
both.
"""

from functools import lru_cache
import hashlib
import importlib.util
import json
from pathlib import Path

from . import _diskcache

__all__ = ["cached_design_warnings"]

_KIND = "design"
_CODE = ("design.py", "_designmodel.py", "_designcache.py")


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


def _packed_tables(problem):
    """The pickled symbolic tables a problem has (or would have) in the derivation cache; None if unknown."""
    blob = problem.__dict__.get("_symbolic")  # read back from the cache, not built yet (problem.py)
    if blob is None and hasattr(problem, "_packed"):
        blob = problem._packed().__dict__.get("_symbolic")  # just derived: the record the cache got
    return blob if isinstance(blob, bytes) else None


def _keys(problem, formal_order, time_order):
    """Keys to look under, cheapest first: of the packed tables, then of the built bounds."""
    plain = json.dumps({
        "operator": problem.operator, "equation_text": problem.equation_text, "constants": problem.constants,
        "order": [problem.space_order, problem.time_order], "asked": [formal_order, time_order],
    }, sort_keys=True, default=repr)
    head = ("design-warnings", _code_fingerprint(), problem.content_hash(), plain)
    blob = _packed_tables(problem)
    if blob is not None:
        yield _diskcache.make_key(*head, "packed " + hashlib.sha256(blob).hexdigest())
    import sympy as sp
    bounds = {k: [sp.srepr(e), lo, hi] for k, (e, lo, hi) in problem.bounds.items()}  # builds the tables
    yield _diskcache.make_key(*head, "bounds " + json.dumps(bounds, sort_keys=True))


def _valid(entry):
    return isinstance(entry, list) and all(isinstance(w, str) for w in entry)


def cached_design_warnings(problem, formal_order=None, time_order=None):
    """:func:`~mmsverify.design.design_warnings` of a Problem, read from the derivation cache when seen before.

    Parameters
    ----------
    problem : Problem
        Anything else is checked without the cache.
    formal_order, time_order : float, optional
        As for :func:`~mmsverify.design.design_warnings`.

    Returns
    -------
    list of str
        The same texts :func:`~mmsverify.design.design_warnings` returns.
    """
    missed = []
    try:
        for key in _keys(problem, formal_order, time_order) if _diskcache.cache_dir() else ():
            hit = _diskcache.load(_KIND, key)
            if _valid(hit):
                for k in missed:  # a warm problem's first time: keep it under its packed key too
                    _diskcache.store(_KIND, k, hit)
                return hit
            missed.append(key)
    except Exception:  # not a Problem, or a part that cannot be printed: keep what keys there are
        pass
    from .design import _fast_warnings
    checked, warnings = _fast_warnings(problem, formal_order, time_order)
    if checked:
        for key in missed:
            _diskcache.store(_KIND, key, warnings)
    return warnings

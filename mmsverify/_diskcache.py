"""A small on-disk cache for derived problems and generated evaluator code.

Deriving the source terms of a large system (3-D compressible
Navier-Stokes) and generating its evaluator code takes seconds; reading the
result back takes a small fraction of that. Entries are pickles in one
directory:

* ``$MMSVERIFY_CACHE`` when set (``off``, ``0`` or an empty value disable
  the cache), else ``$XDG_CACHE_HOME/mmsverify``, else ``~/.cache/mmsverify``.
* Every key includes a fingerprint of the code that produces the entries:
  the package version, the sympy and Python versions and the text of the
  modules that read problems, build operators and generate code. Editing
  any of them, or upgrading sympy, starts a fresh set of entries.
* Writes go to a temporary file that is then renamed over the entry, so a
  reader never sees half a file, also with several processes at once. They
  happen on a background thread, so a slow disk (a network home folder)
  never holds up a study: :func:`store` takes a snapshot (the pickled
  bytes) and returns, :func:`load` sees entries still waiting, and
  :func:`flush` waits for them (run at interpreter exit, by each study
  level, and by a forked child before it exits).
* At most ``MAX_ENTRIES`` entries are kept; a write that finds more
  removes the least recently written ones, and temporaries over an hour
  old (left by a writer killed between writing and renaming).
* An entry that cannot be read (truncated, corrupt, from another version)
  is ignored, removed and rebuilt by the caller. An entry is only loaded
  when the current user owns it and nobody else can write it, since
  loading a pickle runs code.
"""

import atexit
from functools import lru_cache
import hashlib
import os
from pathlib import Path
import pickle
import sys
import tempfile
import threading
import time

__all__ = ["cache_dir", "fingerprint", "make_key", "load", "store", "flush", "clear"]

_OFF = ("", "0", "off", "no", "false", "none")
# Modules whose text decides what an entry holds.
_SOURCES = ("problem/record.py", "problem/operators.py", "problem/expr.py", "_fast.py", "problem/derive.py",
            "problem/evaluate.py", "_codegen_se.py",
            "_diskcache.py")
# Entries kept; older ones (by modification time) are removed when a write finds more.
MAX_ENTRIES = 256
# Age after which a temporary file is taken to be a killed writer's leftover.
STALE_SECONDS = 3600


def cache_dir():
    """The cache directory, or None when caching is switched off."""
    env = os.environ.get("MMSVERIFY_CACHE")
    if env is not None:
        return None if env.strip().lower() in _OFF else Path(env).expanduser()
    base = os.environ.get("XDG_CACHE_HOME")
    if not base:
        try:
            base = Path.home() / ".cache"
        except (RuntimeError, KeyError):     # no home directory: no cache
            return None
    return Path(base) / "mmsverify"


@lru_cache(maxsize=1)
def fingerprint():
    """Hash of everything besides the input that an entry depends on."""
    import sympy
    from mmsverify import __version__
    h = hashlib.sha256()
    h.update(f"mmsverify {__version__}; sympy {sympy.__version__}; python {sys.version_info[:2]}".encode())
    here = Path(__file__).resolve().parent
    for name in _SOURCES:
        try:
            h.update((here / name).read_bytes())
        except OSError:
            h.update(f"missing {name}".encode())
    return h.hexdigest()


def make_key(*parts):
    """Entry key from text parts and the code fingerprint."""
    h = hashlib.sha256(fingerprint().encode())
    for part in parts:
        data = part if isinstance(part, bytes) else str(part).encode()
        h.update(len(data).to_bytes(8, "little"))
        h.update(data)
    return h.hexdigest()[:40]


def _path(kind, key):
    root = cache_dir()
    return None if root is None else root / f"{kind}-{key}.pkl"


def _trusted(path):
    if not hasattr(os, "getuid"):
        return True
    st = path.stat()
    return st.st_uid == os.getuid() and not st.st_mode & 0o022


def load(kind, key):
    """The stored object, or None when absent, unreadable or caching is off."""
    path = _path(kind, key)
    if path is None:
        return None
    with _state.lock:
        waiting = _state.pending.get(path)
    if waiting is not None:     # stored by this process, not on disk yet
        return pickle.loads(waiting)
    try:
        if not _trusted(path):
            return None
        with open(path, "rb") as fh:
            return pickle.load(fh)
    except FileNotFoundError:
        return None
    except Exception:  # corrupt, truncated or stale: drop it, the caller rebuilds
        try:
            path.unlink()
        except OSError:
            pass
        return None


def store(kind, key, obj):
    """Queue an entry for writing (atomically, on the writer thread); False when caching is off or it cannot pickle.

    A disk that cannot take it (read-only, full) is found by the writer,
    which drops the entry quietly: a cache must never stop a study.
    """
    path = _path(kind, key)
    if path is None:
        return False
    try:
        data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception:
        return False
    with _state.lock:
        _state.pending[path] = data
        if _state.writer is None or not _state.writer.is_alive():
            _state.writer = threading.Thread(target=_write_pending, name="mmsverify-cache-writer", daemon=True)
            _state.writer.start()
        _state.changed.notify_all()
    return True


def flush(timeout=10.0):
    """Wait until every queued entry is written (or dropped); True when none is left waiting."""
    deadline = time.monotonic() + timeout
    with _state.lock:
        while _state.pending or _state.busy:
            left = deadline - time.monotonic()
            if left <= 0 or _state.writer is None or not _state.writer.is_alive():
                return not _state.pending
            _state.changed.wait(left)
    return True


class _State:
    """The queue of entries waiting for the writer thread (made anew in a forked child)."""

    def __init__(self):
        self.lock = threading.Lock()
        self.changed = threading.Condition(self.lock)
        self.pending = {}        # path -> pickled bytes; a later store of the same path replaces it
        self.busy = False        # the writer holds an entry it took off the queue
        self.writer = None


_state = _State()


def _write_pending():
    while True:
        with _state.lock:
            while not _state.pending:
                _state.changed.wait()
            path, data = next(iter(_state.pending.items()))
            _state.busy = True
        try:
            _write(path, data)
        finally:
            with _state.lock:
                if _state.pending.get(path) is data:
                    del _state.pending[path]
                _state.busy = False
                _state.changed.notify_all()


def _write(path, data):
    tmp = None
    try:
        path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem.split('-', 1)[0]}-", suffix=".tmp", dir=path.parent)
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
        _prune(path.parent)
    except Exception:  # a read-only or full disk must never stop a study
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass


def _after_fork_in_child():
    # the writer thread does not exist in a child; its lock may have been held at the fork
    global _state
    _state = _State()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_after_fork_in_child)
atexit.register(flush)


def _prune(root):
    try:
        now = time.time()
        for tmp in root.glob(".*.tmp"):        # a writer killed before its rename; live ones are seconds old
            if now - tmp.stat().st_mtime > STALE_SECONDS:
                tmp.unlink()
    except OSError:
        pass
    try:
        entries = list(root.glob("*.pkl"))
        if len(entries) <= MAX_ENTRIES:
            return
        entries.sort(key=lambda e: e.stat().st_mtime)
        for e in entries[: len(entries) - MAX_ENTRIES * 3 // 4]:
            e.unlink()
    except OSError:          # another process pruned at the same time
        pass


def clear():
    """Remove every entry; returns how many files were removed."""
    flush()
    root = cache_dir()
    if root is None or not root.is_dir():
        return 0
    n = 0
    for path in root.glob("*.pkl"):
        try:
            path.unlink()
            n += 1
        except OSError:
            pass
    return n

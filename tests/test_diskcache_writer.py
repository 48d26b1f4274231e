"""The derivation cache writes on a background thread (mmsverify._diskcache).

A slow disk must not hold up a study, and nothing stored may be lost: a
stored entry is visible to `load` at once, on disk after `flush`, at
normal interpreter exit, and from a forked child that flushes before it
ends. Writes stay atomic (temporary file renamed into place).
"""

import os
import pickle
import subprocess
import sys
import threading
import time

import pytest

from mmsverify import _diskcache


@pytest.fixture
def cache(tmp_path, monkeypatch):
    folder = tmp_path / "cache"
    monkeypatch.setenv("MMSVERIFY_CACHE", str(folder))
    yield folder
    _diskcache.flush()


def test_a_stored_entry_is_seen_at_once_and_on_disk_after_flush(cache):
    assert _diskcache.store("design", "a" * 40, ["w"])
    assert _diskcache.load("design", "a" * 40) == ["w"]          # waiting or written: the same answer
    assert _diskcache.flush()
    (entry,) = cache.glob("design-*.pkl")
    assert pickle.loads(entry.read_bytes()) == ["w"]
    assert not list(cache.glob(".*.tmp"))


def test_a_slow_disk_does_not_hold_up_the_caller(cache, monkeypatch):
    write = _diskcache._write
    release = threading.Event()

    def slow(path, data):
        release.wait(5)
        write(path, data)
    monkeypatch.setattr(_diskcache, "_write", slow)
    start = time.monotonic()
    assert _diskcache.store("problem", "b" * 40, {"x": 1})
    assert time.monotonic() - start < 1.0                          # returned while the write waits
    assert _diskcache.load("problem", "b" * 40) == {"x": 1}
    assert not list(cache.glob("problem-*.pkl"))
    release.set()
    assert _diskcache.flush() and list(cache.glob("problem-*.pkl"))


def test_the_newest_store_of_a_key_wins(cache):
    for i in range(5):
        _diskcache.store("programs", "c" * 40, {"n": i})
    assert _diskcache.flush()
    assert _diskcache.load("programs", "c" * 40) == {"n": 4}


def test_entries_are_written_at_interpreter_exit(cache):
    script = ("from mmsverify import _diskcache\n"
              "assert _diskcache.store('problem', 'd' * 40, {'y': 2})\n")
    res = subprocess.run([sys.executable, "-c", script], env={**os.environ, "MMSVERIFY_CACHE": str(cache)},
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert _diskcache.load("problem", "d" * 40) == {"y": 2}


@pytest.mark.filterwarnings("ignore:This process .* is multi-threaded:DeprecationWarning")  # Python 3.12+: forks with the writer running on purpose
def test_a_forked_child_starts_with_its_own_queue_and_flushes_what_it_stores(cache):
    _diskcache.store("design", "e" * 40, ["parent"])
    parent_queue = _diskcache._state
    pid = os.fork()
    if pid == 0:
        ok = False
        try:    # a queue of its own (the parent's lock may have been held at the fork), entries written
            ok = _diskcache._state is not parent_queue and not _diskcache._state.pending
            ok = _diskcache.store("design", "f" * 40, ["child"]) and _diskcache.flush() and ok
        finally:
            os._exit(0 if ok else 1)
    _, status = os.waitpid(pid, 0)
    assert os.WEXITSTATUS(status) == 0
    assert _diskcache.flush()
    assert _diskcache.load("design", "e" * 40) == ["parent"]
    assert _diskcache.load("design", "f" * 40) == ["child"]


def test_a_disk_that_refuses_the_write_is_quiet(cache, monkeypatch):
    def full(*args, **kwargs):
        raise OSError(28, "No space left on device")
    monkeypatch.setattr(_diskcache.tempfile, "mkstemp", full)
    assert _diskcache.store("problem", "g" * 40, {"z": 3})
    assert _diskcache.flush()                       # dropped, not waiting for ever
    monkeypatch.undo()
    assert not list(cache.glob("*.pkl")) and _diskcache.load("problem", "g" * 40) is None

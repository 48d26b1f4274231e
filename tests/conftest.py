"""Session settings for the test suite.

The suite runs with a derivation cache of its own (a new folder per
session, removed at the end), so no result depends on what earlier runs or
other versions left in ``~/.cache/mmsverify``; tests that need a cache in
a given state set ``MMSVERIFY_CACHE`` themselves.
"""

import os
import shutil
import tempfile


def pytest_configure(config):
    folder = tempfile.mkdtemp(prefix="mmsverify-test-cache-")
    config._mmsverify_saved_cache = os.environ.get("MMSVERIFY_CACHE")
    config._mmsverify_cache = folder
    os.environ["MMSVERIFY_CACHE"] = folder


def pytest_unconfigure(config):
    folder = getattr(config, "_mmsverify_cache", None)
    if folder is None:
        return
    saved = config._mmsverify_saved_cache
    if saved is None:
        os.environ.pop("MMSVERIFY_CACHE", None)
    else:
        os.environ["MMSVERIFY_CACHE"] = saved
    shutil.rmtree(folder, ignore_errors=True)

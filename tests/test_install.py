"""A normal (non-editable) install works: bundled problems and solvers ship in the package.

This is the README's main-job command run as a new user would: the package
is built into a wheel, installed into a fresh virtual environment without
``-e``, and ``mmsverify demo`` is run from an empty folder.
"""

import os
from pathlib import Path
import shutil
import subprocess
import sys
import venv

import pytest

REPO = Path(__file__).resolve().parent.parent


def _run(args, **kw):
    run = subprocess.run(args, capture_output=True, text=True, timeout=900, **kw)
    assert run.returncode == 0, f"{args} exited {run.returncode}:\n{run.stdout}\n{run.stderr}"
    return run


@pytest.mark.slow
def test_wheel_installed_without_editable_runs_the_readme_demo(tmp_path):
    # build from a copy, so the checkout gets no build/ or egg-info folders
    src = tmp_path / "src"
    shutil.copytree(REPO, src, ignore=shutil.ignore_patterns(".git", "build", "dist", "*.egg-info", "__pycache__",
                                                               ".pytest_cache", ".hypothesis", "tests"))
    wheels = tmp_path / "wheels"
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "--quiet", "-w", str(wheels),
          str(src)])
    (wheel,) = wheels.glob("mmsverify-*.whl")

    # the dependencies come from this interpreter's site-packages; mmsverify itself only from the wheel
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(system_site_packages=True, with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "MMSVERIFY_CACHE")}
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps", "--quiet", str(wheel)],
         env=env)

    empty = tmp_path / "empty"
    empty.mkdir()
    where = _run([str(python), "-c", "import mmsverify, solvers_demo; print(mmsverify.__file__); "
                  "print(solvers_demo.__file__)"], cwd=empty, env=env).stdout.split()
    assert all(Path(p).is_relative_to(env_dir) for p in where), f"not imported from the wheel: {where}"

    demo = subprocess.run([str(env_dir / "bin" / "mmsverify"), "demo"], capture_output=True, text=True, cwd=empty,
                          env=env, timeout=900)
    assert demo.returncode == 0, demo.stdout + demo.stderr
    assert "the seeded mistake is caught" in demo.stdout
    listed = _run([str(env_dir / "bin" / "mmsverify"), "list"], cwd=empty, env=env).stdout
    assert "plate-poisson" in listed and "poisson2d" in listed
    assert list(empty.iterdir()) == [], "the demo left files in the folder it ran from"

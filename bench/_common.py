"""Shared helpers of the bench scripts: machine description, timers, tables."""

import os
import platform
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def machine():
    """Short description of the machine: first lines of lscpu, Python, NumPy, sympy."""
    import numpy
    import sympy
    lines = []
    try:
        out = subprocess.run(["lscpu"], capture_output=True, text=True, timeout=10).stdout
        keep = ("Architecture", "CPU(s):", "Model name", "Thread(s) per core", "L2 cache", "L3 cache")
        lines = [" ".join(ln.split()) for ln in out.splitlines() if ln.strip().startswith(keep)]
    except (OSError, subprocess.SubprocessError):
        lines = [platform.processor() or platform.machine()]
    try:
        load = "load average %.2f %.2f %.2f" % os.getloadavg()
    except OSError:
        load = "load average unknown"
    lines.append(f"Python {platform.python_version()}, NumPy {numpy.__version__}, sympy {sympy.__version__}; {load}")
    return lines


class Timer:
    """Wall and CPU seconds of a block: ``with Timer() as t: ...; t.wall, t.cpu``."""

    def __enter__(self):
        self._w, self._c = time.perf_counter(), time.process_time()
        return self

    def __exit__(self, *exc):
        self.wall = time.perf_counter() - self._w
        self.cpu = time.process_time() - self._c
        return False


def table(header, rows):
    """A Markdown table as text."""
    out = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    out += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return "\n".join(out)

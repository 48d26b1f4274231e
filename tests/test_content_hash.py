"""The content hash: a hash of the canonical parsed input, the same in every process.

It keys the level cache and the baselines, so it must not depend on how
sympy prints, orders or simplifies, on which process read the file first,
or on the spelling of the file; it must change with the mathematics.
"""

import json
from pathlib import Path
import subprocess
import sys

import pytest

from mmsverify import bundled_problems, derive, load_problem, problem_from_text

ROOT = Path(__file__).resolve().parent.parent

# The value for the bundled plate-poisson.toml, worked out once from the canonical form of its tables.
# A change here is a change of every baseline and cache key: make it only on purpose (a new format).
PLATE_POISSON = "a9eeb1370ffd3cf0ed38f371b882afeda2ec8177e2295a2fa616d0d5d953ad8d"

_HASHES = """
import json, sys
from mmsverify import bundled_problems, derive, load_problem
warm = sys.argv[1] == "warm"
out = {}
for name in bundled_problems():
    if warm:        # this process has read, derived and evaluated the problem before
        first = derive(load_problem(name))
        first.exact(first.problem.field_names[0], *[0.5] * first.problem.dim,
                    **({"t": 0.0} if first.problem.transient else {}))
    out[name] = load_problem(name).content_hash()
print(json.dumps(out))
"""


def test_the_hash_of_a_bundled_problem_is_stated():
    assert load_problem("plate-poisson").content_hash() == PLATE_POISSON


def test_two_fresh_processes_warm_and_cold_give_the_same_hashes():
    runs = {}
    for state, seed in (("cold", "1"), ("warm", "2")):
        done = subprocess.run([sys.executable, "-c", _HASHES, state], capture_output=True, text=True, timeout=600,
                              cwd=ROOT, env={"PYTHONPATH": str(ROOT), "PYTHONHASHSEED": seed, "PATH": "/usr/bin:/bin"})
        assert done.returncode == 0, done.stderr
        runs[state] = json.loads(done.stdout)
    assert set(runs["cold"]) == set(bundled_problems())
    assert runs["cold"] == runs["warm"]
    assert runs["cold"]["plate-poisson"] == PLATE_POISSON
    assert len(set(runs["cold"].values())) == len(runs["cold"])     # different problems, different hashes


BASE = """name = "rod"
description = "a rod"
[domain]
x = [0.0, 1.0]
[fields]
u = "sin(0.5*pi*x) + x**2"
[operator]
kind = "diffusion"
k = "1 + x"
[order]
space = 2
"""


def test_spelling_names_and_orders_leave_the_hash_alone():
    base = problem_from_text(BASE).content_hash()
    same = [BASE.replace('"sin(0.5*pi*x) + x**2"', '"sin( 0.50 * pi * x )+(x**2)"'),
            BASE.replace('name = "rod"', 'name = "another"').replace("a rod", "another rod"),
            BASE.replace("space = 2", "space = 1\ntolerance = 0.3"),
            "# a comment\n" + BASE + "[study]\nlevels = 3\n"]
    for text in same:
        assert problem_from_text(text).content_hash() == base, text


@pytest.mark.parametrize("old, new", [('"1 + x"', '"1 + 2*x"'), ("0.5*pi", "0.25*pi"), ("[0.0, 1.0]", "[0.0, 2.0]"),
                                      ("space = 2", 'space = 2\n[boundaries]\nx_max = "neumann"')])
def test_the_mathematics_changes_the_hash(old, new):
    assert problem_from_text(BASE.replace(old, new)).content_hash() != problem_from_text(BASE).content_hash()


def test_a_default_parameter_written_out_gives_the_same_hash():
    plain = BASE.replace('k = "1 + x"\n', "")
    assert problem_from_text(plain).content_hash() == problem_from_text(plain.replace(
        'kind = "diffusion"', 'kind = "diffusion"\nk = 1')).content_hash()
    assert derive(problem_from_text(plain)).content_hash == problem_from_text(plain).content_hash()

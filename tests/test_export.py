"""Exported NumPy, C and Fortran code agrees with the derived expressions."""

import ctypes
import functools
import importlib.util
import shutil
import subprocess

import numpy as np
import pytest
import sympy as sp

import mmsverify
from mmsverify.cli import main
from mmsverify.problem.derive import compile_expression, derive, problem_from_text
from mmsverify.outputs.export import ExportError, export_code, function_names, write_export

# Round-off yardstick: double precision evaluation of the same formula in a
# different order differs by a few ulps of the largest term.  # common practice
RTOL = 1e-12
PROBLEMS = mmsverify.bundled_problems()


def _points(problem, n=64, seed=7):
    rng = np.random.default_rng(seed)
    lo = list(problem.lower) + ([problem.t_range[0]] if problem.transient else [])
    hi = list(problem.upper) + ([problem.t_range[1]] if problem.transient else [])
    return [rng.uniform(a, b, n) for a, b in zip(lo, hi)]


def _args(problem):
    return tuple(problem.coords) + ((problem.t,) if problem.transient else ())


@functools.lru_cache(maxsize=None)
def _reference_of(name):
    return _reference(mmsverify.load_problem(name))


def _reference(problem):
    """NumPy values of every expression and, per point, the size of its largest term."""
    pts = _points(problem)
    out = {}
    for key, expr in derive(problem).expressions().items():
        value = compile_expression(expr, _args(problem))(*pts)
        terms = sp.Add.make_args(sp.expand(expr, deep=False))
        term_values = sp.lambdify(_args(problem), list(terms), modules="numpy", cse=True)(*pts)
        scale = np.max([np.abs(np.broadcast_to(v, value.shape)) for v in term_values], axis=0)
        out[key] = (value, np.maximum(scale, np.abs(value)))
    return pts, out


def _check(problem, reference, evaluate):
    for key, (value, scale) in reference.items():
        got = evaluate(key)
        assert got.shape == value.shape
        err = np.abs(got - value)
        assert np.all(err <= RTOL * scale + 1e-300), \
            f"{problem.name} {key}: max relative difference {np.max(err / scale):.2e}"


def _compile(cmd, cwd):
    run = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True)
    assert run.returncode == 0, f"{' '.join(map(str, cmd))} failed:\n{run.stdout}\n{run.stderr}"


@pytest.mark.parametrize("name", PROBLEMS)
def test_python_export_matches_numpy(name, tmp_path):
    problem = mmsverify.load_problem(name)
    pts, ref = _reference_of(name)
    path = write_export(problem, "python", tmp_path / "gen.py")
    spec = importlib.util.spec_from_file_location("gen", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert mod.CONTENT_HASH == problem.content_hash()
    _check(problem, ref, lambda key: mod.FUNCTIONS[key](*pts))


@pytest.mark.skipif(shutil.which("gcc") is None, reason="needs the system C compiler gcc")
@pytest.mark.parametrize("name", PROBLEMS)
def test_c_export_compiles_and_matches_numpy(name, tmp_path):
    problem = mmsverify.load_problem(name)
    pts, ref = _reference_of(name)
    header = write_export(problem, "c", tmp_path / "mms.h")
    assert f"content hash sha256:{problem.content_hash()}" in header.read_text()
    names = function_names(problem, "c")
    argv = ", ".join(f"const double *a{i}" for i in range(len(pts)))
    call = ", ".join(f"a{i}[i]" for i in range(len(pts)))
    wrap = ['#include "mms.h"']
    for j, key in enumerate(ref):
        wrap.append(f"void eval_{j}(int n, {argv}, double *out) "
                    f"{{ for (int i = 0; i < n; ++i) out[i] = {names[key]}({call}); }}")
    (tmp_path / "wrap.c").write_text("\n".join(wrap) + "\n")
    _compile(["gcc", "-std=c99", "-pedantic", "-Wall", "-Wextra", "-Werror", "-O2", "-fPIC", "-shared",
              "wrap.c", "-o", "libmms.so", "-lm"], tmp_path)
    lib = ctypes.CDLL(str(tmp_path / "libmms.so"))
    _check(problem, ref, lambda key: _call(lib, f"eval_{list(ref).index(key)}", pts))


def _call(lib, symbol, pts):
    fn = getattr(lib, symbol)
    n = len(pts[0])
    out = np.zeros(n)
    arrays = [np.ascontiguousarray(p, dtype=np.float64) for p in pts]
    fn(ctypes.c_int(n), *[a.ctypes.data_as(ctypes.c_void_p) for a in arrays], out.ctypes.data_as(ctypes.c_void_p))
    return out


@pytest.mark.skipif(shutil.which("gfortran") is None, reason="needs gfortran (.ci/run installs it)")
@pytest.mark.parametrize("name", PROBLEMS)
def test_fortran_export_compiles_and_matches_numpy(name, tmp_path):
    problem = mmsverify.load_problem(name)
    pts, ref = _reference_of(name)
    source = write_export(problem, "fortran", tmp_path / "mms.f90").read_text()
    assert f"content hash sha256:{problem.content_hash()}" in source
    assert max(len(line) for line in source.splitlines()) <= 132  # free-form line limit, Fortran 90 standard
    module = source.split("\nmodule ")[1].split()[0]
    names = function_names(problem, "fortran")
    args = ", ".join(f"a{i}" for i in range(len(pts)))
    wrap = ["module mms_wrap", "  use iso_c_binding", f"  use {module}", "  implicit none", "contains"]
    for j, key in enumerate(ref):
        wrap += [f'  subroutine eval_{j}(n, {args}, out) bind(C, name="eval_{j}")',
                 "    integer(c_int), value :: n",
                 f"    real(c_double), intent(in) :: {', '.join(f'a{i}(n)' for i in range(len(pts)))}",
                 "    real(c_double), intent(out) :: out(n)",
                 f"    out = {names[key]}({args})",
                 f"  end subroutine eval_{j}"]
    wrap.append("end module mms_wrap")
    (tmp_path / "wrap.f90").write_text("\n".join(wrap) + "\n")
    _compile(["gfortran", "-std=f2008", "-Werror=line-truncation", "-O2", "-fPIC", "-shared",
              "mms.f90", "wrap.f90", "-o", "libmms.so"], tmp_path)
    lib = ctypes.CDLL(str(tmp_path / "libmms.so"))
    _check(problem, ref, lambda key: _call(lib, f"eval_{list(ref).index(key)}", pts))


def test_common_subexpressions_are_computed_once():
    # the source of plate-poisson repeats exp(x*y/2); the exported C computes it once
    code = export_code("plate-poisson", "c")
    body = code.split("mms_source_u(double x, double y)")[1].split("}")[0]
    assert body.count("exp(") == 1
    assert "const double cse0 = " in body and body.split("const double cse0 = ")[1].count("exp(") == 1


def test_every_language_carries_the_content_hash():
    problem = mmsverify.load_problem("slab-heat")
    for lang in ("python", "c", "fortran", "latex"):
        assert problem.content_hash() in export_code(problem, lang), lang


def test_latex_lists_every_expression():
    text = export_code("fin-diffusion", "latex")
    assert text.startswith("% Generated by mmsverify")
    for key in derive("fin-diffusion").expressions():
        assert r"\mathrm{" + key.replace("_", r"\_") + "}(x, y) &=" in text


def test_transient_functions_take_time_last():
    code = export_code("shock-burgers", "c")
    assert "static inline double mms_exact_u(double x, double t)" in code


def test_fortran_names_stay_unique_and_short():
    text = ('[domain]\nx = [0, 1]\n[fields]\nT = "x**3"\nt = "x**4"\na_very_long_field_name_for_testing = "x**5"\n'
            '[operator]\nkind = "custom"\n[operator.equations]\nT = "-lap(T)"\nt = "-lap(t)"\n'
            'a_very_long_field_name_for_testing = "-lap(a_very_long_field_name_for_testing)"')
    names = function_names(problem_from_text(text, "clash"), "fortran")
    assert len({n.lower() for n in names.values()}) == len(names)
    assert max(len(n) for n in names.values()) <= 31  # Fortran 90 name length limit


def test_unknown_language_and_key_are_refused():
    with pytest.raises(ExportError, match="choose one of"):
        export_code("plate-poisson", "cobol")
    with pytest.raises(ExportError, match="source_u"):
        export_code("plate-poisson", "c", keys=["source_q"])


def test_cli_writes_a_file(tmp_path, capsys):
    assert main(["export", "plate-poisson", "--lang", "fortran", "-o", str(tmp_path)]) == 0
    written = tmp_path / "mms_plate_poisson.f90"
    assert "module mms_plate_poisson" in written.read_text()
    assert main(["export", "plate-poisson", "--lang", "c", "--only", "source_u"]) == 0
    out = capsys.readouterr().out
    assert "mms_source_u" in out and "mms_exact_u(double" not in out

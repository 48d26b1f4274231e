"""Problem files: the format, and clear errors that name the file, line and field."""

import pytest

from mmsverify import ProblemError, bundled_problems, load_problem, problem_from_text
from mmsverify.problem.derive import derive_equations

BASE = '[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(pi*x)*y"\n'


@pytest.mark.parametrize("name", bundled_problems())
def test_every_bundled_problem_loads(name):
    p = load_problem(name)
    equations = derive_equations(p).equations
    assert p.fields and equations and p.dim in (1, 2, 3)
    assert set(equations) == set(p.fields)


def _err(text, source="case.toml"):
    with pytest.raises(ProblemError) as info:
        problem_from_text(text, source)
    return str(info.value)


def test_unknown_function_names_file_line_and_field():
    msg = _err('[domain]\nx = [0, 1]\n[fields]\nu = "sinh(x) + gamma(x)"\n')
    assert "case.toml, line 4, [fields] u" in msg and "gamma" in msg


def test_undefined_symbol_says_where_to_define_it():
    msg = _err('[domain]\nx = [0, 1]\n[fields]\nu = "sin(q*x)"\n')
    assert "line 4" in msg and "'q'" in msg and "constants" in msg


def test_field_missing_for_operator():
    msg = _err(BASE + '[operator]\nkind = "navier_stokes"\n')
    assert "needs fields u, v, p" in msg


def test_dimension_mismatch():
    msg = _err('[domain]\nx = [0, 1]\n[fields]\nu = "x"\n[operator]\nkind = "navier_stokes"\n')
    assert "navier_stokes works in (2,) dimensions" in msg and "line 6" in msg


def test_unknown_operator_lists_the_valid_ones():
    msg = _err(BASE + '[operator]\nkind = "maxwell"\n')
    assert "maxwell" in msg and "advection_diffusion" in msg and "custom" in msg


def test_time_used_without_time_interval():
    msg = _err('[domain]\nx = [0, 1]\n[fields]\nu = "x*t"\n')
    assert "add t = [t0, t1]" in msg


def test_malformed_toml_names_the_file():
    msg = _err('[domain\nx = [0, 1]\n', "broken.toml")
    assert msg.startswith("broken.toml: not valid TOML") and "line 1" in msg


def test_bad_boundary_kind_and_side():
    assert "kind must be one of" in _err(BASE + '[boundaries]\nx_min = "convective"\n')
    assert "unknown side" in _err(BASE + '[boundaries]\nz_max = "neumann"\n')


def test_parameter_unknown_for_operator():
    msg = _err(BASE + '[operator]\nkind = "poisson"\nkappa = 2\n')
    assert "not a parameter of poisson" in msg and "line 8" in msg


def test_custom_operator_needs_an_equation_per_field():
    msg = _err(BASE + '[operator]\nkind = "custom"\n[operator.equations]\n')
    assert "operator.equations" in msg


def test_missing_file_and_unknown_bundled_name():
    with pytest.raises(ProblemError, match="bundled problems: .*plate-poisson"):
        load_problem("no-such-problem")


def test_content_hash_ignores_name_but_not_mathematics():
    a = problem_from_text(BASE + 'name = "a"\n'.replace("name", "#"), "a")
    b = problem_from_text('name = "other"\n' + BASE, "b")
    c = problem_from_text(BASE.replace("y\"", "y**2\""), "c")
    assert a.content_hash() == b.content_hash() != c.content_hash()


def test_custom_operator_with_field_dependent_parameter():
    p = load_problem("reactor-custom")
    assert p.operator == "custom" and "k" in p.parameters
    assert p.boundaries[("u", "x_max")] == "neumann"

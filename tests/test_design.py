"""Design checks of manufactured solutions: terms, truncation error, admissibility, balancing."""

import pytest

from mmsverify.errors import ProblemError
from mmsverify.problem import problem_from_text

_HEAD = '[domain]\nx = [0, 1]\n[fields]\nu = "1 + x"\n[bounds]\n'


def test_bounds_table_is_read_with_fields_parameters_and_derived_quantities():
    p = problem_from_text(_HEAD + 'u = {min = 0}\nk = [0.5, 2]\nPe = {expr = "u/k", max = 3}\n')
    expr, lo, hi = p.bounds["u"]
    assert (str(expr), lo, hi) == ("x + 1", 0.0, None)
    assert p.bounds["k"][1:] == (0.5, 2.0)
    assert str(p.bounds["Pe"][0]) == "x + 1" and p.bounds["Pe"][2] == 3.0


@pytest.mark.parametrize("line, message", [
    ("u = {mn = 0}", "unknown entries ['mn']"),
    ("u = [1]", "expected [min, max]"),
    ("w = {min = 0}", "names no field or operator parameter"),
    ("u = {min = 2, max = 1}", "must exceed min"),
    ("u = {}", "give min, max or both"),
    ('u = {expr = "x", min = 0}', "needs a new identifier"),
    ('Q = {expr = "zz", min = 0}', "unknown name 'zz'"),
])
def test_bad_bounds_name_the_file_line_and_entry(line, message):
    with pytest.raises(ProblemError) as err:
        problem_from_text(_HEAD + line + "\n", "bad.toml")
    assert "bad.toml, line 6, [bounds]" in str(err.value) and message in str(err.value)


@pytest.mark.parametrize("name", ["diffusion", "poisson", "advection_diffusion", "burgers", "navier_stokes"])
@pytest.mark.parametrize("transient", [False, True])
def test_operator_terms_add_up_to_the_residuals(name, transient):
    # the split must lose nothing: sum of terms == residual, symbolically  # common practice
    import sympy as sp
    from mmsverify.operators import get_operator
    op = get_operator(name)
    x, y, t = sp.symbols("x y t")
    X = (x,) if name == "burgers" else (x, y)
    q = {f: sp.Function(f)(*X, t) for f in (op.fields or ("u",))}
    par = {k: sp.Function(k)(*X, t) for k in op.parameters}     # coefficients may vary
    tt = t if transient else None
    res, terms = op.residuals(q, X, tt, par), op.terms(q, X, tt, par)
    assert set(res) == set(terms)
    for eq in res:
        assert sp.simplify(res[eq] - sp.Add(*terms[eq].values())) == 0
        assert ("time" in terms[eq]) == (transient and not (name == "navier_stokes" and eq == "p"))

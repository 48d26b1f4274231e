"""Design checks of manufactured solutions: terms, truncation error, admissibility, balancing."""

import pytest

from mmsverify.errors import ProblemError
from mmsverify.problem.derive import problem_from_text

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


@pytest.mark.parametrize("name", ["diffusion", "poisson", "advection_diffusion", "burgers", "navier_stokes",
                                  "navier_stokes_compressible"])
@pytest.mark.parametrize("transient", [False, True])
def test_operator_terms_add_up_to_the_residuals(name, transient):
    # the split must lose nothing: sum of terms == residual, symbolically  # common practice
    import sympy as sp
    from mmsverify.problem.operators import get_operator
    op = get_operator(name)
    x, y, t = sp.symbols("x y t")
    X = (x,) if name == "burgers" else (x, y)
    q = {f: sp.Function(f)(*X, t) for f in (op.required_fields(len(X)) or ("u",))}
    par = {k: sp.Function(k)(*X, t) for k in op.parameters}     # coefficients may vary
    tt = t if transient else None
    res, terms = op.residuals(q, X, tt, par), op.terms(q, X, tt, par)
    assert set(res) == set(terms)
    for eq in res:
        assert sp.simplify(res[eq] - sp.Add(*terms[eq].values())) == 0
        assert ("time" in terms[eq]) == (transient and not (name == "navier_stokes" and eq == "p"))


# -- designs that must be flagged ---------------------------------------------------------
import numpy as np

from mmsverify.problem.derive import derive, load_problem
from mmsverify.design.checks import (admissibility_check, audit, design_warnings, term_sizes, truncation_check)
from mmsverify.problem.record import bundled_problems

DATA = __import__("pathlib").Path(__file__).parent / "data"


def _five_point_residual(problem, n=8):
    """max |(-lap_h u_exact) - f| on interior nodes of an n x n grid of the unit square."""
    mms = derive(problem)
    h = 1.0 / n
    x, y = np.meshgrid(np.linspace(0, 1, n + 1), np.linspace(0, 1, n + 1), indexing="ij")
    u = mms.exact("u", x, y)
    lap = (u[2:, 1:-1] + u[:-2, 1:-1] + u[1:-1, 2:] + u[1:-1, :-2] - 4 * u[1:-1, 1:-1]) / h**2
    return float(np.max(np.abs(-lap - mms.source("u", x[1:-1, 1:-1], y[1:-1, 1:-1]))))


def test_quadratic_field_for_second_order_laplacian_is_flagged_exact():
    # The five-point Laplacian has truncation error (h**2/12)(u_xxxx + u_yyyy) + O(h**4)
    # (LeVeque 2007, Finite Difference Methods for ODEs and PDEs, sec. 2.5 and 3.2; section
    # numbers from memory): zero for a quadratic, so order 2 cannot be observed.
    p = load_problem(DATA / "quadratic-poisson.toml")
    report = truncation_check(p)
    assert report.space_status == "exact" and not report.ok
    assert {i.label for i in report.items if i.vanishes} == {"d4u/dx4", "d4u/dy4"}
    assert "cannot be observed" in report.warnings[0]
    # ... and it really is exact: the discrete operator reproduces the source to round-off,
    assert _five_point_residual(p) < 1e-10
    # while the bundled trigonometric-exponential design leaves an O(h**2) residual and passes.
    good = load_problem("plate-poisson")
    assert _five_point_residual(good) > 1e-3 and truncation_check(good).ok


def test_cubic_in_one_direction_is_flagged_partially():
    p = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(2*x) + y**3"\n')
    report = truncation_check(p)
    assert report.space_status == "partial"
    assert [w.split(":")[0] for w in report.warnings] == ["d4u/dy4 = 0"]
    assert truncation_check(p, formal_order=1).ok         # a first-order scheme needs u_yyy only


def test_time_order_is_checked_against_the_time_dependence():
    text = '[domain]\nx = [0, 1]\nt = [0, 1]\n[fields]\nu = "sin(2*x)*(1 + t)"\n[order]\ntime = 1\n'
    report = truncation_check(problem_from_text(text))
    assert report.time_status == "exact" and report.space_status == "ok"
    assert "time integrator of order 1" in report.warnings[0]
    assert truncation_check(problem_from_text(text.replace("(1 + t)", "exp(-t)"))).ok


def test_field_that_switches_off_convection_is_flagged_with_the_reason():
    a = audit(DATA / "parallel-flow.toml", starts=0)
    sizes = {(t.equation, t.term): t for t in a.terms.terms}
    conv = sizes[("u", "convection")]
    assert conv.status == "zero" and sizes[("u", "viscous")].ok and sizes[("u", "pressure")].ok
    assert "v is 0" in conv.reasons and "du/dx = 0 (u does not vary in x)" in conv.reasons
    assert any(w.startswith("equation u, term convection: vanishes everywhere") for w in a.warnings)
    assert any(w.startswith("equation v: every term vanishes") for w in a.warnings)


def test_advection_switched_off_by_the_field_and_by_the_coefficient():
    text = ('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nc = "1 + sin(2*y)"\n'
            '[operator]\nkind = "advection_diffusion"\nk = 0.1\nax = 1.0\nay = 0.0\n')
    report = term_sizes(problem_from_text(text))
    adv = next(t for t in report.terms if t.term == "advection")
    assert adv.status == "zero"
    assert set(adv.reasons) == {"dc/dx = 0 (c does not vary in x)", "coefficient ay is 0"}
    fixed = term_sizes(problem_from_text(text.replace('"1 + sin(2*y)"', '"1 + sin(2*y)*cos(x)"')
                                         .replace("ay = 0.0", "ay = 0.5")))
    assert fixed.ok


def test_term_switched_off_by_a_zero_coefficient_is_noted_not_warned():
    # pure advection (k = 0) is a legitimate problem: the diffusion term is absent, not badly designed
    text = ('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nc = "1 + sin(2*x)*cos(y)"\n'
            '[operator]\nkind = "advection_diffusion"\nk = 0\nax = 1.0\nay = 0.5\n')
    a = audit(problem_from_text(text), starts=0)
    diffusion = next(t for t in a.terms.terms if t.term == "diffusion")
    assert diffusion.status == "off" and diffusion.reasons == ("coefficient k is 0",)
    assert a.ok and "term diffusion is switched off" in str(a.terms)
    # a diffusivity may be zero (0 <= k holds for the constant: nothing to check); a conductivity may not
    assert not any(c.name == "k" for c in a.admissibility.checks)
    text = '[domain]\nx = [0, 1]\n[fields]\nu = "1 + sin(2*x)"\n[operator]\nkind = "diffusion"\nk = 0\n'
    k = next(c for c in audit(problem_from_text(text), starts=0).admissibility.checks if c.name == "k")
    assert not k.ok and k.rule == "0 < k"


def test_small_term_is_flagged_and_the_threshold_is_respected():
    report = term_sizes(DATA / "weak-diffusion.toml")
    diff = next(t for t in report.terms if t.term == "diffusion")
    assert diff.status == "small" and 0.003 < diff.relative < 0.004
    assert "Raise it at least 2.9x" in diff.hint and "coefficient(s) k" in diff.hint
    assert term_sizes(DATA / "weak-diffusion.toml", threshold=0.001).ok


def test_custom_operator_terms_are_the_terms_written_in_the_file():
    report = term_sizes("reactor-custom")
    assert [t.term for t in report.terms] == ["-d(k*d(u, x), x)", "r*u**3"] and report.ok


def test_density_that_goes_negative_late_in_time_is_flagged():
    report = admissibility_check(DATA / "negative-density.toml")
    rho = next(c for c in report.checks if c.name == "rho")
    # min over x of 1 + 0.8 sin(.)(1 + 0.6 sin(1.5 t)) is 1 - 0.8 (1 + 0.6 sin 1.5) at t = 1
    assert not rho.ok and rho.low == pytest.approx(1 - 0.8 * (1 + 0.6 * np.sin(1.5)), abs=1e-6)
    assert rho.at_low[1] == pytest.approx(1.0)
    mach = next(c for c in report.checks if c.name == "Mach")
    assert mach.ok and mach.high == pytest.approx(0.7 / np.sqrt(2.0), rel=1e-6)
    assert report.warnings[0].startswith("rho reaches -0.27") and "t=1 " in report.warnings[0]


def test_optimisation_finds_a_violation_between_sample_points():
    sampled = admissibility_check(DATA / "narrow-dip.toml", starts=0)
    assert sampled.ok                                        # 65 samples miss the dip
    found = admissibility_check(DATA / "narrow-dip.toml")
    t = next(c for c in found.checks if c.name == "T")
    assert not t.ok and t.low < -0.08 and t.sampled_low > 0.4
    assert t.at_low[0] == pytest.approx(0.4937, abs=2e-3)


def test_operator_coefficients_must_be_positive_without_any_bounds_table():
    text = '[domain]\nx = [0, 1]\n[fields]\nu = "sin(2*x)"\n[operator]\nkind = "diffusion"\nk = "1 - 2*x"\n'
    report = admissibility_check(problem_from_text(text))
    k = next(c for c in report.checks if c.name == "k")
    assert k.implied and not k.ok and k.low == pytest.approx(-1.0)
    assert "required by the operator" in report.warnings[0]


# -- designs that must pass ---------------------------------------------------------------
_CONSTANT = "a constant coefficient leaves the face-coefficient part of the scheme unexercised"
_FLAGGED = {  # bundled designs with a real finding, kept visible until their owners change them
    "slab-heat": _CONSTANT, "estuary-advection": _CONSTANT, "river-advection": _CONSTANT,
    "compressible-2d": _CONSTANT + " (constant viscosity and Prandtl number)",
    "compressible-3d": _CONSTANT + " (constant viscosity and Prandtl number)",
}


@pytest.mark.parametrize("name", [pytest.param(n, marks=pytest.mark.xfail(strict=True, reason=_FLAGGED[n]))
                                  if n in _FLAGGED else n for n in bundled_problems()])
def test_bundled_problems_pass_every_design_check(name):
    assert design_warnings(load_problem(name)) == []


def test_roy_subsonic_navier_stokes_design_passes_with_physical_bounds():
    # Roy, Nelson, Smith & Ober 2004, Int. J. Numer. Meth. Fluids 44:599, subsonic case (constants as
    # bundled in mmsverify/problem/bundled/compressible-2d.toml; see its header for their provenance). Subsonic means
    # Mach < 1 everywhere; density and pressure positive.
    from mmsverify.problem.record import PROBLEM_DIR
    text = (PROBLEM_DIR / "compressible-2d.toml").read_text() + (
        '\n[bounds]\nMach = {expr = "sqrt(u**2 + v**2)/sqrt(gamma*p/rho)", max = 1}\n'
        'T = {expr = "p/(287*rho)", min = 100, max = 600}\n')
    a = audit(problem_from_text(text), starts=4)
    # the published design holds viscosity and Prandtl number constant: only that is reported
    assert a.terms.ok and a.truncation.ok and a.admissibility.ok, a.warnings
    assert {f.name for f in a.coverage.findings} == {"mu", "Pr"}
    checks = {c.name: c for c in a.admissibility.checks}
    assert 0.2 < checks["Mach"].high < 0.45 and checks["rho"].low > 0.7 and checks["p"].low > 5e4
    terms = {(t.equation, t.term): t.relative for t in a.terms.terms}
    assert set(terms) >= {("p", "conduction"), ("p", "viscous"), ("u", "viscous"), ("u", "convection")}


@pytest.mark.parametrize("name", bundled_problems())
def test_structured_terms_add_up_to_the_derived_sources(name):
    from mmsverify.design.model import model_from_problem, sample_points
    from mmsverify.problem.derive import compile_expression, derive_equations
    p = load_problem(name)
    m = model_from_problem(p)
    pts = sample_points(m, {1: 9, 2: 5, 3: 3}[p.dim], times=3)
    values = m.compile([t.expr for t in m.terms])(*pts)
    for eq, terms in m.equations().items():
        total = sum(values[m.terms.index(t)] for t in terms)
        ref = compile_expression(derive_equations(p).equations[eq], m.variables)(*pts)
        assert np.allclose(total, ref, rtol=1e-10, atol=1e-10 * np.max(np.abs(ref)))


def test_design_warnings_are_prefixed_and_never_raise(monkeypatch):
    warnings = design_warnings(load_problem(DATA / "quadratic-poisson.toml"))
    assert len(warnings) == 1 and warnings[0].startswith("design: every leading truncation-error derivative")
    import mmsverify.design.checks as design

    def broken(problem):
        raise RuntimeError("boom")

    monkeypatch.setattr(design, "model_from_problem", broken)
    assert design_warnings(load_problem("plate-poisson")) == ["design checks could not run: RuntimeError: boom"]


def test_audit_text_lists_every_section():
    text = str(audit(DATA / "parallel-flow.toml", starts=0))
    assert text.startswith("design has ") and "term sizes of parallel-flow" in text
    assert "leading truncation-error derivatives" in text and "physical admissibility" in text


# -- balancing ------------------------------------------------------------------------------
from mmsverify.design.balance import balance


def _with_constants(text, values):
    for k, v in values.items():
        text = __import__("re").sub(rf"(?m)^{k} = .*$", f"{k} = {v!r}", text)
    return text


def test_balancing_lifts_a_weak_term_within_the_stated_iterations():
    r = balance(DATA / "weak-diffusion.toml", iterations=40)
    assert r.iterations <= 40 and r.tuned == ("A", "kw")
    assert r.spread_before["c"] > 250 and r.spread_after["c"] < r.spread_before["c"] / 3
    assert r.after["kw"] > r.before["kw"] and r.admissible_after and not r.warnings_after and r.improved
    # ... but no wavier than the coarsest grid (8 cells) resolves: kw pi h <= 1, about 6 points per wavelength
    assert r.after["kw"] * np.pi / 8 <= 1.01
    # the suggested constants, written back into the file, pass the term check
    text = _with_constants((DATA / "weak-diffusion.toml").read_text(), r.after)
    assert term_sizes(problem_from_text(text)).ok
    assert "kw = " in r.constants_toml() and "40 iterations" in str(r)


def test_balancing_restores_admissibility():
    text = _with_constants((DATA / "weak-diffusion.toml").read_text(), {"A": 1.3, "kw": 5.0})
    assert not admissibility_check(problem_from_text(text)).ok          # c = 1 + 1.3 sin sin < 0
    r = balance(text, iterations=60)
    assert not r.admissible_before and r.admissible_after
    assert abs(r.after["A"]) < 1.0
    assert admissibility_check(problem_from_text(_with_constants(text, r.after))).ok


def test_balancing_only_tunes_what_it_is_told_and_refuses_unknown_constants():
    r = balance(DATA / "weak-diffusion.toml", tune=["A"], iterations=10)
    assert r.tuned == ("A",) and r.after["kw"] == r.before["kw"] and r.iterations <= 10
    with pytest.raises(ProblemError, match=r"cannot tune \['nu'\]"):
        balance(DATA / "weak-diffusion.toml", tune=["nu"])
    with pytest.raises(ProblemError, match="iterations must be at least 1"):
        balance(DATA / "weak-diffusion.toml", iterations=0)
    with pytest.raises(ProblemError, match="cannot read the problem file"):
        balance("no-such-problem.toml")


# -- command line ---------------------------------------------------------------------------
from mmsverify.cli import main


def test_audit_command_exit_codes_and_output(capsys):
    assert main(["audit", "plate-poisson", "--starts", "0"]) == 0
    assert capsys.readouterr().out.startswith("design OK: plate-poisson")
    assert main(["audit", str(DATA / "parallel-flow.toml"), "--starts", "0"]) == 1
    assert "!! equation u, term convection: vanishes everywhere" in capsys.readouterr().out
    assert main(["audit", str(DATA / "no-such.toml")]) == 2
    assert "no such problem file" in capsys.readouterr().err


def test_audit_command_balances_on_request(capsys):
    code = main(["audit", str(DATA / "weak-diffusion.toml"), "--balance", "--iterations", "20", "--tune", "kw",
                 "--starts", "2"])
    out = capsys.readouterr().out
    assert code == 1 and "of at most 20 iterations" in out and "tuning kw" in out
    table = out.split("suggested constants (paste into the problem file):\n")[1].splitlines()
    assert table[0] == "[constants]" and table[1] == "A = 0.4" and table[2].startswith("kw = ")
    assert float(table[2].split("=")[1]) > 0.5        # tuned up towards comparable terms


# -- coverage: what the terms need and the solution leaves at zero -----------------------------
from mmsverify.design.checks import coverage_check

_DIFFUSION = '[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "{u}"\n[operator]\nkind = "diffusion"\nk = {k}\n'


def test_a_constant_coefficient_is_reported_with_a_varying_one_to_use():
    # -d/dx(k du/dx) = -k u_xx - k_x u_x: with k constant the k_x u_x part, where face coefficients of a
    # conservative scheme enter, is never exercised (Salari & Knupp 2000, SAND2000-1444, sec. 3; from memory)
    p = problem_from_text(_DIFFUSION.format(u="sin(x)*cos(y)", k="0.5"))
    report = coverage_check(p)
    (f,) = report.findings
    assert f.name == "k" and f.derivatives == ("dk/dx", "dk/dy") and "k = 0.5 is constant" in f.reason
    assert 'k = "0.5*(1 + 0.25*sin(x + y + 0.3))"' in f.suggestion
    assert not audit(p, starts=0).ok and any("dk/dx" in w for w in design_warnings(p))
    # the suggestion, followed, exercises it
    assert coverage_check(problem_from_text(_DIFFUSION.format(u="sin(x)*cos(y)",
                                                               k='"0.5*(1 + 0.25*sin(x + y + 0.3))"'))).ok


def test_a_coefficient_varying_in_one_direction_only_is_reported():
    (f,) = coverage_check(problem_from_text(_DIFFUSION.format(u="sin(x)*cos(y)", k='"1 + x/2"'))).findings
    assert f.derivatives == ("dk/dy",) and "k does not vary in y" in f.reason


def test_a_field_derivative_a_term_needs_is_reported():
    # advection a.grad(u) with a = (1, 0.4): u that does not vary in y leaves the ay*u_y part unexercised
    text = ('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nc = "sin(x)"\n[operator]\n'
            'kind = "advection_diffusion"\nk = "1 + 0.2*x*y"\nax = 1.0\nay = 0.4\n')
    findings = {f.name: f for f in coverage_check(problem_from_text(text)).findings}
    assert "dc/dy" in findings["c"].derivatives and "c does not vary in y" in findings["c"].reason
    assert "0.1*sin(2*y + 0.3)" in findings["c"].suggestion


def test_operator_defaults_and_switched_off_terms_are_not_reported():
    # Poisson's k = 1 is the operator's own default; k = 0 switches diffusion off on purpose
    assert coverage_check(load_problem("plate-poisson")).ok
    assert coverage_check(load_problem("plume-advection")).ok
    assert coverage_check(load_problem("fin-diffusion")).ok

"""Parameterised field families: texts that load, designs that pass, divergence-free velocities."""

import pytest
import sympy as sp

from mmsverify.design.checks import audit, truncation_check
from mmsverify.errors import ProblemError
from mmsverify.design.families import (SCALAR_FAMILIES, divergence, is_divergence_free, scalar_field,
                                solenoidal_velocity, vector_field)
from mmsverify.problem.derive import derive, problem_from_text


@pytest.mark.parametrize("kind", sorted(SCALAR_FAMILIES))
@pytest.mark.parametrize("dim", [1, 2, 3])
@pytest.mark.parametrize("transient", [False, True])
def test_every_family_with_its_defaults_is_a_sound_diffusion_design(kind, dim, transient):
    fs = scalar_field(kind, "T", dim, transient)
    p = problem_from_text(fs.problem_text(f"{kind}-{dim}d", "diffusion"), "<family>")
    assert p.fields["T"] == fs.expressions()["T"]
    a = audit(p, starts=0, per_axis={1: 33, 2: 11, 3: 5}[dim])
    assert a.ok, a.warnings


def test_trig_family_passes_for_the_advective_and_flow_operators():
    fs = scalar_field("trig", "c", 2)
    # a varying k: a constant one leaves dk/dx of the diffusion term unexercised (coverage_check)
    adv = fs.problem_text("adv", "advection_diffusion",
                          parameters={"k": "0.1*(1 + 0.25*sin(x + y + 0.3))", "ax": 1.0, "ay": 0.5})
    assert audit(problem_from_text(adv), starts=0).ok
    flow = vector_field("trig", ("u", "v"), 2) + scalar_field("trig", "p", 2)
    ns = flow.problem_text("ns", "navier_stokes", parameters={"nu": 0.1})
    assert audit(problem_from_text(ns), starts=0).ok
    burgers = scalar_field("trig", "u", 1, transient=True).problem_text("b", "burgers", parameters={"nu": 0.1})
    assert audit(problem_from_text(burgers), starts=0).ok


def test_low_degree_polynomial_is_exact_for_a_second_order_laplacian():
    # u_xxxx = 0 for degree 3: the five-point scheme is exact  # LeVeque 2007, sec. 2.5 (from memory)
    cubic = scalar_field("polynomial", "u", 2, degree=3)
    report = truncation_check(problem_from_text(cubic.problem_text("cubic", "poisson")))
    assert report.space_status == "exact"
    quartic = scalar_field("polynomial", "u", 2, degree=4)
    assert truncation_check(problem_from_text(quartic.problem_text("quartic", "poisson"))).ok


@pytest.mark.parametrize("dim", [2, 3])
@pytest.mark.parametrize("transient", [False, True])
def test_solenoidal_family_is_divergence_free_exactly(dim, transient):
    fs = solenoidal_velocity(dim, transient=transient)
    coords = [fs.symbols()[a] for a in fs.axes]
    # with the constants kept as symbols, the divergence simplifies to 0 for every value
    exprs = fs.expressions(keep_constants=True)
    assert sp.simplify(divergence(exprs, coords)) == 0 and is_divergence_free(exprs, coords)
    assert is_divergence_free(fs.expressions(exact=True), coords)
    # and it is not constant: every component varies in every direction
    for c in exprs.values():
        assert all(sp.diff(c, x) != 0 for x in coords)


def test_componentwise_vector_family_is_not_divergence_free():
    fs = vector_field("trig", dim=2)
    coords = [fs.symbols()[a] for a in fs.axes]
    assert not is_divergence_free(fs.expressions(), coords)
    x, y = sp.symbols("x y")
    assert divergence([x, y], [x, y]) == 2


def test_divergence_free_flow_leaves_no_mass_source_but_exercises_both_derivatives():
    flow = solenoidal_velocity(2) + scalar_field("trig", "p", 2)
    p = problem_from_text(flow.problem_text("vortex", "navier_stokes", parameters={"nu": 0.05}))
    assert sp.simplify(derive(p).equations["p"]) == 0
    a = audit(p, starts=0)
    assert a.ok, a.warnings            # continuity_x and continuity_y are each non-zero


def test_constants_are_named_after_the_field_and_can_be_set():
    fs = scalar_field("trig", "rho", 1, rho_0=2.0)
    assert fs.fields["rho"] == "rho_0 + (rho_ax*sin(rho_kx*pi*x + rho_px))"
    assert fs.constants["rho_0"] == 2.0
    assert "rho_0 = 2.0" in fs.toml() and '[fields]\nrho = "rho_0 + ' in fs.toml()
    with pytest.raises(ProblemError, match="no constant"):
        scalar_field("trig", "u", 1, v_0=1.0)


@pytest.mark.parametrize("call, message", [
    (lambda: scalar_field("wavelet"), "unknown field family 'wavelet'"),
    (lambda: scalar_field("trig", "x"), "must be a new identifier"),
    (lambda: scalar_field("trig", "u", 4), "1, 2 and 3 space dimensions"),
    (lambda: scalar_field("polynomial", "u", 1, degree=0), "at least 1"),
    (lambda: vector_field("trig", ("u",), 2), "needs 2 component names"),
    (lambda: solenoidal_velocity(1), "2-D and 3-D"),
    (lambda: scalar_field("trig", "u", 1) + scalar_field("trig", "u", 1), "both field sets define"),
    (lambda: scalar_field("trig", "u", 1) + scalar_field("trig", "v", 2), "cannot join"),
])
def test_bad_family_requests_are_refused_clearly(call, message):
    with pytest.raises(ProblemError, match=message):
        call()


def test_bundled_style_divergence_free_flow_file_is_sound_and_has_no_mass_source():
    from pathlib import Path
    from mmsverify.problem.derive import load_problem
    p = load_problem(Path(__file__).parent / "data" / "vortex-stream.toml")
    x, y = p.coords
    assert is_divergence_free([p.fields["u"], p.fields["v"]], (x, y)) and derive(p).equations["p"] == 0
    a = audit(p, starts=2)
    assert a.ok, a.warnings
    assert {c.name for c in a.admissibility.checks} >= {"speed", "Re_cell"}

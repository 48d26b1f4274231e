"""The seeded-mistake catalogue: what an order-of-accuracy test should and should not catch.

Each :class:`Entry` names a demo solver configured with one seeded mistake
(or none), the manufactured problem and refinement plan to test it with,
and what we expect: whether the mistake changes the observed order, in
which norms, and to what. Mistakes are switches on the solvers
(``FDDiffusion(mistake="source-shifted")``), never copies of them.

Three kinds of entry:

* ``"mistake"``: a seeded coding mistake. ``changes_order`` says whether an
  order test can see it; the ones that cannot (a Jacobian error that only
  slows Newton, a lag of the same order as the scheme, a mistake the
  manufactured solution does not exercise) are there on purpose.
* ``"correct"``: a correct solver, which must never be flagged.
* ``"property"``: a correct scheme with a known order loss (a two-point flux
  on a skewed mesh, a limiter at an extremum); flagged by design.

This follows the blind mistake test of Knupp & Salari 2003 (Verification
of Computer Codes in Computational Science and Engineering, Chapman &
Hall/CRC), where seeded coding mistakes were sorted into those an order
test must catch and those it cannot: the judge here sees only observed and
formal orders, never the expectation.
"""

from dataclasses import dataclass, field

from mmsverify import MMSError

from .fd.advection import FDAdvectionDiffusion
from .fd.burgers import FDBurgers
from .fd.diffusion import FDDiffusion
from .fd.heat import FDHeat
from .fv.advection import FVAdvection
from .fv.diffusion import FVDiffusion
from .ns.staggered import StaggeredNS

__all__ = ["Entry", "ENTRIES", "entries", "KINDS"]

KINDS = ("mistake", "correct", "property")
ALL = ("L1", "L2", "Linf")


@dataclass(frozen=True)
class Entry:
    """One row of the catalogue.

    Attributes
    ----------
    key : str
        Short unique name.
    solver : DemoSolver
        The configured solver (its ``mistake`` switch set for mistakes).
    problem : str
        Bundled problem name.
    expected : str
        The expected effect in words (e.g. ``"2 -> 1"``).
    changes_order : bool
        Whether the observed order should differ from the formal order.
    kind : str
        ``"mistake"``, ``"correct"`` or ``"property"``.
    norms : tuple of str
        Norms the verdict is read in (a scheme's own claim; all by default).
    study : dict
        Keyword arguments for the study (levels, base_cells, mode, options).
    note : str
        Why the entry is there.
    """

    key: str
    solver: object
    problem: str
    expected: str
    changes_order: bool
    kind: str = "mistake"
    norms: tuple = ALL
    study: dict = field(default_factory=dict)
    note: str = ""

    @property
    def description(self):
        """What the seeded mistake does, or the scheme's name."""
        if getattr(self.solver, "mistake", ""):
            return self.solver.MISTAKES[self.solver.mistake]
        return self.note or self.solver.name

    @property
    def should_flag(self):
        return self.changes_order


def _m(key, solver, problem, expected, changes=True, **kw):
    return Entry(key, solver, problem, expected, changes, "mistake", **kw)


def _c(key, solver, problem, **kw):
    order = f"{solver.formal_order}" + (f", time {solver.time_order}" if hasattr(solver, "time_order") else "")
    return Entry(key, solver, problem, f"order {order} confirmed", False, "correct", **kw)


_B16 = {"base_cells": 16}
_TIME = {"mode": "time", "base_cells": 2000}

ENTRIES = (
    # -- finite differences, steady diffusion -------------------------------------------------
    _m("fd-neumann-one-sided", FDDiffusion(mistake="neumann-one-sided"), "plate-poisson", "2 -> 1"),
    _m("fd-source-shifted", FDDiffusion(mistake="source-shifted"), "plate-poisson", "2 -> 1"),
    _m("fd-dirichlet-shifted", FDDiffusion(mistake="dirichlet-shifted"), "plate-poisson", "2 -> 1"),
    _m("fd-neumann-sign", FDDiffusion(mistake="neumann-sign"), "plate-poisson", "2 -> 0 (no convergence)"),
    _m("fd-neumann-full-volume", FDDiffusion(mistake="neumann-full-volume"), "plate-poisson", "2 -> 1"),
    _m("fd-dy-uses-dx", FDDiffusion(mistake="dy-uses-dx"), "fin-diffusion", "2 -> 0 (no convergence)"),
    _m("fd-dy-uses-dx-square", FDDiffusion(mistake="dy-uses-dx"), "plate-poisson", "none: dx = dy here",
       changes=False, note="on a square box with equal cell counts dx = dy, so the test cannot see it"),
    _m("fd-coefficient-shifted", FDDiffusion(mistake="coefficient-shifted"), "fin-diffusion", "2 -> 1"),
    _m("fd-coefficient-nonconservative", FDDiffusion(mistake="coefficient-nonconservative"), "fin-diffusion",
       "2 -> 0 (no convergence)"),
    # -- transient heat ------------------------------------------------------------------------
    _m("heat-source-new-level", FDHeat(mistake="source-new-level"), "slab-heat", "2 -> 1"),
    _m("heat-dirichlet-lagged", FDHeat(mistake="dirichlet-lagged"), "slab-heat", "2 -> 1"),
    _m("heat-one-step-short", FDHeat(mistake="one-step-short"), "slab-heat", "2 -> 1"),
    _m("heat-capacity-missing", FDHeat(mistake="capacity-missing"), "slab-heat", "2 -> 0 (no convergence)"),
    _m("heat-euler-dirichlet-lagged", FDHeat(scheme="implicit-euler", mistake="dirichlet-lagged"), "slab-heat",
       "none: O(dt) lag in a first-order scheme", changes=False, study=_TIME,
       note="the lag adds an O(dt) error to a scheme that is O(dt) anyway"),
    # -- Burgers by Newton ---------------------------------------------------------------------
    _m("burgers-jacobian-entry", FDBurgers(mistake="jacobian-entry"), "shock-burgers",
       "none: only more Newton iterations", changes=False, study=_B16,
       note="Newton converges to the same answer, linearly instead of quadratically"),
    _m("burgers-convection-lagged", FDBurgers(mistake="convection-lagged"), "shock-burgers", "2 -> 1", study=_B16),
    _m("burgers-viscous-weight", FDBurgers(mistake="viscous-weight"), "shock-burgers", "2 -> 0 (no convergence)",
       study=_B16),
    # -- advection-diffusion -------------------------------------------------------------------
    _m("adv-first-order-convection", FDAdvectionDiffusion(mistake="first-order-convection"), "river-advection",
       "2 -> 1"),
    _m("adv-velocity-swapped", FDAdvectionDiffusion(mistake="velocity-swapped"), "river-advection",
       "2 -> 0 (no convergence)"),
    _m("adv-central-factor", FDAdvectionDiffusion(mistake="central-factor"), "river-advection",
       "2 -> 0 (no convergence)"),
    # -- finite volumes ------------------------------------------------------------------------
    _m("fv-correction-dropped", FVDiffusion(grid="perturbed", mistake="correction-dropped"), "plate-poisson",
       "2 -> 0 (no convergence)"),
    _m("fv-area-uniform", FVDiffusion(grid="stretched", mistake="area-uniform"), "plate-poisson",
       "2 -> 0 (no convergence)"),
    _m("fv-boundary-distance-full", FVDiffusion(grid="stretched", mistake="boundary-distance-full"),
       "plate-poisson", "2 -> 1"),
    _m("fv-source-at-vertex", FVDiffusion(grid="perturbed", mistake="source-at-vertex"), "plate-poisson",
       "2 -> 1"),
    _m("fv-reconstruction-half", FVAdvection(reconstruction="unlimited", mistake="reconstruction-half"),
       "plume-advection", "2 -> 1"),
    _m("fv-inflow-at-centroid", FVAdvection(grid="perturbed", reconstruction="unlimited",
                                            mistake="inflow-at-centroid"), "plume-advection", "2 -> 1"),
    # -- incompressible flow on a staggered grid -----------------------------------------------
    _m("ns-pressure-gradient-halved", StaggeredNS(mistake="pressure-gradient-halved"), "cavity-flow",
       "2 -> 0 (no convergence)"),
    _m("ns-convection-term-missing", StaggeredNS(mistake="convection-term-missing"), "cavity-flow",
       "2 -> 0 (no convergence)"),
    _m("ns-wall-ghost-value", StaggeredNS(mistake="wall-ghost-value"), "cavity-flow", "2 -> 1 or less"),
    _m("ns-source-at-centre", StaggeredNS(mistake="source-at-centre"), "cavity-flow", "2 -> 1"),
    # -- correct solvers -----------------------------------------------------------------------
    _c("ok-fd-poisson-2d", FDDiffusion(), "plate-poisson"),
    _c("ok-fd-poisson-3d", FDDiffusion(), "block-poisson3d"),
    _c("ok-fd-diffusion", FDDiffusion(), "fin-diffusion"),
    _c("ok-fd-neumann-one-sided", FDDiffusion(neumann="one-sided"), "plate-poisson", study=_B16),
    _c("ok-fd-neumann-3pt", FDDiffusion(neumann="one-sided-3pt"), "plate-poisson"),
    _c("ok-heat-crank-nicolson", FDHeat(), "slab-heat"),
    _c("ok-heat-implicit-euler", FDHeat(scheme="implicit-euler"), "slab-heat"),
    _c("ok-heat-euler-time", FDHeat(scheme="implicit-euler"), "slab-heat", study=_TIME),
    _c("ok-burgers", FDBurgers(), "shock-burgers", study=_B16),
    _c("ok-adv-central", FDAdvectionDiffusion(), "river-advection"),
    _c("ok-adv-upwind", FDAdvectionDiffusion(convection="upwind"), "river-advection", study=_B16),
    _c("ok-fv-diffusion-uniform", FVDiffusion(), "plate-poisson"),
    _c("ok-fv-diffusion-stretched", FVDiffusion(grid="stretched"), "plate-poisson"),
    _c("ok-fv-diffusion-skewed", FVDiffusion(grid="skewed"), "plate-poisson"),
    _c("ok-fv-diffusion-perturbed", FVDiffusion(grid="perturbed"), "plate-poisson"),
    _c("ok-fv-two-point-stretched", FVDiffusion(grid="stretched", flux="two-point"), "fin-diffusion"),
    _c("ok-fv-upwind-perturbed", FVAdvection(grid="perturbed", reconstruction="first-order"), "plume-advection"),
    _c("ok-fv-unlimited-perturbed", FVAdvection(grid="perturbed", reconstruction="unlimited"), "plume-advection"),
    _c("ok-ns-u", StaggeredNS(report="u"), "cavity-flow", note="u on its own faces"),
    _c("ok-ns-v", StaggeredNS(report="v"), "cavity-flow", note="v on its own faces"),
    _c("ok-ns-p", StaggeredNS(report="p"), "cavity-flow", norms=("L1", "L2"),
       note="p at cell centres, judged in L1 and L2 (Linf approaches 2 slowly, see the solver)"),
    _c("ok-fv-limited-l1", FVAdvection(), "plume-advection", norms=("L1",),
       note="limited reconstruction, judged in L1 (its claim on smooth meshes)"),
    # -- known properties of correct schemes ---------------------------------------------------
    Entry("known-two-point-skewed", FVDiffusion(grid="skewed", flux="two-point"), "plate-poisson",
          "2 -> 0: two-point flux inconsistent on skewed meshes", True, "property",
          note="two-point flux on a skewed mesh (Ferziger & Peric 2002, section 8.6.2)"),
    Entry("known-limiter-extrema", FVAdvection(), "plume-advection", "Linf 2 -> 1 at the extremum", True,
          "property", norms=("Linf",), note="limited reconstruction clips the slope at the smooth maximum"),
)


def entries(kind=None, keys=None):
    """Catalogue entries, optionally of one kind or with the given keys (in catalogue order)."""
    out = [e for e in ENTRIES if (kind is None or e.kind == kind) and (keys is None or e.key in keys)]
    if keys is not None:
        missing = set(keys) - {e.key for e in out}
        if missing:
            raise MMSError(f"no catalogue entries {sorted(missing)}; known: {', '.join(e.key for e in ENTRIES)}")
    return out

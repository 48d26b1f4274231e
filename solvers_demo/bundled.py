"""Ready-made instances of the demo solvers, registered by name in pyproject.toml
(entry-point group ``mmsverify.solvers``).

``mmsverify run PROBLEM NAME`` judges against the problem's formal order;
for a first-order scheme add ``--formal-order 1`` (the instance states its
own order as ``formal_order``; :func:`solvers_demo.studies.verify` uses it).
"""

from .fd.advection import FDAdvectionDiffusion
from .fd.burgers import FDBurgers
from .fd.diffusion import FDDiffusion
from .fd.heat import FDHeat
from .fv.advection import FVAdvection
from .fv.diffusion import FVDiffusion
from .ns.staggered import StaggeredNS

__all__ = [
    "fd_diffusion", "fd_diffusion_neumann1", "fd_diffusion_neumann3pt", "fd_heat_euler", "fd_heat_cn",
    "fd_burgers", "fd_advection_upwind", "fd_advection_central", "fd_advection_upwind2",
    "fv_diffusion", "fv_diffusion_stretched", "fv_diffusion_skewed", "fv_diffusion_perturbed",
    "fv_two_point", "fv_advection_upwind", "fv_advection_unlimited", "fv_advection_limited",
    "ns_staggered", "ns_staggered_u", "ns_staggered_v",
]

fd_diffusion = FDDiffusion()
fd_diffusion_neumann1 = FDDiffusion(neumann="one-sided")
fd_diffusion_neumann3pt = FDDiffusion(neumann="one-sided-3pt")
fd_heat_euler = FDHeat(scheme="implicit-euler")
fd_heat_cn = FDHeat(scheme="crank-nicolson")
fd_burgers = FDBurgers()
fd_advection_upwind = FDAdvectionDiffusion(convection="upwind")
fd_advection_central = FDAdvectionDiffusion(convection="central")
fd_advection_upwind2 = FDAdvectionDiffusion(convection="upwind2")
fv_diffusion = FVDiffusion()
fv_diffusion_stretched = FVDiffusion(grid="stretched")
fv_diffusion_skewed = FVDiffusion(grid="skewed")
fv_diffusion_perturbed = FVDiffusion(grid="perturbed")
fv_two_point = FVDiffusion(flux="two-point")
fv_advection_upwind = FVAdvection(reconstruction="first-order")
fv_advection_unlimited = FVAdvection(reconstruction="unlimited")
fv_advection_limited = FVAdvection(reconstruction="limited")
ns_staggered = StaggeredNS()
ns_staggered_u = StaggeredNS(report="u")
ns_staggered_v = StaggeredNS(report="v")

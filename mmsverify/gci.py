"""Solution verification of a real simulation: the one import it needs.

A simulation run on three or more grids (values of a quantity per grid,
or a file of them) gets Richardson extrapolation, the GCI, the observed
order and a plan for a target error from here:

    >>> from mmsverify.gci import gci
    >>> r = gci([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)  # coarse to fine
    >>> round(r.p, 2), round(r.phi_ext21, 4), round(100 * r.gci_fine21, 1)
    (1.53, 6.1685, 2.2)

(Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1.)

The work is done by the analysis stage (:mod:`mmsverify.analysis.gci`,
:mod:`mmsverify.analysis.estimate`, :mod:`mmsverify.analysis.gridvalues`);
this module gathers its public names, as :mod:`mmsverify.testing` does for
test suites. The command ``mmsverify estimate`` is built on the same names.
"""

from mmsverify.analysis.estimate import Assessment, assess, assess_table, plan
from mmsverify.analysis.gci import GCIResult, ProfileGCI, gci, gci_profile, plot_profile, representative_h
from mmsverify.analysis.gridvalues import load_levels, load_profile

__all__ = ["gci", "GCIResult", "gci_profile", "ProfileGCI", "plot_profile", "representative_h",
           "assess", "assess_table", "Assessment", "plan", "load_levels", "load_profile"]

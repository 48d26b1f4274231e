"""mmsverify: prove a PDE solver converges at its design order, and estimate
the discretization error left in a real simulation."""

__version__ = "0.1.0"

from .errors import MMSError, ProblemError, ExpressionError, GridError, SolverError, AnalysisError
from .grids import Grid, refinement
from .problem import Problem, load_problem, problem_from_text, bundled_problems
from .derive import Manufactured, derive
from .solvers import Case, Solution
from .norms import error_norms
from .order import observed_orders, fit_order, classify_convergence, asymptotic_check, eca_hoekstra
from .gci import gci, gci_profile
from .estimate import assess, assess_table, load_levels, plan
from .verdict import Verdict
from .study import LevelResult, StudyResult, run_study, plan_grids
from .spacetime import SpaceTimeResult, run_space_time
from .external import ExternalSolver
from .runner import run_studies
from .cache import LevelCache

__all__ = [
    "MMSError", "ProblemError", "ExpressionError", "GridError", "SolverError", "AnalysisError",
    "Grid", "refinement", "Problem", "load_problem", "problem_from_text", "bundled_problems",
    "Manufactured", "derive", "Case", "Solution", "error_norms", "observed_orders", "Verdict",
    "LevelResult", "StudyResult", "run_study", "plan_grids", "SpaceTimeResult", "run_space_time",
    "fit_order", "classify_convergence", "asymptotic_check", "eca_hoekstra", "gci", "gci_profile",
    "assess", "assess_table", "load_levels", "plan", "ExternalSolver", "run_studies", "LevelCache",
]

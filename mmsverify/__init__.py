"""mmsverify: prove a PDE solver converges at its design order, and estimate
the discretization error left in a real simulation."""

__version__ = "0.1.0"

from mmsverify.errors import MMSError, ProblemError, ExpressionError, GridError, SolverError, AnalysisError
from mmsverify.execute.grids import Grid, refinement
from mmsverify.problem.record import Problem, bundled_problems
from mmsverify.problem.derive import Manufactured, derive, load_problem, problem_from_text
from mmsverify.execute.solvers import Case, Solution
from mmsverify.execute.norms import error_norms
from mmsverify.analysis.order import observed_orders, fit_order, classify_convergence, asymptotic_check, eca_hoekstra
from mmsverify.analysis.gci import gci_profile
from mmsverify.analysis.estimate import assess, assess_table, load_levels, plan
from mmsverify.analysis.verdict import Verdict
from mmsverify.study.settings import Judging, Refinement, Running
from mmsverify.execute.level import LevelResult
from mmsverify.study.refinement import StudyResult, run_study, plan_grids
from mmsverify.study.spacetime import SpaceTimeResult, run_space_time
from mmsverify.execute.external import ExternalSolver
from mmsverify.study.batch import run_studies
from mmsverify.execute.cache import LevelCache
from mmsverify import gci  # the module: solution verification of a real simulation

__all__ = [
    "MMSError", "ProblemError", "ExpressionError", "GridError", "SolverError", "AnalysisError",
    "Grid", "refinement", "Problem", "load_problem", "problem_from_text", "bundled_problems",
    "Manufactured", "derive", "Case", "Solution", "error_norms", "observed_orders", "Verdict",
    "LevelResult", "StudyResult", "run_study", "Refinement", "Judging", "Running", "plan_grids", "SpaceTimeResult", "run_space_time",
    "fit_order", "classify_convergence", "asymptotic_check", "eca_hoekstra", "gci", "gci_profile",
    "assess", "assess_table", "load_levels", "plan", "ExternalSolver", "run_studies", "LevelCache",
]

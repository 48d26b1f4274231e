"""Analysis: observed orders, fits, convergence type, Richardson/GCI, planning, verdicts."""

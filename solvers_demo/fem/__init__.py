"""Finite-element demo solvers on triangles, built on scikit-fem (an optional dependency)."""

"""Finite-difference demo solvers."""

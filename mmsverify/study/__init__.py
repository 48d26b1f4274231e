"""Refinement studies: plan the levels, run them, judge the orders."""

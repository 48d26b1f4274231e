"""Outputs: reports, exported code, baselines."""

"""Demo solvers for mmsverify: genuine discretizations, some with seeded mistakes.

They use only mmsverify's public API, exactly as a user's code would.
"""

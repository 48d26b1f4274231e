"""``mmsverify list``: bundled problems, solvers and operators."""

from mmsverify.problem.operators import OPERATORS
from mmsverify.problem.derive import load_problem
from mmsverify.problem.record import PROBLEM_DIR, bundled_problems
from mmsverify.execute.solvers import registered_solvers


def _list(args):
    print(f"Problems (in {PROBLEM_DIR}):")
    rows = []
    for name in bundled_problems():
        try:
            p = load_problem(PROBLEM_DIR / f"{name}.toml")
            rows.append((name, f"{p.dim}-D {p.operator}", p.description))
        except Exception as exc:  # list the rest even when one file is broken
            rows.append((name, "", f"(cannot be read: {exc})"))
    kind = max(len(r[1]) for r in rows) if rows else 0
    for name, what, text in rows:
        print(f"  {name:<28} {what:<{kind}}  {text}")
    print("\nSolvers (registered by installed packages):")
    for name, target in registered_solvers().items():
        print(f"  {name:<28} {target}")
    print("\nOperators (problem files: [operator] kind = ...):")
    for op in OPERATORS.values():
        print(f"  {op.name:<28} {op.summary}")
    print(f"  {'custom':<28} equations written in the file with d(expr, x), d(expr, x, 2), lap(expr)")


def register(sub):
    p = sub.add_parser("list", help="list bundled problems, solvers and operators")
    p.set_defaults(func=_list)

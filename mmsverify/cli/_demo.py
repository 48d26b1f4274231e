"""``mmsverify demo``: the bundled demonstration, no configuration needed."""

from mmsverify.render.text import CAUTION, format_study
from mmsverify.study.refinement import run_study
from mmsverify.cli import EXIT_FAIL, EXIT_OK

PROBLEM = "plate-poisson"
CORRECT = "poisson2d"
MISTAKE = "poisson2d-neumann1"


def _wrap(text, width=100):
    import textwrap
    return textwrap.wrap(text, width)


def _demo(args):
    print("mmsverify demo: a membrane under load, -lap u = f on the unit square, Dirichlet on three sides and")
    print("a prescribed slope on x_max. Two finite-difference solvers designed for second order are checked.\n")
    print(f"1) {CORRECT}: 5-point stencil, ghost-node Neumann boundary (correct)\n")
    good = run_study(PROBLEM, CORRECT, levels=args.levels)
    print(format_study(good, caution=False).rstrip())
    print(f"\n2) {MISTAKE}: the same, but the Neumann side uses a one-sided first-order difference (seeded mistake)\n")
    bad = run_study(PROBLEM, MISTAKE, levels=args.levels)
    print(format_study(bad, caution=False).rstrip())
    expected = good.passed and not bad.passed
    print("\nDemo outcome: " + ("the correct solver is confirmed at order 2 and the seeded mistake is caught."
                                if expected else "UNEXPECTED: the demo solvers did not behave as designed."))
    print("\n" + "\n".join(_wrap(CAUTION)))
    return EXIT_OK if expected else EXIT_FAIL


def register(sub):
    p = sub.add_parser("demo", help="run the bundled demo: one correct solver, one seeded mistake")
    p.add_argument("--levels", type=int, default=4, help="grid levels (default 4)")
    p.set_defaults(func=_demo)

"""``mmsverify mistakes``: run the seeded-mistake catalogue and report what the order test detects.

The demo package contributes this command to the ``mmsverify`` program through the entry-point
group ``mmsverify.commands`` (see pyproject.toml).

Every entry of :mod:`solvers_demo.catalogue` (a demo solver with one seeded
mistake, a correct solver, or a scheme with a known order loss) is run as a
manufactured-solution study; the table says per entry the expected effect,
the observed orders, whether the verdict flagged it and whether that was
the expected outcome. Exit code 0 when every entry behaved as expected,
1 otherwise.
"""

import json
import sys

from mmsverify.cli import EXIT_FAIL, EXIT_OK
from mmsverify.fileio import write_atomic



def _mistakes(args):
    from solvers_demo.catalogue import ENTRIES
    from solvers_demo.detection import run_catalogue

    if args.list:
        for e in ENTRIES:
            print(f"{e.key:<32} {e.kind:<9} {e.problem:<17} {e.expected}")
        return EXIT_OK

    def progress(outcome):
        if args.verbose_rows:
            mark = "ok" if outcome.agrees else "UNEXPECTED"
            print(f"  {outcome.entry.key:<32} {'flagged' if outcome.flagged else 'passed':<8} {mark} "
                  f"({outcome.seconds:.1f} s)", file=sys.stderr, flush=True)

    report = run_catalogue(keys=args.only or None, kind=args.kind, workers=args.workers, progress=progress)
    print(report)
    if args.out:
        write_atomic(args.out, "# Seeded-mistake detection\n\n" + report.to_markdown())
        print(f"\nwrote {args.out}")
    if args.json:
        write_atomic(args.json, json.dumps(report.to_dict(), indent=2))
        print(f"wrote {args.json}")
    if args.equal_cost:
        from solvers_demo.equal_cost import compare_at_equal_cost, plot_equal_cost
        from solvers_demo.fd.advection import FDAdvectionDiffusion
        comparison = compare_at_equal_cost(
            "estuary-advection", {"first-order upwind": FDAdvectionDiffusion(convection="upwind"),
                                  "second-order central": FDAdvectionDiffusion()}, levels=6, base_cells=8)
        print("\n" + str(comparison))
        plot_equal_cost(comparison, args.equal_cost)
        print(f"wrote {args.equal_cost}")
    return EXIT_OK if report.ok else EXIT_FAIL


def register(sub):
    p = sub.add_parser("mistakes", help="run the seeded-mistake catalogue: which mistakes does the order test catch?",
                       description="Run every seeded mistake, correct solver and known order loss of the demo "
                                   "catalogue as a manufactured-solution study and print the detection table.")
    p.add_argument("--only", nargs="+", metavar="KEY", help="run only these entries (see --list)")
    p.add_argument("--kind", choices=("mistake", "correct", "property"), help="run only entries of this kind")
    p.add_argument("--list", action="store_true", help="list the entries without running them")
    p.add_argument("--workers", type=int, default=1, help="processes to spread the entries over (default 1)")
    p.add_argument("--out", metavar="PATH", help="also write the table as Markdown")
    p.add_argument("--json", metavar="PATH", help="also write every number as JSON")
    p.add_argument("--equal-cost", metavar="PNG", help="also compare first- and second-order convection at equal "
                                                      "cost on estuary-advection and save the plot")
    p.add_argument("--rows", dest="verbose_rows", action="store_true", help="report each entry as it finishes")
    p.set_defaults(func=_mistakes)

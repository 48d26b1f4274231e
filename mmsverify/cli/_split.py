"""``mmsverify split PROBLEM SOLVER``: space and time orders of a transient solver, separately."""

from mmsverify.study.spacetime import run_space_time
from mmsverify.cli import EXIT_FAIL, EXIT_INCONCLUSIVE, EXIT_OK


def _split(args):
    from mmsverify.cli.progress import progress_for
    levels = args.levels or 4
    shown = []

    def study_progress(label):  # one progress line per level of each study, the reruns included
        if shown:
            getattr(shown[-1], "close", lambda: None)()
        shown.append(progress_for(args, levels, f"{args.problem} / {args.solver}, {label}"))
        return shown[-1]

    r = run_space_time(args.problem, args.solver, levels=levels, base_cells=args.base_cells,
                       base_steps=args.base_steps, ratio=args.ratio or 2.0, fine_cells=args.fine_cells,
                       fine_steps=args.fine_steps, tolerance=args.tolerance, refine_budget=args.refine_budget,
                       study_progress=study_progress)
    if shown:
        getattr(shown[-1], "close", lambda: None)()  # end a live progress line before the tables
    print(r)
    return {"pass": EXIT_OK, "fail": EXIT_FAIL}.get(r.outcome, EXIT_INCONCLUSIVE)


def register(sub):
    p = sub.add_parser("split", help="transient solvers: temporal, spatial and combined studies, each judged",
                       description="Three studies of a transient solver: time steps refined at fixed fine "
                                   "cells, cells refined at a fixed small step, and both together with the "
                                   "step tied to h by the ratio of formal orders.")
    p.add_argument("problem", help="transient problem file (.toml) or bundled name")
    p.add_argument("solver", help="bundled solver name or module:function")
    p.add_argument("--levels", type=int, help="levels per study (default 4)")
    p.add_argument("--base-cells", type=int, help="coarsest cells per direction")
    p.add_argument("--base-steps", type=int, help="coarsest number of time steps")
    p.add_argument("--ratio", type=float, help="refinement ratio (default 2)")
    p.add_argument("--fine-cells", type=int, help="frozen cells of the temporal study")
    p.add_argument("--fine-steps", type=int, help="frozen steps of the spatial study")
    p.add_argument("--refine-budget", type=float, metavar="SECONDS",
                   help="solver seconds the automatic refinement of the frozen cells and steps may spend "
                        "(default 120); past it the report says what to run instead")
    p.add_argument("--tolerance", type=float, help="allowed |observed - formal| order")
    p.set_defaults(func=_split)

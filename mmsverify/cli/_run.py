"""``mmsverify run PROBLEM SOLVER``: a manufactured-solution study."""

import json
import sys
from pathlib import Path

from ..study import MODES, run_study
from . import EXIT_FAIL, EXIT_INCONCLUSIVE, EXIT_OK


def add_study_options(p):
    p.add_argument("--levels", type=int, help="number of grid levels (default: problem's [study], else 4)")
    p.add_argument("--base-cells", type=int, help="cells per direction on the coarsest level (default 8)")
    p.add_argument("--ratio", type=float, help="refinement ratio (default 2)")
    p.add_argument("--mode", choices=MODES, default="combined",
                   help="transient problems: refine space and time together, space only, or time only")
    p.add_argument("--base-steps", type=int, help="time steps on the coarsest level (transient problems)")
    p.add_argument("--tolerance", type=float, help="allowed |observed - formal| order (default: problem's)")
    p.add_argument("--formal-order", type=float, help="override the problem's formal order")


def exit_code(result):
    if result.passed:
        return EXIT_OK
    if any(v.status in ("below", "above") for v in result.verdicts):
        return EXIT_FAIL
    return EXIT_INCONCLUSIVE


def study_from_args(args, problem, solver, progress=None):
    return run_study(problem, solver, levels=args.levels, base_cells=args.base_cells, ratio=args.ratio,
                     mode=args.mode, base_steps=args.base_steps, tolerance=args.tolerance,
                     formal_order=args.formal_order, progress=progress)


def write_json(result, path):
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(json.dumps(result.to_dict(), indent=2))
    tmp.replace(path)


def _run(args):
    if args.solver is None:
        print("mmsverify run: name a solver: a bundled one (see `mmsverify list`) or module:function",
              file=sys.stderr)
        return 2
    from ..progress import progress_for
    result = study_from_args(args, args.problem, args.solver, progress_for(args, label=f"{args.problem} / {args.solver}"))
    print(result)
    if args.json:
        write_json(result, args.json)
        print(f"\nwrote {args.json}")
    return exit_code(result)


def register(sub):
    p = sub.add_parser("run", help="run a solver on a refinement sequence and judge the observed order",
                       description="Run SOLVER on PROBLEM over a refinement sequence, print errors, observed "
                                   "orders and the verdict against the formal order.")
    p.add_argument("problem", help="problem file (.toml) or bundled problem name")
    p.add_argument("solver", nargs="?", help="bundled solver name or module:function")
    add_study_options(p)
    p.add_argument("--json", metavar="PATH", help="also write every number as JSON")
    p.set_defaults(func=_run)

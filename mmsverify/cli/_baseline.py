"""``mmsverify baseline save|check``: regression mode for a solver's own CI."""

import sys

from mmsverify.outputs.baseline import DEFAULT_ERROR_FACTOR, check_baseline, load_baseline, save_baseline
from mmsverify.execute.norms import NORMS
from mmsverify.cli.progress import NORMAL, QUIET, VERBOSE, progress_for, verbosity
from mmsverify.cli import EXIT_FAIL, EXIT_INPUT, EXIT_OK, comma_choices
from mmsverify.cli._run import add_study_options, study_from_args


def _save(args):
    result = study_from_args(args, args.problem, args.solver, progress_for(args, label=f"{args.problem} / {args.solver}"))
    if verbosity(args) != QUIET:
        print(result)
        print()
    base = save_baseline(result, args.output, error_factor=args.error_factor, allow_failing=args.allow_failing)
    print(f"saved baseline {args.output}: {len(base.grids)} levels of {base.problem}, recorded with {base.solver}; "
          f"checks will require order >= {base.formal_order - base.tolerance:g} and errors <= "
          f"{base.error_factor:g} x these")
    return EXIT_OK


def _norms(text):
    if text is None:
        return None
    return comma_choices(text, NORMS, "norm")


def _check(args):
    try:
        norms = _norms(args.norms)
    except ValueError as exc:
        print(f"mmsverify baseline check: {exc}", file=sys.stderr)
        return EXIT_INPUT
    base = load_baseline(args.baseline)
    solver = args.solver or base.solver
    check = check_baseline(base, solver, problem=args.problem, error_factor=args.error_factor,
                           tolerance=args.tolerance, norms=norms,
                           progress=progress_for(args, len(base.grids), f"{base.problem} / {solver}"))
    level = verbosity(args)
    print(check if level == VERBOSE or (level == NORMAL and not check.passed) else check.summary())
    return EXIT_OK if check.passed else EXIT_FAIL


def register(sub):
    p = sub.add_parser("baseline", help="save a verified study as a baseline; check later runs against it",
                       description="Regression mode for CI. `save` runs a study and records its grids and errors; "
                                   "`check` reruns those grids with a solver and fails (exit 1) when an observed "
                                   "order falls below formal minus tolerance or an error grows beyond the "
                                   "stated factor.")
    actions = p.add_subparsers(dest="action", metavar="ACTION", required=True)
    s = actions.add_parser("save", help="run a study and save it as a baseline file")
    s.add_argument("problem", help="problem file (.toml) or bundled problem name")
    s.add_argument("solver", help="bundled solver name or module:function")
    s.add_argument("-o", "--output", required=True, metavar="FILE", help="baseline file to write (JSON)")
    add_study_options(s)
    s.add_argument("--error-factor", type=float, default=DEFAULT_ERROR_FACTOR,
                   help=f"errors of later runs may be at most this many times the recorded ones "
                        f"(default {DEFAULT_ERROR_FACTOR:g})")
    s.add_argument("--allow-failing", action="store_true",
                   help="record the study even if its verdict is not PASS")
    s.set_defaults(func=_save)
    c = actions.add_parser("check", help="rerun a baseline's grids and compare")
    c.add_argument("baseline", help="baseline file written by `mmsverify baseline save`")
    c.add_argument("solver", nargs="?", help="solver to check (default: the one the baseline was recorded with)")
    c.add_argument("--problem", help="problem file, when it moved since the baseline was saved")
    c.add_argument("--error-factor", type=float, help="override the baseline's error factor")
    c.add_argument("--tolerance", type=float, help="override the baseline's order tolerance")
    c.add_argument("--norms", help=f"comma-separated norms to check (default {','.join(NORMS)})")
    c.set_defaults(func=_check)
    return p

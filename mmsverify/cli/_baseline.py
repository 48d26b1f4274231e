"""``mmsverify baseline save|check``: regression mode for a solver's own CI."""

import json
import sys

from mmsverify.outputs.baseline import (DEFAULT_ERROR_FACTOR, check_baseline, check_data, load_baseline,
                                        recorded_solver, run_record, save_baseline)
from mmsverify.execute.norms import NORMS
from mmsverify.cli.progress import NORMAL, QUIET, VERBOSE, progress_for, verbosity
from mmsverify.cli import EXIT_FAIL, EXIT_INPUT, EXIT_OK, comma_choices
from mmsverify.cli._run import (add_study_options, cache_folder, dask_client, external_from_args, option_values,
                                study_from_args)
from mmsverify.study.settings import Running


def _one_solver(args, command):
    if args.solver is not None and args.external:
        print(f"mmsverify baseline {command}: give either a solver or --external, not both", file=sys.stderr)
        return False
    return True


def _save(args):
    if not _one_solver(args, "save"):
        return EXIT_INPUT
    if args.solver is None and not args.external:
        print("mmsverify baseline save: name a solver (bundled name or module:function) or an external program "
              "with --external", file=sys.stderr)
        return EXIT_INPUT
    label = args.solver or args.external
    result = study_from_args(args, args.problem, args.solver, progress_for(args, label=f"{args.problem} / {label}"))
    if verbosity(args) != QUIET:
        print(result)
        print()
    run = run_record(external_from_args(args) or args.solver, option_values(args), args.timeout)
    base = save_baseline(result, args.output, error_factor=args.error_factor, allow_failing=args.allow_failing,
                         run=run)
    print(f"saved baseline {args.output}: {len(base.grids)} levels of {base.problem}, recorded with {base.solver}; "
          f"checks will require order >= {base.formal_order - base.tolerance:g} and errors <= "
          f"{base.error_factor:g} x these")
    return EXIT_OK


def _norms(text):
    if text is None:
        return None
    return comma_choices(text, NORMS, "norm")


def _check(args):
    if not _one_solver(args, "check"):
        return EXIT_INPUT
    try:
        norms = _norms(args.norms)
    except ValueError as exc:
        print(f"mmsverify baseline check: {exc}", file=sys.stderr)
        return EXIT_INPUT
    base = load_baseline(args.baseline)
    solver = external_from_args(args) or args.solver or recorded_solver(base, args.rerun_recorded)
    label = getattr(solver, "name", solver)
    timeout = args.timeout if args.timeout is not None else (base.run or {}).get("timeout")
    client = dask_client(args.dask, args.workers) if args.dask else None
    try:
        check = check_baseline(base, solver, problem=args.problem, error_factor=args.error_factor,
                               tolerance=args.tolerance, norms=norms, options=option_values(args) or None,
                               running=Running(executor=client, workers=None if client else args.workers,
                                               timeout=timeout, cache_dir=cache_folder(args), resume=not args.fresh,
                                               progress=progress_for(args, len(base.grids),
                                                                     f"{base.problem} / {label}")))
    finally:
        if client is not None:
            cluster = client.cluster
            client.close()
            if args.dask == "local" and cluster is not None:
                cluster.close()
    if args.json:
        text = json.dumps(check_data(check), indent=2, allow_nan=False) + "\n"
        if args.json == "-":
            sys.stdout.write(text)
        else:
            from mmsverify.fileio import write_atomic
            write_atomic(args.json, text)
    if args.json != "-":
        level = verbosity(args)
        print(check if level == VERBOSE or (level == NORMAL and not check.passed) else check.summary())
    return EXIT_OK if check.passed else EXIT_FAIL


def register(sub):
    p = sub.add_parser("baseline", help="save a verified study as a baseline; check later runs against it",
                       description="Regression mode for CI. `save` runs a study and records its grids, errors, "
                                   "solver options and external command; `check` reruns those grids with a solver "
                                   "and fails (exit 1) when an observed order falls below formal minus tolerance "
                                   "or an error grows beyond the stated factor.")
    actions = p.add_subparsers(dest="action", metavar="ACTION", required=True)
    s = actions.add_parser("save", help="run a study and save it as a baseline file")
    s.add_argument("problem", help="problem file (.toml) or bundled problem name")
    s.add_argument("solver", nargs="?", help="bundled solver name or module:function (or use --external)")
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
    c.add_argument("solver", nargs="?",
                   help="solver to check (or --external); without one, a bundled solver the baseline names, or "
                        "with --rerun-recorded the solver or program it names")
    c.add_argument("--rerun-recorded", action="store_true",
                   help="run the module:function or external program the baseline file names (a file never "
                        "chooses the code that runs unless you say so)")
    c.add_argument("--problem", help="problem file, when it moved since the baseline was saved")
    c.add_argument("--error-factor", type=float, help="override the baseline's error factor")
    c.add_argument("--norms", help=f"comma-separated norms to check (default {','.join(NORMS)})")
    c.add_argument("--json", metavar="PATH", help="also write the outcome as JSON ('-': to stdout, instead of text)")
    add_study_options(c, grid=False)
    c.set_defaults(func=_check)
    return p

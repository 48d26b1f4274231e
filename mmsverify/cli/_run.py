"""``mmsverify run PROBLEM SOLVER``: a manufactured-solution study."""

import argparse
from dataclasses import replace
import shlex
import sys
from pathlib import Path

from mmsverify.errors import GridError, SolverError
from mmsverify.execute.external import OUTPUT_FORMATS, ExternalSolver
from mmsverify.execute.resolutions import parse_cells
from mmsverify.execute.solvers import resolve_solver
from mmsverify.study.settings import Judging, Refinement, Running
from mmsverify.study.refinement import MODES, run_study
from mmsverify.cli import EXIT_FAIL, EXIT_INCONCLUSIVE, EXIT_INPUT, EXIT_OK


def add_study_options(p, grid=True):
    """The options of a study; ``grid=False`` leaves out the plan (levels, mode, formal order, norms), for
    ``baseline check``, which reruns the baseline's grids under its rules."""
    p.add_argument("--tolerance", type=float,
                   help="allowed |observed - formal| order, below half the formal order (default: problem's)")
    p.add_argument("--option", action="append", default=[], metavar="NAME=VALUE",
                   help="solver option passed in case.options, e.g. --option grid=perturbed (repeatable)")
    add_execution_options(p)
    if not grid:
        return
    p.add_argument("--levels", type=int, help="number of grid levels (default: problem's [study], else 4)")
    p.add_argument("--base-cells", type=int, help="cells per direction on the coarsest level (default 8)")
    p.add_argument("--ratio", type=float, help="refinement ratio (default 2)")
    p.add_argument("--cells", metavar="LIST",
                   help="a list of resolutions instead, cells per direction, one level each: 6,10,17,29")
    p.add_argument("--mode", choices=MODES, default="combined",
                   help="transient problems: refine space and time together, space only, or time only")
    p.add_argument("--base-steps", type=int, help="time steps on the coarsest level (transient problems)")
    p.add_argument("--formal-order", type=float, help="override the formal order (default: the solver's stated "
                                                      "order, else the problem's)")
    p.add_argument("--norms", metavar="LIST",
                   help="norms that get a verdict for every field, comma-separated (default: the norms the solver "
                        "states per field, else L1,L2,Linf; all are reported)")


def add_execution_options(p):
    """Options for where and how levels run: processes, time limits, cache, external programs."""
    g = p.add_argument_group("execution")
    g.add_argument("--workers", type=int, metavar="N",
                   help="run the levels in a local pool of N processes (default: one after another)")
    g.add_argument("--timeout", type=_timeout, default=DEFAULT_TIMEOUT, metavar="SECONDS",
                   help=f"time limit per level: a slower level is stopped (its processes killed) and fails; "
                        f"default {DEFAULT_TIMEOUT:g} s; 'none' turns the limit off")
    g.add_argument("--cache", metavar="DIR", help="keep finished levels in DIR; reruns and resumed studies reuse them")
    g.add_argument("--fresh", action="store_true", help="with --cache: recompute every level and overwrite")
    g.add_argument("--no-cache", action="store_true",
                   help="neither read nor write the level cache (overrides an earlier --cache, e.g. in a CI script)")
    g.add_argument("--dask", metavar="ADDRESS",
                   help="run the levels on a Dask cluster (scheduler address, or 'local' for one on this machine)")
    g.add_argument("--external", metavar="COMMAND",
                   help="solve each level with an external program, e.g. \"./poisson2d {case}\"; split like a "
                        "shell command line but never run through a shell; placeholders {case} {out} {dir} {level} "
                        "{problem} {hash}")
    g.add_argument("--output-format", choices=OUTPUT_FORMATS, default="csv",
                   help="solution file the external program writes (default csv)")
    g.add_argument("--case-format", choices=("toml", "json"), default="toml", help="case file format (default toml)")
    g.add_argument("--workdir", metavar="DIR",
                   help="keep each level's case file, output log and solution in DIR (default: <cache>/runs with "
                        "--cache, else temporary)")
    g.add_argument("--param", action="append", default=[], metavar="NAME=VALUE",
                   help="parameter for the external program's case file (repeatable)")
    g.add_argument("--spacing", choices=("grid", "volumes"), default="grid",
                   help="h of a level: from the case grid, or (V/N)^(1/d) from the program's cell volumes")


#: Seconds per level unless --timeout says otherwise: an hour stops a hung solver or program
#: within the working day, yet is far above any level a verification study needs
#: (the bundled studies take seconds; a million-cell 3-D level takes minutes).
DEFAULT_TIMEOUT = 3600.0


def _timeout(text):
    """``--timeout``: a positive number of seconds, or ``none`` (or 0) for no limit."""
    if text.strip().lower() in ("none", "off", "0"):
        return None
    try:
        value = float(text)
    except ValueError:
        value = None
    if value is None or not 0 < value < float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} is not a time limit: give seconds (e.g. 600) or 'none'")
    return value


def describe_timeout(args):
    """The line that states the time limit per level of a study run from the command line."""
    limit = getattr(args, "timeout", None)
    if limit is None:
        return "time limit per level: none (--timeout none)"
    how = "default; change with --timeout SECONDS or --timeout none" if limit == DEFAULT_TIMEOUT else "--timeout"
    return f"time limit per level: {limit:g} s ({how})"


def exit_code(result):
    """0 confirmed, 1 an order missed, 3 inconclusive; 2 when no level ran (a set-up the solver refuses)."""
    if result.levels and not any(lv.ok for lv in result.levels):
        return EXIT_INPUT
    return {"pass": EXIT_OK, "fail": EXIT_FAIL}.get(result.outcome, EXIT_INCONCLUSIVE)


def _param(text):
    name, sep, value = text.partition("=")
    if not sep or not name.strip():
        raise SolverError(f"{text!r}: write NAME=VALUE, e.g. --param omega=1.8 or --option grid=stretched")
    value = value.strip()
    for kind in (int, float):
        try:
            return name.strip(), kind(value)
        except ValueError:
            pass
    return name.strip(), {"true": True, "false": False}.get(value.lower(), value)


def _norm_list(text):
    from mmsverify.errors import AnalysisError
    from mmsverify.execute.norms import NORMS
    from mmsverify.cli import comma_choices
    if not text:
        return None     # the solver's stated norms, else all (see mmsverify.study.refinement.judged_norms)
    try:
        return comma_choices(text, NORMS, "norm")
    except ValueError as exc:
        raise AnalysisError(f"--norms: {exc}") from None


def option_values(args):
    """The solver options ``--option NAME=VALUE`` give, as a dict."""
    return dict(_param(o) for o in getattr(args, "option", []))


def cache_folder(args):
    """The level-cache folder the options name, or None (``--no-cache``, or no ``--cache``)."""
    return None if getattr(args, "no_cache", False) else getattr(args, "cache", None)


def external_from_args(args):
    """The ExternalSolver that ``--external`` describes, or None."""
    command = getattr(args, "external", None)
    if not command:
        return None
    workdir = args.workdir or (str(Path(cache_folder(args)) / "runs") if cache_folder(args) else None)
    try:
        words = shlex.split(command)
    except ValueError as exc:  # an unbalanced quote
        raise SolverError(f"--external {command!r}: {exc}; quote each argument with a matching ' or \", "
                          "or escape the quote with \\") from None
    if not words:
        raise SolverError("--external: the command is empty; give the program and its arguments, "
                          "e.g. --external \"./poisson2d {case}\"")
    return ExternalSolver(words, fmt=args.output_format, case_format=args.case_format,
                          workdir=workdir, params=dict(_param(p) for p in args.param), spacing=args.spacing,
                          timeout=args.timeout)


def dask_client(address, workers):
    try:
        import distributed
    except ImportError:
        raise SolverError("--dask needs the optional Dask dependency: pip install 'mmsverify[dask]'") from None
    if address == "local":
        return distributed.Client(distributed.LocalCluster(n_workers=workers or 2, threads_per_worker=1,
                                                           dashboard_address=None))
    return distributed.Client(address)


def _frozen_refused(args, problem, solver):
    """The GridError for ``--mode time|space`` on a transient problem with the frozen resolution not given.

    Its message holds the commands that work: ``split``, which sizes the
    frozen resolution from the errors it measures, and this command with
    the frozen resolution fixed by hand.
    """
    from mmsverify.errors import GridError
    from mmsverify.problem.derive import get_problem
    mode = getattr(args, "mode", "combined")
    option = {"time": "base_cells", "space": "base_steps"}.get(mode)
    if option is None or getattr(args, option) is not None or not get_problem(problem).transient:
        return None
    name = args.problem if isinstance(args.problem, str) else get_problem(problem).name
    plan = [f"--{k.replace('_', '-')} {getattr(args, k):g}" for k in ("levels", "base_cells", "base_steps", "ratio")
            if getattr(args, k, None) is not None]
    words = ["mmsverify", "split", shlex.quote(name), shlex.quote(str(solver)), *plan]
    split = " ".join(words) if solver and not getattr(args, "external", None) else None
    frozen, kind = ("cells", "spatial") if mode == "time" else ("steps", "temporal")
    text = (f"--mode {mode} keeps the {frozen} frozen, and the {kind} error left at a fixed count of {frozen} can "
            f"bend the {mode} order of a correct solver, so the count is not guessed. ")
    if split:
        text += (f"Run the space-time study, which refines the frozen {frozen} until their error is negligible "
                 f"(and prints the count it settled on):\n    {split}\nor ")
    text += f"freeze the {frozen} yourself with --{option.replace('_', '-')} N, fine enough that their error is negligible"
    return GridError(text)


def _cell_list(text):
    """``--cells 6,10,17,29`` as a list of whole numbers (at least two)."""
    cells = parse_cells(text, "--cells")
    if not isinstance(cells, list):
        raise GridError(f"--cells: give at least 2 resolutions, coarse to fine (e.g. 6,10,17,29), got {text!r}; "
                        "for a single coarsest level use --base-cells")
    return cells


def study_from_args(args, problem, solver, progress=None):
    refused = _frozen_refused(args, problem, solver)
    if refused is not None:
        raise refused
    solver = external_from_args(args) or solver
    refinement = Refinement(levels=args.levels, base_cells=args.base_cells, ratio=args.ratio, mode=args.mode,
                            base_steps=args.base_steps,
                            cells=_cell_list(args.cells) if getattr(args, "cells", None) else None)
    judging = Judging(tolerance=args.tolerance, formal_order=args.formal_order,
                      norms=_norm_list(getattr(args, "norms", None)))
    running = Running(progress=progress, timeout=getattr(args, "timeout", None),
                      cache_dir=cache_folder(args), resume=not getattr(args, "fresh", False))
    options = option_values(args) or None
    if getattr(args, "dask", None):
        client = dask_client(args.dask, args.workers)
        try:
            return run_study(problem, solver, refinement, judging, replace(running, executor=client),
                             options=options)
        finally:
            cluster = client.cluster
            client.close()
            if args.dask == "local" and cluster is not None:
                cluster.close()
    return run_study(problem, solver, refinement, judging, replace(running, workers=getattr(args, "workers", None)),
                     options=options)


def _run(args):
    if args.solver is None and not args.external:
        print("mmsverify run: name a solver: a bundled one (see `mmsverify list`) or module:function, "
              "or an external program with --external", file=sys.stderr)
        return 2
    if args.solver is not None and args.external:
        print("mmsverify run: give either a solver or --external, not both", file=sys.stderr)
        return 2
    from mmsverify.problem.derive import get_problem
    from mmsverify.cli.progress import progress_for
    quiet = getattr(args, "quiet", False)
    problem = get_problem(args.problem)  # read once: the design checks and the study share it
    if args.solver is not None and not args.external:
        resolve_solver(args.solver)      # a name that cannot be imported fails here, before any work
    if not quiet:
        print(describe_timeout(args), file=sys.stderr)
        print_design_warnings(args, problem)
    label = args.solver or args.external
    progress = progress_for(args, label=f"{args.problem} / {label}")
    try:
        result = study_from_args(args, problem, args.solver, progress)
    finally:
        getattr(progress, "close", lambda: None)()  # end a live progress line before the table
    print(str(result).splitlines()[0] if quiet else result)
    if args.target_error is not None and not quiet:
        print_plans(result, args.target_error)
    if args.json:
        from mmsverify.outputs.studyfile import write_json
        write_json(result, args.json)
        if not quiet:
            print(f"\nwrote {args.json}")
    return exit_code(result)


def print_plans(result, target):
    """Predicted grid and run time to reach ``target`` in the L2 norm, per field."""
    from mmsverify.errors import AnalysisError
    from mmsverify.analysis.estimate import plan
    for f in result.fields:
        ok = [lv for lv in result.levels if lv.ok and f in lv.errors]
        print(f"\nplan for field {f}: L2 error {target:g}")
        try:
            p = plan([lv.h for lv in ok], [lv.errors[f]["L2"] for lv in ok], [lv.seconds for lv in ok], target,
                     cells=[lv.grid.n_cells for lv in ok], dim=ok[-1].grid.dim if ok else None,
                     formal_order=result.formal_order, time_unit="s of solver time")
        except AnalysisError as exc:
            print(f"  no plan: {exc}")
            continue
        print("  " + str(p).replace("\n", "\n  "))


def print_design_warnings(args, problem=None):
    """Warn, ahead of the study, where the manufactured solution cannot catch mistakes (:mod:`mmsverify.design`)."""
    import warnings
    from mmsverify.design.checks import design_warnings
    from mmsverify.problem.derive import get_problem
    order = getattr(args, "formal_order", None)
    orders = {"time_order": order} if getattr(args, "mode", None) == "time" else {"formal_order": order}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")   # numerical warnings of the samples; a failed check says so itself
        found = design_warnings(get_problem(args.problem if problem is None else problem), **orders)
    for w in found:
        print(f"warning: {w}", file=sys.stderr)
    sys.stderr.flush()


def register(sub):
    p = sub.add_parser("run", help="run a solver on a refinement sequence and judge the observed order",
                       description="Run SOLVER on PROBLEM over a refinement sequence, print errors, observed "
                                   "orders and the verdict against the formal order.")
    p.add_argument("problem", help="problem file (.toml) or bundled problem name")
    p.add_argument("solver", nargs="?", help="bundled solver name or module:function (or use --external)")
    add_study_options(p)
    p.add_argument("--json", metavar="PATH", help="also write every number as JSON")
    p.add_argument("--target-error", type=float, metavar="E",
                   help="also predict the grid and run time that bring the L2 error of each field to E")
    p.set_defaults(func=_run)

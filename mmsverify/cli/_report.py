"""``mmsverify report``: a study as Markdown, HTML, JSON and CSV files with figures."""

import sys
from pathlib import Path

from mmsverify.errors import MMSError
from mmsverify.cli.progress import QUIET, progress_for, verbosity
from mmsverify.outputs.reports import FORMATS, write_reports
from mmsverify.render.wording import headline
from mmsverify.cli import EXIT_INPUT, comma_choices
from mmsverify.cli._run import add_study_options, exit_code, external_from_args, study_from_args


def _formats(text):
    return list(comma_choices(text.lower(), FORMATS, "format"))


def _report(args):
    try:
        formats = _formats(args.formats)
    except ValueError as exc:
        print(f"mmsverify report: {exc}", file=sys.stderr)
        return EXIT_INPUT
    if args.source:
        if args.problem or args.solver or args.external:
            print("mmsverify report: give either --from FILE or PROBLEM SOLVER, not both", file=sys.stderr)
            return EXIT_INPUT
        from mmsverify.outputs.studyfile import read_json
        result = read_json(args.source)
        want_map = args.map
    else:
        if not args.problem or bool(args.solver) == bool(args.external):
            print("mmsverify report: name a PROBLEM and either a SOLVER or --external COMMAND (or --from a study "
                  "JSON file)", file=sys.stderr)
            return EXIT_INPUT
        label = args.solver or args.external
        result = study_from_args(args, args.problem, args.solver, progress_for(args, label=f"{args.problem} / {label}"))
        want_map = not args.no_map
    pointwise = None
    if want_map and {"md", "html"} & set(formats):
        from mmsverify.render.pointwise import finest_error
        try:
            if args.source:
                _recorded_solver_is_bundled(result, args.source)
            pointwise = finest_error(result, solver=external_from_args(args) or args.solver or None,
                                     problem=args.problem or None)
        except MMSError as exc:  # the reports are still worth writing without the map
            print(f"mmsverify report: no error map: {exc}", file=sys.stderr)
    output = args.output or (Path(args.source).parent if args.source else _DEFAULT_OUTPUT)
    written = write_reports(result, output, formats, pointwise, stem=args.name)
    if verbosity(args) == QUIET:
        print(f"{result.outcome.upper()}: {headline(result)}")
    else:
        print(result)
        print()
    if verbosity(args) != QUIET:
        for path in written.values():
            print(f"wrote {path}")
    return exit_code(result)


def _recorded_solver_is_bundled(result, source):
    """A study file never chooses code to import: the error map reruns only a solver registered by name by an
    installed package."""
    from mmsverify.execute.solvers import registered_solvers
    if result.solver not in registered_solvers():
        raise MMSError(f"{source}: the study names the solver {result.solver!r}, which no installed package "
                       "registers by name, and a study file never chooses code to import; draw the map with "
                       "`mmsverify report PROBLEM SOLVER`, naming the solver yourself")


#: Folder for the files of a study run by the command (a study read with --from is written beside its JSON).
_DEFAULT_OUTPUT = "mmsverify-report"


def register(sub):
    p = sub.add_parser("report", help="write a study as Markdown, HTML, JSON and CSV with figures",
                       description="Run SOLVER on PROBLEM (or read a study JSON written earlier) and write the "
                                   "reports: each states the verdict, then the evidence (tables, figures of "
                                   "error and order against grid size, run time and where the error lives), "
                                   "then the cautions. The exit code is that of `mmsverify run`.")
    p.add_argument("problem", nargs="?", help="problem file (.toml) or bundled problem name")
    p.add_argument("solver", nargs="?", help="bundled solver name or module:function (or use --external)")
    add_study_options(p)
    p.add_argument("--from", dest="source", metavar="STUDY_JSON",
                   help="draw the reports from a study JSON written by this command instead of running")
    p.add_argument("-o", "--output", metavar="DIR",
                   help=f"folder for the files (default ./{_DEFAULT_OUTPUT}; with --from, the folder of the "
                        "study JSON, so the reports land beside it)")
    p.add_argument("--formats", default=",".join(FORMATS),
                   help=f"comma-separated subset of {','.join(FORMATS)} (default all)")
    p.add_argument("--name", help="file name stem (default <problem>_<solver>)")
    p.add_argument("--no-map", action="store_true",
                   help="skip the pointwise error map (saves one extra solver run on the finest level)")
    p.add_argument("--map", action="store_true",
                   help="with --from: rerun the finest level to draw the error map (needs the solver)")
    p.set_defaults(func=_report)

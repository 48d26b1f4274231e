"""``mmsverify export PROBLEM --lang LANG``: source terms as NumPy, C, Fortran or LaTeX."""

import sys

from mmsverify.outputs.export import LANGUAGES, export_code, write_export


def _export(args):
    keys = args.only or None
    if args.output:
        path = write_export(args.problem, args.lang, args.output, keys)
        print(f"wrote {path}", file=sys.stderr)
    else:
        sys.stdout.write(export_code(args.problem, args.lang, keys))
    return 0


def register(sub):
    p = sub.add_parser("export", help="write exact solution, source terms and boundary data as code",
                       description="Write the manufactured expressions of PROBLEM as NumPy, C99 (header), "
                                   "Fortran 90 (module) or LaTeX, with common subexpressions eliminated and "
                                   "the problem's content hash in the header.")
    p.add_argument("problem", help="problem file (.toml) or bundled problem name")
    p.add_argument("--lang", choices=LANGUAGES, default="c", help="output language (default c)")
    p.add_argument("-o", "--output", metavar="PATH",
                   help="file or folder to write (atomically); default: standard output")
    p.add_argument("--only", nargs="+", metavar="KEY",
                   help="export only these expressions (keys as `mmsverify derive` lists them, e.g. source_u)")
    p.set_defaults(func=_export)

"""``mmsverify estimate``: discretization error of a real simulation, no exact solution needed.

Three forms:

* ``mmsverify estimate levels.csv`` - a level table (see :mod:`mmsverify.analysis.gridvalues`);
* ``mmsverify estimate --values 6.063,5.972,5.863 --cells 18000,8000,4500 --dim 2``;
* ``mmsverify estimate --profile coarse.csv medium.csv fine.csv --cells ... --dim 2``
  for a line or field sampled on three grids (interpolated to the fine points).

Levels may come fine to coarse as well (Celik et al. 2008 number them so):
the order is read from the sizes, the levels are reordered, and a note says
so. Profile files pair with the sizes by position; when their point counts
contradict the order the sizes give, the command refuses and names the files.
"""

import json
from pathlib import Path

from mmsverify.errors import AnalysisError
from mmsverify.analysis.estimate import assess, assess_table, load_levels, load_profile
from mmsverify.analysis.gci import gci_profile, plot_profile
from mmsverify.cli import EXIT_FAIL, EXIT_OK


# Messages of the Python functions name their keywords; on the command line the flags do that job.
_CLI_WORDS = (
    ("choose one with column=", "choose one with --column (column= in Python)"),
    ("pass formal_order (the scheme's design order)",
     "give the formal order with --formal-order (the scheme's design order; formal_order= in Python)"),
    ("pass dim=1, 2 or 3", "give --dim 1, 2 or 3 (dim= in Python)"),
)


def _cli_words(text):
    """``text`` with the Python keywords it tells the reader to pass replaced by this command's flags."""
    for python, flag in _CLI_WORDS:
        text = text.replace(python, flag)
    return text


def _floats(text, what):
    try:
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise AnalysisError(f"--{what}: expected numbers separated by commas, got {text!r}") from None


def _sizes(args, n):
    h = _floats(args.h, "h") if args.h else None
    cells = _floats(args.cells, "cells") if args.cells else None
    if (h is None) == (cells is None):
        raise AnalysisError("give the grid sizes with --h or the cell counts with --cells (and --dim)")
    if len(h or cells) != n:
        raise AnalysisError(f"{n} value(s) but {len(h or cells)} grid size(s); give one size per value")
    return h, cells


def _fine_first(h, cells):
    """True if the sizes run fine to coarse (h increasing, or cell counts decreasing) from first to last."""
    sizes = h if h else [-c for c in cells]
    return len(sizes) > 1 and all(a < b for a, b in zip(sizes, sizes[1:]))


def _coarse_to_fine(values, h, cells):
    """Accept levels listed fine to coarse too (as Celik et al. 2008 number them); a note says so."""
    if not _fine_first(h, cells):
        return values, h, cells, None
    note = (f"note: the sizes (--{'h' if h else 'cells'}) run fine to coarse; the values were taken in the same "
            "order and are listed coarse to fine below")
    return values[::-1], h[::-1] if h else None, cells[::-1] if cells else None, note


def _profile_order(files, pts, vals, h, cells):
    """Put the three profile files coarse to fine, checking the sizes against the files' point counts.

    The sizes pair with the files by position. Sizes that run fine to coarse
    reorder both, with a note. Point counts that fall strictly while the
    sizes say coarse to fine (or rise while they say fine to coarse) mean the
    files and sizes disagree, which is refused, naming the files.
    """
    counts = [len(v) for v in vals]
    rising = counts[0] < counts[1] < counts[2]
    falling = counts[0] > counts[1] > counts[2]
    listing = ", ".join(f"{f} ({n} points)" for f, n in zip(files, counts))
    size_opt = "--h" if h else "--cells"
    if _fine_first(h, cells):
        if rising:
            raise AnalysisError(
                f"{size_opt} runs fine to coarse but the profile files grow in points: {listing}. Give the files "
                f"and {size_opt} in the same order, coarse, medium, fine")
        note = (f"note: {size_opt} runs fine to coarse, so the files were taken as fine, medium, coarse: "
                f"{listing}; they are used coarse to fine")
        rev = slice(None, None, -1)
        return (list(files)[rev], list(pts)[rev], list(vals)[rev], h[rev] if h else None,
                cells[rev] if cells else None, note)
    if falling:
        raise AnalysisError(
            f"the profile files shrink in points from first to last ({listing}) while {size_opt} runs coarse to "
            f"fine: the files seem listed fine to coarse. List them coarse, medium, fine, in the order of "
            f"{size_opt}")
    return list(files), list(pts), list(vals), h, cells, None


def _estimate(args):
    try:
        return _estimate_in_cli_words(args)
    except AnalysisError as exc:
        raise AnalysisError(_cli_words(str(exc))) from None


def _estimate_in_cli_words(args):
    if args.profile:
        if len(args.profile) != 3:
            raise AnalysisError("--profile takes three files, coarse, medium and fine")
        pts, vals = zip(*(load_profile(p, column=args.column) for p in args.profile))
        h, cells = _sizes(args, 3)
        _, pts, vals, h, cells, note = _profile_order(args.profile, pts, vals, h, cells)
        if note:
            print(note)
        result = gci_profile(pts, vals, h=h, cells=cells, dim=args.dim, volume=args.volume,
                             interpolation=args.interpolation)
        print(_cli_words(str(result)))
        if args.plot:
            plot_profile(result, args.plot, label=args.column or "value")
            print(f"\nwrote {args.plot}")
        return EXIT_OK
    if args.file:
        table = load_levels(args.file, dim=args.dim)
        if table.reversed:
            print(f"note: {args.file} lists the levels fine to coarse (by its {table.size_column} column); "
                  "they are used and listed coarse to fine")
        result = assess_table(table, formal_order=args.formal_order, noise=args.noise)
        records = list(result)
    elif args.values:
        values = _floats(args.values, "values")
        h, cells = _sizes(args, len(values))
        values, h, cells, note = _coarse_to_fine(values, h, cells)
        if note:
            print(note)
        result = assess(values, h=h, cells=cells, dim=args.dim, volume=args.volume, name=args.name,
                        formal_order=args.formal_order, noise=args.noise)
        records = [result]
    else:
        raise AnalysisError("give a level file, --values with --h or --cells, or --profile with three files")
    print(_cli_words(str(result)))
    if args.details:
        for r in records:
            print()
            print(_cli_words(str(r.gci)) if r.gci is not None else f"{r.name}: no GCI table (the finest two values are equal)")
    if args.json:
        Path(args.json).write_text(json.dumps([_record(r) for r in records], indent=2))
        print(f"\nwrote {args.json}")
    # exit 1 when a quantity's uncertainty is above the acceptance level or could not be estimated
    return EXIT_OK if all(r.acceptable for r in records) else EXIT_FAIL


def _record(r):
    return {"name": r.name, "values": list(r.values), "extrapolated": r.extrapolated, "order": r.order,
            "uncertainty": r.uncertainty, "relative_uncertainty": r.relative_uncertainty,
            "convergence": r.convergence.kind if r.convergence else None, "method": r.method,
            "acceptable": r.acceptable, "verdict": r.verdict, "warnings": [_cli_words(w) for w in r.warnings]}


def register(sub):
    p = sub.add_parser("estimate", help="discretization error of a real simulation from three or more grids",
                       description="Richardson extrapolation, observed order, GCI and convergence type for "
                                   "quantities computed on three or more grids (no exact solution needed).")
    p.add_argument("file", nargs="?", help="level table: CSV (cells or h, then one column per quantity) or TOML")
    p.add_argument("--values", help="values of one quantity, comma-separated, coarse to fine or fine to coarse, matching the sizes")
    p.add_argument("--h", help="representative grid sizes, comma-separated")
    p.add_argument("--cells", help="cell counts, comma-separated (with --dim)")
    p.add_argument("--dim", type=int, help="space dimension, to turn cell counts into h = (V/N)^(1/dim)")
    p.add_argument("--volume", type=float, help="domain volume V (default 1)")
    p.add_argument("--name", default="quantity", help="name of the quantity given with --values")
    p.add_argument("--formal-order", type=float, help="order the scheme is designed for (flags far-off orders)")
    p.add_argument("--noise", type=float, metavar="REL",
                   help="relative noise of the values beyond round-off, e.g. an iterative solver's tolerance; "
                        "changes below max(1e-10, REL) x |value| count as converged to round-off")
    p.add_argument("--profile", nargs="+", metavar="CSV",
                   help="three profile files, coarse, medium, fine (sizes in the same order; files and sizes "
                        "both fine to coarse are reordered with a note)")
    p.add_argument("--column", help="quantity column of the profile files")
    p.add_argument("--interpolation", choices=("cubic", "linear"), default="cubic",
                   help="how coarse profiles reach the fine points (default cubic; linear for profiles with jumps)")
    p.add_argument("--plot", metavar="PNG", help="profile plot with GCI error bars")
    p.add_argument("--details", action="store_true", help="also print the full GCI table of each quantity")
    p.add_argument("--json", metavar="PATH", help="write the estimates as JSON")
    p.set_defaults(func=_estimate)

"""``mmsverify estimate``: discretization error of a real simulation, no exact solution needed.

Three forms:

* ``mmsverify estimate levels.csv`` - a level table (see :mod:`mmsverify.levels`);
* ``mmsverify estimate --values 6.063,5.972,5.863 --cells 18000,8000,4500 --dim 2``;
* ``mmsverify estimate --profile coarse.csv medium.csv fine.csv --cells ... --dim 2``
  for a line or field sampled on three grids (interpolated to the fine points).
"""

import json
from pathlib import Path

from ..errors import AnalysisError
from ..estimate import assess, assess_table, load_levels, load_profile
from ..gci import gci_profile, plot_profile
from . import EXIT_FAIL, EXIT_OK


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


def _coarse_to_fine(values, h, cells):
    """Accept levels listed fine to coarse too (as Celik et al. 2008 number them)."""
    sizes = h if h else [-c for c in cells]
    if len(sizes) > 1 and sizes[0] < sizes[-1]:
        values, h, cells = values[::-1], h[::-1] if h else None, cells[::-1] if cells else None
    return values, h, cells


def _estimate(args):
    if args.profile:
        if len(args.profile) != 3:
            raise AnalysisError("--profile takes three files, coarse, medium and fine")
        pts, vals = zip(*(load_profile(p, column=args.column) for p in args.profile))
        h, cells = _sizes(args, 3)
        result = gci_profile(list(pts), list(vals), h=h, cells=cells, dim=args.dim, volume=args.volume,
                             interpolation=args.interpolation)
        print(result)
        if args.plot:
            plot_profile(result, args.plot, label=args.column or "value")
            print(f"\nwrote {args.plot}")
        return EXIT_OK
    if args.file:
        result = assess_table(load_levels(args.file, dim=args.dim), formal_order=args.formal_order, noise=args.noise)
        records = list(result)
    elif args.values:
        values = _floats(args.values, "values")
        h, cells = _sizes(args, len(values))
        values, h, cells = _coarse_to_fine(values, h, cells)
        result = assess(values, h=h, cells=cells, dim=args.dim, volume=args.volume, name=args.name,
                        formal_order=args.formal_order, noise=args.noise)
        records = [result]
    else:
        raise AnalysisError("give a level file, --values with --h or --cells, or --profile with three files")
    print(result)
    if args.details:
        for r in records:
            print()
            print(r.gci if r.gci is not None else f"{r.name}: no GCI table (the finest two values are equal)")
    if args.json:
        Path(args.json).write_text(json.dumps([_record(r) for r in records], indent=2))
        print(f"\nwrote {args.json}")
    # exit 1 when a quantity's uncertainty is above the acceptance level or could not be estimated
    return EXIT_OK if all(r.acceptable for r in records) else EXIT_FAIL


def _record(r):
    return {"name": r.name, "values": list(r.values), "extrapolated": r.extrapolated, "order": r.order,
            "uncertainty": r.uncertainty, "relative_uncertainty": r.relative_uncertainty,
            "convergence": r.convergence.kind if r.convergence else None, "method": r.method,
            "acceptable": r.acceptable, "verdict": r.verdict, "warnings": list(r.warnings)}


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
                   help="three profile files, coarse, medium, fine (sizes in the same order)")
    p.add_argument("--column", help="quantity column of the profile files")
    p.add_argument("--interpolation", choices=("cubic", "linear"), default="cubic",
                   help="how coarse profiles reach the fine points (default cubic; linear for profiles with jumps)")
    p.add_argument("--plot", metavar="PNG", help="profile plot with GCI error bars")
    p.add_argument("--details", action="store_true", help="also print the full GCI table of each quantity")
    p.add_argument("--json", metavar="PATH", help="write the estimates as JSON")
    p.set_defaults(func=_estimate)

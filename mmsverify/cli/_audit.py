"""``mmsverify audit PROBLEM``: does the manufactured solution exercise what it should?"""

from mmsverify.design.checks import SMALL_TERM, audit
from mmsverify.cli import EXIT_FAIL, EXIT_OK


def _names(text):
    return [n.strip() for n in text.split(",") if n.strip()]


def _audit(args):
    a = audit(args.problem, args.formal_order, args.time_order, threshold=args.threshold, starts=args.starts,
              seed=args.seed, per_axis=args.samples)
    print(a)
    if args.balance:
        from mmsverify.design.balance import balance
        r = balance(args.problem, _names(args.tune) if args.tune else None, args.iterations,
                    max_factor=args.max_factor, threshold=args.threshold, per_axis=args.samples,
                    starts=args.starts, seed=args.seed)
        print()
        print(r)
        if r.tuned:
            print("\nsuggested constants (paste into the problem file):")
            print(r.constants_toml().rstrip())
    return EXIT_OK if a.ok else EXIT_FAIL


def register(sub):
    p = sub.add_parser(
        "audit", help="check that a manufactured solution exercises every term, shows its truncation error "
                      "and stays physical",
        description="Check a problem's design: the size of every term of every equation, the derivatives "
                    "that lead the truncation error of a scheme of the formal order, and the [bounds] of the "
                    "file plus the positivity the operator needs (sampling, then optimisation over space and "
                    "time). With --balance, also suggest [constants] that keep the terms comparable. "
                    "Exit code 0 when the design is sound, 1 when anything is flagged.")
    p.add_argument("problem", help="problem file (.toml) or bundled problem name")
    p.add_argument("--formal-order", type=float, help="space order of the scheme (default: the problem's [order])")
    p.add_argument("--time-order", type=float, help="time order of the scheme (default: the problem's [order])")
    p.add_argument("--threshold", type=float, default=SMALL_TERM,
                   help=f"flag a term below this fraction of the largest of its equation (default {SMALL_TERM})")
    p.add_argument("--samples", type=int, metavar="N", help="samples per direction (default 65/25/11 in 1/2/3-D)")
    p.add_argument("--starts", type=int, default=6, help="optimisation starts per bound (0: sampling only)")
    p.add_argument("--seed", type=int, default=0, help="seed of the random optimisation starts")
    p.add_argument("--balance", action="store_true", help="suggest constants that balance the terms")
    p.add_argument("--iterations", type=int, default=100, help="most balancing iterations (default 100)")
    p.add_argument("--tune", metavar="A,B,...", help="constants balancing may change (default: those the "
                                                     "fields use and the operator does not)")
    p.add_argument("--max-factor", type=float, default=10.0, help="largest change of a constant (default 10x)")
    p.set_defaults(func=_audit)

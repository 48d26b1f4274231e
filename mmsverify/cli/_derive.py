"""``mmsverify derive PROBLEM``: show the derived source terms and boundary data."""

import sympy as sp

from mmsverify.problem.derive import derive


def _derive(args):
    mms = derive(args.problem)
    p = mms.problem
    print(f"{p.name}: {p.description}".rstrip(": "))
    print(f"operator {p.operator}; {p.dim}-D{' transient' if p.transient else ''}; content hash {p.content_hash()[:12]}")
    for key, expr in mms.expressions().items():
        print(f"\n{key} =")
        print("  " + (sp.pretty(expr) if args.pretty else str(expr)).replace("\n", "\n  "))


def register(sub):
    p = sub.add_parser("derive", help="print the source terms and boundary data sympy derives for a problem")
    p.add_argument("problem", help="problem file (.toml) or bundled problem name")
    p.add_argument("--pretty", action="store_true", help="two-dimensional pretty printing")
    p.set_defaults(func=_derive)

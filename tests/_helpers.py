"""Checks and data shared by the analysis tests (test_gci, test_estimate*).

Imported as ``from _helpers import ...``: pytest puts this folder on
``sys.path`` for the flat test files beside it (the folder has no
``__init__.py``).
"""

__all__ = ["printed", "no_nan", "write_profiles"]


def printed(value, printed):
    """True if ``value``, rounded to the digits of the ``printed`` string, equals it.

    Published tables give rounded numbers; ``printed(1.5303, "1.53")`` is
    how a computed value is compared with one of them.
    """
    decimals = len(printed.split(".")[1]) if "." in printed else 0
    return f"{value:.{decimals}f}" == printed


def no_nan(record):
    """Assert that ``str(record)`` shows no NaN anywhere; return the text."""
    text = str(record)
    assert "nan" not in text.lower(), text
    return text


def write_profiles(folder, cells=(10, 20, 40), prefix="grid"):
    """CSV profile files ``x, u`` on [0, 2] with ``cells`` cells each; returns their paths (as given).

    Closed form phi(x; h) = sin(x) + h**2 cos(3x): second order at every node.
    """
    import numpy as np
    files = []
    for n in cells:
        x = np.linspace(0, 2, n + 1)
        h = 2 / n
        p = folder / f"{prefix}{n}.csv"
        p.write_text("x, u\n" + "\n".join(f"{a:.17g}, {np.sin(a) + h * h * np.cos(3 * a):.17g}" for a in x))
        files.append(str(p))
    return files

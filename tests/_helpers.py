"""Checks shared by the analysis tests (test_gci, test_estimate).

Imported as ``from _helpers import ...``: pytest puts this folder on
``sys.path`` for the flat test files beside it (the folder has no
``__init__.py``).
"""

__all__ = ["printed", "no_nan"]


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

"""pytest plugin of mmsverify: the ``order_check`` fixture and ``--mmsverify-reports``.

Registered through the ``pytest11`` entry point, so installing mmsverify
makes the fixture available in every test suite::

    def test_scheme_order(order_check):
        order_check("plate-poisson", my_solver, order=2)

``order_check`` takes the arguments of :func:`mmsverify.testing.assert_order`,
records a one-line summary in the test's ``user_properties`` (it shows up in
JUnit XML), and with ``pytest --mmsverify-reports DIR`` also writes an HTML
and a JSON report of every check, passed or failed, for CI artifacts.
"""

import re

import pytest

__all__ = ["order_check", "pytest_addoption"]


def pytest_addoption(parser):
    group = parser.getgroup("mmsverify", "order checks with manufactured solutions")
    group.addoption("--mmsverify-reports", metavar="DIR", default=None,
                    help="write an HTML and a JSON report of every order_check into DIR")


def _record(request, result):
    from mmsverify.render.wording import headline
    request.node.user_properties.append(("mmsverify", f"{result.outcome}: {result.problem} with "
                                                      f"{result.solver}: {headline(result)}"))
    folder = request.config.getoption("mmsverify_reports")
    if folder:
        from mmsverify.outputs.reports import write_reports
        stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", request.node.nodeid).strip("_")
        count = sum(1 for k, _ in request.node.user_properties if k == "mmsverify")
        write_reports(result, folder, ("html", "json"), stem=f"{stem}_{count}" if count > 1 else stem)


@pytest.fixture
def order_check(request):
    """:func:`mmsverify.testing.assert_order`, recorded on the test (and as a report with --mmsverify-reports)."""
    from mmsverify.testing import OrderCheckError, assert_order

    def check(problem, solver, order=None, **kwargs):
        __tracebackhide__ = True
        try:
            result = assert_order(problem, solver, order, **kwargs)
        except OrderCheckError as exc:
            _record(request, exc.result)
            raise
        _record(request, result)
        return result

    return check

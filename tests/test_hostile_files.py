"""Hostile files other than problem files: study JSON, special files, and the quieter problems.

Every file the tool reads is untrusted. A seeded generator builds hostile
study JSON files from real studies (the same files every run; a failure
names its label): values of the wrong type, unknown statuses, deleted keys,
deep nesting, huge lists and strings, NaN and Infinity, byte-order marks,
truncation, binary data, odd top-level documents and payloads that name
code to import. Each is handed to ``mmsverify report --from`` in this
process. The result must be a report (exit 0, 1 or 3) or a refusal with
exit 2 and a message naming the file; never a traceback, never code run
(a canary file that a successful payload would create), never a hang
(each case timed).

Special files (devices, named pipes, sockets, folders, links to devices)
are given wherever a path is read, in one child process with a time limit,
since a regression there would block the read forever.
"""

import copy
import json
from pathlib import Path
import random
import socket
import subprocess
import sys
import time
import tomllib

import numpy as np
import pytest

from mmsverify import Solution, problem_from_text, run_study
from mmsverify.cli import main
from mmsverify.errors import MMSError, ProblemError
from mmsverify.outputs.studyfile import read_json, study_from_data, study_to_data, write_json
from mmsverify.render.markdown import markdown_text
from mmsverify.study.settings import Refinement

REPO = Path(__file__).resolve().parent.parent
SEED = 20261204
PER_CASE_SECONDS = 10.0   # generous on 2 shared cores; a 3,000-level file took more than 60 s before
CANARY = "hostile-files-canary"

# Values of the wrong type, range or kind for most slots of a study file.
WRONG = [True, False, None, "text", "", -1, 0, 2**64, 10**400, 1e308, -1e308, 0.5, -0.5, [], {}, [1, "a"],
         {"a": 1}, "NaN", "inf", [[[]]], "\u202e", "\x00", "ok ", "L2 ", ["L1"], {"L1": None}]
UNKNOWN = ["OK", "passed", "failed ", "unknown", "confirmed!", "L3", "H1", "", "None", "null", "Ok", "value",
           "√", "space\x00", "combined ", "fail"]
ENUM_KEYS = ("status", "norm", "mode", "order_source", "outcome", "axis", "used_for", "norms_source")


# -- the corpus ----------------------------------------------------------------------------------
def _paths(doc, prefix=()):
    """Every path (tuple of keys and indices) to a value in ``doc``."""
    out = []
    items = doc.items() if isinstance(doc, dict) else enumerate(doc) if isinstance(doc, list) else ()
    for k, v in items:
        out.append(prefix + (k,))
        out += _paths(v, prefix + (k,))
    return out


def _set(doc, path, value):
    doc = copy.deepcopy(doc)
    target = doc
    for k in path[:-1]:
        target = target[k]
    target[path[-1]] = value
    return doc


def _delete(doc, path):
    doc = copy.deepcopy(doc)
    target = doc
    for k in path[:-1]:
        target = target[k]
    del target[path[-1]]
    return doc


def _nested(depth, kind):
    return ("[" * depth + "]" * depth) if kind == "list" else ('{"a":' * depth + "1" + "}" * depth)


def _dump(doc):
    return json.dumps(doc, allow_nan=True).encode()


def hostile_studies(bases, rng):
    """``(label, category, content bytes, single-value mutation or None)`` for every generated file."""
    for i in range(130):
        name, doc = rng.choice(bases)
        path = rng.choice(_paths(doc))
        value = rng.choice(WRONG)
        yield f"type-{i}", "wrong type", _dump(_set(doc, path, value)), _set(doc, path, value)
    for i in range(45):
        name, doc = rng.choice(bases)
        paths = [p for p in _paths(doc) if p[-1] in ENUM_KEYS]
        path = rng.choice(paths)
        mutated = _set(doc, path, rng.choice(UNKNOWN))
        yield f"status-{i}", "unknown value", _dump(mutated), mutated
    for i in range(35):
        name, doc = rng.choice(bases)
        path = rng.choice([p for p in _paths(doc) if isinstance(p[-1], str)])
        mutated = _delete(doc, path)
        yield f"delete-{i}", "missing key", _dump(mutated), mutated
    for i, depth in enumerate([33, 64, 100, 999, 1000, 1001, 3000, 10_000, 100_000, 1_000_000] * 2):
        name, doc = rng.choice(bases)
        path = rng.choice(_paths(doc))
        text = _dump(_set(doc, path, "@@NEST@@")).decode()
        text = text.replace('"@@NEST@@"', _nested(depth, "list" if i % 2 else "object"))
        yield f"deep-{i}-{depth}", "deep nesting", text.encode(), None
    name, doc = bases[0]
    yield "huge-levels", "huge", _dump(dict(doc, levels=doc["levels"] * 5000)), None
    yield "huge-verdicts", "huge", _dump(dict(doc, verdicts=doc["verdicts"] * 20_000)), None
    yield "huge-string", "huge", _dump(dict(doc, problem="p" * 5_000_000)), None
    yield "huge-message", "huge", _dump(_set(doc, ("levels", 0, "message"), "m" * 5_000_000)), None
    yield "huge-fields", "huge", _dump(_set(doc, ("levels", 0, "errors"),
                                            {f"f{k}": {"L1": 1.0, "L2": 1.0, "Linf": 1.0} for k in range(50_000)})), None
    yield "huge-file", "huge", _dump(dict(doc, caution="c" * 17 * 2**20)), None
    yield "huge-integer", "huge", _dump(doc).replace(b'"level": 0', b'"level": ' + b"9" * 5000), None
    yield "huge-cells", "huge", _dump(_set(doc, ("levels", 0, "cells"), [2**62, 2**62])), None
    yield "huge-orders", "huge", _dump(_set(doc, ("orders", "u", "L2"), [1.0] * 2_000_000)), None
    yield "huge-info", "huge", _dump(_set(doc, ("levels", 0, "info"), {str(k): k for k in range(200_000)})), None
    for i in range(40):
        name, doc = rng.choice(bases)
        text = _dump(doc).decode()
        numbers = [k for k in range(len(text) - 1) if text[k] in ":[ ," and text[k + 1] in "0123456789-"]
        k = rng.choice(numbers) + 1
        end = k + 1
        while end < len(text) and text[end] in "0123456789.eE+-":
            end += 1
        token = rng.choice(["NaN", "Infinity", "-Infinity", "1e999", "-1e999", "1e400", "-0"])
        yield f"nonfinite-{i}", "NaN, Infinity", (text[:k] + token + text[end:]).encode(), None
    for i, (name, doc) in enumerate(bases):
        yield f"bom-valid-{i}", "byte-order mark", b"\xef\xbb\xbf" + _dump(doc), None
        yield f"bom-double-{i}", "byte-order mark", b"\xef\xbb\xbf\xef\xbb\xbf" + _dump(doc), None
        yield f"bom-utf16-{i}", "byte-order mark", json.dumps(doc).encode("utf-16"), None
        yield f"bom-utf32-{i}", "byte-order mark", json.dumps(doc).encode("utf-32"), None
        mutated = _set(doc, ("levels", 0, "h"), "0.1")
        yield f"bom-mutated-{i}", "byte-order mark", b"\xef\xbb\xbf" + _dump(mutated), mutated
    for i in range(30):
        name, doc = rng.choice(bases)
        data = _dump(doc)
        yield f"truncated-{i}", "truncated", data[:rng.randrange(len(data))], None
    for i in range(12):
        yield f"binary-{i}", "binary", bytes(rng.randrange(256) for _ in range(rng.choice([1, 100, 10_000]))), None
    name, doc = bases[0]
    yield "binary-zeros", "binary", bytes(100_000), None
    yield "binary-latin1", "binary", json.dumps(dict(doc, problem="plaque-épaisse"), ensure_ascii=False).encode("latin-1"), None
    yield "binary-gzip", "binary", b"\x1f\x8b\x08\x00" + bytes(64), None
    yield "binary-bad-utf8", "binary", _dump(doc).replace(b'"plate-poisson"', b'"plate-\xc3\x28"', 1), None
    for i, text in enumerate(["", " ", "[]", "1", '"x"', "null", "true", "{}", "{} {}", '{"a": 1} // note',
                              '{"format": "mmsverify.study"}', '{"format": "mmsverify.study", "format_version": 1}',
                              '{"format": "mmsverify.study", "format_version": true}',
                              '{"format": "mmsverify.study", "format_version": 1.0}']):
        yield f"document-{i}", "other document", text.encode(), None
    for i, (name, doc) in enumerate(bases):
        for j, value in enumerate(["canarymod:solve", "os:system", "subprocess:run", "__import__('os')",
                                   "canarymod"]):
            yield f"payload-solver-{i}-{j}", "payload", _dump(dict(doc, solver=value)), None
        markup = dict(doc, problem="<script>alert(1)</script> *x* [l](javascript:1) | ``` ~~s~~ &amp;",
                      solver="`rm -rf ~` __init__")
        yield f"payload-markup-{i}", "payload", _dump(markup), None
        yield f"payload-message-{i}", "payload", _dump(_set(doc, ("levels", 0, "message"),
                                                             "```\n# injected\n<img src=x onerror=alert(1)>")), None
        yield f"payload-source-{i}", "payload", _dump(dict(doc, source="/dev/zero")), None


@pytest.fixture(scope="module")
def bases():
    """Study data of two real studies: a steady one with quantities and a transient one."""
    steady = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=3))
    transient = run_study("slab-heat", "fd-heat-euler", refinement=Refinement(levels=2))
    return [("plate-poisson", study_to_data(steady)), ("slab-heat", study_to_data(transient))]


def _report(path, out, capsys, *extra, formats="json,csv"):
    """Run ``report --from`` in this process: (exit code, stderr, seconds, traceback or None)."""
    start = time.perf_counter()
    try:
        code = main(["--quiet", "report", "--from", str(path), "--formats", formats, "-o", str(out), *extra])
        crash = None
    except BaseException as exc:  # anything escaping the command line is a failure of this test
        code, crash = None, f"{type(exc).__name__}: {exc}"[:300]
    seconds = time.perf_counter() - start
    return code, capsys.readouterr().err, seconds, crash


@pytest.mark.slow
def test_hostile_study_files_end_in_a_report_or_a_clear_refusal(bases, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(tmp_path))
    # a module that a file naming it as the solver would make mmsverify import
    (tmp_path / "canarymod.py").write_text(f"open({CANARY!r}, 'w').close()\ndef solve(case):\n    return None\n")
    rng = random.Random(SEED)
    table, problems = {}, []
    corpus = list(hostile_studies(bases, rng))
    assert len(corpus) >= 300
    for label, category, content, _ in corpus:
        path = tmp_path / "in" / f"{label}.json"
        path.parent.mkdir(exist_ok=True)
        path.write_bytes(content)
        # payloads go through every format and the error map; the others skip the figures, for time
        extra = ("--map",) if category == "payload" else ()
        code, err, seconds, crash = _report(path, tmp_path / "out" / label, capsys, *extra,
                                            formats="md,html,json,csv" if category == "payload" else "json,csv")
        row = table.setdefault(category, {"files": 0, "read": 0, "refused": 0, "other": 0, "slowest": 0.0})
        row["files"] += 1
        row["slowest"] = max(row["slowest"], seconds)
        if crash is not None or code not in (0, 1, 2, 3):
            row["other"] += 1
            problems.append(f"{label}: {crash or f'exit {code}'}")
        elif "mmsverify: error:" in err:
            row["refused"] += 1
            if str(path) not in err:
                problems.append(f"{label}: the message does not name the file: {err[:200]!r}")
        else:
            row["read"] += 1
            if category == "payload" and "solver" in label and "no error map" not in err:
                problems.append(f"{label}: a solver named by the file was used for the map")
        if seconds > PER_CASE_SECONDS:
            problems.append(f"{label}: took {seconds:.1f} s")
    print("\nhostile study files:", json.dumps(table, indent=1))  # the figures in docs/robustness.md
    assert not (tmp_path / CANARY).exists(), "a study file made mmsverify import a module"
    assert not problems, "\n".join(problems[:30])
    for category in ("wrong type", "unknown value", "deep nesting", "NaN, Infinity", "truncated", "binary"):
        assert table[category]["refused"] > 0, category
    assert table["byte-order mark"]["read"] >= 2  # a UTF-8 BOM in front of a valid file is accepted


def test_a_three_thousand_level_file_is_refused_at_once(bases, tmp_path):
    name, doc = bases[0]
    for depth in (3000, 1_000_000):
        p = tmp_path / f"deep{depth}.json"
        p.write_text(json.dumps(dict(doc, notes="@")).replace('"@"', _nested(depth, "list")))
        start = time.perf_counter()
        with pytest.raises(MMSError, match=rf"deep{depth}.json: .*nests arrays and objects {depth + 1} deep"):
            read_json(p)
        assert time.perf_counter() - start < 2.0


@pytest.mark.parametrize("mutate, message", [
    (lambda d: _set(d, ("levels", 1, "h"), "0.1"), r"level entry 1, key 'h': expected a positive finite number"),
    (lambda d: _set(d, ("levels", 0, "status"), "passed"), r"level entry 0, key 'status': expected one of ok, failed"),
    (lambda d: _set(d, ("verdicts", 2, "status"), "great"), r"verdict entry 2, key 'status': expected one of conf"),
    (lambda d: _set(d, ("verdicts", 0, "norm"), "H1"), r"verdict entry 0: a verdict in the H1 norm of field u, but "
                                                        r"level\(s\) 0, 1, 2.* hold no H1 error"),
    (lambda d: _set(d, ("levels", 0, "errors", "u", "L2"), "x"), r"level entry 0, errors u, key 'L2'"),
    (lambda d: _set(d, ("levels", 0, "cells"), [8, True]), r"level entry 0, cells: expected a whole number"),
    (lambda d: _set(d, ("levels", 0, "seconds"), -1), r"key 'seconds': expected a finite number at least 0"),
    (lambda d: _set(d, ("tolerance",), 10**400), r"key 'tolerance': expected a finite number"),
    (lambda d: _delete(d, ("levels", 0, "lower")), r"level entry 0: missing key\(s\) 'lower'"),
    (lambda d: _set(d, ("levels",), {"0": {}}), r"key 'levels': expected a list"),
    (lambda d: _set(d, ("levels", 0, "upper"), [0.0, 0.0]), r"level entry 0: level 0: upper corner"),
    (lambda d: _set(d, ("order_conflicts",), [{"axis": "depth", "solver": 1, "problem": 2, "used_for": "grids"}]),
     r"order_conflicts entry 0, key 'axis'"),
])
def test_a_refusal_names_the_file_and_the_entry(bases, tmp_path, mutate, message):
    p = tmp_path / "s.json"
    p.write_text(json.dumps(mutate(bases[0][1])))
    with pytest.raises(MMSError, match=f"s.json, {message}" if not message.startswith("key") else message):
        read_json(p)


def test_the_validator_is_at_least_as_strict_as_the_schema(bases):
    jsonschema = pytest.importorskip("jsonschema")  # in the [test] extra
    schema = json.loads((REPO / "docs" / "study.schema.json").read_text())
    for name, doc in bases:
        jsonschema.validate(doc, schema)
        study_from_data(doc, name)
    checked = 0
    for label, category, content, mutated in hostile_studies(bases, random.Random(SEED)):
        if mutated is None:
            continue
        try:
            jsonschema.validate(mutated, schema)
        except jsonschema.ValidationError:
            checked += 1
            with pytest.raises(MMSError):
                study_from_data(mutated, label)
    assert checked > 100


def test_a_byte_order_mark_is_accepted_in_study_and_problem_files(bases, tmp_path):
    p = tmp_path / "s.json"
    p.write_bytes(b"\xef\xbb\xbf" + json.dumps(bases[0][1]).encode())
    assert read_json(p).problem == "plate-poisson"
    toml = tmp_path / "rod.toml"
    toml.write_bytes(b"\xef\xbb\xbf" + (REPO / "mmsverify" / "problem" / "bundled" / "plate-poisson.toml").read_bytes())
    from mmsverify.problem.derive import load_problem
    assert load_problem(toml).content_hash() == load_problem("plate-poisson").content_hash()


# -- special files, everywhere a path is read ----------------------------------------------------
SPECIAL_CHILD = r'''
import json, os, socket, sys
from pathlib import Path
d = Path(sys.argv[1])
os.mkfifo(d / "pipe")
s = socket.socket(socket.AF_UNIX); s.bind(str(d / "sock"))
(d / "folder").mkdir()
os.symlink("/dev/zero", d / "link-to-zero")
paths = {"/dev/zero": "/dev/zero", "pipe": str(d / "pipe"), "socket": str(d / "sock"),
         "folder": str(d / "folder"), "link to /dev/zero": str(d / "link-to-zero")}
from mmsverify.cli import main
from mmsverify.errors import MMSError
from mmsverify.analysis.gridvalues import load_levels, load_profile
from mmsverify.problem.derive import load_problem
from mmsverify.execute.external import read_solution, read_case
from mmsverify.outputs.studyfile import read_json
out = {}
for kind, p in paths.items():
    for what, fn in (("study JSON", read_json), ("problem file", load_problem), ("level table", load_levels),
                     ("profile", load_profile), ("case file", read_case),
                     ("program output", lambda p: read_solution(p, load_problem("plate-poisson"), "csv"))):
        try:
            fn(p)
            out[f"{what} / {kind}"] = "read"
        except MMSError as exc:
            out[f"{what} / {kind}"] = "refused" + (" naming it" if p in str(exc) else "")
        except Exception as exc:
            out[f"{what} / {kind}"] = f"other {type(exc).__name__}: {exc}"
    sys.stdout.flush()
codes = {}
for kind, p in paths.items():
    codes[f"report --from {kind}"] = main(["report", "--from", p, "-o", str(d / "o")])
    codes[f"derive {kind}"] = main(["derive", p])
print(json.dumps({"reads": out, "codes": codes}))
'''


@pytest.mark.slow
def test_special_files_are_refused_before_reading_everywhere(tmp_path):
    run = subprocess.run([sys.executable, "-c", SPECIAL_CHILD, str(tmp_path)], capture_output=True, text=True,
                         timeout=180, cwd=REPO, env={**__import__("os").environ, "PYTHONPATH": str(REPO)})
    assert run.returncode == 0, run.stderr[-2000:]
    result = json.loads(run.stdout.strip().splitlines()[-1])
    print("\nspecial files:", json.dumps(result, indent=1))
    assert len(result["reads"]) == 30
    assert all(v == "refused naming it" for v in result["reads"].values()), result["reads"]
    assert set(result["codes"].values()) == {2}, result["codes"]


# -- the quieter problems ------------------------------------------------------------------------
ROD = '''
name = "{name}"
[domain]
x = [0.0, 1.0]
[fields]
{field} = "{u}"
[operator]
kind = "{kind}"
{extra}
[order]
space = 2
'''


def _rod(u="sin(x) + 1", field="u", kind="poisson", extra="", name="rod"):
    return ROD.format(u=u, field=field, kind=kind, extra=extra, name=name)


@pytest.mark.parametrize("text, message", [
    (_rod(field="pi"), r"\[fields\] pi: pi is the number pi in every expression"),
    (_rod(field="E"), r"\[fields\] E: E is Euler's number e"),
    (_rod(kind="custom", extra='pi = "2"\n[operator.equations]\nu = "-lap(u) + pi*u"'),
     r"\[operator\] pi: pi is the number pi"),
])
def test_reserved_constant_names_are_refused(text, message):
    with pytest.raises(ProblemError, match=message):
        problem_from_text(text, "rod.toml")


@pytest.mark.parametrize("u", ["abs(x - 0.5) + sin(x)", "max(x, 0.5)", "min(x, 1 - x)"])
def test_functions_without_a_derivative_everywhere_are_refused_at_load(u):
    with pytest.raises(ProblemError, match=r"rod.toml, line \d+, \[fields\] u: the source term of equation 'u' "
                                           r"needs a derivative that does not exist everywhere"):
        problem_from_text(_rod(u=u), "rod.toml")


@pytest.mark.filterwarnings("ignore:divide by zero:RuntimeWarning")  # the solver meets the pole
def test_an_exact_solution_that_is_not_finite_is_blamed_on_the_problem():
    problem = problem_from_text(_rod(u="1/(x - 0.5)"), "rod.toml")
    result = run_study(problem, "fd-diffusion", refinement=Refinement(levels=2))
    for lv in result.levels:
        assert not lv.ok
        assert "the problem, not the solver, needs fixing" in lv.message
        assert "is inf at (x = 0.5)" in lv.message or "is -inf at (x = 0.5)" in lv.message


@pytest.mark.filterwarnings("ignore:divide by zero:RuntimeWarning")  # the solver meets the pole
def test_a_solver_that_reads_only_finite_points_still_gets_the_blame_right():
    # a solver that returns fine values at a point where the exact solution is infinite: the problem is at fault
    problem = problem_from_text(_rod(u="1/(x - 0.5)**2"), "rod.toml")

    def at_the_pole(case):
        x = np.array([0.25, 0.5, 0.75])
        return Solution(values={"u": np.ones(3)}, points=(x,), weights=np.full(3, 1 / 3))

    result = run_study(problem, at_the_pole, refinement=Refinement(levels=2))
    assert all("exact solution" in lv.message and "(x = 0.5)" in lv.message for lv in result.levels)


def test_solution_info_that_json_cannot_hold_keeps_the_report(tmp_path, capsys):
    from mmsverify.execute.solvers import resolve_solver
    base = resolve_solver("poisson2d")

    class Opaque:
        def __repr__(self):
            return "<Opaque>"

    def solve(case):
        s = base(case)
        info = dict(s.info, opaque=Opaque(), array=np.arange(3), nested={"c": 1 + 2j}, big=np.float32(2.5))
        return Solution(values=s.values, points=s.points, weights=s.weights, time=s.time, info=info,
                        quantities=s.quantities)

    result = run_study("plate-poisson", solve, refinement=Refinement(levels=4))
    assert result.orders_confirmed
    info = result.levels[0].info
    assert info["opaque"] == "<Opaque>" and info["array"] == [0, 1, 2] and info["big"] == 2.5
    assert info["nested"] == {"c": "(1+2j)"} and "opaque, nested.c" in info["mmsverify_note"]
    back = read_json(write_json(result, tmp_path / "s.json"))
    assert back.levels[0].info["opaque"] == "<Opaque>"


@pytest.mark.parametrize("name", ["plate 𝔘𝔫𝔦𝔠𝔬𝔡𝔢 🜁", 'quote " and back\\slash', "émoji 😀 and ✓"])
def test_case_files_are_valid_toml_for_any_unicode_name(tmp_path, name):
    from mmsverify.problem.derive import derive
    from mmsverify.execute.external import read_case, write_case
    from mmsverify.execute.grids import Grid
    from mmsverify.execute.solvers import Case
    problem = problem_from_text(_rod().replace('name = "rod"', f"name = {json.dumps(name, ensure_ascii=False)}"))
    case = Case(Grid(0, (0.0,), (1.0,), (4,)), derive(problem))
    path = write_case(case, tmp_path, tmp_path / "solution.csv", params={"omega": 1.5})
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert data["problem"] == name and data["boundary"]["u"] == ["dirichlet", "dirichlet"]
    assert read_case(path)["problem"] == name


def test_markdown_escapes_names_and_messages(bases):
    name, doc = bases[0]
    doc = dict(doc, problem="<script>x</script> *bold* [a](b)", solver="s|o`l")
    doc = _set(doc, ("levels", 0, "status"), "failed")
    doc = _set(doc, ("levels", 0, "message"), "boom ```\n# not a heading\n````")
    md = markdown_text(study_from_data(doc))
    assert "# Order verification: \\<script\\>x\\</script\\> \\*bold\\* \\[a\\](b) solved by s\\|o\\`l" in md
    assert "<script>" not in md
    # the message's own backquote runs cannot close its code block
    block = md[md.index("`````text"):]
    assert block.splitlines()[1:4] == ["boom ```", "# not a heading", "````"] and block.splitlines()[4] == "`````"


def test_duplicated_csv_columns_are_refused(tmp_path):
    from mmsverify.errors import AnalysisError
    from mmsverify.execute.external import ProgramFailed, read_solution
    from mmsverify.analysis.gridvalues import load_levels, load_profile
    from mmsverify.problem.derive import load_problem
    (tmp_path / "t.csv").write_text("dim = 2\ncells, lift, lift\n100, 1.0, 2.0\n400, 1.1, 2.1\n")
    with pytest.raises(AnalysisError, match=r"t.csv, line 2: column names repeat: lift"):
        load_levels(tmp_path / "t.csv")
    (tmp_path / "p.csv").write_text("x, u, u\n0.0, 1.0, 5.0\n1.0, 2.0, 6.0\n")
    with pytest.raises(AnalysisError, match=r"p.csv, line 1: column names repeat: u"):
        load_profile(tmp_path / "p.csv", "u")
    (tmp_path / "s.csv").write_text("x,y,u,u\n0,0,1,2\n1,1,1,2\n")
    with pytest.raises(ProgramFailed, match=r"s.csv: the header names the column\(s\) u more than once"):
        read_solution(tmp_path / "s.csv", load_problem("plate-poisson"), "csv")

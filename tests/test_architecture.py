"""The package layout follows docs/architecture.md: stages import only upward, no cycles,
no other module's underscore names, no demo imports, and no fork/thread/gc machinery."""

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parent.parent / "mmsverify"

#: Stage of each subpackage or top-level module; a module may import its own stage and lower numbers.
STAGES = {"errors": 0, "fileio": 0, "problem": 1, "design": 2, "execute": 2, "analysis": 3, "render": 4,
          "study": 5, "outputs": 6, "cli": 7, "testing": 7, "pytest_plugin": 7, "gci": 7, "__init__": 8, "__main__": 8}


def _modules():
    for path in sorted(PKG.rglob("*.py")):
        rel = path.relative_to(PKG.parent).with_suffix("")
        parts = list(rel.parts)
        is_pkg = parts[-1] == "__init__"
        if is_pkg:
            parts = parts[:-1]
        yield ".".join(parts), is_pkg, path


def _imports(name, is_pkg, path):
    """(imported module, imported names) for every import in the file, relative ones resolved."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, ()
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if is_pkg else name.split(".")[:-1]
                base = base[: len(base) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            yield mod, tuple(a.name for a in node.names)


MODULES = {name: (is_pkg, path) for name, is_pkg, path in _modules()}


def _stage(module):
    parts = module.split(".")
    if parts[0] != "mmsverify":
        return None
    if len(parts) == 1:
        return STAGES["__init__"]
    return STAGES.get(parts[1])


def _target(mod, names):
    """Modules that an import statement really loads inside the package."""
    out = [mod]
    for n in names:
        if f"{mod}.{n}" in MODULES:
            out.append(f"{mod}.{n}")
    return out


def test_every_module_belongs_to_a_stage():
    unknown = [m for m in MODULES if m != "mmsverify" and _stage(m) is None]
    assert not unknown, f"modules outside the stages of docs/architecture.md: {unknown}"


def test_stages_import_only_upward():
    bad = []
    for name, (is_pkg, path) in MODULES.items():
        own = _stage(name)
        for mod, names in _imports(name, is_pkg, path):
            for target in _target(mod, names):
                stage = _stage(target)
                if stage is not None and target != "mmsverify" and stage > own:
                    bad.append(f"{name} imports {target}")
    assert not bad, "imports against the stage order:\n" + "\n".join(bad)


def test_no_import_cycles():
    graph = {name: set() for name in MODULES}
    for name, (is_pkg, path) in MODULES.items():
        for mod, names in _imports(name, is_pkg, path):
            for target in _target(mod, names):
                if target in MODULES and target != name and not name.startswith(target + "."):
                    graph[name].add(target)
    # packages' __init__ import their children; a child importing its package's other children is fine
    seen, stack, cycles = {}, [], []

    def visit(node):
        seen[node] = "open"
        stack.append(node)
        for nxt in graph[node]:
            if seen.get(nxt) == "open":
                cycles.append(stack[stack.index(nxt):] + [nxt])
            elif nxt not in seen:
                visit(nxt)
        stack.pop()
        seen[node] = "done"

    for node in graph:
        if node not in seen:
            visit(node)
    assert not cycles, "import cycles:\n" + "\n".join(" -> ".join(c) for c in cycles)


def test_no_module_uses_another_modules_underscore_names():
    bad = []
    for name, (is_pkg, path) in MODULES.items():
        for mod, names in _imports(name, is_pkg, path):
            if not mod.startswith("mmsverify"):
                continue
            private = [n for n in names if n.startswith("_") and not n.startswith("__")]
            # a package's private modules (cli/_run.py) serve the modules of that package only
            parts = mod.split(".")
            hidden = [i for i, p in enumerate(parts) if p.startswith("_") and not p.startswith("__")]
            package = name if is_pkg else name.rpartition(".")[0]
            outside = hidden and not package.startswith(".".join(parts[:hidden[0]]))
            if private or outside:
                bad.append(f"{name}: from {mod} import {', '.join(names)}")
    assert not bad, "underscore names used across modules:\n" + "\n".join(bad)


def test_core_never_imports_the_demo():
    bad = [name for name, (is_pkg, path) in MODULES.items()
           for mod, _ in _imports(name, is_pkg, path) if mod.split(".")[0] == "solvers_demo"]
    assert not bad, f"the core imports solvers_demo in: {bad}"


@pytest.mark.parametrize("needle", ["os.fork", "gc.freeze", "threading.Thread", "import _thread", "symengine"])
def test_no_concurrency_tricks(needle):
    hits = [str(p.relative_to(PKG.parent)) for p in PKG.rglob("*.py") if needle in p.read_text(encoding="utf-8")]
    assert not hits, f"{needle} in {hits}"


def test_the_name_of_a_module_is_the_module():
    # `import mmsverify.gci` gives the module whatever was imported first; no function shadows it.
    import subprocess
    import sys
    out = subprocess.run([sys.executable, "-c", "import mmsverify.gci as m; print(m.__name__)"],
                         capture_output=True, text=True, check=True).stdout
    assert out.strip() == "mmsverify.gci"
    import types
    import mmsverify
    shadowed = [n for n in mmsverify.__all__ if f"mmsverify.{n}" in MODULES
                and not isinstance(getattr(mmsverify, n), types.ModuleType)]
    assert not shadowed, f"top-level names that hide a module of the same name: {shadowed}"

"""The shape of the code: the stage map of DEVELOPERS.md, size limits, a light ``import tomo``.

The map (rank, package, what it may import) is parsed from DEVELOPERS.md, so the
document and the code cannot drift apart. Imports are read with ``ast`` from every
module, function-level ones included (they are imports all the same, only later).
"""

from __future__ import annotations

import ast
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "tomo"

#: Functions longer than MAX_FUNCTION_LINES and modules longer than MAX_MODULE_LINES
#: today, each with its owner's reason. Whoever shortens one removes it here; the test
#: fails when an entry is no longer needed, so the list only shrinks.
MAX_FUNCTION_LINES = 100
MAX_MODULE_LINES = 600
LONG_FUNCTIONS: set = set()
LONG_MODULES: set = set()


def _module_name(path):
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def stage_map():
    """{package: (rank, set of packages it may import)} from DEVELOPERS.md's table."""
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    rows = re.findall(r"^\| (\d+) \| `(tomo(?:\.\w+)?)` \| .* \| ([^|]*) \|$", text, flags=re.M)
    out = {}
    for rank, package, allowed in rows:
        names = {f"tomo.{n.strip()}" for n in allowed.split(",") if n.strip() not in ("", "-")}
        out[package] = (int(rank), names)
    return out


def stage_of(module):
    """The map's package of a module: ``tomo.<sub>``; the top package is the API's."""
    parts = module.split(".")
    return "tomo.api" if len(parts) == 1 else ".".join(parts[:2])


def imports_of(module, path):
    """Every tomo module ``module`` imports, at any depth of its code."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            # `from . import note` imports the package; `from .. import api` a module
            submodules = {f"{target}.{a.name}" for a in node.names} & MODULES.keys()
            found |= submodules if len(submodules) == len(node.names) else submodules | {target}
    return {name for name in found if name in MODULES and name != module}


GRAPH = {name: imports_of(name, path) for name, path in MODULES.items()}


def test_map_is_ranked_and_covers_every_package():
    stages = stage_map()
    assert {"tomo.core", "tomo.api", "tomo.cli"} <= stages.keys(), "DEVELOPERS.md's table was not found"
    for package, (rank, allowed) in stages.items():
        for other in allowed:
            assert other in stages, f"{package} may import {other}, which the map does not list"
            # never upward; a package at its neighbour's rank (records beside survey)
            # may import it one way only, which the walk below checks
            assert stages[other][0] <= rank, f"{package} (rank {rank}) may import {other} of rank {stages[other][0]}"
    # the allowed imports themselves have no cycle: strip packages that import nothing
    # left until none remain (Kahn 1962, Commun. ACM 5, 558-562, topological sorting)
    left = {package: set(allowed) for package, (_, allowed) in stages.items()}
    while left:
        free = [package for package, allowed in left.items() if not allowed & left.keys()]
        assert free, f"the map's allowed imports form a cycle among {sorted(left)}"
        for package in free:
            del left[package]
    unmapped = sorted({stage_of(m) for m in MODULES} - stages.keys())
    assert not unmapped, f"packages missing from DEVELOPERS.md's map: {unmapped}"


def test_every_import_follows_the_map():
    stages = stage_map()
    wrong = []
    for module, targets in GRAPH.items():
        mine = stage_of(module)
        for target in sorted(targets):
            theirs = stage_of(target)
            if theirs != mine and theirs not in stages[mine][1]:
                wrong.append(f"{module} imports {target} ({mine} may import {', '.join(sorted(stages[mine][1]))})")
    assert not wrong, "\n".join(wrong)


def test_no_import_cycles():
    # Tarjan's strongly connected components (Tarjan 1972, SIAM J. Comput. 1, 146-160):
    # any component of more than one module is a cycle.
    index, low, stack, on_stack, cycles = {}, {}, [], set(), []

    def visit(v):
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in GRAPH[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                cycles.append(sorted(component))

    for v in GRAPH:
        if v not in index:
            visit(v)
    assert not cycles, f"import cycles: {cycles}"


def _sizes():
    functions, modules = {}, {}
    for path in MODULES.values():
        rel = path.relative_to(ROOT).as_posix()
        text = path.read_text(encoding="utf-8")
        modules[rel] = len(text.splitlines())
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                functions[(rel, node.name)] = node.end_lineno - node.lineno + 1
    return functions, modules


def test_functions_and_modules_stay_short():
    functions, modules = _sizes()
    long_functions = {key for key, n in functions.items() if n > MAX_FUNCTION_LINES}
    long_modules = {key for key, n in modules.items() if n > MAX_MODULE_LINES}
    new = [f"{f}: {name} has {functions[(f, name)]} lines" for f, name in sorted(long_functions - LONG_FUNCTIONS)]
    new += [f"{f} has {modules[f]} lines" for f in sorted(long_modules - LONG_MODULES)]
    assert not new, f"over {MAX_FUNCTION_LINES} lines per function / {MAX_MODULE_LINES} per module:\n" + "\n".join(new)
    done = [f"{f}: {name}" for f, name in sorted(LONG_FUNCTIONS - long_functions)]
    done += sorted(LONG_MODULES - long_modules)
    assert not done, "short enough now, remove from the allow-list in tests/test_architecture.py: " + ", ".join(done)


def test_the_library_does_not_print():
    # progress goes to a callback or logging; only the command line writes to the screen
    prints = []
    for module, path in MODULES.items():
        if stage_of(module) == "tomo.cli":
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "print":
                prints.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert not prints, f"print() in the library: {prints}"


@pytest.mark.parametrize("heavy", ["matplotlib", "h5py"])
def test_import_tomo_stays_light(heavy):
    # a fresh interpreter: what `import tomo` loads, and what the API loads before a
    # figure or a run file is asked for
    code = (f"import sys, tomo; a = sorted(m for m in sys.modules if m.split('.')[0] == {heavy!r}); "
            f"tomo.read_survey; b = sorted(m for m in sys.modules if m.split('.')[0] == {heavy!r}); "
            "print(len(a), len(b))")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    after_import, after_api = (int(v) for v in result.stdout.split())
    assert after_import == 0, f"import tomo loads {heavy}"
    if heavy == "matplotlib":
        assert after_api == 0, "tomo.read_survey (tomo.api) loads matplotlib before any figure is asked for"


def test_public_names_resolve():
    import tomo

    missing = [name for name in tomo.__all__ if not hasattr(tomo, name)]
    assert not missing, f"tomo.__all__ names that do not resolve: {missing}"
    assert set(tomo._LAZY) <= set(tomo.__all__), "a lazily exported name is missing from tomo.__all__"

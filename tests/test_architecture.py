"""The package's structure holds to docs/architecture.md.

Independent of import-linter (which CI also runs): every import statement in the package,
including those inside functions, is read with :mod:`ast`; the stage order below is the one
written in docs/architecture.md and in pyproject's ``[tool.importlinter]``.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "polarbeam"

#: lowest first; stages on one line may not import each other.
ORDER = [
    {"errors", "_version"},
    {"uncertain", "quantities", "constants"},
    {"_util"},
    {"instrument", "beam", "chemistry", "reduction"},
    {"contract"},
    {"results"},
    {"extraction"},
    {"separation"},
    {"calibration"},
    {"comparison"},
    {"report"},
    {"pipeline"},
    {"simulation"},
    {"planning"},
    {"batch"},
    {"cli"},
]
LEVEL = {stage: i for i, group in enumerate(ORDER) for stage in group}


def _modules():
    for path in sorted(SRC.rglob("*.py")):
        rel = path.relative_to(SRC.parent).with_suffix("")
        name = ".".join(rel.parts).removesuffix(".__init__")
        yield name, path, ast.parse(path.read_text(encoding="utf-8"))


def _imports(name: str, tree: ast.AST, is_package: bool):
    """(target module, imported names, line) of every polarbeam import, at any depth."""
    base = name.split(".") if is_package else name.split(".")[:-1]
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                mod = ".".join([*base[: len(base) - node.level + 1], node.module or ""]).strip(".")
            else:
                mod = node.module or ""
            if mod == "polarbeam" or mod.startswith("polarbeam."):
                yield mod, [a.name for a in node.names], node.lineno
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("polarbeam"):
                    yield a.name, [], node.lineno


def _stage(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else None


MODULES = list(_modules())


def test_no_upward_or_sideways_imports():
    bad = []
    for name, path, tree in MODULES:
        src = _stage(name)
        if src not in LEVEL:
            continue
        for target, _names, line in _imports(name, tree, path.name == "__init__.py"):
            dst = _stage(target)
            if dst is None or dst == src or dst not in LEVEL:
                continue
            if LEVEL[dst] >= LEVEL[src]:
                bad.append(f"{path.relative_to(SRC)}:{line} {name} -> {target}")
    assert not bad, "imports against the stage order:\n" + "\n".join(bad)


def test_no_import_cycles_between_modules():
    graph: dict[str, set[str]] = {}
    names = {n for n, _, _ in MODULES}
    for name, path, tree in MODULES:
        deps = graph.setdefault(name, set())
        for target, imported, _ in _imports(name, tree, path.name == "__init__.py"):
            for cand in [f"{target}.{n}" for n in imported] + [target]:
                if cand in names and cand != name:
                    deps.add(cand)
                    break
    # the root façade (polarbeam/__init__) loads the API lazily by name: not an import edge
    graph["polarbeam"] = set()
    state: dict[str, int] = {}
    cycle: list[str] = []

    def visit(n: str, stack: list[str]) -> bool:
        state[n] = 1
        for d in graph.get(n, ()):
            if d.startswith(n + ".") and n != "polarbeam":
                continue  # a package's __init__ re-exporting its own modules
            if state.get(d) == 1:
                cycle.extend([*stack[stack.index(d) :], d] if d in stack else [n, d])
                return True
            if state.get(d) is None and visit(d, [*stack, d]):
                return True
        state[n] = 2
        return False

    for n in sorted(graph):
        if state.get(n) is None and visit(n, [n]):
            break
    assert not cycle, "import cycle: " + " -> ".join(cycle)


def test_no_private_names_across_modules():
    bad = []
    for name, path, tree in MODULES:
        for target, imported, line in _imports(name, tree, path.name == "__init__.py"):
            if target == name:
                continue
            for n in imported:
                if n.startswith("_") and not n.startswith("__"):
                    bad.append(f"{path.relative_to(SRC)}:{line} imports {target}.{n}")
    assert not bad, "\n".join(bad)


@pytest.mark.parametrize("name,path", [(n, p) for n, p, _ in MODULES], ids=lambda x: str(x))
def test_modules_stay_small(name, path):
    lines = path.read_text(encoding="utf-8").count("\n")
    assert lines <= 900, f"{name} has {lines} lines; split it along its concerns"


def test_one_error_hierarchy():
    """Every exception class lives in polarbeam.errors (common practice: one hierarchy)."""
    bad = []
    for name, path, tree in MODULES:
        if name == "polarbeam.errors":
            continue
        for node in ast.walk(tree):
            if isinstance(node, ast.ClassDef) and node.name.endswith(("Error", "Exception")):
                bad.append(f"{path.relative_to(SRC)}:{node.lineno} class {node.name}")
    assert not bad, "\n".join(bad)


def test_only_the_contract_parses_unit_strings():
    bad = []
    for name, path, tree in MODULES:
        if _stage(name) in ("contract", "quantities"):
            continue
        for node in ast.walk(tree):
            if isinstance(node, ast.Name) and node.id == "parse_quantity":
                bad.append(f"{path.relative_to(SRC)}:{node.lineno}")
            if isinstance(node, ast.ImportFrom) and any(
                a.name == "parse_quantity" for a in node.names
            ):
                bad.append(f"{path.relative_to(SRC)}:{node.lineno}")
    assert not bad, "parse_quantity outside polarbeam.contract:\n" + "\n".join(sorted(set(bad)))

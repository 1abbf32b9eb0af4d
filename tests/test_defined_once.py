"""The editions and the column lists of the tables are each written down in one place."""

from __future__ import annotations

import ast
from collections import defaultdict
from pathlib import Path

SRC = Path(__file__).resolve().parents[1] / "src" / "springback"


def _modules() -> dict[str, ast.Module]:
    return {str(p.relative_to(SRC)): ast.parse(p.read_text(encoding="utf-8"))
            for p in sorted(SRC.rglob("*.py"))}


def test_each_column_list_has_one_name_in_one_module() -> None:
    where: dict[str, list[str]] = defaultdict(list)
    for name, tree in _modules().items():
        for node in tree.body:
            targets = node.targets if isinstance(node, ast.Assign) else \
                [node.target] if isinstance(node, ast.AnnAssign) else []
            for target in targets:
                if isinstance(target, ast.Name) and target.id.endswith("_COLUMNS"):
                    where[target.id].append(name)
    assert where, "no column lists found"
    assert {k: v for k, v in where.items() if len(v) > 1} == {}


def test_the_editions_are_listed_once() -> None:
    lists = []
    for name, tree in _modules().items():
        for node in ast.walk(tree):
            if isinstance(node, ast.Tuple | ast.List) and {"participant", "therapist"} == {
                    e.value for e in node.elts if isinstance(e, ast.Constant)}:
                lists.append((name, node.lineno))
    # The Edition literal and the EDITIONS tuple beside it.
    assert {name for name, _ in lists} == {"settings/sections.py"} and len(lists) == 2, lists


def test_the_study_tables_take_their_columns_from_the_stages() -> None:
    """out/metrics.csv, findings.csv, flags.csv and shifts.csv name no column themselves."""
    tree = _modules()["build/output.py"]
    written = [node for node in ast.walk(tree) if isinstance(node, ast.keyword)
               and node.arg == "columns" and isinstance(node.value, ast.List)]
    assert written == []

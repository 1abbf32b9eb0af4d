"""Charts' captions and the booklet context only phrase findings: no number decides a word.

Every conclusion is the findings stage's (springback.findings); a caption that compared a
statistic with a cut-off (`if p < alpha`, `abs(rho) < 0.1`, `tau > 0`) would decide on its own
and could contradict the finding it sits next to. The check reads the source with `ast`: in the
charts' description and sentence functions and in render/context.py, no ordering comparison may
take a number or an alpha as one side. Counting answers (`len(...)`) is phrasing, not deciding.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "springback"
CAPTIONS = ("description", "sentences")
"""Names of the chart functions that write captions (text alternatives)."""
ORDERING = (ast.Lt, ast.LtE, ast.Gt, ast.GtE)


def _is_threshold(node: ast.expr) -> bool:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        node = node.operand
    if isinstance(node, ast.Constant):
        return isinstance(node.value, (int, float)) and not isinstance(node.value, bool)
    name = node.id if isinstance(node, ast.Name) else \
        node.attr if isinstance(node, ast.Attribute) else ""
    return "alpha" in name.lower()


def _counts(node: ast.expr) -> bool:
    return any(isinstance(n, ast.Call) and isinstance(n.func, ast.Name) and n.func.id == "len"
               for n in ast.walk(node))


def decisions(source: str, every_function: bool = False) -> list[str]:
    """`function:line: comparison` for each threshold comparison in the caption functions."""
    found = []
    for fn in ast.walk(ast.parse(source)):
        if not isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            continue
        if not every_function and not any(word in fn.name for word in CAPTIONS):
            continue
        for node in ast.walk(fn):
            if not isinstance(node, ast.Compare):
                continue
            sides = [node.left, *node.comparators]
            if any(isinstance(op, ORDERING) for op in node.ops) and \
                    any(_is_threshold(s) for s in sides) and not any(_counts(s) for s in sides):
                found.append(f"{fn.name}:{node.lineno}: {ast.unparse(node)}")
    return found


def test_chart_captions_compare_no_number_with_a_threshold() -> None:
    """Check no chart caption function decides a word by comparing a number with a cut-off."""
    found = {path.name: decisions(path.read_text(encoding="utf-8"))
             for path in sorted((PACKAGE / "charts").glob("*.py"))}
    assert not {k: v for k, v in found.items() if v}


def test_the_booklet_context_compares_no_number_with_a_threshold() -> None:
    """Check render/context.py, which hands the templates their values, decides nothing."""
    source = (PACKAGE / "render" / "context.py").read_text(encoding="utf-8")
    assert decisions(source, every_function=True) == []


def test_the_checker_sees_a_threshold() -> None:
    """Check the checker finds the comparisons the captions used to make, and lets counts be."""
    sample = '''
def _grid_description(ctx, tau, p, alpha):
    return int(((tau > 0) & (p < alpha)).sum())

def _load_description(rho):
    return "same" if abs(rho) < 0.1 else "worse"

def _shift_sentences(points):
    return "one" if len(points) <= 2 else "many"

def layout(width):
    return width >= 28
'''
    found = decisions(sample)
    assert [f.split(":")[0] for f in found] == ["_grid_description", "_grid_description",
                                                "_load_description"]

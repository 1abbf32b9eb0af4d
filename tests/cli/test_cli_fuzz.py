"""Fuzz a whole project through the command line: study.toml values and CSV rows.

Whatever the values, `check` and `build` end with a message and an exit code (never a
traceback), leave every input file byte for byte as it was, and write nothing outside the
project folder. Output folders outside the project are a user's explicit choice, so the
fuzzed `out_dir` values are the hostile ones inside it (or the project and its parent).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import os
import tempfile
from pathlib import Path
from typing import Any

from click.testing import CliRunner
from hypothesis import HealthCheck, Phase, example, given, settings
from hypothesis import strategies as st

from springback.cli import main

FUZZ = settings(max_examples=12, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow],
                phases=[Phase.explicit, Phase.reuse, Phase.generate])

TOML = """\
[study]
title = {title}
timezone = {timezone}

[items.sad]
scale = {scale}

[items.calm]
scale = [1, 7]
reverse = {reverse}

[composites.low_mood]
items = ["sad", "calm"]
higher_is = {higher_is}

[booklet]
formats = {formats}

[metrics]
surrogates = {surrogates}

[output]
out_dir = {out_dir}

[archive]
keep_inputs = {keep}

[[referral]]
region = "default"
language = "en"
questions = "Questions? Call the study team on +99 20 555 0100 (fictional)."
feeling_worse = "Feeling worse for a while? Make an appointment with your family doctor."
self_harm = "Thinking about hurting yourself? Call the crisis line (fictional) today."
emergency = "In danger right now? Call the emergency number +99 999 (fictional)."
"""


def _toml(value: Any) -> str:
    """A TOML value (strings as JSON strings, which TOML reads the same way)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    return json.dumps(value)


ODD_TEXT = st.sampled_from(["", " ", "../../x", "/etc/passwd", ":x: [bold]b[/bold]", "<script>",
                            "{{ 7*7 }}", "=HYPERLINK(\"x\")", "a" * 300, "\u202e\u0000", "é"])
NUMBER = st.one_of(st.integers(min_value=-10**20, max_value=10**20),
                   st.floats(allow_nan=True, allow_infinity=True), st.sampled_from([0, 1, 99]))
GOOD = {"title": "Tiny", "timezone": "Europe/Amsterdam", "scale": [1, 7], "reverse": True,
        "higher_is": "worse", "formats": ["html"], "surrogates": 19, "out_dir": "out",
        "keep": "copy"}
_ODD = {
    "title": st.one_of(ODD_TEXT, st.text(max_size=20), NUMBER),
    "timezone": st.one_of(st.sampled_from(["Europe/Amsterdam", "UTC", "Mars/Base", "../../etc",
                                           ""]), NUMBER),
    "scale": st.one_of(st.lists(NUMBER, max_size=3), st.sampled_from([[1, 7], [7, 1]]),
                       ODD_TEXT),
    "reverse": st.one_of(st.booleans(), ODD_TEXT),
    "higher_is": st.one_of(st.sampled_from(["worse", "better"]), ODD_TEXT),
    "formats": st.one_of(st.just(["html"]), st.lists(ODD_TEXT, max_size=2)),
    "surrogates": st.one_of(st.sampled_from([19, 99]), NUMBER),
    "out_dir": st.sampled_from(["out", ".", "..", "data", "archive", "archive/out",
                                "templates/out", "out/../data", "", "study.toml"]),
    "keep": st.one_of(st.sampled_from(["copy", "hash"]), ODD_TEXT),
}
VALUES = st.fixed_dictionaries({
    # Mostly good values, so a fuzzed value is often the only wrong one and reaches the checks
    # that come after the settings.
    key: st.one_of(st.just(GOOD[key]), st.just(GOOD[key]), odd) for key, odd in _ODD.items()
})
CELL = st.one_of(st.sampled_from(["p1", "p2", "2024-03-04 09:00", "2024-03-05 13:00", "3", "9",
                                  "", "NA", "=1+1", "-0", "1e309", "../p", "2099-01-01 00:00"]),
                 st.text(max_size=5))
ROWS = st.lists(st.lists(CELL, min_size=1, max_size=5), max_size=12)


def _csv(rows: list[list[str]]) -> bytes:
    lines = ["participant,timestamp,sad,calm"]
    lines += [",".join('"' + c.replace('"', '""') + '"' for c in row) for row in rows]
    lines += [f"p1,2024-03-{d:02d} 10:00,{d % 7 + 1},4" for d in range(1, 6)]
    return ("\n".join(lines) + "\n").encode("utf-8", "surrogatepass")


def _tree(root: Path) -> dict[str, str]:
    return {p.relative_to(root).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file() and not p.is_symlink()}


def _run(values: dict[str, Any], rows: list[list[str]], command: str) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        parent = Path(tmp)
        project = parent / "study"
        (project / "data").mkdir(parents=True)
        (parent / "beside.txt").write_text("a neighbour's file\n", encoding="utf-8")
        text = TOML.format(**{k: _toml(v) for k, v in values.items()})
        (project / "study.toml").write_bytes(text.encode("utf-8", "surrogatepass"))
        (project / "data" / "momentary.csv").write_bytes(_csv(rows))
        (project / "data" / "participants.csv").write_text(
            "participant,language,consent,feedback\np1,en,yes,yes\np2,en,yes,yes\n",
            encoding="utf-8")
        inputs = _tree(project)
        outside = {k: v for k, v in _tree(parent).items() if not k.startswith("study/")}
        runner = CliRunner()
        (parent / "cwd").mkdir()
        with contextlib.chdir(parent / "cwd"):  # relative paths resolve in an empty folder
            result = runner.invoke(main, [command, str(project), *(["-j", "1", "-q"]
                                                                  if command == "build" else [])])
        assert result.exit_code in (0, 1, 2), result.output
        if result.exception is not None:
            assert isinstance(result.exception, SystemExit), repr(result.exception)
        assert "Traceback" not in result.output
        after = _tree(project)
        assert {k: after.get(k) for k in inputs} == inputs  # every input as it was
        now_outside = {k: v for k, v in _tree(parent).items()
                       if not k.startswith("study/")}
        assert now_outside == outside, sorted(set(now_outside) - set(outside))
        if os.environ.get("SPRINGBACK_FUZZ_SHOW"):
            print(command, result.exit_code, " ".join(result.output.split())[:160])


@FUZZ
@given(values=VALUES, rows=ROWS)
@example(values=GOOD, rows=[])
@example(values={**GOOD, "out_dir": "."}, rows=[])
@example(values={**GOOD, "scale": [1, math.inf], "surrogates": 10**13}, rows=[])
def test_check_never_breaks_or_writes(values: dict[str, Any], rows: list[list[str]]) -> None:
    """Check `check` on fuzzed settings and rows: a message, inputs unchanged, nothing outside."""
    _run(values, rows, "check")


@settings(max_examples=4, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow],
          phases=[Phase.explicit, Phase.reuse, Phase.generate])  # a build is too slow to shrink
@given(values=VALUES, rows=ROWS)
@example(values=GOOD, rows=[["=HYPERLINK(\"http://x\")", "2024-03-06 10:00", "3", "4"]])
@example(values={**GOOD, "out_dir": ".."}, rows=[])
def test_build_never_breaks_or_writes(values: dict[str, Any], rows: list[list[str]]) -> None:
    """Check `build` on fuzzed settings and rows: it ends cleanly, changes no input, stays in."""
    _run(values, rows, "build")

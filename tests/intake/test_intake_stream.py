"""Check that reading the momentary file in blocks and checking it by participant changes nothing.

`load_study` reads a CSV file `CHUNK_ROWS` rows at a time and checks `GROUP_ROWS` rows of whole
participants at a time (`springback.intake.stream`); with both set far below a file's size the
study and every problem must be those of reading the file at once. The reference is the same
code path with one block and one group, which the other intake tests pin to hand-made values.
"""

from __future__ import annotations

import os
import shutil
import stat
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from springback.frames import DiskFrames, MemoryFrames
from springback.intake import check_study, load_study, stream
from springback.intake.problems import Sink
from tests.support.intake_project import make_project

EXAMPLE = Path(__file__).resolve().parents[2] / "example_project"


def _small_blocks(monkeypatch: pytest.MonkeyPatch, chunk: int = 700, group: int = 500) -> None:
    monkeypatch.setattr(stream, "CHUNK_ROWS", chunk)
    monkeypatch.setattr(stream, "GROUP_ROWS", group)


def _same_study(a: object, b: object, *, in_order: bool = True) -> None:
    """Equal frames and warnings (in the same order unless participants were interleaved)."""
    for name in ("momentary", "events", "questionnaires", "set_aside", "quality", "roster"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name), obj=name)
    assert a.last_prompt == b.last_prompt  # type: ignore[attr-defined]
    if in_order:
        assert a.warnings == b.warnings  # type: ignore[attr-defined]
    else:
        assert Counter(a.warnings) == Counter(b.warnings)  # type: ignore[attr-defined]


def test_example_study_in_blocks_equals_read_at_once(monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that the example study read in 7 blocks and 9 groups equals it read at once."""
    whole = load_study(EXAMPLE)
    assert len(whole.momentary) > 4000  # the file is many blocks long below
    _small_blocks(monkeypatch)
    blocks = load_study(EXAMPLE)
    _same_study(blocks, whole)
    for pid in whole.participants():  # and every participant's slice, read from the spill file
        pd.testing.assert_frame_equal(blocks.slice(pid).momentary, whole.slice(pid).momentary)
    # The timed rows are held on disk, not in memory, in folders only the owner can open.
    for rows in (blocks.momentary_rows, blocks.event_rows, blocks.questionnaire_rows):
        assert isinstance(rows, DiskFrames)
        assert stat.S_IMODE(os.stat(rows._folder).st_mode) == 0o700


def test_rows_in_time_order_give_the_same_study(tmp_path: Path,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that a file sorted by time (participants interleaved) gives the same tidy data."""
    root = tmp_path / "study"
    shutil.copytree(EXAMPLE, root, ignore=shutil.ignore_patterns("out", "archive"))
    path = root / "data" / "momentary.csv"
    raw = pd.read_csv(path, dtype=str, keep_default_na=False)
    order = pd.to_datetime(raw["timestamp"], utc=True).argsort(kind="stable")
    raw.iloc[order].to_csv(path, index=False)
    assert raw.iloc[order]["participant"].iloc[:20].nunique() > 1  # really interleaved
    whole = load_study(EXAMPLE)
    _small_blocks(monkeypatch)
    mixed = load_study(root)
    columns = [c for c in whole.momentary.columns if c != "source_row"]  # rows moved
    pd.testing.assert_frame_equal(mixed.momentary[columns], whole.momentary[columns])
    pd.testing.assert_frame_equal(mixed.quality, whole.quality)
    assert mixed.last_prompt == whole.last_prompt


MESSY_TOML = """\
[study]
title = "Messy study"
timezone = "Europe/Amsterdam"

[data]
on_bad_rows = "{mode}"

[items.sad]
scale = [1, 7]

[items.calm]
scale = [1, 7]
"""


def _messy_rows() -> str:
    """Rows of six people with every kind of row problem, participants interleaved."""
    rng = np.random.default_rng(7)
    lines = ["participant,timestamp,scheduled,sad,calm"]
    for day in range(1, 29):
        for pid in ("p1", "p2", "p3", "p4", "p5", "stranger"):
            for hour in (9, 13, 19):
                sched = f"2024-03-{day:02d} {hour:02d}:00"
                late = rng.random() < 0.05
                answer = f"2024-03-{day:02d} {hour + (2 if late else 0):02d}:05"
                sad = str(int(rng.integers(1, 8)))
                if rng.random() < 0.08:
                    sad = "9"  # outside the scale: more than 20 of them in all
                calm = "" if rng.random() < 0.02 else str(int(rng.integers(1, 8)))
                if calm == "":
                    sad = ""  # an unanswered prompt
                lines.append(f"{pid},{answer},{sched},{sad},{calm}")
        if day % 5 == 0:
            lines.append(f",2024-03-{day:02d} 10:00,2024-03-{day:02d} 10:00,3,3")  # no id
            lines.append(f"p2,2024-03-{day:02d} 13:05,2024-03-{day:02d} 13:00,1,1")  # repeat
    return "\n".join(lines) + "\n"


MESSY_ROSTER = """\
participant,language,consent
p1,en,yes
p2,en,yes
p3,en,withdrawn
p4,en,yes
p5,en,yes
p6,en,yes
"""


@pytest.mark.parametrize("mode", ["set aside", "error"])
def test_problems_found_in_blocks_equal_those_found_at_once(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mode: str) -> None:
    """Check that every problem (and the 'N more rows' line) is the same in blocks."""
    roster = MESSY_ROSTER + ("stranger,en,yes\n" if mode == "set aside" else "")
    files = {"data/momentary.csv": _messy_rows(), "data/participants.csv": roster}
    root = make_project(tmp_path / "study", toml=MESSY_TOML.format(mode=mode), files=files)
    whole = check_study(root)
    _small_blocks(monkeypatch, chunk=37, group=50)
    blocks = check_study(root)
    codes = Counter(p.code for p in whole.problems)
    kinds = ["value-out-of-scale", "missing-participant", "withdrawn", "late-answers",
             "conflicting-rows", "no-data"] + (["not-in-roster"] if mode == "error" else [])
    for code in kinds:
        assert codes[code] > 0, code  # the file really has each kind of problem
    assert sum("more rows with this problem" in p.what for p in whole.problems) == 1
    # Same problems; their order may differ only where participants were checked apart.
    assert Counter(blocks.problems) == Counter(whole.problems)
    if mode == "set aside":
        assert whole.study is not None and blocks.study is not None
        _same_study(blocks.study, whole.study, in_order=False)


def test_long_layout_in_blocks_equals_read_at_once(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that a long file (one row per item) widens the same when read in blocks."""
    wide = pd.read_csv(EXAMPLE / "data" / "momentary.csv", dtype=str, keep_default_na=False)
    wide = wide[wide["participant"].isin(["P01", "P02", "P03"])]
    items = ["down", "anxious", "cheerful", "stress"]
    long = wide.melt(id_vars=["participant", "timestamp", "scheduled"], value_vars=items,
                     var_name="item", value_name="value").sort_values(["timestamp", "item"])
    long.loc[long.index[::97], "item"] = "unknown"  # an item the study lacks, in every block
    toml = """\
[study]
title = "Long study"
timezone = "Europe/Amsterdam"
prompts_per_day = 5

[data]
layout = "long"
""" + "".join(f"\n[items.{k}]\nscale = [1, 7]\n" for k in items)
    roster = "participant,language,consent\nP01,en,yes\nP02,en,yes\nP03,en,yes\n"
    root = make_project(tmp_path / "long", toml=toml, files={
        "data/momentary.csv": long.to_csv(index=False), "data/participants.csv": roster})
    whole = load_study(root)
    _small_blocks(monkeypatch, chunk=900, group=600)
    blocks = load_study(root)
    _same_study(blocks, whole)
    assert [p.code for p in whole.warnings].count("unknown-item-rows") == 1


def test_bad_line_deep_in_a_file_is_a_problem(tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that a broken line found in a later block names its line, as at once."""
    rows = "participant,timestamp,sad,calm\n" + "".join(
        f"p1,2024-03-{d:02d} 09:00,3,5\n" for d in range(1, 29)) + "p1,2024-03-29 09:00,3,5,9\n"
    root = make_project(tmp_path / "study", files={"data/momentary.csv": rows})
    whole = [p.message() for p in check_study(root).problems]
    _small_blocks(monkeypatch, chunk=5, group=5)
    assert [p.message() for p in check_study(root).problems] == whole
    assert any("line 30 has 5 fields but the header has 4" in m for m in whole)


def test_sink_sums_up_rows_reported_in_several_calls() -> None:
    """Check that bad rows reported in two calls list and sum up as one call does."""
    one, two = Sink(), Sink()
    rows = list(range(2, 40))
    one.bad_rows("f.csv", rows, ["p"] * len(rows), ["x"] * len(rows), what="bad",
                 column="c", code="k")
    for part in (rows[:15], rows[15:]):
        two.bad_rows("f.csv", part, ["p"] * len(part), ["x"] * len(part), what="bad",
                     column="c", code="k")
    assert one.problems == two.problems
    assert one.problems[-1].what == "18 more rows with this problem: bad"
    assert len(one.set_aside_frame()) == len(two.set_aside_frame()) == 38


def _frame(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "participant": pd.Series(rng.choice(["a", "b", "c", "d"], n)).astype(str),
        "time": pd.date_range("2026-03-28", periods=n, freq="37min", tz="UTC"),
        "local_time": pd.date_range("2026-03-28", periods=n, freq="37min",
                                    tz="UTC").tz_convert("Europe/Amsterdam"),
        "study_day": pd.date_range("2026-03-28", periods=n, freq="37min").normalize(),
        "value": np.where(rng.random(n) < 0.2, np.nan, rng.normal(size=n)),
        "source_row": np.arange(n, dtype="int64") + 2,
    })


def test_disk_frames_give_back_each_keys_rows_exactly() -> None:
    """Check spilled rows against pandas' own selection: values, order and types."""
    spill = DiskFrames()
    parts = [_frame(200, 1), _frame(150, 2), _frame(0, 3), _frame(90, 4)]
    for part in parts:
        spill.append(part, part["participant"])
    spill.seal()
    everything = pd.concat(parts, ignore_index=True)
    memory = MemoryFrames(everything)
    for key in ("a", "b", "c", "d"):
        # reference: pandas boolean selection, rows in the order they were added
        expected = everything[everything["participant"] == key].reset_index(drop=True)
        pd.testing.assert_frame_equal(spill.rows(key), expected)
        pd.testing.assert_frame_equal(memory.rows(key), expected)
        assert spill.count(key) == memory.count(key) == len(expected)
    assert spill.names() == ["a", "b", "c", "d"] or sorted(spill.names()) == ["a", "b", "c", "d"]
    nobody = spill.rows("zzz")
    assert nobody.empty and list(nobody.dtypes) == list(everything.dtypes)
    assert len(spill) == len(everything)


def test_disk_frames_folder_is_private_and_removed() -> None:
    """Check that the spill folder only its owner can open, and that it is removed."""
    spill = DiskFrames()
    spill.append(_frame(10, 5), _frame(10, 5)["participant"])
    spill.seal()
    folder = spill._folder
    assert stat.S_IMODE(os.stat(folder).st_mode) == 0o700
    assert any(folder.iterdir())
    spill.close()
    assert not folder.exists()


def test_set_aside_rows_kept_as_codes_give_the_same_frame() -> None:
    """Check the compact set-aside log against a frame built from one tuple per row."""
    main, other = Sink(), Sink()
    main.aside("data/momentary.csv", np.array([9, 4, 4]), ["p2", "p1", "p1"], "an empty row")
    main.aside("data/momentary.csv", [4], ["p1"], "a copy of row 3", column="sad")
    other.aside("data/events.csv", [2], ["p3"], "participant withdrew consent")
    main.take(other)
    # reference: pandas' own frame of the rows as tuples, deduplicated and sorted the same way
    rows = [("data/momentary.csv", 9, "", "p2", "an empty row"),
            ("data/momentary.csv", 4, "", "p1", "an empty row"),
            ("data/momentary.csv", 4, "", "p1", "an empty row"),
            ("data/momentary.csv", 4, "sad", "p1", "a copy of row 3"),
            ("data/events.csv", 2, "", "p3", "participant withdrew consent")]
    want = pd.DataFrame(rows, columns=["file", "row", "column", "participant", "reason"])
    want = want.drop_duplicates(["file", "row", "reason"]).sort_values(
        ["file", "row"], kind="stable").reset_index(drop=True)
    pd.testing.assert_frame_equal(main.set_aside_frame(), want)
    assert other.set_aside_frame().empty

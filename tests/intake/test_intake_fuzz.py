"""Fuzz the CSV reading: any bytes give clean problems, never a traceback, and files stay as is."""

from __future__ import annotations

import hashlib
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from springback.errors import SpringbackError
from springback.intake import check_study, load_study
from tests.support.intake_project import MOMENTARY, ROSTER, make_project

FUZZ = settings(max_examples=20, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow])

CELLS = st.one_of(
    st.sampled_from(["p1", "p2", "2024-03-04 09:00", "2024-03-31 02:30", "3", "9", "", "NA",
                     "x", '"', '""', "2024-13-45 25:61", "+01:00", "4,5", "1e309", "-0"]),
    st.text(max_size=6),
)


def _hashes(root: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted((root / "data").iterdir())}


def _run(files: dict[str, str | bytes | None]) -> None:
    """Check and load a project with these files; only clean problems may come out."""
    with tempfile.TemporaryDirectory() as tmp:
        root = make_project(Path(tmp) / "study", files=files)
        before = _hashes(root)
        report = check_study(root)  # any exception but a clean report fails the test
        assert all(p.what for p in report.problems)
        assert all(isinstance(p.message(), str) for p in report.problems)
        if report.ok:
            study = load_study(root)
            assert study.momentary["participant"].isin(study.roster["participant"]).all()
        else:
            with pytest.raises(SpringbackError):
                load_study(root)
        assert _hashes(root) == before


@FUZZ
@given(data=st.binary(max_size=300))
@example(data=b"\x01\r\x01")  # a bare carriage return once broke the header check
@example(data=b"\xff\xfe")  # a UTF-16 byte-order mark and nothing else
@example(data=b"participant\rtimestamp\r")  # old Mac line ends
def test_random_bytes(data: bytes) -> None:
    """Check that random bytes as the momentary file give problems, not a traceback."""
    _run({"data/momentary.csv": data})


HEADERS = {
    "data/momentary.csv": ["participant", "timestamp", "sad", "calm"],
    "data/participants.csv": ["participant", "language", "consent", "feedback"],
    "data/events.csv": ["participant", "timestamp", "kind", "intensity"],
    "data/questionnaires.csv": ["participant", "timestamp", "questionnaire", "score"],
}


@FUZZ
@given(rows=st.lists(st.lists(CELLS, min_size=1, max_size=6), max_size=6),
       delimiter=st.sampled_from([",", ";", "\t", "|", " ", ":"]),
       quote=st.booleans(), target=st.sampled_from(sorted(HEADERS)))
def test_random_delimited_tables(rows: list[list[str]], delimiter: str, quote: bool,
                                 target: str) -> None:
    """Check that tables of odd cells with any delimiter, in any file, give clean problems."""
    header = delimiter.join(HEADERS[target])
    cell = (lambda c: f'"{c}"') if quote else (lambda c: c)
    body = "\n".join(delimiter.join(cell(c) for c in row) for row in rows)
    _run({target: header + "\n" + body + "\n"})


@FUZZ
@given(cut=st.integers(min_value=0, max_value=len(MOMENTARY.encode())),
       roster_cut=st.integers(min_value=0, max_value=len(ROSTER.encode())),
       encoding=st.sampled_from(["utf-8", "utf-8-sig", "latin-1", "utf-16"]))
def test_truncated_files(cut: int, roster_cut: int, encoding: str) -> None:
    """Check that files cut off anywhere, in any encoding, give clean problems."""
    _run({"data/momentary.csv": MOMENTARY.replace("p1", "pé").encode(encoding)[:cut],
          "data/participants.csv": ROSTER.replace("p1", "pé").encode(encoding)[:roster_cut]})

"""End to end with the real build on a small copy of the example study: reproducible builds,
the release gate across rebuilds, builds killed at random points, verify --rebuild, forget."""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from springback.archive import manifest as archive
from springback.archive.erasure import forget
from springback.files import sha256_file
from springback.review import gate as review

EXAMPLE = Path(__file__).resolve().parents[2] / "example_project"
PEOPLE = ("P01", "P08", "P10")
"""P01 an ordinary booklet, P08 held by the questionnaire rule, P10 withdrawn."""
EPOCH = "1780000000"

pytestmark = [pytest.mark.slow, pytest.mark.xdist_group("archive-e2e")]


def small_example(target: Path, pdf: bool = False) -> Path:
    """Copy the example study with three participants, few surrogates, HTML (and PDF) only."""
    target.mkdir(parents=True)
    (target / "data").mkdir()
    for path in sorted((EXAMPLE / "data").glob("*.csv")):
        lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
        kept = [lines[0]] + [x for x in lines[1:] if x.split(",", 1)[0] in PEOPLE]
        (target / "data" / path.name).write_text("".join(kept), encoding="utf-8")
    text = (EXAMPLE / "study.toml").read_text(encoding="utf-8")
    formats = 'formats = ["html", "pdf"]' if pdf else 'formats = ["html"]'
    for old, new in (('formats = ["html", "pdf"]', formats),
                     ("surrogates = 1000", "surrogates = 19")):
        assert old in text
        text = text.replace(old, new)
    (target / "study.toml").write_text(text, encoding="utf-8")
    return target


def run_build(project: Path) -> None:
    """Build in this process, as the command line does."""
    from springback.build.pipeline import build

    report = build(project, jobs=1)
    assert not report.failed, [(o.participant, o.reason) for o in report.failed]


def tree(folder: Path) -> dict[str, str]:
    """Relative path -> SHA-256 of every visible file under a folder."""
    return {p.relative_to(folder).as_posix(): sha256_file(p) for p in sorted(folder.rglob("*"))
            if p.is_file() and not any(s.startswith(".") for s in p.relative_to(folder).parts)}


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, float]:
    """One built small study (read-only: tests copy it), and how long the build took."""
    os.environ["SOURCE_DATE_EPOCH"] = EPOCH
    try:
        project = small_example(tmp_path_factory.mktemp("e2e") / "study")
        start = time.monotonic()
        run_build(project)
        return project, time.monotonic() - start
    finally:
        os.environ.pop("SOURCE_DATE_EPOCH", None)


def _copy(project: Path, target: Path) -> Path:
    shutil.copytree(project, target, ignore=shutil.ignore_patterns(".*.lock"))
    return target


def test_two_builds_are_byte_identical(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that the same inputs built in two folders give byte-identical HTML, PDF and CSV."""
    from springback.build.pipeline import build

    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    first = small_example(tmp_path / "one", pdf=True)
    second = small_example(tmp_path / "two", pdf=True)
    for project in (first, second):
        report = build(project, jobs=1, participants=["P01", "P10"])
        assert not report.failed
    assert tree(first / "out") == tree(second / "out")
    assert (first / "out" / "booklets" / "P01" / "therapist.pdf").is_file()
    [a], [b] = archive.builds(first), archive.builds(second)
    assert tree(first / "archive" / a / "out") == tree(second / "archive" / b / "out")


def test_verify_rebuild(built: tuple[Path, float], tmp_path: Path) -> None:
    """Check that verify --rebuild reproduces the archived outputs from the archived inputs."""
    project = _copy(built[0], tmp_path / "study")
    assert archive.verify(project, rebuild=True, rebuild_fn=lambda p: run_build(p)) == []
    path = project / "archive" / archive.builds(project)[0] / "out" / "metrics.csv"
    path.write_bytes(path.read_bytes().replace(b"P01", b"P02", 1))
    found = {m.file for m in archive.verify(project, rebuild=True,
                                            rebuild_fn=lambda p: run_build(p))}
    assert f"{archive.builds(project)[0]}/out/metrics.csv" in found


def _change_one_answer(project: Path, participant: str) -> None:
    """Change the first 'down' rating of a participant by one scale point."""
    data = project / "data" / "momentary.csv"
    lines = data.read_text(encoding="utf-8").splitlines(keepends=True)
    row = next(i for i, x in enumerate(lines) if x.startswith(participant + ","))
    cells = lines[row].rstrip("\n").split(",")
    cells[3] = "7" if cells[3] != "7" else "6"
    lines[row] = ",".join(cells) + "\n"
    data.write_text("".join(lines), encoding="utf-8")


def test_gate_across_rebuilds(built: tuple[Path, float], tmp_path: Path) -> None:
    """Check the held booklet across release, approval, a data change and a rebuild."""
    project = _copy(built[0], tmp_path / "study")
    held = review.list_held(project)
    assert [(h.participant, h.state) for h in held] == [("P08", "held")]
    assert any("severe depression score" in r for r in held[0].reasons)
    report = review.release(project)
    assert report.released == ("P01",)
    assert dict(report.withheld) == {"P08": "held for review", "P10": "consent withdrawn"}
    review.approve(project, "P08", "Dr. Fictional Reviewer")
    assert review.release(project).released == ("P01", "P08")
    # Change one of P08's answers: the booklet's fingerprint changes, the approval lapses.
    _change_one_answer(project, "P08")
    released = {q.relative_to(project).as_posix(): q.read_bytes()
                for q in sorted((project / "out" / "release").rglob("*")) if q.is_file()}
    run_build(project)
    # The build leaves out/release/ as the last release made it; only `release` changes it
    # (and `send` refuses a released copy the latest build and the gate no longer allow).
    assert {q.relative_to(project).as_posix(): q.read_bytes()
            for q in sorted((project / "out" / "release").rglob("*")) if q.is_file()} == released
    assert review.release(project).released == ("P01",)
    assert not (project / "out" / "release" / "P08").exists()
    assert [h.state for h in review.list_held(project)] == ["held"]
    assert archive.verify(project) == []


def _consistent(project: Path) -> None:
    """Assert what a killed build may leave: nothing that looks complete but is not."""
    recorded = [archive.load_manifest(project, b) for b in archive.builds(project)] if (
        project / "archive" / "audit.jsonl").exists() else []
    outputs = [{k[4:]: v for k, v in m["files"].items() if k.startswith("out/")}
               for m in recorded]
    if (project / "out").exists():
        assert tree(project / "out") in outputs  # out/ is exactly one recorded build's output
    for m in archive.verify(project):
        assert m.what == "not recorded in the audit log", m.message()  # logged by the next build


def _kill_at_random(project: Path, seed: int, whole_build: float, writing_only: bool) -> None:
    """Start a build in its own process group and SIGKILL it at a seeded random moment.

    `writing_only` waits until the build starts writing (its hidden staging folder appears)
    and kills within the next half second, where a careless writer would leave half a folder.
    """
    rng = np.random.default_rng(seed)
    script = "import sys; from springback.build.pipeline import build; build(sys.argv[1], jobs=1)"
    proc = subprocess.Popen([sys.executable, "-c", script, str(project)],
                            start_new_session=True, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    try:
        if writing_only:
            deadline = time.monotonic() + 10 * whole_build + 60
            while not list(project.glob(".out.partial-*")) and proc.poll() is None:
                assert time.monotonic() < deadline, "the build never started writing"
                time.sleep(0.002)
            delay = rng.uniform(0.0, 0.5)
        else:
            delay = rng.uniform(0.3, 1.1) * (whole_build + 2.0)
        proc.wait(timeout=delay)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


@pytest.mark.parametrize(("seed", "writing_only"), [(1, False), (2, False), (3, True),
                                                    (4, True)])
def test_killed_build_leaves_a_consistent_state(built: tuple[Path, float], tmp_path: Path,
                                                seed: int, writing_only: bool) -> None:
    """Check that SIGKILL at a random moment leaves a consistent state and the next build works."""
    project = _copy(built[0], tmp_path / "study")
    _change_one_answer(project, "P01")  # so the killed build writes something new
    _kill_at_random(project, seed, built[1], writing_only)
    _consistent(project)
    run_build(project)
    assert archive.verify(project) == []
    latest = archive.load_manifest(project, archive.builds(project)[-1])
    assert tree(project / "out") == {k[4:]: v for k, v in latest["files"].items()
                                     if k.startswith("out/")}
    leftovers = [p.name for p in [*project.iterdir(), *(project / "archive").iterdir()]
                 if ".partial-" in p.name or ".old-" in p.name]
    assert leftovers == []


def test_forget_end_to_end(built: tuple[Path, float], tmp_path: Path) -> None:
    """Check that after forget no file under archive/ or out/ holds the id, and verify passes."""
    project = _copy(built[0], tmp_path / "study")
    review.approve(project, "P08", "Dr. Fictional Reviewer", "P08 is expected on Monday")
    review.release(project)
    forget(project, "P08", by="data steward")
    assert archive.verify(project) == []
    for folder in (project / "archive", project / "out"):
        for path in folder.rglob("*"):
            assert "P08" not in path.relative_to(project).as_posix()
            if path.is_file():
                assert b"P08" not in path.read_bytes(), path
    assert (project / "out" / "booklets" / "P01" / "participant.html").is_file()
    assert (project / "out" / "release" / "P01" / "participant.html").is_file()

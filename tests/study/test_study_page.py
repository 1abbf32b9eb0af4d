"""The study page's accessibility basics, the files' determinism and the notebook API."""

from __future__ import annotations

import io
import math
import os
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from springback import study
from springback.study import files as study_files_of
from tests.study.cohort import ar1_cohort, findings_rows
from tests.support import metrics_sim

COURSES = ["abrupt_shift", "no_clear_change", "gradual_change", "no_clear_change",
           "switching", "abrupt_shift", "no_clear_change", "not_enough_data"]
WARNINGS = ["rising", "not_rising", "rising", "not_rising", "not_rising", "not_rising",
            "not_rising", "not_enough_data"]


def sample_inputs() -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """Long metrics and findings tables, a schedule and pairs of eight simulated people."""
    pairs, phis = ar1_cohort(8, 0.4, 0.1, seed=11)
    people = sorted(set(pairs["participant"]))
    rng = np.random.default_rng(2)
    rows = []
    for pid, phi in zip(people, phis, strict=True):
        for measure, value, lo, hi in (
                ("inertia", phi, phi - 0.1, phi + 0.1), ("mean", rng.uniform(2, 5), None, None),
                ("compliance", rng.uniform(0.5, 0.95), None, None),
                ("half_life_hours", 2.5 * np.log(2) / -np.log(phi), None, None),
                ("warning_tau_inertia", rng.uniform(-0.5, 0.5), None, None),
                ("reliable_change_phq9", rng.normal(), None, None)):
            rows.append({"participant": pid, "measure": measure, "value": value, "lower": lo,
                         "upper": hi, "n": 100, "note": ""})
    rows.append({"participant": people[-1], "measure": "rmssd", "value": None, "lower": None,
                 "upper": None, "n": 3, "note": "needs at least 20 consecutive pairs"})
    metrics_long = pd.DataFrame(rows)
    findings = findings_rows(list(zip(people, COURSES, WARNINGS, strict=True)))
    days = pd.date_range("2026-03-02", periods=21, freq="D")
    schedule = pd.DataFrame([{"participant": pid, "period": 1, "study_day": d,
                              "answered": int(rng.integers(2, 6)), "sent": 5.0}
                             for pid in people for d in days])
    return metrics_long, findings, schedule, pairs


def sample_files() -> dict[str, bytes]:
    metrics_long, findings, schedule, pairs = sample_inputs()
    settings = metrics_sim.settings_for()
    frames = study.compute(metrics_long, findings, schedule, pairs, settings)
    return study_files_of(frames, "Harbour <Light> Study", settings.metrics.alpha)


class Outline(HTMLParser):
    """Collect what the accessibility checks look at."""

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.html_lang = ""
        self.headings: list[int] = []
        self.tables = 0
        self.captions = 0
        self.header_cells: list[str | None] = []
        self.svgs: list[dict[str, str | None]] = []
        self.svg_children: list[set[str]] = []
        self.urls: list[str] = []
        self.csp = ""

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "html":
            self.html_lang = a.get("lang") or ""
        if tag in ("h1", "h2", "h3", "h4", "h5", "h6"):
            self.headings.append(int(tag[1]))
        if tag == "table":
            self.tables += 1
        if tag == "caption" and self.stack and self.stack[-1] == "table":
            self.captions += 1
        if tag == "th":
            self.header_cells.append(a.get("scope"))
        if tag == "svg":
            self.svgs.append(a)
            self.svg_children.append(set())
        elif self.stack and self.stack[-1] == "svg":
            self.svg_children[-1].add(tag)
        if tag == "meta" and a.get("http-equiv") == "Content-Security-Policy":
            self.csp = a.get("content") or ""
        for key in ("src", "href", "xlink:href"):
            if a.get(key):
                self.urls.append(str(a[key]))
        if tag not in ("meta", "br", "img", "input", "link", "path", "rect", "line", "circle"):
            self.stack.append(tag)

    def handle_endtag(self, tag: str) -> None:
        while self.stack:
            if self.stack.pop() == tag:
                break


def test_the_page_has_the_accessibility_basics() -> None:
    """Check lang, one h1, no skipped heading level, captions, header scopes, SVG text
    alternatives and a policy that loads nothing (WCAG 2.1: 1.1.1, 1.3.1, 2.4.6, 3.1.1)."""
    html = sample_files()["study/results.html"].decode("utf-8")
    page = Outline()
    page.feed(html)
    assert page.html_lang == "en"
    assert page.headings.count(1) == 1 and page.headings[0] == 1
    assert all(b - a <= 1 for a, b in zip(page.headings, page.headings[1:], strict=False))
    assert page.tables >= 6 and page.captions == page.tables
    assert page.header_cells and all(s in ("col", "row") for s in page.header_cells)
    assert len(page.svgs) >= 4
    for attrs, children in zip(page.svgs, page.svg_children, strict=True):
        assert attrs.get("role") == "img" and attrs.get("aria-labelledby")
        assert {"title", "desc"} <= children
    assert page.csp.startswith("default-src 'none'")
    assert not [u for u in page.urls if "://" in u or u.startswith("//")]
    assert "Harbour &lt;Light&gt; Study" in html
    # Every chart is followed by the table of its data.
    assert html.count("<figure>") == html.count("<caption>Data of the chart:")


def test_the_page_words_the_count_as_the_studys_own_observation() -> None:
    """Check the before-shifts section says what the study saw, not that it predicts."""
    html = sample_files()["study/results.html"].decode("utf-8")
    section = html[html.index('id="before-shifts"'):html.index('id="files"')]
    assert "none of it shows that rising indicators predict a shift" in section
    assert "validated" not in section.replace("not been validated", "")
    # Seven readings at alpha 0.05: 0.35 expected; two rising were seen (hand count).
    assert "about 0.35 of the 7 readings" in section and "this study saw 2" in section


def test_the_files_are_the_same_bytes_every_time() -> None:
    """Check two computations give byte-identical files, also in a fresh process."""
    first, second = sample_files(), sample_files()
    assert first == second
    code = ("import sys, hashlib; from tests.study.test_study_page import sample_files; "
            "f = sample_files(); sys.stdout.write(''.join(k + hashlib.sha256(v).hexdigest() "
            "for k, v in sorted(f.items())))")
    root = Path(__file__).resolve().parents[2]
    env = {**os.environ, "SOURCE_DATE_EPOCH": "1700000000", "PYTHONHASHSEED": "7"}
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=root, env=env, check=True).stdout
    import hashlib
    assert out == "".join(k + hashlib.sha256(v).hexdigest() for k, v in sorted(first.items()))


def test_parquet_and_csv_hold_the_same_participants() -> None:
    """Check participants.parquet and participants.csv agree and are one row per person."""
    files = sample_files()
    from_parquet = pd.read_parquet(io.BytesIO(files["study/participants.parquet"]))
    from_csv = pd.read_csv(io.BytesIO(files["study/participants.csv"]),
                           dtype={"participant": str})
    assert from_parquet["participant"].is_unique and len(from_parquet) == 8
    pd.testing.assert_frame_equal(from_parquet, from_csv, check_dtype=False)
    assert {"inertia", "inertia_lower", "reading_course", "certainty_warning"} <= set(
        from_csv.columns)
    book = pd.read_csv(io.BytesIO(files["study/codebook.csv"]))
    assert set(from_csv.columns) - {"participant"} <= set(book["measure"])


def test_results_reads_out_or_the_latest_archived_build(tmp_path: Path) -> None:
    """Check the notebook API returns the written tables, from out/ or from the archive."""
    files = sample_files()
    project = tmp_path / "p"
    archived = project / "archive" / "0002-20260101T000000Z" / "out"
    for base in (project / "out", archived):
        for rel, data in files.items():
            (base / rel).parent.mkdir(parents=True, exist_ok=True)
            (base / rel).write_bytes(data)
    got = study.results(project)
    assert list(got) == list(study.TABLES)
    expected = pd.read_csv(io.BytesIO(files["study/group_estimates.csv"]))
    pd.testing.assert_frame_equal(got["group_estimates"], expected)
    for rel in files:
        (project / "out" / rel).unlink()
    again = study.results(project)
    pd.testing.assert_frame_equal(again["warning_table"], got["warning_table"])
    with pytest.raises(FileNotFoundError):
        study.results(tmp_path / "empty")


def test_an_empty_or_tiny_cohort_still_gets_its_files() -> None:
    """Check a study where nobody has metrics, or one person has, gives every file and says
    "not available" instead of numbers it cannot have."""
    settings = metrics_sim.settings_for()
    metrics_long, findings, schedule, pairs = sample_inputs()
    for keep in ([], ["S00"]):
        frames = study.compute(metrics_long[metrics_long["participant"].isin(keep)],
                               findings[findings["participant"].isin(keep)],
                               schedule[schedule["participant"].isin(keep)],
                               pairs[pairs["participant"].isin(keep)], settings)
        files = study_files_of(frames, "Tiny", 0.05)
        assert sorted(files) == sorted(f"study/{n}" for n in study.STUDY_FILES)
        group = frames["group_estimates"].set_index("estimate")
        assert math.isnan(group.loc["inertia_mixed", "value"])
        assert len(frames["participants"]) == len(keep)
        page = Outline()
        page.feed(files["study/results.html"].decode("utf-8"))
        assert page.headings.count(1) == 1 and page.captions == page.tables

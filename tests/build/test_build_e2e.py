"""End to end: the example study builds, and its HTML, PDF and CSV outputs parse."""

from __future__ import annotations

from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner
from pypdf import PdfReader

from springback.cli import main

pytestmark = pytest.mark.xdist_group("example")


class _Text(HTMLParser):
    """Collect visible text and the heading structure of an HTML page."""

    def __init__(self) -> None:
        super().__init__()
        self.text: list[str] = []
        self.headings: list[str] = []
        self._skip = 0

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag in ("script", "style", "svg"):
            self._skip += 1
        if tag in ("h1", "h2", "h3", "h4"):
            self.headings.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if tag in ("script", "style", "svg") and self._skip:
            self._skip -= 1

    def handle_data(self, data: str) -> None:
        if not self._skip and data.strip():
            self.text.append(data.strip())


def _parse(path: Path) -> _Text:
    parser = _Text()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


def test_every_booklet_is_built(built_example: Path) -> None:
    """Check that each consenting participant who wants feedback gets both editions."""
    out = built_example / "out"
    roster = pd.read_csv(built_example / "data" / "participants.csv", dtype=str)
    metrics = pd.read_csv(out / "metrics.csv")
    answered = metrics[metrics["measure"] == "n_answered"].set_index("participant")["value"]
    built = 0
    for row in roster.itertuples():
        folder = out / "booklets" / row.participant
        wants = row.consent == "yes" and row.feedback == "yes"
        enough = answered.get(row.participant, 0) >= 30
        if wants and enough:
            built += 1
            assert (folder / "participant.html").is_file()
            assert (folder / "participant.pdf").is_file()
            if row.therapist == "yes":
                assert (folder / "therapist.html").is_file()
                assert (folder / "therapist.pdf").is_file()
        else:
            assert not folder.exists(), f"{row.participant} should have no booklet"
    assert built >= 8


def test_outputs_parse(built_example: Path) -> None:
    """Check that the HTML, the PDF text and the study tables parse and agree on the id."""
    out = built_example / "out"
    folders = sorted((out / "booklets").iterdir())
    first = folders[0]
    page = _parse(first / "participant.html")
    assert page.headings.count("h1") == 1
    assert first.name in " ".join(page.text)
    reader = PdfReader(first / "participant.pdf")
    assert len(reader.pages) >= 3
    pdf_text = " ".join(p.extract_text() for p in reader.pages)
    assert first.name in pdf_text
    metrics = pd.read_csv(out / "metrics.csv")
    assert list(metrics.columns) == ["participant", "measure", "value", "lower", "upper", "n",
                                     "note"]
    required = {"n_answered", "compliance", "mean", "sd", "relative_variability", "rmssd",
                "inertia", "half_life_hours", "recovery_half_life_hours", "warning_tau_inertia",
                "warning_p_inertia", "warning_tau_variance", "warning_p_variance",
                "warning_robustness"}
    assert required <= set(metrics["measure"])
    # A missing value always carries its reason.
    missing = metrics[metrics["value"].isna()]
    assert missing["note"].notna().all()
    flags = pd.read_csv(out / "flags.csv")
    assert list(flags.columns) == ["participant", "rule", "action", "value", "when"]
    overview = _parse(out / "index.html")
    assert overview.headings.count("h1") == 1


def test_check_refuses_a_broken_copy(example_copy: Path) -> None:
    """Check that `check` on a broken study exits non-zero with a readable message."""
    momentary = example_copy / "data" / "momentary.csv"
    lines = momentary.read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    row = lines[1].split(",")
    item = next(i for i, name in enumerate(header) if name == "down")
    row[item] = "99"
    lines[1] = ",".join(row)
    momentary.write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = CliRunner().invoke(main, ["check", str(example_copy)])
    assert result.exit_code != 0
    assert "data/momentary.csv, row 2, column 'down'" in result.output
    assert "Traceback" not in result.output


def test_init_makes_a_project_check_accepts(tmp_path: Path) -> None:
    """Check that a project made by `init` validates (its settings come from the schema)."""
    runner = CliRunner()
    made = runner.invoke(main, ["init", str(tmp_path / "new")])
    assert made.exit_code == 0, made.output
    checked = runner.invoke(main, ["check", str(tmp_path / "new")])
    assert "error(s)" in checked.output
    assert "Traceback" not in checked.output
    again = runner.invoke(main, ["init", str(tmp_path / "new")])
    assert again.exit_code != 0 and "already exists" in again.output


def test_version_and_help() -> None:
    """Check that --version and --help work on every command."""
    runner = CliRunner()
    assert runner.invoke(main, ["--version"]).output.startswith("springback, version")
    for cmd in ([], ["init"], ["check"], ["build"]):
        result = runner.invoke(main, [*cmd, "--help"])
        assert result.exit_code == 0 and "Usage" in result.output


def test_build_refuses_without_referral_text(example_copy: Path) -> None:
    """Check `build` refuses when a participant's language and region have no referral text."""
    toml = example_copy / "study.toml"
    text = toml.read_text(encoding="utf-8")
    blocks = text.split("[[referral]]")
    kept = [b for b in blocks[1:] if not ('region = "south"' in b and 'language = "nl"' in b)]
    assert len(kept) == len(blocks) - 2
    toml.write_text("[[referral]]".join([blocks[0], *kept]), encoding="utf-8")
    result = CliRunner().invoke(main, ["build", str(example_copy), "-q"])
    assert result.exit_code != 0
    assert "no referral text for language 'nl' and region 'south'" in result.output
    assert not (example_copy / "out").exists()

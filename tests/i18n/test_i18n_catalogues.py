"""The message catalogues: complete, compiled, current with the sources, and checked at `check`."""

from __future__ import annotations

import configparser
import io
import shutil
from collections.abc import Iterator
from pathlib import Path

import pytest
from babel.messages.mofile import write_mo
from babel.messages.pofile import read_po

from springback.i18n import catalogues
from springback.i18n import language as i18n
from springback.i18n.catalogues import (
    TRANSLATED,
    extract,
    extract_template,
    report_ok,
    run_translations,
    translation_report,
)
from springback.i18n.language import (
    catalogue_path,
    catalogue_problems,
    template_path,
    translations,
)

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def report() -> dict[str, dict[str, list[str]]]:
    """The translation report against a fresh extraction from the current sources."""
    return translation_report()


@pytest.fixture
def scratch_locale(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Path]:
    """A writable copy of the catalogues, used instead of the packaged ones."""
    locale = tmp_path / "locale"
    shutil.copytree(i18n.LOCALE_DIR, locale)
    monkeypatch.setattr(i18n, "LOCALE_DIR", locale)
    translations.cache_clear()
    yield locale
    translations.cache_clear()


@pytest.mark.parametrize("language", TRANSLATED)
def test_catalogue_complete(report: dict, language: str) -> None:
    """Check that every message is translated and none is fuzzy or has wrong placeholders."""
    entry = report[language]
    assert entry["untranslated"] == [], f"{language}: not translated"
    assert entry["fuzzy"] == [], f"{language}: fuzzy"
    assert entry["errors"] == [], f"{language}: placeholder errors"


@pytest.mark.parametrize("language", TRANSLATED)
def test_compiled_catalogue_matches_its_source(report: dict, language: str) -> None:
    """Check that the committed .mo holds exactly the translations of the .po."""
    assert report[language]["not_compiled"] == []


def test_template_is_current_with_the_sources() -> None:
    """Check that the committed messages.pot holds exactly the messages in the sources now."""
    with template_path().open("rb") as fh:
        committed = {m.id if isinstance(m.id, str) else tuple(m.id) for m in read_po(fh) if m.id}
    fresh = {m.id if isinstance(m.id, str) else tuple(m.id) for m in extract_template() if m.id}
    assert sorted(map(str, fresh - committed)) == [], "run `springback translations --update`"
    assert sorted(map(str, committed - fresh)) == [], "run `springback translations --update`"


def test_extraction_options_match_the_booklet_environment() -> None:
    """Check that babel.cfg reads templates as the renderer does, so the ids are the same."""
    from springback.render import make_environment

    cfg = configparser.ConfigParser()
    cfg.read(REPO / "babel.cfg")
    options = cfg["jinja2: src/springback/templates/**.html"]
    env = make_environment(None, "en")
    assert options.getboolean("trim_blocks") == env.trim_blocks
    assert options.getboolean("lstrip_blocks") == env.lstrip_blocks
    assert options.getboolean("newstyle_gettext") == env.newstyle_gettext  # type: ignore[attr-defined]
    assert options.getboolean("trimmed", False) == env.policies["ext.i18n.trimmed"]


def test_complete_languages_pass_check(report: dict) -> None:
    """Check that `check` finds nothing wrong with complete catalogues."""
    if not report_ok(report):
        pytest.skip("catalogues incomplete (reported by test_catalogue_complete)")
    assert catalogue_problems(["en", "nl", "de", "nl"]) == []


def test_unknown_language_is_a_check_error() -> None:
    """Check that an unknown language is one error naming it and the languages on offer."""
    problems = catalogue_problems(["en", "fr"], where="data/participants.csv, column 'language'")
    assert len(problems) == 1
    problem = problems[0]
    assert problem.is_error and problem.code == "unknown-language"
    assert problem.message().startswith(
        "data/participants.csv, column 'language': springback has no booklet text in "
        "language 'fr'; expected one of en, nl, de, found 'fr'"
    )


def test_incomplete_language_is_a_check_error_naming_the_messages(scratch_locale: Path) -> None:
    """Check that a catalogue missing a message is an error that names the message."""
    po_path = catalogue_path("de")
    with po_path.open("rb") as fh:
        catalog = read_po(fh, locale="de")
    gone = next(m.id for m in catalog if m.id and isinstance(m.id, str))
    catalog.delete(gone)
    buffer = io.BytesIO()
    write_mo(buffer, catalog)
    catalogue_path("de", ".mo").write_bytes(buffer.getvalue())
    problems = catalogue_problems(["de", "nl"])
    assert [p.code for p in problems] == ["catalogue-incomplete"]
    assert "German (de) catalogue is incomplete: 1 message(s) not translated" in problems[0].what
    assert repr(gone) in problems[0].what or f"'{gone}'" in problems[0].what


def test_missing_compiled_catalogue_is_reported(scratch_locale: Path) -> None:
    """Check that a missing .mo gives a clear error rather than a traceback."""
    catalogue_path("nl", ".mo").unlink()
    problems = catalogue_problems(["nl"])
    assert [p.code for p in problems] == ["catalogue-unreadable"]
    assert "compiled catalogue for language 'nl' is missing" in problems[0].what


def test_update_adds_new_messages_and_drops_removed_ones(
    scratch_locale: Path, tmp_path: Path
) -> None:
    """Check the update workflow on a tiny source tree: new text untranslated, old text gone."""
    root = tmp_path / "checkout"
    (root / "src" / "springback").mkdir(parents=True)
    (root / "babel.cfg").write_text("[python: src/springback/**.py]\n", encoding="utf-8")
    (root / "src" / "springback" / "x.py").write_text(
        "def f(gettext):\n"
        "    # Translators: a made-up message for this test\n"
        "    return gettext('A brand new sentence.')\n",
        encoding="utf-8",
    )
    before = translation_report(["nl"], fresh=True, root=root)["nl"]
    assert before["untranslated"] == ["A brand new sentence."]
    assert "Your mood booklet" in before["obsolete"]  # in the .po, gone from these sources
    changed = extract(root)
    assert template_path() in changed and catalogue_path("nl") in changed
    after = translation_report(["nl"], fresh=False)["nl"]
    assert after["untranslated"] == ["A brand new sentence."]
    assert after["obsolete"] == [] and after["not_compiled"] == []
    with template_path().open("rb") as fh:
        (message,) = [m for m in read_po(fh) if m.id]
    assert message.auto_comments == ["a made-up message for this test"]
    assert message.locations == [("src/springback/x.py", 3)]
    assert extract(root) == []  # nothing changes on a second run


def test_run_translations_exit_code(
    report: dict, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    """Check that the report command exits 0 when complete and 1 (listing the text) when not."""
    incomplete = {"nl": {**report["nl"], "untranslated": ["Some new text"]}, "de": report["de"]}
    monkeypatch.setattr(catalogues, "translation_report", lambda: incomplete)
    assert run_translations(update=False) == 1
    out = capsys.readouterr().out
    assert "Dutch (nl)" in out and "not translated:\n    Some new text" in out
    monkeypatch.setattr(catalogues, "translation_report", lambda: report)
    assert run_translations(update=False) == (0 if report_ok(report) else 1)

"""Compiled templates are shared by the environments of one process, and never go stale."""

from __future__ import annotations

from pathlib import Path

import pytest

from springback.render import env as render_env
from springback.render.env import make_environment


def _compiles(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    seen: list[str] = []
    real = render_env._Sandbox.compile

    def counted(self, source, name=None, filename=None, raw=False, defer_init=False):  # type: ignore[no-untyped-def]
        seen.append(str(name))
        return real(self, source, name, filename, raw, defer_init)

    monkeypatch.setattr(render_env._Sandbox, "compile", counted)
    return seen


def test_a_second_environment_compiles_nothing_again(tmp_path: Path,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    templates = tmp_path / "templates"
    templates.mkdir()
    (templates / "note.html").write_text("{{ _('Date') }}: {{ x }}", encoding="utf-8")
    seen = _compiles(monkeypatch)
    first = make_environment(templates, "en").get_template("note.html").render(x=3)
    assert seen == ["note.html"]
    # Another language's environment: the same code, its own catalogue.
    dutch = make_environment(templates, "nl").get_template("note.html").render(x=3)
    assert seen == ["note.html"]
    assert first == "Date: 3"
    assert dutch == "Datum: 3"


def test_a_changed_template_is_compiled_afresh(tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    templates = tmp_path / "templates"
    templates.mkdir()
    page = templates / "page.html"
    page.write_text("before {{ x }}", encoding="utf-8")
    assert make_environment(templates, "en").get_template("page.html").render(x=1) == "before 1"
    page.write_text("after {{ x }}", encoding="utf-8")
    seen = _compiles(monkeypatch)
    assert make_environment(templates, "en").get_template("page.html").render(x=1) == "after 1"
    assert seen == ["page.html"]

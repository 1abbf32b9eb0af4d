"""A study's templates are code: they run sandboxed, read only their own folders, load nothing."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from springback.render import html_to_pdf, make_environment
from springback.render.env import TemplateRefused

PAYLOAD = "{{ cycler.__init__.__globals__.os.popen('id').read() }}"
PAGE = ('<!DOCTYPE html><html lang="en"><head><title>t</title>{head}</head><body><main>'
        '<p>Hello</p>{body}</main></body></html>')


def _words(text: str) -> str:
    return " ".join(text.split())


def test_template_cannot_run_a_program(tmp_path: Path) -> None:
    """Check the cycler escape is refused with a message naming the template and the fix."""
    templates = tmp_path / "study" / "templates"
    templates.mkdir(parents=True)
    (templates / "participant.html").write_text(f"<p>{PAYLOAD}</p>", encoding="utf-8")
    env = make_environment(templates, "en")
    with pytest.raises(TemplateRefused) as caught:
        env.get_template("participant.html").render()
    text = _words(str(caught.value))
    assert text.startswith("templates/participant.html: the template reaches for '__init__'")
    assert "run in a sandbox" in text and "Fix: remove that expression" in text
    assert "uid=" not in text


@pytest.mark.parametrize("payload", [
    "{{ ''.__class__.__mro__[1].__subclasses__() }}",
    "{{ lipsum.__globals__['os'].system('true') }}",
    "{{ self._TemplateReference__context }}",
])
def test_other_escapes_are_refused(tmp_path: Path, payload: str) -> None:
    """Check the usual ways out of a template are refused too."""
    templates = tmp_path / "templates"
    templates.mkdir()
    (templates / "x.html").write_text(payload, encoding="utf-8")
    with pytest.raises(TemplateRefused, match="may not use"):
        make_environment(templates, "en").get_template("x.html").render()


def test_link_out_of_templates_is_refused(tmp_path: Path) -> None:
    """Check that a symlinked template pointing outside the templates is not read."""
    secret = tmp_path / "secret.txt"
    secret.write_text("private words", encoding="utf-8")
    templates = tmp_path / "study" / "templates"
    (templates / "sections").mkdir(parents=True)
    os.symlink(secret, templates / "sections" / "reflect.html")
    env = make_environment(templates, "en")
    with pytest.raises(TemplateRefused) as caught:
        env.get_template("sections/reflect.html").render()
    text = _words(str(caught.value))
    assert text.startswith("templates/sections/reflect.html: the template leads to")
    assert "outside the project's templates/ folder" in text
    assert "Fix: copy the file into templates/ instead of linking to it" in text
    assert "private words" not in text


def test_templates_folder_linked_elsewhere_is_refused(tmp_path: Path) -> None:
    """Check that templates/ itself as a link to another folder is refused."""
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "x.html").write_text("hi", encoding="utf-8")
    (tmp_path / "study").mkdir()
    os.symlink(elsewhere, tmp_path / "study" / "templates")
    env = make_environment(tmp_path / "study" / "templates", "en")
    with pytest.raises(TemplateRefused, match="leads to"):
        env.get_template("x.html").render()


def test_link_inside_templates_is_allowed(tmp_path: Path) -> None:
    """Check that a link from one project template to another stays usable."""
    templates = tmp_path / "templates"
    templates.mkdir()
    (templates / "a.html").write_text("<p>{{ 1 + 1 }}</p>", encoding="utf-8")
    os.symlink(templates / "a.html", templates / "b.html")
    assert make_environment(templates, "en").get_template("b.html").render() == "<p>2</p>"


@pytest.mark.parametrize("head, body, shown", [
    ('<link rel="attachment" href="file:///etc/passwd">', "", "file:///etc/passwd"),
    ("", '<img src="data/momentary.csv" alt="x">', "data/momentary.csv"),
    ("", '<img src="https://example.org/track.png" alt="x">', "https://example.org/track.png"),
    ('<link rel="stylesheet" href="http://example.org/a.css">', "", "http://example.org/a.css"),
])
def test_pdf_loads_no_local_file_or_network(tmp_path: Path, head: str, body: str,
                                            shown: str) -> None:
    """Check WeasyPrint may not embed local files or fetch URLs; the refusal names the URL."""
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "momentary.csv").write_text("participant\nP01\n", encoding="utf-8")
    with pytest.raises(TemplateRefused) as caught:
        html_to_pdf(PAGE.format(head=head, body=body), tmp_path)
    text = _words(str(caught.value))
    assert shown in text and "which a booklet may not load" in text
    assert "no PDF was made" in text and "Fix: remove that link, image or attachment" in text


def test_pdf_with_inline_data_and_own_fonts_is_made(tmp_path: Path) -> None:
    """Check data: URIs still work (fonts and images arrive inline)."""
    png = ("data:image/png;base64,iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAYAAAAfFcSJAAAADUlEQVR42m"
           "P8z8BQDwAEhQGAhKmMIQAAAABJRU5ErkJggg==")
    pdf = html_to_pdf(PAGE.format(head="", body=f'<img src="{png}" alt="dot">'), tmp_path)
    assert pdf.startswith(b"%PDF") and b"root:" not in pdf


def test_build_names_the_refused_template(tmp_path: Path) -> None:
    """Check a build with the cycler escape in a study template fails that booklet, saying why."""
    from click.testing import CliRunner

    from springback.cli import main
    from tests.cli.test_cli_fuzz import GOOD, TOML, _toml

    project = tmp_path / "study"
    (project / "data").mkdir(parents=True)
    (project / "templates" / "sections").mkdir(parents=True)
    (project / "templates" / "sections" / "reflect.html").write_text(
        f"<p>{PAYLOAD}</p>", encoding="utf-8")
    (project / "study.toml").write_text(TOML.format(**{k: _toml(v) for k, v in GOOD.items()}),
                                        encoding="utf-8")
    rows = ["participant,timestamp,sad,calm"]
    rows += [f"p1,2024-03-{day:02d} {hour}:00,{(day * k) % 7 + 1},{(day + k) % 7 + 1}"
             for day in range(1, 13) for k, hour in enumerate((9, 13, 17, 21), start=1)]
    (project / "data" / "momentary.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (project / "data" / "participants.csv").write_text(
        "participant,language,consent,feedback\np1,en,yes,yes\n", encoding="utf-8")
    result = CliRunner().invoke(main, ["build", str(project), "-j", "1", "-q"])
    assert result.exit_code == 2
    text = _words(result.output)
    assert "Traceback" not in text and "uid=" not in text
    assert ("templates/sections/reflect.html: the template reaches for '__init__' of a type "
            "value, which booklet templates may not use") in text
    assert not list((project / "out" / "booklets").rglob("*.html"))

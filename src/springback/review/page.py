"""The HTML of the local review page (`review.serve`): one self-contained page, no scripts.

Every text that comes from a study (ids, reasons, names, notes) is escaped; the page loads
nothing (inline style only, and a Content-Security-Policy that forbids fetching).
"""

from __future__ import annotations

from html import escape
from pathlib import Path
from typing import Any
from urllib.parse import quote

STYLE = """
body { font-family: system-ui, sans-serif; line-height: 1.5; max-width: 72rem; margin: 0 auto;
       padding: 1rem; color: #1a1a1a; background: #fff; }
table { border-collapse: collapse; width: 100%; margin: 0.5rem 0 1.5rem; }
th, td { border: 1px solid #767676; padding: 0.3rem 0.5rem; text-align: left;
         vertical-align: top; }
caption { text-align: left; font-weight: bold; padding: 0.3rem 0; }
fieldset { border: 1px solid #767676; margin: 0.5rem 0 1rem; padding: 0.5rem 1rem; }
label { display: block; margin-top: 0.4rem; font-weight: bold; }
input[type=text], select, textarea { font: inherit; width: 100%; max-width: 30rem;
       box-sizing: border-box; border: 1px solid #595959; padding: 0.2rem; }
button { font: inherit; margin: 0.5rem 0.5rem 0 0; padding: 0.3rem 0.8rem; }
.status { background: #e8f4ea; border-left: 0.4rem solid #1e6b34; padding: 0.5rem 1rem; }
.alert { background: #fbeaea; border-left: 0.4rem solid #9b1c1c; padding: 0.5rem 1rem; }
a { color: #0b4f9c; }
:focus-visible { outline: 3px solid #0b4f9c; outline-offset: 2px; }
"""


def _frame(title: str, body: str) -> str:
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
        "style-src 'unsafe-inline'; img-src data:; font-src data:; form-action 'self'\">\n"
        f"<title>{escape(title)}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n"
        f"<main>\n{body}\n</main>\n</body>\n</html>\n"
    )


def refusal_html(why: str) -> str:
    """A short page saying why a request was refused."""
    return _frame("Review page: refused",
                  f"<h1>Refused</h1>\n<p class=\"alert\" role=\"alert\">{escape(why)}</p>")


def _who(reviewers: list[tuple[str, str]], ident: str) -> str:
    """The reviewer's name: a list when study.toml has one, else a text field."""
    if reviewers:
        options = "".join(
            f"<option value=\"{escape(n)}\">{escape(n)}{' (' + escape(r) + ')' if r else ''}"
            "</option>" for n, r in reviewers)
        return (f"<label for=\"by-{ident}\">Your name</label>\n<select id=\"by-{ident}\" "
                f"name=\"by\" required><option value=\"\">(choose)</option>{options}</select>")
    return (f"<label for=\"by-{ident}\">Your name</label>\n<input type=\"text\" "
            f"id=\"by-{ident}\" name=\"by\" required autocomplete=\"name\">")


def _note(ident: str) -> str:
    return (f"<label for=\"note-{ident}\">Note (why; kept beside the audit log and erased with "
            f"the participant)</label>\n<textarea id=\"note-{ident}\" name=\"note\" rows=\"2\">"
            "</textarea>")


def _hidden(fields: dict[str, str]) -> str:
    return "".join(f"<input type=\"hidden\" name=\"{escape(k)}\" value=\"{escape(v)}\">"
                   for k, v in fields.items())


def _links(pid: str, files: list[str]) -> str:
    out = []
    for rel in files:
        name = rel.rsplit("/", 1)[-1]
        href = f"/booklet/{quote(pid, safe='')}/{quote(name, safe='')}"
        out.append(f"<a href=\"{escape(href)}\" aria-label=\""
                   f"{escape(pid)}, {escape(name)}\">{escape(name)}</a>")
    return " · ".join(out) or "–"


def _held(project: Path, form_key: str, reviewers: list[tuple[str, str]],
          manifest: dict[str, Any]) -> str:
    from springback.review import gate

    held = gate.list_held(project)
    if not held:
        return "<p>No booklet of the latest build is held.</p>"
    people = manifest.get("participants", {})
    rows, forms = [], []
    for i, h in enumerate(held):
        pid = h.participant
        decided = f"{h.decided_by}, {h.decided_at}" if h.decided_by else "–"
        reasons = "<br>".join(escape(r) for r in h.reasons)
        rows.append(f"<tr><th scope=\"row\">{escape(pid)}</th><td>{escape(h.version)}</td>"
                    f"<td>{escape(h.state)}</td><td>{reasons}</td><td>{escape(decided)}</td>"
                    f"<td>{_links(pid, list(people.get(pid, {}).get('files', [])))}</td></tr>")
        ident = f"h{i}"
        hidden = _hidden({"form_key": form_key, "participant": pid, "version": h.version,
                          "fingerprint": h.fingerprint})
        forms.append(
            f"<form method=\"post\" action=\"/decide\">\n<fieldset>\n<legend>Decide on the "
            f"booklet of {escape(pid)}, version {escape(h.version)} ({escape(h.state)})"
            f"</legend>\n{hidden}\n{_who(reviewers, ident)}\n{_note(ident)}\n"
            "<button type=\"submit\" name=\"decision\" value=\"approve\">Approve for "
            f"release: {escape(pid)}</button><button type=\"submit\" name=\"decision\" "
            f"value=\"reject\">Reject: {escape(pid)}</button>\n</fieldset>\n</form>")
    table = ("<table>\n<caption>Held booklets of the latest build</caption>\n<thead><tr>"
             "<th scope=\"col\">Participant</th><th scope=\"col\">Version</th>"
             "<th scope=\"col\">State</th><th scope=\"col\">Reasons</th>"
             "<th scope=\"col\">Decided</th><th scope=\"col\">Booklet files</th></tr></thead>\n"
             "<tbody>\n" + "\n".join(rows) + "\n</tbody>\n</table>")
    return table + "\n" + "\n".join(forms)


def _actions(project: Path, form_key: str, reviewers: list[tuple[str, str]]) -> str:
    from springback.review.actions import open_actions

    todo = open_actions(project)
    if not todo:
        return "<p>No action is open.</p>"
    rows, forms = [], []
    for i, a in enumerate(todo):
        rows.append(f"<tr><th scope=\"row\">{escape(a.participant)}</th><td>{escape(a.words)}"
                    f"</td><td>{escape(a.reason)}</td><td>{escape(a.since or '–')}</td>"
                    f"<td>{escape(a.booklet)}</td></tr>")
        if a.kind == "review":
            continue
        ident = f"a{i}"
        hidden = _hidden({"form_key": form_key, "participant": a.participant, "rule": a.rule})
        forms.append(
            f"<form method=\"post\" action=\"/close\">\n<fieldset>\n<legend>Record as done: "
            f"{escape(a.participant)}, {escape(a.rule)}</legend>\n{hidden}\n"
            f"{_who(reviewers, ident)}\n{_note(ident)}\n<button type=\"submit\">Record as done: "
            f"{escape(a.participant)}, {escape(a.rule)}</button>\n</fieldset>\n</form>")
    table = ("<table>\n<caption>Open actions (a held booklet's action closes with its "
             "decision)</caption>\n<thead><tr><th scope=\"col\">Participant</th>"
             "<th scope=\"col\">Action</th><th scope=\"col\">Reason</th>"
             "<th scope=\"col\">Since</th><th scope=\"col\">Booklet</th></tr></thead>\n<tbody>\n"
             + "\n".join(rows) + "\n</tbody>\n</table>")
    return table + "\n" + "\n".join(forms)


def page_html(project: Path, form_key: str, message: tuple[str, str] | None = None) -> str:
    """The review page: the last decision's outcome, held booklets, open actions."""
    from springback.errors import SpringbackError
    from springback.review.actions import latest_build, reviewers

    parts = ["<h1>Review: held booklets and open actions</h1>"]
    if message:
        kind, text = message
        role = "alert" if kind == "alert" else "status"
        parts.append(f"<p class=\"{role}\" role=\"{role}\">{escape(text)}</p>")
    try:
        manifest = latest_build(project)
        names = reviewers(project)
        parts.append(f"<p>Latest build: {escape(str(manifest.get('build', '')))}. Each decision "
                     "is recorded in the audit log for the booklet version shown; a newer "
                     "build's version needs its own decision.</p>")
        parts.append("<h2>Held booklets</h2>")
        parts.append(_held(project, form_key, names, manifest))
        parts.append("<h2>Open actions</h2>")
        parts.append(_actions(project, form_key, names))
    except SpringbackError as exc:
        parts.append(f"<p class=\"alert\" role=\"alert\">{escape(str(exc))}</p>")
    return _frame("Review: held booklets and open actions", "\n".join(parts))

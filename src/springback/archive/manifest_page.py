"""The human-readable page beside each build's manifest.json (self-contained, escaped).

    manifest_html(manifest: dict) -> str
"""

from __future__ import annotations

from html import escape
from typing import Any

from springback.model import Flag

_STYLE = (
    "body{font-family:system-ui,sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;"
    "color:#1a1a1a;background:#fff;line-height:1.5}table{border-collapse:collapse;width:100%;"
    "margin:0 0 1.5rem}th,td{border:1px solid #767676;padding:.25rem .5rem;text-align:left;"
    "vertical-align:top}th{background:#eee}code{font-size:.85em;word-break:break-all}"
)


def _table(caption: str, header: tuple[str, ...], rows: list[tuple[Any, ...]]) -> str:
    head = "".join(f'<th scope="col">{escape(h)}</th>' for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td>{escape(str(c))}</td>" for c in row) + "</tr>" for row in rows
    ) or f'<tr><td colspan="{len(header)}">none</td></tr>'
    return (f"<table><caption>{escape(caption)}</caption><thead><tr>{head}</tr></thead>"
            f"<tbody>{body}</tbody></table>")


def manifest_html(manifest: dict[str, Any]) -> str:
    """Render a manifest as a plain page: facts, inputs, templates, outputs, participants."""
    facts = [
        ("Build", manifest.get("build", "")),
        ("Tool", f"springback {manifest.get('tool', {}).get('version', '')}"),
        ("Python", manifest.get("python", "")),
        ("Platform", manifest.get("platform", "")),
        ("Started (UTC)", manifest.get("started", "")),
        ("Ended (UTC)", manifest.get("ended", "")),
        ("Build time shown in outputs (UTC)", manifest.get("built_at", "")),
        ("Settings SHA-256", manifest.get("settings", {}).get("sha256", "")),
        ("Inputs kept", manifest.get("keep_inputs", "")),
    ]
    deps = sorted(manifest.get("dependencies", {}).items())
    inputs = [
        (rel, rec.get("sha256", ""), rec.get("bytes", ""),
         rec.get("archived") or ("erased" if rec.get("erased") else "hash only"))
        for rel, rec in sorted(manifest.get("inputs", {}).items())
    ]
    templates = sorted(manifest.get("templates", {}).items())
    outputs = sorted(
        (rel, sha) for rel, sha in manifest.get("files", {}).items() if rel.startswith("out/")
    )
    people = []
    for pid, rec in sorted(manifest.get("participants", {}).items()):
        flags = "; ".join(f"{f.rule} ({f.action})" for f in
                          (Flag.from_row(row, pid) for row in rec.get("flags", [])))
        period = rec.get("period", {}) or {}
        people.append((pid, rec.get("review_state", ""), flags or "none",
                       f"{period.get('first', '')} to {period.get('last', '')}",
                       str(rec.get("fingerprint", ""))[:16]))
    erasures = [(e.get("time", ""), e.get("subject", "")[:16], e.get("files_removed", ""),
                 e.get("files_rewritten", "")) for e in manifest.get("erasures", [])]
    params = sorted((k, v) for k, v in manifest.get("params", {}).items())
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>Build {escape(str(manifest.get('build', '')))}: provenance</title>",
        f"<style>{_STYLE}</style></head><body><main>",
        f"<h1>Build {escape(str(manifest.get('build', '')))}: provenance</h1>",
        "<p>What went into this build and what came out. The file manifest.json beside this "
        "page is the authoritative record; <code>springback verify</code> checks it.</p>",
        _table("Build facts", ("Fact", "Value"), facts),
        _table("Parameters and seeds", ("Parameter", "Value"), params),
        _table("Software versions", ("Package", "Version"), deps),
        _table("Input files", ("File", "SHA-256", "Bytes", "Archived copy"), inputs),
        _table("Templates", ("Template", "SHA-256"), templates),
        _table("Outputs", ("File", "SHA-256"), outputs),
        _table("Participants", ("Participant", "Review state", "Flags", "Period covered",
                                "Booklet fingerprint (start)"), people),
        _table("Erasures", ("When (UTC)", "Erased subject (hashed, start)", "Files removed",
                            "Files rewritten"), erasures),
        "</main></body></html>",
        "",
    ]
    return "\n".join(parts)

"""`springback init`: a new project folder with a commented study.toml and tiny data templates.

The comments come from the settings schema's field descriptions, so they never drift from it.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from pydantic import BaseModel
from pydantic.fields import PydanticUndefined

from springback.errors import SpringbackError
from springback.settings import SETTINGS_FILE, StudySettings
from springback.settings.sections import (
    Composite,
    Item,
    Questionnaire,
    Referral,
    Reviewer,
    SafetyRule,
)

_EXAMPLE_TABLES = {
    "items": (
        "[items.down]\n"
        "scale = [1, 7]\n"
        'label = { en = "I feel down" }\n\n'
        "[items.cheerful]\n"
        "scale = [1, 7]\n"
        "reverse = true\n"
        'label = { en = "I feel cheerful" }\n'
    ),
    "composites": (
        "[composites.low_mood]\n"
        'items = ["down", "cheerful"]\n'
        'higher_is = "worse"\n'
        'label = { en = "low mood" }\n'
    ),
    "questionnaires": (
        "# [questionnaires.weekly]\n"
        "# range = [0, 27]\n"
        '# bands = [[0, "minimal"], [5, "mild"], [10, "moderate"]]\n'
        "# reliability = 0.84\n"
        "# sd = 5.0\n"
    ),
    "safety": (
        "# [[safety.rules]]\n"
        '# name = "high weekly score"\n'
        '# questionnaire = "weekly"\n'
        "# at_least = 20\n"
        '# action = "hold"\n'
    ),
    "review": (
        "# Without this list anyone named with --by may decide; with it, only these people.\n"
        "# [[review.reviewers]]\n"
        '# name = "Dr. A. Example"\n'
        '# role = "clinical psychologist"\n'
    ),
    "referral": (
        "# Replace with your region's real services before any booklet is given out.\n"
        "[[referral]]\n"
        'region = "default"\n'
        'language = "en"\n'
        'questions = "Write to the study team at study@example.org"\n'
        'feeling_worse = "Make an appointment with your family doctor"\n'
        'self_harm = "Call your doctor today, or a crisis line"\n'
        'emergency = "Call your local emergency number"\n'
    ),
}

_TABLE_MODELS: dict[str, type[BaseModel]] = {
    "items": Item, "composites": Composite, "questionnaires": Questionnaire,
    "safety": SafetyRule, "referral": Referral, "review": Reviewer,
}
"""The model of each table with an example above: its other keys are listed after the example."""

_DATA_TEMPLATES = {
    "momentary.csv": "participant,timestamp,scheduled,down,cheerful\n"
    "p01,2026-03-02T09:14:00+01:00,2026-03-02T09:10:00+01:00,3,5\n",
    "participants.csv": "participant,language,consent,feedback,therapist,region\n"
    "p01,en,yes,yes,yes,default\n",
    "events.csv": "participant,timestamp,kind,intensity\n",
    "questionnaires.csv": "participant,timestamp,questionnaire,score\n",
}


def _toml_value(value: Any) -> str | None:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, Path):
        return _toml_value(value.as_posix())
    if isinstance(value, list | tuple):
        parts = [_toml_value(v) for v in value]
        return None if None in parts else "[" + ", ".join(p for p in parts if p) + "]"
    if isinstance(value, dict) and not value:
        return "{}"
    return None


def _comment(text: str) -> list[str]:
    words, lines, line = text.split(), [], "#"
    for w in words:
        if len(line) + len(w) > 92:
            lines.append(line)
            line = "#"
        line += " " + w
    return [*lines, line]


def _section(model: type[BaseModel], name: str) -> list[str]:
    lines = [f"[{name}]"]
    nested: list[tuple[str, type[BaseModel]]] = []
    for key, info in model.model_fields.items():
        annotation = info.annotation
        if isinstance(annotation, type) and issubclass(annotation, BaseModel):
            nested.append((key, annotation))
            continue
        lines += _comment(info.description or "")
        default = info.get_default(call_default_factory=True)
        if default is PydanticUndefined:
            continue
        rendered = _toml_value(default) if default is not None else None
        lines.append(f"# {key} = {rendered}" if rendered is None or default is None
                     else f"{key} = {rendered}")
        if default is None:
            lines[-1] = f"# {key} =   (not set)"
    lines.append("")
    for key, sub in nested:
        lines += _comment(model.model_fields[key].description or "")
        lines += _section(sub, f"{name}.{key}")
    return lines


def _more_keys(model: type[BaseModel], shown: str) -> str:
    """Commented lines for the keys of a table's model that its example does not set."""
    lines = []
    for key, info in model.model_fields.items():
        if re.search(rf"^(# )?{key} =", shown, re.M):
            continue
        default = info.get_default(call_default_factory=True)
        rendered = None if default in (PydanticUndefined, None) else _toml_value(default)
        lines += [*_comment(info.description or key), f"# {key} = {rendered or ''}".rstrip()]
    return "\n".join(lines) + "\n" if lines else ""


def commented_settings() -> str:
    """A complete study.toml: every section with its keys, defaults and meaning as comments."""
    out = [
        "# springback study settings. Every key has a default except the items you ask about.",
        "# Lines starting with # are comments. Paths are relative to this folder.",
        "",
    ]
    for key, info in StudySettings.model_fields.items():
        annotation = info.annotation
        out += _comment(info.description or key)
        if key in _EXAMPLE_TABLES:
            example = _EXAMPLE_TABLES[key]
            table = _TABLE_MODELS.get(key)
            out.append(example + (_more_keys(table, example) if table else ""))
        elif isinstance(annotation, type) and issubclass(annotation, BaseModel):
            out += _section(annotation, key)
        else:
            out.append("")
    return "\n".join(out).rstrip() + "\n"


def init_project(folder: Path) -> list[Path]:
    """Create a new project folder; refuses to overwrite an existing study.toml."""
    folder = Path(folder)
    target = folder / SETTINGS_FILE
    if target.exists():
        raise SpringbackError(
            f"{target} already exists; init never overwrites a study. Choose a new folder."
        )
    (folder / "data").mkdir(parents=True, exist_ok=True)
    (folder / "templates").mkdir(exist_ok=True)
    written = [target]
    target.write_text(commented_settings(), encoding="utf-8")
    for name, text in _DATA_TEMPLATES.items():
        path = folder / "data" / name
        if not path.exists():
            path.write_text(text, encoding="utf-8")
            written.append(path)
    return written

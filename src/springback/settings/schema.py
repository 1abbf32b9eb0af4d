"""The whole `study.toml` (`StudySettings`), loading it, and the checks across sections.
"""

from __future__ import annotations

import difflib
import itertools
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from pydantic import BaseModel, Field, ValidationError

from springback.errors import Problem, SettingsError, Severity, error, warning
from springback.settings.data_files import DataFiles, data_checks
from springback.settings.sections import (
    SETTINGS_FILE,
    Archive,
    Booklet,
    Composite,
    Delivery,
    Events,
    Item,
    Metrics,
    Output,
    Questionnaire,
    Referral,
    Review,
    Safety,
    Section,
    StudyInfo,
)


@dataclass(frozen=True)
class Band:
    """One band of a questionnaire (`StudySettings.band_table`)."""

    label: str
    """Its name in the booklet's language."""
    lower: float
    """The lowest score in the band (its lower bound in `bands`)."""
    upper: float
    """The highest score in it: one below the next band's lower bound; the range's top."""
    end: float
    """Where the band ends on the score axis: the next band's lower bound; the range's top."""


class StudySettings(Section):
    """Everything in `study.toml`."""

    study: StudyInfo = Field(default_factory=StudyInfo, description="Study facts.")
    data: DataFiles = Field(default_factory=DataFiles, description="Data files and columns.")
    items: dict[str, Item] = Field(default_factory=dict, description="Momentary items.")
    composites: dict[str, Composite] = Field(default_factory=dict, description="Composites.")
    booklet: Booklet = Field(default_factory=Booklet, description="What booklets contain.")
    events: Events = Field(default_factory=Events, description="Event markers.")
    questionnaires: dict[str, Questionnaire] = Field(
        default_factory=dict, description="Periodic questionnaires."
    )
    metrics: Metrics = Field(default_factory=Metrics, description="Metric parameters.")
    safety: Safety = Field(default_factory=Safety, description="Safety rules.")
    referral: list[Referral] = Field(
        default_factory=list, description="Referral texts per region and language."
    )
    review: Review = Field(default_factory=Review, description="Who reviews held booklets.")
    archive: Archive = Field(default_factory=Archive, description="Audit archive.")
    delivery: Delivery = Field(default_factory=Delivery, description="Sending booklets.")
    output: Output = Field(default_factory=Output, description="Output folders.")

    # -- derived facts used everywhere -------------------------------------------------
    @property
    def about(self) -> str:
        """The composite or item the booklets are about."""
        if self.booklet.about:
            return self.booklet.about
        if self.composites:
            return next(iter(self.composites))
        return next(iter(self.items))

    def higher_is_worse(self, variable: str) -> bool:
        """Polarity of a composite or item (items: higher is worse unless reverse-scored)."""
        if variable in self.composites:
            return self.composites[variable].higher_is == "worse"
        if variable in self.items:
            return not self.items[variable].reverse
        raise KeyError(variable)

    def scale_of(self, variable: str) -> tuple[float, float]:
        """Scale range of an item, or of a composite (its items' common range)."""
        if variable in self.items:
            return self.items[variable].scale
        scales = [self.items[i].scale for i in self.composites[variable].items]
        lows, highs = [s[0] for s in scales], [s[1] for s in scales]
        return (min(lows), max(highs))

    def label_of(self, variable: str, language: str) -> str:
        """Human label of an item or composite in a language (falls back to English, then key)."""
        spec = self.items.get(variable) or self.composites.get(variable)
        labels = spec.label if spec else {}
        return labels.get(language) or labels.get("en") or variable.replace("_", " ")

    def event_label(self, kind: str, language: str) -> str:
        """An event kind's name in a language (as written in the data when untranslated)."""
        return self.events.labels.get(kind, {}).get(language) or kind

    def band_label(self, questionnaire: str, label: str, language: str) -> str:
        """A questionnaire band's name in a language (the `bands` label when untranslated)."""
        q = self.questionnaires[questionnaire]
        names = q.band_labels.get(language, [])
        for (_, name), translated in zip(q.bands, names, strict=False):
            if name == label:
                return translated
        return label

    def band_table(self, questionnaire: str, language: str) -> tuple[Band, ...]:
        """A questionnaire's bands, increasing, with their names in a language: the one band
        table the booklet's text and the questionnaire chart both show."""
        q = self.questionnaires[questionnaire]
        top = float(q.range[1])
        ends = [float(lower) for lower, _ in q.bands[1:]] + [top]
        return tuple(
            Band(self.band_label(questionnaire, str(label), language), float(lower),
                 end - 1 if i + 1 < len(q.bands) else top, end)
            for i, ((lower, label), end) in enumerate(zip(q.bands, ends, strict=True)))

    def referral_for(self, region: str, language: str) -> Referral | None:
        """The referral text for a region and language, falling back to region 'default'."""
        for wanted in (region, "default"):
            for r in self.referral:
                if r.region == wanted and r.language == language:
                    return r
        return None


# ---------------------------------------------------------------------------------------
# Loading


def unknown_keys(model: type[BaseModel], raw: Any, prefix: str = "") -> list[Problem]:
    """Warn about keys the schema does not know, with a 'did you mean' suggestion."""
    problems: list[Problem] = []
    if not isinstance(raw, dict):
        return problems
    fields = model.model_fields
    for key, value in raw.items():
        path = f"{prefix}{key}"
        if key not in fields:
            close = difflib.get_close_matches(key, list(fields), n=1)
            problems.append(
                warning(
                    f"{SETTINGS_FILE}: {path}",
                    f"unknown setting '{key}' is ignored",
                    fix=f"did you mean '{close[0]}'?" if close else "remove it or check spelling",
                    code="unknown-key",
                )
            )
            continue
        sub = _section_type(fields[key].annotation)
        if sub is None:
            continue
        kind, section = sub
        if kind == "one":
            problems += unknown_keys(section, value, f"{path}.")
        elif kind == "dict" and isinstance(value, dict):
            for name, entry in value.items():
                problems += unknown_keys(section, entry, f"{path}.{name}.")
        elif kind == "list" and isinstance(value, list):
            for i, entry in enumerate(value):
                problems += unknown_keys(section, entry, f"{path}[{i}].")
    return problems


def _section_type(annotation: Any) -> tuple[str, type[BaseModel]] | None:
    origin = getattr(annotation, "__origin__", None)
    args: tuple[Any, ...] = getattr(annotation, "__args__", ())
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return ("one", annotation)
    if origin is dict and len(args) == 2 and isinstance(args[1], type) and issubclass(
        args[1], BaseModel
    ):
        return ("dict", args[1])
    if origin is list and args and isinstance(args[0], type) and issubclass(args[0], BaseModel):
        return ("list", args[0])
    return None


def _plain(msg: str) -> str:
    """Turn pydantic's message into plain words (no Python type names)."""
    msg = msg.removeprefix("Value error, ")
    return msg.replace("Input should be", "it should be").replace("Field required", "missing")


def from_mapping(raw: dict[str, Any]) -> tuple[StudySettings, list[Problem]]:
    """Validate a settings mapping; return the settings and every problem found."""
    problems = unknown_keys(StudySettings, raw)
    try:
        settings = StudySettings.model_validate(raw)
    except ValidationError as exc:
        for e in exc.errors():
            key = ".".join(str(p) for p in e["loc"])
            found = e.get("input")
            problems.append(
                error(
                    f"{SETTINGS_FILE}: {key}",
                    _plain(e["msg"]),
                    found=repr(found) if not isinstance(found, dict) else "",
                    fix="correct this key in study.toml (see `springback init` for an example)",
                    code="invalid-setting",
                )
            )
        raise SettingsError(problems) from None
    problems += cross_checks(settings)
    return settings, problems


def cross_checks(s: StudySettings) -> list[Problem]:
    """Rules that involve several keys; each says why a value is refused."""
    out: list[Problem] = []
    where = SETTINGS_FILE + ": "
    if not s.items:
        out.append(
            error(where + "items", "no momentary items are defined",
                  fix="add at least one [items.<name>] table with scale = [low, high]",
                  code="no-items")
        )
    for name, comp in s.composites.items():
        for item in comp.items:
            if item not in s.items:
                close = difflib.get_close_matches(item, list(s.items), n=1)
                out.append(
                    error(where + f"composites.{name}.items",
                          f"composite '{name}' names unknown item '{item}'",
                          expected="one of: " + ", ".join(s.items),
                          fix=f"did you mean '{close[0]}'?" if close else
                          f"add [items.{item}] or remove it from the composite",
                          code="unknown-item")
                )
    if s.items:
        about = s.booklet.about
        if about is not None and about not in s.items and about not in s.composites:
            known = list(s.composites) + list(s.items)
            close = difflib.get_close_matches(about, known, n=1)
            out.append(
                error(where + "booklet.about", f"'{about}' is neither a composite nor an item",
                      expected="one of: " + ", ".join(known),
                      fix=f"did you mean '{close[0]}'?" if close else "name a composite or item",
                      code="unknown-about")
            )
    for name, q in s.questionnaires.items():
        bounds = [b[0] for b in q.bands]
        if any(b2 <= b1 for b1, b2 in itertools.pairwise(bounds)):
            out.append(
                error(where + f"questionnaires.{name}.bands",
                      "band lower bounds must increase",
                      found=", ".join(f"{b:g}" for b in bounds),
                      fix="list bands from the lowest score upwards, each [lower bound, label]",
                      code="bands-not-increasing")
            )
        for language, names in q.band_labels.items():
            if len(names) != len(q.bands):
                out.append(
                    error(where + f"questionnaires.{name}.band_labels.{language}",
                          "there must be one band name per band",
                          expected=f"{len(q.bands)} names", found=f"{len(names)}",
                          fix="list a name for every band, in the order of `bands`",
                          code="band-labels-count")
                )
        if q.bands and not (q.range[0] <= bounds[0] <= q.range[1]):
            out.append(
                error(where + f"questionnaires.{name}.bands",
                      "the first band must start inside the questionnaire's range",
                      expected=f"a lower bound between {q.range[0]:g} and {q.range[1]:g}",
                      found=f"{bounds[0]:g}", code="bands-outside-range")
            )
    for i, rule in enumerate(s.safety.rules):
        key = where + f"safety.rules[{i}]"
        sources = [rule.questionnaire is not None, rule.item is not None, rule.shift,
                   rule.silence_days is not None]
        if sum(sources) != 1:
            out.append(
                error(key, f"rule '{rule.name}' must have exactly one source",
                      expected="one of questionnaire, item, shift = true, silence_days",
                      found=f"{sum(sources)} sources", code="rule-sources")
            )
        if rule.questionnaire is not None and rule.questionnaire not in s.questionnaires:
            out.append(
                error(key + ".questionnaire",
                      f"rule '{rule.name}' names unknown questionnaire '{rule.questionnaire}'",
                      expected="one of: " + (", ".join(s.questionnaires) or "(none defined)"),
                      fix="define it under [questionnaires.<name>] or correct the name",
                      code="unknown-questionnaire")
            )
        if rule.item is not None and rule.item not in s.items:
            out.append(
                error(key + ".item", f"rule '{rule.name}' names unknown item '{rule.item}'",
                      expected="one of: " + ", ".join(s.items),
                      fix="correct the item name", code="unknown-item")
            )
        if (rule.questionnaire or rule.item) and rule.at_least is None and rule.at_most is None:
            out.append(
                error(key, f"rule '{rule.name}' needs at_least or at_most",
                      code="rule-threshold")
            )
    out += data_checks(s.data, where)
    if s.events.daily_load not in (None, "events") and s.events.daily_load not in s.items:
        out.append(
            error(where + "events.daily_load",
                  f"'{s.events.daily_load}' is neither an item nor 'events'",
                  code="unknown-load")
        )
    return out


def load_settings(project: Path) -> tuple[StudySettings, list[Problem]]:
    """Read and validate `study.toml` in a project folder.

    Raises SettingsError with every problem found; returns warnings otherwise.
    """
    path = Path(project) / SETTINGS_FILE
    if path.exists() and not path.is_file():
        raise SettingsError(
            [error(SETTINGS_FILE, "this is not a regular file (it is a folder, a named pipe or "
                   "a device)", expected="the study's settings file",
                   fix="replace it with the study's study.toml", code="not-a-file")]
        )
    if not path.is_file():
        raise SettingsError(
            [error(SETTINGS_FILE, "the settings file is missing",
                   expected=f"a file {path}",
                   fix="run `springback init FOLDER` to create a project with a commented "
                   "study.toml", code="missing-settings")]
        )
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(
            [error(SETTINGS_FILE, f"this is not valid TOML: {exc}",
                   fix="correct the line named (a missing quote or bracket is usual)",
                   code="invalid-toml")]
        ) from None
    except UnicodeDecodeError:
        raise SettingsError(
            [error(SETTINGS_FILE, "the file is not UTF-8 text", fix="save it as UTF-8",
                   code="invalid-toml")]
        ) from None
    except RecursionError:
        raise SettingsError(
            [error(SETTINGS_FILE, "this is not usable TOML: arrays or tables are nested too "
                   "deeply", fix="write the values without nesting lists inside lists",
                   code="invalid-toml")]
        ) from None
    settings, problems = from_mapping(raw)
    errors = [p for p in problems if p.severity is Severity.ERROR]
    if errors:
        raise SettingsError(problems)
    return settings, problems


def normalised(settings: StudySettings) -> dict[str, Any]:
    """The settings as a plain, key-sorted mapping (for hashing and the manifest)."""
    return settings.model_dump(mode="json")

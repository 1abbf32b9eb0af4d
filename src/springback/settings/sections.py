"""The sections of `study.toml`, one pydantic model per table: keys, defaults, meanings.

The field descriptions are the documentation: `springback init` writes them as comments into
a new `study.toml`, and errors quote the key. Paths are relative to the project folder.
"""

from __future__ import annotations

import difflib
import math
from pathlib import Path
from typing import Literal, cast
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from pydantic import BaseModel, ConfigDict, Field, field_validator

SETTINGS_FILE = "study.toml"


def zone_names() -> list[str]:
    """Every IANA time zone name this machine knows (for "did you mean" hints)."""
    from zoneinfo import available_timezones

    return sorted(available_timezones())


Text = dict[str, str]
"""A text per language code: ``{ en = "...", nl = "..." }``."""


class Section(BaseModel):
    """Base for every settings section: unknown keys are found by `unknown_keys`, not here."""

    model_config = ConfigDict(extra="ignore", frozen=True, populate_by_name=True)


class Contact(Section):
    name: str = Field("", description="Who participants can ask about the study or the booklet.")
    email: str = Field("", description="The study's e-mail address.")
    phone: str = Field("", description="The study's phone number.")


class StudyInfo(Section):
    title: str = Field("Untitled study", description="The study's name, shown on every booklet.")
    team: str = Field("", description="The research team or clinic running the study.")
    contact: Contact = Field(default_factory=Contact, description="Study contact.")
    timezone: str = Field(
        "UTC",
        description="IANA time zone of the study (e.g. Europe/Amsterdam). Naive timestamps are "
        "read in it, and all times in booklets are shown in it.",
    )
    languages: list[str] = Field(
        default_factory=lambda: ["en"], description="Languages booklets are made in (en, nl, de)."
    )
    day_start: str = Field(
        "04:00",
        description="Local clock time at which a study day begins; answers before it count "
        "for the previous day (night owls).",
    )
    prompts_per_day: int | None = Field(
        None,
        ge=1,
        description="Prompts sent per day by design; used for compliance when the data have no "
        "'scheduled' column.",
    )
    answers_checked: Text = Field(
        default_factory=dict,
        description="Per language: who looks at the answers and how often (shown in every "
        "booklet's cautions), e.g. 'A member of the team reads the answers once a week.'",
    )

    @field_validator("timezone")
    @classmethod
    def _known_zone(cls, v: str) -> str:
        try:
            ZoneInfo(v)
        except (ZoneInfoNotFoundError, ValueError):
            close = difflib.get_close_matches(v, zone_names(), n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            raise ValueError(f"unknown time zone '{v}'{hint}") from None
        return v

    @field_validator("day_start")
    @classmethod
    def _clock(cls, v: str) -> str:
        hh, _, mm = v.partition(":")
        if not (hh.isdigit() and mm.isdigit() and 0 <= int(hh) < 24 and 0 <= int(mm) < 60):
            raise ValueError(f"'{v}' is not a clock time like 04:00")
        return v


class Item(Section):
    scale: tuple[float, float] = Field(description="Lowest and highest possible rating.")
    reverse: bool = Field(False, description="Reverse-score this item in composites.")
    label: Text = Field(default_factory=dict, description="Item wording per language.")
    column: str | None = Field(None, description="Column name in the data (default: the key).")

    @field_validator("scale")
    @classmethod
    def _ordered(cls, v: tuple[float, float]) -> tuple[float, float]:
        if not all(math.isfinite(x) for x in v):
            raise ValueError(f"both ends must be finite numbers, found [{v[0]}, {v[1]}]")
        if not v[0] < v[1]:
            raise ValueError(f"the low end must be below the high end, found [{v[0]}, {v[1]}]")
        return v


class Composite(Section):
    items: list[str] = Field(description="Items averaged into this composite (after reversing).")
    higher_is: Literal["worse", "better"] = Field(
        description="Whether a higher composite means feeling worse or better."
    )
    label: Text = Field(default_factory=dict, description="Name per language (e.g. 'low mood').")
    min_items: int | None = Field(
        None, ge=1, description="Answered items needed for a score (default: all)."
    )


Edition = Literal["participant", "therapist"]
EDITIONS: tuple[Edition, ...] = ("participant", "therapist")
"""The two booklets a participant can get: their own and their therapist's (`model` names them
to the other stages)."""


class Booklet(Section):
    about: str | None = Field(
        None, description="The composite or item the booklet is about (default: first composite)."
    )
    editions: list[Edition] = Field(
        default_factory=lambda: list(EDITIONS), description="Editions to make."
    )
    formats: list[Literal["html", "pdf"]] = Field(
        default_factory=lambda: cast(list[Literal["html", "pdf"]], ["html", "pdf"]),
        description="Output formats."
    )
    paper: Literal["A4", "Letter"] = Field("A4", description="PDF paper size.")
    large_print: bool = Field(False, description="Body text 16 pt or larger.")
    show_change_to_participant: bool = Field(
        False,
        description="Show the section on how indicators changed over the study in the "
        "participant edition too (default: therapist edition only; early-warning indicators "
        "miss most shifts and raise false alarms in individuals).",
    )
    show_landscape: bool = Field(True, description="Include the mood-landscape picture.")
    min_prompts: int = Field(
        30, ge=1, description="Answered prompts below which no booklet is made (too little data)."
    )


class Events(Section):
    upsetting: list[str] | None = Field(
        None, description="Event kinds that count as upsetting (default: all kinds)."
    )
    min_intensity: float | None = Field(
        None, description="Only events at least this intense count (default: all)."
    )
    daily_load: str | None = Field(
        None,
        description="What measures daily load for the mood-against-load picture: an item name "
        "(its daily mean) or 'events' (upsetting events per day). Default: none.",
    )
    labels: dict[str, Text] = Field(
        default_factory=dict,
        description="Event kinds as booklets name them, per language: "
        "{ conflict = { nl = \"ruzie\", de = \"Streit\" } }; untranslated kinds are shown as "
        "written in the data.",
    )


class Questionnaire(Section):
    range: tuple[float, float] = Field(description="Lowest and highest possible total.")
    bands: list[tuple[float, str]] = Field(
        default_factory=list,
        description="Published severity bands as [lower bound, label], increasing.",
    )
    higher_is: Literal["worse", "better"] = Field("worse", description="Polarity of the score.")
    reliability: float | None = Field(
        None, gt=0, lt=1, description="Test-retest reliability, for the reliable change index."
    )
    sd: float | None = Field(
        None, gt=0, description="SD of a reference sample, for the reliable change index."
    )
    items: list[str] = Field(
        default_factory=list, description="Item columns to sum when there is no score column."
    )
    max_missing_items: int = Field(
        0, ge=0, description="Items that may be missing; the total is prorated (mean x k)."
    )
    label: Text = Field(default_factory=dict, description="Name per language.")
    band_labels: dict[str, list[str]] = Field(
        default_factory=dict,
        description="Band names per language, in the order of `bands` (e.g. nl = [\"minimaal\", "
        "...]); bands without a translation show the label given in `bands`.",
    )
    sudden_min_change: float | None = Field(
        None,
        description="Sudden gains/losses: smallest change between two scores (default: the "
        "reliable-change threshold; Tang & DeRubeis 1999 criterion 1).",
    )
    sudden_min_relative: float = Field(
        0.25, gt=0, lt=1, description="Sudden gains: smallest change relative to the prior score."
    )


class Metrics(Section):
    max_gap_hours: float = Field(
        6.0, gt=0, description="Longest gap between prompts that still counts as consecutive."
    )
    min_pairs: int = Field(30, ge=3, description="Consecutive pairs needed for carry-over.")
    window: float = Field(
        0.5, gt=0, lt=1,
        description="Rolling window for early-warning indicators, share of prompts."
    )
    windows: list[float] = Field(
        default_factory=lambda: [0.3, 0.4, 0.5, 0.6, 0.7],
        description="Window shares tried in the sensitivity grid.",
    )
    detrend: Literal["gaussian", "linear", "none"] = Field(
        "gaussian", description="How slow trends are removed before rolling indicators."
    )
    bandwidth_days: float = Field(
        7.0, gt=0, description="Gaussian detrending: kernel SD in days."
    )
    bandwidths_days: list[float] = Field(
        default_factory=lambda: [3.0, 5.0, 7.0, 10.0, 14.0],
        description="Kernel SDs tried in the sensitivity grid.",
    )
    min_window_prompts: int = Field(
        20, ge=5, description="A rolling window with fewer answered prompts is skipped."
    )
    surrogates: int = Field(
        1000, ge=19, le=100_000,
        description="Surrogate series per significance test (19 to 100,000).",
    )
    seed: int = Field(20240917, description="Seed for every random step (reproducible builds).")
    alpha: float = Field(0.05, gt=0, lt=1, description="Significance level.")
    dip_k: float = Field(
        2.0, gt=0, description="A dip is a rating this many SD worse than the rolling baseline."
    )
    baseline_days: float = Field(7.0, gt=0, description="Days in the rolling baseline.")
    recovery_band_sd: float = Field(
        0.5, gt=0, description="Back to baseline means within this many SD of it."
    )
    ta_mssd_lambda: float = Field(
        0.0, ge=0, description="Time adjustment exponent of the MSSD (0 = plain MSSD)."
    )
    pelt_penalty: float | None = Field(
        None, gt=0, description="PELT penalty on daily means (default: BIC-type 2 s^2 ln n)."
    )
    min_segment_days: int = Field(3, ge=2, description="Shortest segment between change points.")
    entropy_order: int = Field(3, ge=2, le=7, description="Permutation entropy order.")
    entropy_delay: int = Field(1, ge=1, description="Permutation entropy delay.")


class SafetyRule(Section):
    name: str = Field(description="A short name for the rule, shown in flags.")
    questionnaire: str | None = Field(None, description="Source: a questionnaire's total.")
    item: str | None = Field(None, description="Source: a momentary item's rating.")
    shift: bool = Field(False, description="Source: a detected abrupt worsening.")
    silence_days: int | None = Field(
        None, ge=1, description="Source: no answers for this many days near the end."
    )
    at_least: float | None = Field(None, description="Hit when the value is at least this.")
    at_most: float | None = Field(None, description="Hit when the value is at most this.")
    within_days: float | None = Field(None, gt=0, description="Only the last N days count.")
    action: Literal["refer", "hold"] = Field(
        description="'refer': referral advice first; 'hold': held until a clinician reviews it."
    )


class Safety(Section):
    rules: list[SafetyRule] = Field(default_factory=list, description="Safety rules.")


class Referral(Section):
    region: str = Field("default", description="Roster region this text is for.")
    language: str = Field("en", description="Language of this text.")
    questions: str = Field(description="Who to ask about the booklet or the study (and how).")
    feeling_worse: str = Field(description="Where to go when feeling worse for a while.")
    self_harm: str = Field(description="Same-day help when thinking of harming yourself.")
    emergency: str = Field(description="The local emergency number.")


class Reviewer(Section):
    name: str = Field(description="The reviewer's name, as they sign a decision (--by NAME).")
    role: str = Field("", description="Their role, such as 'clinical psychologist'.")


class Review(Section):
    reviewers: list[Reviewer] = Field(
        default_factory=list,
        description="Who may approve or reject held booklets and close actions (name, role); "
        "when the list is empty, anyone named with --by may decide.",
    )


class Archive(Section):
    keep_inputs: Literal["copy", "hash"] = Field(
        "copy", description="'copy' keeps each input file in the archive; 'hash' only its hash."
    )
    retention_years: float = Field(10.0, gt=0, description="How long archived builds are kept.")
    keep_contacts: bool = Field(
        False, description="Keep the roster's contact columns (e-mail, phone, address, names) "
        "in archived copies; by default they are left out."
    )


class Delivery(Section):
    smtp_host: str = Field("", description="The study's own SMTP server.")
    smtp_port: int = Field(587, description="SMTP port.")
    security: Literal["starttls", "tls", "none"] = Field("starttls", description="Encryption.")
    user: str = Field("", description="SMTP user name.")
    password_env: str = Field(
        "SPRINGBACK_SMTP_PASSWORD", description="Environment variable holding the password."
    )
    sender: str = Field("", description="From address.")
    contacts_file: Path | None = Field(
        None, description="CSV with participant,email[,therapist_email]; keep outside data/."
    )
    passphrases_file: Path | None = Field(
        None, description="CSV with participant,passphrase for protected PDFs."
    )
    subject: Text = Field(
        default_factory=dict,
        description="Message subject per language; may use {study}, {team}, {contact}, "
        "{participant}, {version}. Default: an English text of springback's own.",
    )
    body: Text = Field(
        default_factory=dict,
        description="Message text per language (same placeholders). Never put the passphrase "
        "here: it reaches people by another channel.",
    )
    therapist_subject: Text = Field(
        default_factory=dict, description="Subject of the therapist copy per language."
    )
    therapist_body: Text = Field(
        default_factory=dict, description="Message text of the therapist copy per language."
    )
    ca_file: Path | None = Field(
        None,
        description="Certificate of your institution's own certificate authority, when the "
        "SMTP server's certificate comes from it (default: the system's trusted authorities).",
    )
    timeout_seconds: float = Field(
        30.0, gt=0, description="How long to wait for the SMTP server before giving up."
    )


class Output(Section):
    out_dir: Path = Field(Path("out"), description="Where booklets are written.")
    archive_dir: Path = Field(Path("archive"), description="Where the audit archive lives.")


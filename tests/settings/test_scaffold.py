"""`springback init`'s study.toml: every key of the schema is there, and the file is valid TOML."""

from __future__ import annotations

import re
import tomllib

import pytest
from pydantic import BaseModel

from springback.settings import StudySettings
from springback.settings.scaffold import commented_settings
from springback.settings.sections import Composite, Item, Questionnaire, Referral, SafetyRule


def _keys(model: type[BaseModel]) -> list[str]:
    return list(model.model_fields)


@pytest.mark.parametrize("model", [Item, Composite, Questionnaire, SafetyRule, Referral])
def test_every_key_of_a_table_is_in_the_template(model: type[BaseModel]) -> None:
    """Check each key of the per-name tables is written, set or commented (e.g. items.column)."""
    text = commented_settings()
    missing = [k for k in _keys(model) if not re.search(rf"^(# )?{k} =", text, re.M)]
    assert missing == []


def test_the_template_is_valid_settings() -> None:
    """Check the template parses as TOML and validates against the schema."""
    raw = tomllib.loads(commented_settings())
    StudySettings.model_validate(raw)

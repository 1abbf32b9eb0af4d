"""Settings: the schema of `study.toml` (one model per table), loading it, and `init`.

`load_settings(project)` is the stage's entry point; the names below are the ones other
stages use.
"""

from springback.settings.schema import (
    Band,
    StudySettings,
    cross_checks,
    from_mapping,
    load_settings,
    normalised,
    unknown_keys,
)
from springback.settings.sections import (
    SETTINGS_FILE,
    Questionnaire,
    Referral,
    SafetyRule,
)

__all__ = [
    "SETTINGS_FILE",
    "Band",
    "Questionnaire",
    "Referral",
    "SafetyRule",
    "StudySettings",
    "cross_checks",
    "from_mapping",
    "load_settings",
    "normalised",
    "unknown_keys",
]

"""Everything `check` verifies, in one pass: settings and data, referral texts, translations,
and archived builds past their retention period. `build` refuses on any error found here.
"""

from __future__ import annotations

from pathlib import Path

from springback.errors import Problem, ProblemsFound
from springback.intake import CheckReport, check_study
from springback.model import Study


def study_problems(project: Path, study: Study) -> list[Problem]:
    """Checks that need the loaded study: referral texts, catalogues, retention."""
    from springback.archive.manifest import expired_builds
    from springback.archive.roster_copy import contact_problems
    from springback.i18n.check import check_languages
    from springback.i18n.language import catalogue_problems
    from springback.safety.rules import referral_problems

    roster = study.roster
    wanted = roster[(roster["consent"] == "yes") & roster["feedback"].astype(bool)]
    problems = referral_problems(study)
    problems += check_languages(study.settings, roster, project)
    undeclared = set(wanted["language"].astype(str)) - set(study.settings.study.languages)
    problems += catalogue_problems(sorted(undeclared), where="data/participants.csv: language")
    problems += expired_builds(project, study.settings)
    problems += contact_problems(project, study.settings)
    problems += _key_problems()
    return problems


def _key_problems() -> list[Problem]:
    """A signing key in the environment that the audit log could not use (found before work)."""
    from springback.archive.audit import KEY_VARIABLE, audit_key
    from springback.errors import ArchiveError, error

    try:
        audit_key()
    except ArchiveError as exc:
        what, _, fix = str(exc).partition("; use ")
        return [error(f"environment: {KEY_VARIABLE}", what.removeprefix(f"{KEY_VARIABLE} "),
                      fix="use " + fix, code="audit-key")]
    return []


def preflight(project: Path, *, strict: bool = False) -> CheckReport:
    """Run every check and return all problems found (never raises for user mistakes)."""
    report = check_study(project, strict=strict)
    if report.study is None:
        return report
    extra = study_problems(Path(project), report.study) + _out_problems(Path(project),
                                                                        report.study)
    return CheckReport(problems=(*report.problems, *extra), study=report.study, strict=strict)


def _out_problems(project: Path, study: Study) -> list[Problem]:
    """The configured output folder, checked as the build will check it."""
    from springback.build.output import check_out_dir
    from springback.errors import OutputFolderError, error

    output = study.settings.output
    project = project.resolve()
    try:
        check_out_dir(project, project / output.out_dir, project / output.archive_dir)
    except OutputFolderError as exc:
        what, _, fix = str(exc).partition(". Fix: ")
        return [error("study.toml: output.out_dir", what, fix=fix, code="unsafe-out-dir")]
    return []


def require_buildable(project: Path, study: Study) -> None:
    """Raise ProblemsFound when the study cannot be built (missing referral text, say)."""
    problems = study_problems(project, study)
    if any(p.is_error for p in problems):
        raise ProblemsFound([*problems, *study.warnings])

"""Read the roster: who consented, in which language they get a booklet, and for whom."""

from __future__ import annotations

import difflib

import numpy as np
import pandas as pd

from springback.errors import error
from springback.intake.problems import column_name, rows_list
from springback.intake.readers import Table, as_text, labelled
from springback.model import ROSTER_COLUMNS
from springback.settings import StudySettings

YES = {"yes", "y", "true", "1", "ja", "j"}
NO = {"no", "n", "false", "0", "nee", "nein"}
CONSENT = {"yes": "yes", "withdrawn": "withdrawn"}

ID_LIMIT = 64
ID_RULE = (f"at most {ID_LIMIT} letters, digits, '_', '-', '.', '#' or spaces, not starting "
           "with '.', '-' or a space and not ending with '.' or a space")
"""The documented rule for participant ids: each id names a folder under out/booklets/."""

# Names Windows keeps for devices; a file or folder with one of them (any case, with or
# without an extension) cannot be created there.
RESERVED = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(10)),
            *(f"lpt{i}" for i in range(10))}


def id_problem(pid: str) -> str | None:
    """Why an id cannot be used as a folder name (None when it is safe)."""
    if not pid:
        return "an empty id"
    if len(pid) > ID_LIMIT:
        return f"{len(pid)} characters"
    if "/" in pid or "\\" in pid:
        return "a path separator ('/' or '\\')"
    if ".." in pid:
        return "'..'"
    if any(not ch.isprintable() for ch in pid):
        return "a control character"
    if pid[0] in ".- ":
        return f"a leading '{pid[0]}'"
    if pid[-1] in ". ":
        return f"a trailing '{pid[-1]}'"
    # Inner spaces and '#' are kept because real studies use ids such as 'User #25290'.
    odd = sorted({ch for ch in pid if not (ch.isalnum() or ch in "_-.# ")})
    if odd:
        return "the character(s) " + " ".join(repr(ch) for ch in odd)
    if pid.split(".", 1)[0].lower() in RESERVED:
        return "a name Windows reserves for a device"
    return None


def _shown(pid: str) -> str:
    """The id as it can be printed: control characters escaped, long ids shortened."""
    text = pid.encode("unicode_escape").decode("ascii") if not pid.isprintable() else pid
    return text if len(text) <= 40 else text[:37] + "..."


def read_roster(table: Table, settings: StudySettings, problems: list) -> pd.DataFrame | None:
    """Check the roster and return it by the column contract; None if it cannot be used."""
    cols = settings.data.columns
    missing = settings.data.missing_values
    present = list(table.frame.columns)
    ok = True
    id_column = cols.id_column("participants")
    id_key = "roster_participant" if id_column != cols.participant else "participant"
    for name, role in ((id_column, id_key), (cols.consent, "consent")):
        if name not in present:
            ok = False
            close = difflib.get_close_matches(name, present, n=1)
            problems.append(error(
                table.where, f"column '{name}' is missing",
                expected=f"a column named '{name}' ({role})",
                found="columns " + ", ".join(column_name(c) for c in present[:8]),
                fix=(f"did you mean '{close[0]}'? " if close else "")
                + f'rename the column, or set {role} = "..." under [data.columns]',
                column=name, code="missing-column"))
    if not ok:
        return None
    if table.frame.empty:
        problems.append(error(table.where, "the file has a header but no rows",
                              fix="list every participant with their consent",
                              code="no-rows"))
        return None
    rows = table.rows

    def text(name: str) -> pd.Series:
        return as_text(labelled(table, name), missing) if name in present else \
            pd.Series(np.nan, index=table.frame.index, dtype="str")

    pid = text(id_column)
    out = pd.DataFrame({"participant": pid.fillna("")})
    for r in rows[pid.isna().to_numpy()]:
        problems.append(error(table.where, "the participant id is missing", row=int(r),
                              column=id_column, fix="fill in the id or delete the row",
                              code="missing-participant"))
    for r, who in zip(rows[pid.notna().to_numpy()], pid[pid.notna()], strict=True):
        reason = id_problem(str(who))
        if reason:
            problems.append(error(
                table.where, f"participant id '{_shown(str(who))}' cannot be used as a folder "
                "name", expected=ID_RULE, found=reason, row=int(r), column=id_column,
                fix="give the participant a plain id such as P01, the same in every data file",
                code="unsafe-participant"))
    twice = pid.notna() & pid.duplicated(keep=False)
    for who, group in pd.Series(rows[twice.to_numpy()]).groupby(pid[twice].to_numpy()):
        problems.append(error(table.where, f"participant '{who}' is listed more than once",
                              found=rows_list(group.tolist()), row=int(group.iloc[0]),
                              column=id_column, fix="keep one row per participant",
                              code="duplicate-participant"))
    consent = text(cols.consent).str.lower()
    out["consent"] = consent.map(CONSENT)
    wrong = out["consent"].isna().to_numpy()
    for r, v in zip(rows[wrong], text(cols.consent)[wrong], strict=True):
        problems.append(error(table.where, "consent must be 'yes' or 'withdrawn'",
                              found="an empty cell" if pd.isna(v) else f"'{v}'", row=int(r),
                              column=cols.consent, fix="write yes or withdrawn",
                              code="bad-consent"))
    default_language = settings.study.languages[0] if settings.study.languages else "en"
    language = text(cols.language).str.lower().fillna(default_language)
    unknown = ~language.isin(settings.study.languages).to_numpy()
    for r, v in zip(rows[unknown], language[unknown], strict=True):
        problems.append(error(table.where, f"language '{v}' is not one of the study's languages",
                              expected="one of: " + ", ".join(settings.study.languages),
                              row=int(r), column=cols.language,
                              fix="correct the code, or add it to languages under [study]",
                              code="bad-language"))
    out["language"] = language
    for name, key in ((cols.feedback, "feedback"), (cols.therapist, "therapist")):
        flag = text(name).str.lower()
        out[key] = np.where(flag.isin(NO).to_numpy(), False, True)
        odd = (flag.notna() & ~flag.isin(YES | NO)).to_numpy()
        for r, v in zip(rows[odd], flag[odd], strict=True):
            problems.append(error(table.where, f"{key} must be yes or no", found=f"'{v}'",
                                  row=int(r), column=name, fix="write yes or no",
                                  code="bad-flag"))
    out["region"] = text(cols.region).fillna("default")
    out["_row"] = rows
    out = out[pid.notna().to_numpy()]
    out = out.astype({"participant": str, "language": str, "region": str, "consent": object})
    out["feedback"] = out["feedback"].astype(bool)
    out["therapist"] = out["therapist"].astype(bool)
    return out[[*ROSTER_COLUMNS, "_row"]].reset_index(drop=True)

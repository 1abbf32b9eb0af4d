"""Read the periodic questionnaires: a given total, or the item sum prorated as set."""

from __future__ import annotations

import difflib

import numpy as np
import pandas as pd

from springback.errors import error, warning
from springback.intake.events import read_timed
from springback.intake.problems import Sink
from springback.intake.readers import Table, as_number, as_text, labelled
from springback.model import QUESTIONNAIRE_COLUMNS
from springback.settings import StudySettings


def read_questionnaires(table: Table, settings: StudySettings,
                        sink: Sink) -> pd.DataFrame | None:
    """Check every questionnaire row and give it one score inside the questionnaire's range."""
    cols = settings.data.columns
    missing = settings.data.missing_values
    got = read_timed(table, settings, sink, {cols.questionnaire: "questionnaire"},
                     "questionnaires")
    if got is None:
        return None
    out, usable = got
    rows = table.rows
    who = out["participant"].to_numpy()
    name = as_text(labelled(table, cols.questionnaire), missing)
    known = name.isin(list(settings.questionnaires)).to_numpy()
    odd = usable & ~known
    defined = ", ".join(settings.questionnaires) or "(none defined)"
    sink.bad_rows(table.where, rows[odd], who[odd],
                  ["an empty cell" if pd.isna(v) else f"'{v}'" for v in name[odd]],
                  what="the questionnaire is not defined in study.toml", column=cols.questionnaire,
                  expected="one of: " + defined,
                  fix="add it under [questionnaires.<name>], or correct the name",
                  code="unknown-questionnaire")
    usable &= known
    score = pd.Series(np.nan, index=table.frame.index)
    if cols.score in table.frame.columns:
        given, wrong = as_number(table.frame[cols.score], missing)
        hit = usable & wrong.to_numpy()
        sink.bad_rows(table.where, rows[hit], who[hit],
                      [f"'{v}'" for v in table.frame[cols.score][hit]], what="not a number",
                      column=cols.score, expected="a total score", code="not-a-number")
        usable &= ~hit
        score = given.where(~wrong)
    for q, spec in settings.questionnaires.items():
        todo = usable & (name == q).to_numpy() & score.isna().to_numpy()
        if not todo.any():
            continue
        if not spec.items:
            sink.bad_rows(table.where, rows[todo], who[todo], [""] * int(todo.sum()),
                          what=f"no score for '{q}'", column=cols.score,
                          expected="a score, or item columns listed under "
                          f"[questionnaires.{q}] items", code="missing-score")
            usable &= ~todo
            continue
        summed = _item_sum(table, q, spec.items, spec.max_missing_items, todo, who, sink,
                           missing)
        if summed is None:
            usable &= ~todo
            continue
        total, ok = summed
        score[todo] = total[todo]
        usable &= ~(todo & ~ok)
    for q, spec in settings.questionnaires.items():
        low, high = spec.range
        outside = usable & (name == q).to_numpy() & ((score < low) | (score > high)).to_numpy()
        sink.bad_rows(table.where, rows[outside], who[outside],
                      [f"{v:g}" for v in score[outside]],
                      what=f"score outside the range of '{q}'", column=cols.score,
                      expected=f"a score from {low:g} to {high:g}",
                      fix=f"correct the score, or the range under [questionnaires.{q}]",
                      code="score-out-of-range")
        usable &= ~outside
    out["questionnaire"] = name.fillna("").astype(str)
    out["score"] = score.astype(float).to_numpy()
    return out[usable].reset_index(drop=True)


def _item_sum(table: Table, q: str, items: list[str], max_missing: int, todo: np.ndarray,
              who: np.ndarray, sink: Sink, missing: list[str]
              ) -> tuple[pd.Series, np.ndarray] | None:
    """Sum of the items, prorated (mean x k) when at most `max_missing` are empty."""
    present = list(table.frame.columns)
    absent = [c for c in items if c not in present]
    for c in absent:
        close = difflib.get_close_matches(c, present, n=1)
        sink.add(error(table.where, f"column '{c}' is missing",
                       expected=f"a column named '{c}' (an item of '{q}')",
                       fix=(f"did you mean '{close[0]}'? " if close else "")
                       + f"rename the column, or correct [questionnaires.{q}] items",
                       column=c, code="missing-column"))
    if absent:
        return None
    rows = table.rows
    values = pd.DataFrame(index=table.frame.index)
    ok = np.ones(len(values), bool)
    for c in items:
        number, wrong = as_number(table.frame[c], missing)
        hit = todo & wrong.to_numpy()
        sink.bad_rows(table.where, rows[hit], who[hit], [f"'{v}'" for v in table.frame[c][hit]],
                      what="not a number", column=c, expected="a number or an empty cell",
                      code="not-a-number")
        ok &= ~hit
        values[c] = number
    empty = values.isna().sum(axis=1).to_numpy()
    short = todo & ok & (empty > max_missing)
    for r, p, n in zip(rows[short], who[short], empty[short], strict=True):
        sink.add(warning(table.where, f"{n} of the {len(items)} items of '{q}' are empty; the "
                         "row is set aside", expected=f"at most {max_missing} empty",
                         row=int(r), fix="fill in the items, or raise max_missing_items under "
                         f"[questionnaires.{q}]", code="too-few-items"))
        sink.aside(table.where, [r], [p], f"too many empty items of '{q}'")
    ok &= ~short
    total = values.mean(axis=1) * len(items)
    return total, ok


def questionnaire_frame(scores: pd.DataFrame, zone: str) -> pd.DataFrame:
    """The questionnaire scores by the column contract, sorted by participant and time."""
    out = scores.sort_values(["participant", "time"], kind="stable").reset_index(drop=True)
    out["local_time"] = out["time"].dt.tz_convert(zone)
    return out[list(QUESTIONNAIRE_COLUMNS)]

"""Turn time cells of any format into UTC instants, naming every time that cannot be placed."""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd

_ISO = re.compile(
    r"^\s*(\d{4}-\d{1,2}-\d{1,2}(?:[T ]\d{1,2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?)?)\s*(.*?)\s*$"
)
_OFFSET = re.compile(r"^(?:UTC|GMT)?\s*([+-])(\d{1,2})(?::?(\d{2}))?$")
_TAIL = r"(Z|[+-]\d{2}(?::?\d{2})?)$"
"""The UTC offset ending an ISO time ('Z', '+05:00', '+0500' or '+05')."""

# Abbreviations that name one fixed offset (CEST is always UTC+2), so they are read as that
# offset. Ambiguous ones (CST: US Central or China; IST: India, Ireland or Israel) are left
# out on purpose: such times are reported, not guessed.
ABBREVIATIONS = {
    "UTC": 0, "GMT": 0, "Z": 0, "WET": 0, "WEST": 60, "BST": 60,
    "CET": 60, "CEST": 120, "MET": 60, "MEST": 120, "EET": 120, "EEST": 180,
    "MSK": 180, "EST": -300, "EDT": -240, "MST": -420, "MDT": -360,
    "PST": -480, "PDT": -420, "AKST": -540, "AKDT": -480, "HST": -600,
    "AEST": 600, "AEDT": 660, "ACST": 570, "AWST": 480, "NZST": 720, "NZDT": 780,
    "JST": 540, "KST": 540, "SGT": 480, "HKT": 480, "SAST": 120,
}
ISO_EXAMPLE = "an ISO 8601 time such as 2024-03-04 09:15 or 2024-03-04T09:15:00+01:00"


@dataclass(frozen=True)
class Times:
    """Parsed times: UTC instants (NaT where missing or bad) and why each bad one failed."""

    utc: pd.Series
    problem: pd.Series
    """'' when fine or missing; else 'bad-time', 'unknown-zone', 'nonexistent-time' or
    'ambiguous-time'."""
    zone: pd.Series
    """The zone each time was read in (its own, the row's, or the study's)."""
    offset: pd.Series
    """Minutes ahead of UTC of an offset written in the time itself ('+05:00', 'Z'); NaN
    when the time has none (a naive time, a zone word such as JST, a zone column)."""


@lru_cache(maxsize=512)
def zone_of(token: str) -> int | str | None:
    """A zone text as offset minutes, an IANA name, or None when it names no zone."""
    if token in ABBREVIATIONS:
        return ABBREVIATIONS[token]
    m = _OFFSET.match(token)
    if m:
        sign = 1 if m.group(1) == "+" else -1
        hours, minutes = int(m.group(2)), int(m.group(3) or 0)
        if hours <= 14 and minutes < 60:
            return sign * (hours * 60 + minutes)
        return None
    if "/" in token or token == "UTC":
        try:
            ZoneInfo(token)
        except (ZoneInfoNotFoundError, ValueError):
            return None
        return token
    return None


def _split(text: pd.Series) -> tuple[pd.Series, pd.Series]:
    """Split ISO times into the clock part and the zone text after it ('' when none)."""
    parts = text.str.extract(_ISO)
    return parts[0], parts[1].fillna("")


def zone_texts(values: pd.Series) -> pd.Series:
    """Zone texts from a time-zone column: a bare zone, or the zone ending a time."""
    text = values.astype("str").str.strip().fillna("")
    clock, zone = _split(text)
    return text.where(clock.isna(), zone).astype(object)


def parse_times(values: pd.Series, *, study_zone: str, row_zones: pd.Series | None = None,
                fmt: str | None = None, missing: pd.Series | None = None) -> Times:
    """Read times (text or datetime values) as UTC; naive ones in the row's or study's zone."""
    index = values.index
    gone = missing if missing is not None else values.isna()
    problem = pd.Series("", index=index, dtype=object)
    own_zone = pd.Series("", index=index, dtype=object)
    aware = pd.Series(pd.NaT, index=index, dtype="datetime64[ns, UTC]")
    offset = pd.Series(np.nan, index=index, dtype=float)
    if values.dtype.kind == "M":
        if isinstance(values.dtype, pd.DatetimeTZDtype):
            utc = values.dt.tz_convert("UTC").astype("datetime64[ns, UTC]")
            return Times(utc, problem, pd.Series(str(values.dt.tz), index=index, dtype=object),
                         offset)
        naive = values.astype("datetime64[ns]")
    else:
        if not isinstance(values.dtype, pd.StringDtype):
            values = values.map(_cell_text, na_action="ignore").astype("str")
        text = values.str.strip().mask(gone)
        if fmt:
            has_zone = "%z" in fmt or "%Z" in fmt
            parsed = pd.to_datetime(text, format=fmt, errors="coerce", utc=has_zone)
            if has_zone:
                utc = parsed.astype("datetime64[ns, UTC]")
                problem[parsed.isna() & ~gone] = "bad-time"
                if "%z" in fmt:  # the clock as written, less the instant: the offset
                    clock = pd.to_datetime(text, format=fmt.replace("%z", ""), exact=False,
                                           errors="coerce").astype("datetime64[ns]")
                    offset = (clock - utc.dt.tz_localize(None)).dt.total_seconds() / 60
                return Times(utc, problem, own_zone, offset.astype(float))
            naive = parsed.astype("datetime64[ns]")
        else:
            naive, own_zone, aware = _iso(text.fillna(""))
            offset = _written_offsets(text.fillna(""), own_zone, aware)
        problem[naive.isna() & aware.isna() & ~gone] = "bad-time"
    # numpy's `where` on object arrays, so every row refers to one string object per zone
    # (pandas' `where` made a new string for every row: about 140 MiB a million rows).
    zone_cells = own_zone.to_numpy(dtype=object)
    if row_zones is not None:
        codes, names = pd.factorize(row_zones.reindex(index).fillna(""))
        theirs = np.asarray(names, dtype=object)[codes]
        zone_cells = np.where(zone_cells != "", zone_cells, theirs)
    study = np.empty((), dtype=object)  # an object scalar: a str would be copied per row
    study[()] = study_zone
    zone = pd.Series(np.where(zone_cells != "", zone_cells, study), index=index, dtype=object)
    utc = pd.Series(pd.NaT, index=index, dtype="datetime64[ns, UTC]")
    ok = naive.notna().to_numpy()
    for token in pd.unique(zone[ok]):
        rows = ok & (zone == token).to_numpy()
        spec = zone_of(str(token))
        if spec is None:
            problem[rows] = "unknown-zone"
            continue
        local = naive[rows]
        if isinstance(spec, int):
            utc[rows] = (local - pd.Timedelta(minutes=spec)).dt.tz_localize("UTC")
            continue
        k = int(rows.sum())
        early = local.dt.tz_localize(spec, ambiguous=np.ones(k, bool), nonexistent="NaT")
        late = local.dt.tz_localize(spec, ambiguous=np.zeros(k, bool), nonexistent="NaT")
        sub = pd.Series("", index=local.index, dtype=object)
        sub[early.isna()] = "nonexistent-time"
        sub[early.notna() & (early != late)] = "ambiguous-time"
        problem[rows] = problem[rows].where(sub == "", sub)
        utc[rows] = early.where(sub == "").dt.tz_convert("UTC")
    utc = utc.where(aware.isna(), aware)
    bad = problem != ""
    utc[bad] = pd.NaT
    return Times(utc, problem, zone, offset.where(~bad))


def _written_offsets(text: pd.Series, words: pd.Series, aware: pd.Series) -> pd.Series:
    """Minutes of the offset each ISO time ends with: after the clock ('...T09:00+05:00') or
    as its zone text ('... 09:00 +05:00', 'GMT+5'); NaN for naive times and zone words."""
    out = pd.Series(np.nan, index=text.index, dtype=float)
    tails = text.str.strip().str.extract(_TAIL)[0].where(aware.notna())
    tails = tails.where(tails.notna(), words.where(words != ""))
    for token in pd.unique(tails.dropna()):
        spec = zone_of(str(token)) if token == "Z" or _OFFSET.match(str(token)) else None
        if isinstance(spec, int):
            out[(tails == token).to_numpy()] = float(spec)
    return out


def _iso(text: pd.Series) -> tuple[pd.Series, pd.Series, pd.Series]:
    """ISO times as (naive clock, zone text after it, UTC instant when an offset is given).

    Fast path first: two vectorised parses tell plain local times ('...09:00' still parses
    with a 'Z' added) from times with an offset; only the rest (a zone word such as CET,
    dates without a time, garbage) goes through the slower regular expression.
    """
    naive_try = pd.to_datetime(text + "Z", format="ISO8601", utc=True, errors="coerce")
    aware = pd.to_datetime(text, format="ISO8601", utc=True, errors="coerce")
    is_naive = naive_try.notna()
    is_aware = aware.notna() & ~is_naive & (text.str.len() > 10)
    naive = naive_try.dt.tz_localize(None).astype("datetime64[ns]")
    aware = aware.where(is_aware).astype("datetime64[ns, UTC]")
    zone = pd.Series("", index=text.index, dtype=object)
    rest = (~is_naive & ~is_aware & (text != "")).to_numpy()
    if rest.any():
        clock, words = _split(text[rest])
        naive[rest] = pd.to_datetime(clock, format="ISO8601", errors="coerce").astype(
            "datetime64[ns]")
        zone[rest] = words
    return naive, zone, aware


def _cell_text(value: object) -> str:
    """A cell as text; datetime objects from spreadsheets print as ISO 8601."""
    if isinstance(value, pd.Timestamp):
        return value.isoformat(sep=" ")
    return str(value)


FAR_ZONE_HOURS = 3
"""A time read in a zone this many hours or more from the study's is reported (not changed).
Compared for zones named by a word (JST) or by a zone column; a numeric offset written into
the time itself is taken as given."""


def zone_offsets(utc: pd.Series, zone: pd.Series) -> pd.Series:
    """Hours each instant's own zone is ahead of UTC (NaN where the time or zone is unknown)."""
    out = pd.Series(np.nan, index=utc.index, dtype=float)
    known = utc.notna().to_numpy()
    naive = utc.dt.tz_localize(None)
    for token in pd.unique(zone[known]):
        rows = known & (zone == token).to_numpy()
        spec = zone_of(str(token))
        if spec is None:
            continue
        if isinstance(spec, int):
            out[rows] = spec / 60
            continue
        local = utc[rows].dt.tz_convert(spec).dt.tz_localize(None)
        out[rows] = (local - naive[rows]).dt.total_seconds() / 3600
    return out


def far_zones(utc: pd.Series, zone: pd.Series, study_zone: str) -> np.ndarray:
    """Rows whose own zone is `FAR_ZONE_HOURS` or more from the study's zone at that instant."""
    own = zone_offsets(utc, zone)
    study = zone_offsets(utc, pd.Series(study_zone, index=utc.index, dtype=object))
    return ((own - study).abs() >= FAR_ZONE_HOURS).to_numpy()

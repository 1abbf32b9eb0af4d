"""Cell conversion shared by every file kind, so all formats give identical frames."""

from __future__ import annotations

import re
from collections.abc import Iterable

import numpy as np
import pandas as pd

_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


def _strings(values: pd.Series) -> pd.Series:
    """Cells as trimmed text (pandas' string dtype; missing cells stay missing)."""
    if not isinstance(values.dtype, pd.StringDtype):
        values = values.astype("str")
    return values.str.strip()


def missing_mask(values: pd.Series, missing: Iterable[str]) -> pd.Series:
    """True where a cell holds no value (empty, NaN or one of the missing-value texts)."""
    if values.dtype.kind in "biufcmM":
        return values.isna()
    text = _strings(values)
    return text.isna() | text.isin(list(missing))


def as_text(values: pd.Series, missing: Iterable[str]) -> pd.Series:
    """Cells as trimmed text (numbers without a spurious '.0'); missing cells become NA."""
    if values.dtype.kind in "fc":
        whole = values.notna() & (values == np.round(values))
        out = values.astype(object).where(~whole, values.where(whole).astype("Int64"))
        text = _strings(out.where(values.notna()))
    elif values.dtype.kind == "b":
        text = values.map({True: "yes", False: "no"}).astype("str")
    else:
        text = _strings(values)
    return text.mask(text.isna() | text.isin(list(missing)))


def as_number(values: pd.Series, missing: Iterable[str]) -> tuple[pd.Series, pd.Series]:
    """Cells as floats, and a mask of cells that hold something that is not a number."""
    if values.dtype.kind in "biuf":
        return values.astype("float64"), pd.Series(False, index=values.index)
    text = _strings(values)
    gone = text.isna() | text.isin(list(missing))
    # A decimal comma (2,5) is what European exports write; a thousands comma never occurs
    # on a rating scale, so reading it as a decimal point is safe here.
    if bool(text.str.contains(",", regex=False).any()):
        comma = text.str.fullmatch(_DECIMAL_COMMA.pattern).fillna(False).astype(bool)
        text = text.where(~comma, text.str.replace(",", ".", regex=False))
    number = pd.to_numeric(text.mask(gone), errors="coerce").astype("float64")
    bad = number.isna() & ~gone
    return number, bad.astype(bool)

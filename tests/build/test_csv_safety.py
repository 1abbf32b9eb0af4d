"""Study tables opened in a spreadsheet: no cell runs as a formula.

Rule from the OWASP Foundation's "CSV Injection" guidance: a text cell starting with =, +, -,
@, tab or carriage return is prefixed with a single quote.
"""

from __future__ import annotations

import csv
import io

import numpy as np
import pandas as pd

from springback.build.output import frame_bytes


def _cells(data: bytes) -> list[list[str]]:
    return list(csv.reader(io.StringIO(data.decode("utf-8"))))


def test_formula_like_text_is_quoted() -> None:
    """Check =, +, -, @, tab and CR at the start of a text cell get a leading apostrophe."""
    frame = pd.DataFrame({
        "participant": ["=HYPERLINK(\"http://x.test\",\"a\")", "+1+2", "-2+3", "@SUM(A1)",
                        "\tx", "P01"],
        "reason": ["ok", "ok", "ok", "ok", "ok", "=1"],
    })
    rows = _cells(frame_bytes(frame))
    assert [r[0] for r in rows[1:]] == ["'=HYPERLINK(\"http://x.test\",\"a\")", "'+1+2",
                                        "'-2+3", "'@SUM(A1)", "'\tx", "P01"]
    assert rows[-1][1] == "'=1"


def test_numbers_stay_numbers() -> None:
    """Check negative numbers, as numbers or as text, are written unchanged."""
    frame = pd.DataFrame({"value": [-1.5, np.nan, 2.0], "text": ["-0.25", "", "+3"]})
    rows = _cells(frame_bytes(frame))
    assert rows[1:] == [["-1.5", "-0.25"], ["", ""], ["2.0", "+3"]]

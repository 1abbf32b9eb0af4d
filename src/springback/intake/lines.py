"""Row widths of CSV files, checked in one streaming pass (rows shorter than the header)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.csv as pcsv

from springback.errors import DataError, error


def short_rows(path: Path, where: str, encoding: str, delimiter: str, width: int) -> None:
    """Refuse rows with fewer fields than the header (the CSV parser would fill them silently).

    Arrow's reader finds them in one streaming pass; only the bad rows reach Python.
    """
    if width < 2:
        return
    short: list[tuple[int, int]] = []

    def bad(row: Any) -> str:
        if row.actual_columns < row.expected_columns:
            short.append((int(row.number), int(row.actual_columns)))
        return "skip"

    names = [f"c{i}" for i in range(width)]
    try:
        reader = pcsv.open_csv(
            path, read_options=pcsv.ReadOptions(
                use_threads=False, skip_rows=1, column_names=names,
                encoding=encoding.replace("utf-8-sig", "utf8")),
            parse_options=pcsv.ParseOptions(delimiter=delimiter, newlines_in_values=True,
                                            invalid_row_handler=bad),
            convert_options=pcsv.ConvertOptions(column_types={n: pa.string() for n in names},
                                                 include_columns=names[:1]))
        for _ in reader:
            pass
    except (pa.ArrowInvalid, OSError, UnicodeError, ValueError):
        return  # anything else the parser finds is told by the main reading
    if not short:
        return
    shown = "tab" if delimiter == "\t" else delimiter
    listed = ", ".join(f"row {n} has {k}" for n, k in short[:5])
    more = f" and {len(short) - 5} more rows" if len(short) > 5 else ""
    raise DataError([error(
        where, f"{len(short)} row{'s have' if len(short) > 1 else ' has'} fewer fields than "
        f"the header ({listed}{more}; the header has {width})", row=short[0][0],
        expected=f"{width} '{shown}'-separated fields on every row",
        fix="look at the rows named: a missing separator or a line broken in two is usual; "
        "leave a cell empty rather than leaving it out", code="short-rows")])

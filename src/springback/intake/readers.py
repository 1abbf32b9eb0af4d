"""Read a data file of any supported format into a frame of raw values, never writing to it."""

from __future__ import annotations

import codecs
import csv
import io
import re
import warnings
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from itertools import dropwhile
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from springback.errors import DataError, Problem, error, warning
from springback.intake.cells import as_number, as_text, missing_mask
from springback.intake.lines import short_rows

__all__ = ["Table", "TableChunks", "as_number", "as_text", "labelled", "missing_mask",
           "read_chunks", "read_table", "sniff_delimiter"]

FORMATS = {
    ".csv": "CSV", ".tsv": "CSV", ".txt": "CSV",
    ".xlsx": "Excel", ".xlsm": "Excel",
    ".parquet": "Parquet", ".pq": "Parquet",
    ".sav": "SPSS", ".zsav": "SPSS",
}
DELIMITERS = (",", ";", "\t", "|")
MAX_COLUMNS = 10_000
"""Widest header read; wider files are refused (checking them would take minutes)."""


@dataclass(frozen=True)
class Table:
    """A file's rows as read: raw cell values, column names trimmed, nothing converted yet.

    Row i of `frame` is row i + 2 of the file as a spreadsheet shows it (the header is row 1).
    """

    where: str
    path: Path
    frame: pd.DataFrame
    value_labels: dict[str, dict[Any, str]] = field(default_factory=dict)
    notes: tuple[Problem, ...] = ()
    row_numbers: np.ndarray | None = None
    """The rows' numbers when `frame` holds only some of the file's rows."""

    @property
    def rows(self) -> np.ndarray:
        """The spreadsheet row number of every frame row."""
        if self.row_numbers is not None:
            return self.row_numbers
        return np.arange(len(self.frame)) + 2


@dataclass(frozen=True)
class TableChunks:
    """A file read a block of rows at a time: its columns, notes, and the blocks as tables."""

    where: str
    path: Path
    columns: list[str]
    chunks: Iterator[Table]
    value_labels: dict[str, dict[Any, str]] = field(default_factory=dict)
    notes: tuple[Problem, ...] = ()


def read_table(path: Path, where: str, *, sheet: str | None = None) -> Table:
    """Read one data file chosen by its extension; raise DataError saying why it cannot be read."""
    kind = _kind(path, where)
    notes: list[Problem] = []
    labels: dict[str, dict[Any, str]] = {}
    with _opening(where):
        if kind == "CSV":
            csv_format = _csv_format(path, where, notes)
            frame = _parse_csv(path, where, csv_format)
            short_rows(path, where, csv_format.encoding, csv_format.delimiter,
                       len(csv_format.header) + csv_format.row_names)
        else:
            frame, labels = _read_binary(path, where, kind, sheet)
    frame.columns = [str(c).strip() for c in frame.columns]
    _check_header(frame, where)
    return Table(where, path, frame.reset_index(drop=True), labels, tuple(notes))


def read_chunks(path: Path, where: str, *, sheet: str | None = None,
                rows: int = 100_000) -> TableChunks:
    """Read a data file `rows` rows at a time (CSV files stream; other kinds are read whole).

    The file's header is checked before this returns; a problem found further into the file
    is raised as DataError while the chunks are read.
    """
    kind = _kind(path, where)
    if kind != "CSV":
        table = read_table(path, where, sheet=sheet)
        return TableChunks(where, path, list(table.frame.columns), iter([table]),
                           table.value_labels, table.notes)
    notes: list[Problem] = []
    with _opening(where):
        csv_format = _csv_format(path, where, notes)
        head = _parse_csv(path, where, csv_format, nrows=0)
        short_rows(path, where, csv_format.encoding, csv_format.delimiter,
                   len(csv_format.header) + csv_format.row_names)
    columns = [str(c).strip() for c in head.columns]
    _check_header(pd.DataFrame(columns=columns), where)

    def chunks() -> Iterator[Table]:
        first = 2
        with _opening(where):
            for frame in _parse_csv(path, where, csv_format, chunksize=rows):
                frame.columns = columns
                frame = frame.reset_index(drop=True)
                yield Table(where, path, frame, {}, (), np.arange(len(frame)) + first)
                first += len(frame)

    return TableChunks(where, path, columns, chunks(), {}, tuple(notes))


def _kind(path: Path, where: str) -> str:
    kind = FORMATS.get(path.suffix.lower())
    if kind is None:
        raise DataError([error(
            where, f"files ending in '{path.suffix}' cannot be read",
            expected="a .csv, .tsv, .txt, .xlsx, .parquet or .sav file",
            fix="export the data in one of these formats", code="unsupported-format")])
    if path.exists() and not path.is_file():
        raise DataError([error(
            where, "this is not a regular file (it is a folder, a named pipe or a device)",
            expected="the exported data file itself",
            fix="point the path under [data] in study.toml to the exported file",
            code="not-a-file")])
    if not path.is_file():
        raise DataError([error(
            where, "the file is missing",
            fix="check the file name, or the path under [data] in study.toml",
            code="missing-file")])
    if path.stat().st_size == 0:
        raise DataError([error(where, "the file is empty", fix="export the data again",
                               code="empty-file")])
    return kind


@contextmanager
def _opening(where: str) -> Iterator[None]:
    try:
        yield
    except OSError as exc:
        raise DataError([error(
            where, f"the file cannot be opened: {exc.strerror or exc}",
            fix="check that you may read it and that no other program locks it",
            code="unreadable")]) from None


ROW_NAMES = "(row names)"
"""The name given to an unnamed first column of row names (R's write.table writes one field
more on every data line than in the header)."""


@dataclass(frozen=True)
class _CsvFormat:
    encoding: str
    delimiter: str
    header: list[str]
    row_names: bool = False


def _csv_format(path: Path, where: str, notes: list[Problem]) -> _CsvFormat:
    """Find the text encoding and the delimiter, reading the file in blocks (never whole)."""
    encoding, sample = _encoding(path, where, notes)
    if encoding == "latin-1":
        encoding, sample = _encoding(path, where, notes, "latin-1")
    if sample is None:
        raise DataError([error(where, "the file is empty", fix="export the data again",
                               code="empty-file")])
    delimiter = sniff_delimiter(sample)
    first: list[str] = []
    try:
        head = sample.lstrip("\r\n")
        reader = csv.reader(io.StringIO(head, newline=""), delimiter=delimiter)
        header = next(reader, [])
        first = next((r for r in reader if r), [])
    except csv.Error:
        header = []
    if len(header) > MAX_COLUMNS:
        cut = "\n" not in head and len(sample) >= SAMPLE_CHARS  # the header is longer still
        count = f"more than {len(header):,}" if cut else f"{len(header):,}"
        raise DataError([error(
            where, f"the header has {count} columns; at most {MAX_COLUMNS:,} can be read",
            expected=f"a header line of at most {MAX_COLUMNS:,} "
            f"'{_name(delimiter)}'-separated names",
            fix="export only the columns the study uses (or check the delimiter)",
            code="too-many-columns")])
    # R's write.table: one field more on data lines than in the header, numbered from 1.
    row_names = bool(header) and len(first) == len(header) + 1 and first[0].strip() == "1"
    return _CsvFormat(encoding, delimiter, [h.strip() for h in header], row_names)


SAMPLE_CHARS = 1 << 20
"""Text kept from the file's start to find the delimiter and the header (the first MiB)."""


def _utf16_without_mark(block: bytes) -> bool:
    """Whether bytes look like UTF-16 with no mark: NUL in nearly every other byte, one side."""
    head = block[:4096]
    if len(head) < 4:
        return False
    even, odd = head[0::2], head[1::2]
    shares = (even.count(0) / len(even), odd.count(0) / len(odd))
    return max(shares) >= 0.4 and min(shares) <= 0.05


def _encoding(path: Path, where: str, notes: list[Problem],
              encoding: str | None = None) -> tuple[str, str | None]:
    """The file's encoding and its first MiB of text (None when the file holds only spaces).

    UTF-8 (with or without a byte-order mark) or UTF-16 with its mark; a file that is not
    valid UTF-8 is read as Latin-1 with a note (older Excel and SPSS exports on Windows write
    it, and reading it that way never fails).
    """
    with path.open("rb") as f:
        start = f.read(3)
        f.seek(0)
        if encoding is None:
            if start.startswith(b"\xef\xbb\xbf"):
                encoding = "utf-8-sig"
            elif start.startswith((b"\xff\xfe", b"\xfe\xff")):
                encoding = "utf-16"
            else:
                encoding = "utf-8"
        decoder = codecs.getincrementaldecoder(encoding)()
        sample, text_seen = "", False
        try:
            while block := f.read(1 << 20):
                text = decoder.decode(block)
                if "\x00" in text and _utf16_without_mark(block):
                    raise DataError([error(
                        where, "the file looks like UTF-16 text without a byte-order mark "
                        "(every second byte is NUL), which cannot be read safely",
                        expected="UTF-8 text, or UTF-16 that starts with its byte-order mark",
                        fix="save it again as 'CSV UTF-8' (Excel: File > Save As > CSV UTF-8)",
                        code="utf-16-no-bom")])
                if "\x00" in text:
                    raise DataError([error(
                        where, "the file is not text (it holds NUL bytes)",
                        expected="a CSV file", fix="export the data as CSV again",
                        code="unreadable")])
                text_seen = text_seen or bool(text.strip())
                if len(sample) < SAMPLE_CHARS:
                    sample += text[: SAMPLE_CHARS - len(sample)]
            decoder.decode(b"", final=True)
        except UnicodeDecodeError:
            if encoding == "utf-16":
                raise DataError([error(where, "the file starts like UTF-16 text but is not",
                                       fix="save it as UTF-8 CSV", code="unreadable")]) from None
            notes.append(warning(
                where, "the file is not UTF-8; it was read as Latin-1",
                fix="check that names with accents look right, or save the file as UTF-8",
                code="latin-1"))
            return "latin-1", None
    return encoding, sample if text_seen else None


def _parse_csv(path: Path, where: str, fmt: _CsvFormat, *, chunksize: int | None = None,
               nrows: int | None = None) -> Any:
    """pandas' C parser on the file: a frame, or an iterator of frames with `chunksize`."""
    options: dict[str, Any] = dict(
        sep=fmt.delimiter, dtype=str, index_col=False, keep_default_na=False,
        na_filter=False, engine="c", skip_blank_lines=True, encoding=fmt.encoding)
    if fmt.row_names:  # the header names every column but the first
        options |= {"header": 0, "names": [ROW_NAMES, *fmt.header]}
    if chunksize is None:
        frame = _parsing(path, where, fmt, lambda: pd.read_csv(path, nrows=nrows, **options))
        if len(fmt.header) == frame.shape[1]:
            # pandas renames repeated headers (sad, sad.1), so the raw header is checked too.
            _check_duplicate_names(fmt.header, where)
        return frame
    return _chunks(path, where, fmt, pd.read_csv(path, chunksize=chunksize, **options))


def _chunks(path: Path, where: str, fmt: _CsvFormat, reader: Any) -> Iterator[pd.DataFrame]:
    with reader:
        while True:
            frame = _parsing(path, where, fmt, lambda: next(reader, None))
            if frame is None:
                return
            yield frame


def _parsing(path: Path, where: str, fmt: _CsvFormat, parse: Any) -> Any:
    """Run the parser; turn its complaints into problems that name the line."""
    delimiter = fmt.delimiter
    try:
        with warnings.catch_warnings():
            # More fields than the header would silently lose data: make it an error.
            warnings.simplefilter("error", pd.errors.ParserWarning)
            return parse()
    except pd.errors.ParserWarning:
        raise DataError([error(
            where, f"the file cannot be read as CSV: {_long_line(path, fmt)}",
            expected=f"the same number of '{_name(delimiter)}'-separated fields on every line",
            fix="look at the line named (an unclosed quote or an extra separator is usual)",
            code="unreadable")]) from None
    except pd.errors.EmptyDataError:
        raise DataError([error(where, "the file is empty", fix="export the data again",
                               code="empty-file")]) from None
    except (pd.errors.ParserError, ValueError, csv.Error) as exc:
        raise DataError([error(
            where, f"the file cannot be read as CSV: {_parser_detail(exc)}",
            expected=f"the same number of '{_name(delimiter)}'-separated fields on every line",
            fix="look at the line named (an unclosed quote or an extra separator is usual)",
            code="unreadable")]) from None


def sniff_delimiter(text: str) -> str:
    """Pick the delimiter that splits the header line into the most fields (comma on ties)."""
    lines = text.lstrip("\r\n")[:65536].splitlines()
    first = lines[0] if lines else ""
    best, most = ",", 1
    for d in DELIMITERS:
        try:
            n = len(next(csv.reader([first], delimiter=d), []))
        except csv.Error:
            continue
        if n > most:
            best, most = d, n
    return best


def _long_line(path: Path, fmt: _CsvFormat) -> str:
    """Name the first line with more fields than the header (only called when one exists)."""
    with path.open(encoding=fmt.encoding, newline="") as f:
        lines = dropwhile(lambda line: not line.strip("\r\n"), f)  # as the parser does
        reader = csv.reader(lines, delimiter=fmt.delimiter)
        try:
            width = len(next(reader, []))
            for fields in reader:
                if len(fields) > width:
                    return (f"line {reader.line_num} has {len(fields)} fields but the header "
                            f"has {width}")
        except csv.Error:
            pass
    return "a line has more fields than the header"


def _name(delimiter: str) -> str:
    return {"\t": "tab"}.get(delimiter, delimiter)


def _parser_detail(exc: Exception) -> str:
    text = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
    m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", text)
    if m:
        return f"line {m.group(2)} has {m.group(3)} fields but the header has {m.group(1)}"
    m = re.search(r"EOF inside string starting at row (\d+)", text)
    if m:
        return f"a quoted field starting on line {int(m.group(1)) + 1} is never closed"
    return text.removeprefix("Error tokenizing data. C error: ")


def _read_binary(path: Path, where: str, kind: str,
                 sheet: str | None) -> tuple[pd.DataFrame, dict[str, dict[Any, str]]]:
    labels: dict[str, dict[Any, str]] = {}
    try:
        if kind == "Excel":
            frame = _read_excel(path, where, sheet)
        elif kind == "Parquet":
            frame = pd.read_parquet(path, engine="pyarrow")
        else:
            import pyreadstat

            # Codes stay numbers (ratings are the codes); labels are kept for text columns.
            frame, meta = pyreadstat.read_sav(str(path), apply_value_formats=False)
            labels = {k: dict(v) for k, v in meta.variable_value_labels.items()}
    except DataError:
        raise
    except Exception as exc:  # any reader failure on a user's file is reported, not raised
        raise DataError([error(
            where, f"the file cannot be read as {kind}: {_short(exc)}",
            fix=f"open it in the program that made it and save it again as {kind}",
            code="unreadable")]) from None
    return frame, labels


def _read_excel(path: Path, where: str, sheet: str | None) -> pd.DataFrame:
    import openpyxl

    book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    try:
        names = book.sheetnames
    finally:
        book.close()
    if sheet is not None and sheet not in names:
        raise DataError([error(
            where, f"the workbook has no sheet '{sheet}'",
            expected="one of: " + ", ".join(names), fix="correct [data] sheet in study.toml",
            code="missing-sheet")])
    return pd.read_excel(path, sheet_name=sheet or names[0], engine="openpyxl")


def _short(exc: Exception) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:200]


def _check_header(frame: pd.DataFrame, where: str) -> None:
    names = list(frame.columns)
    if len(names) > MAX_COLUMNS:
        raise DataError([error(
            where, f"the file has {len(names):,} columns; at most {MAX_COLUMNS:,} can be read",
            fix="export only the columns the study uses", code="too-many-columns")])
    _check_duplicate_names(names, where)
    if frame.shape[1] == 0:
        raise DataError([error(where, "the file has no columns", fix="export the data again",
                               code="empty-file")])


def _check_duplicate_names(names: Iterable[str], where: str) -> None:
    seen: set[str] = set()
    twice = []
    for n in names:
        if n in seen and n not in twice:
            twice.append(n)
        seen.add(n)
    if twice:
        raise DataError([error(
            where, "column names appear more than once: " + ", ".join(f"'{n}'" for n in twice),
            expected="each column name once", fix="rename or remove the extra columns",
            code="duplicate-column")])


def labelled(table: Table, column: str) -> pd.Series:
    """A column with its SPSS value labels applied (codes without a label stay as they are)."""
    values = table.frame[column]
    labels = table.value_labels.get(column)
    if not labels:
        return values
    mapped = values.map(lambda v: labels.get(v, v))
    return mapped.astype(object)

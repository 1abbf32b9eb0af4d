"""Check that every file format, delimiter, encoding and layout loads to identical frames."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pyreadstat
import pytest

from springback.intake import check_study, load_study, read_prompts
from springback.model import Study
from tests.support.intake_project import BASE_TOML, make_project

# One small data set, with a missing rating, a naive local time, times with offsets across
# the spring clock change in Amsterdam (31 March 2024), and a participant id that looks
# like a number (spreadsheets and SPSS store it as one).
MOMENTARY = pd.DataFrame({
    "participant": ["p1", "p1", "p1", "p2", "p2", "007"],
    "timestamp": ["2024-03-30 09:00", "2024-03-30T21:30:00+01:00", "2024-03-31T09:00:00+02:00",
                  "2024-03-30 10:00", "2024-03-31 23:59", "2024-03-31 03:30"],
    "sad": [3, 4, None, 2, 1, 7],
    "calm": [5, 4, 6, 6, 7, 1],
})
ROSTER = pd.DataFrame({
    "participant": ["p1", "p2", "007"],
    "language": ["en", "en", "en"],
    "consent": ["yes", "yes", "yes"],
})


def _csv(frame: pd.DataFrame, **kw: object) -> bytes:
    return frame.to_csv(index=False, lineterminator="\n", **kw).encode("utf-8")


def _project(root: Path, momentary: bytes | None = None, ext: str = "csv",
             roster_ext: str = "csv", data: str = "") -> Path:
    """A study whose [data] names the momentary and roster files (plus `data` lines)."""
    toml = BASE_TOML + (f'[data]\nmomentary = "data/momentary.{ext}"\n'
                        f'participants = "data/participants.{roster_ext}"\n{data}')
    files: dict[str, str | bytes | None] = {"data/momentary.csv": None,
                                            "data/participants.csv": None}
    if momentary is not None:
        files[f"data/momentary.{ext}"] = momentary
    if roster_ext == "csv":
        files["data/participants.csv"] = _csv(ROSTER)
    return make_project(root, toml=toml, files=files)


def _frames(study: Study) -> dict[str, pd.DataFrame]:
    return {"momentary": study.momentary, "roster": study.roster, "quality": study.quality}


def _same(a: Study, b: Study) -> None:
    for name, frame in _frames(a).items():
        pd.testing.assert_frame_equal(frame, _frames(b)[name], check_exact=True, obj=name)


@pytest.fixture(scope="module")
def reference(tmp_path_factory: pytest.TempPathFactory) -> Study:
    """The data set loaded from a plain UTF-8 comma-separated file."""
    root = tmp_path_factory.mktemp("reference") / "study"
    return load_study(_project(root, _csv(MOMENTARY)))


def test_reference_frames(reference: Study) -> None:
    """Check the reference load: UTC times across the clock change, ids and ratings as given."""
    m = reference.momentary
    assert list(m["participant"]) == ["007", "p1", "p1", "p1", "p2", "p2"]
    # 2024-03-31 03:30 in Amsterdam is after the change to summer time (+02:00) -> 01:30 UTC
    assert m["time"].iloc[0] == pd.Timestamp("2024-03-31 01:30", tz="UTC")
    # 2024-03-30 09:00 is still winter time (+01:00) -> 08:00 UTC
    assert m["time"].iloc[1] == pd.Timestamp("2024-03-30 08:00", tz="UTC")
    assert m["sad"].isna().sum() == 1
    assert str(m["time"].dtype) == "datetime64[ns, UTC]"
    assert str(m["local_time"].dtype) == "datetime64[ns, Europe/Amsterdam]"


@pytest.mark.parametrize("variant", ["semicolon", "tab", "pipe", "bom", "latin-1", "crlf"])
def test_csv_variants_load_identically(tmp_path: Path, reference: Study, variant: str) -> None:
    """Check that delimiters, a BOM, Latin-1 and Windows line ends give the same frames."""
    sep = {"semicolon": ";", "tab": "\t", "pipe": "|"}.get(variant, ",")
    text = MOMENTARY.to_csv(index=False, sep=sep,
                            lineterminator="\r\n" if variant == "crlf" else "\n")
    if variant == "semicolon":  # European exports write decimal commas with semicolons
        text = text.replace(";3;", ";3,0;")
    raw = text.encode()
    if variant == "bom":
        raw = b"\xef\xbb\xbf" + raw
    if variant == "latin-1":  # a name with an accent, in a byte that is not UTF-8
        frame = MOMENTARY.assign(note="caf\xe9")
        raw = frame.to_csv(index=False, lineterminator="\n").encode("latin-1")
    report = check_study(_project(tmp_path / "study", raw))
    assert report.study is not None, [p.message() for p in report.problems]
    _same(reference, report.study)
    assert [p.code for p in report.problems] == (["latin-1"] if variant == "latin-1" else [])


def _write(fmt: str, frame: pd.DataFrame, path: Path,
           labels: dict[str, dict[float, str]] | None = None) -> None:
    if fmt == "xlsx":
        frame.to_excel(path, index=False)
    elif fmt == "parquet":
        frame.to_parquet(path, index=False)
    else:
        pyreadstat.write_sav(frame, str(path), variable_value_labels=labels or {})


@pytest.mark.parametrize("fmt", ["xlsx", "parquet", "sav"])
def test_binary_formats_load_identically(tmp_path: Path, reference: Study, fmt: str) -> None:
    """Check that the same data written as XLSX, Parquet or SAV load to the CSV's frames."""
    root = tmp_path / "study"
    (root / "data").mkdir(parents=True)
    _write(fmt, MOMENTARY, root / "data" / f"momentary.{fmt}")
    _write(fmt, ROSTER, root / "data" / f"participants.{fmt}")
    study = load_study(_project(root, ext=fmt, roster_ext=fmt))
    _same(reference, study)
    assert all(p.resolve() == p for p in study.input_files)
    assert root.resolve() / "data" / f"momentary.{fmt}" in study.input_files


@pytest.mark.parametrize("fmt", ["xlsx", "parquet", "sav"])
def test_native_datetimes_read_as_local_times(tmp_path: Path, fmt: str) -> None:
    """Check that naive datetime cells are read in the study zone, like naive CSV text."""
    naive = MOMENTARY[~MOMENTARY["timestamp"].str.contains(r"\+")].copy()
    as_text = _project(tmp_path / "text", _csv(naive))
    naive["timestamp"] = pd.to_datetime(naive["timestamp"])
    root = tmp_path / "native"
    (root / "data").mkdir(parents=True)
    _write(fmt, naive, root / "data" / f"momentary.{fmt}")
    _same(load_study(as_text), load_study(_project(root, ext=fmt)))


def test_sav_value_labels_kept(tmp_path: Path) -> None:
    """Check that SAV ratings stay numeric codes while labelled roster codes become words."""
    root = tmp_path / "study"
    (root / "data").mkdir(parents=True)
    coded = MOMENTARY.copy()
    _write("sav", coded, root / "data" / "momentary.sav",
           {"sad": {1.0: "not at all", 7.0: "very much"}})
    roster = ROSTER.assign(consent=[1.0, 1.0, 2.0])
    _write("sav", roster, root / "data" / "participants.sav",
           {"consent": {1.0: "yes", 2.0: "withdrawn"}})
    report = check_study(_project(root, ext="sav", roster_ext="sav"))
    assert report.study is not None
    assert list(report.study.roster["consent"]) == ["withdrawn", "yes", "yes"]
    assert sorted(report.study.momentary["sad"].dropna()) == [1.0, 2.0, 3.0, 4.0]
    assert [p.code for p in report.problems] == ["withdrawn"]


def test_long_layout_equals_wide(tmp_path: Path, reference: Study) -> None:
    """Check that one row per item (item/value columns) gives the wide layout's frames."""
    long = MOMENTARY.melt(id_vars=["participant", "timestamp"], var_name="item",
                          value_name="value").dropna(subset=["value"])
    long = long.sample(frac=1.0, random_state=3)  # row order must not matter
    root = _project(tmp_path / "study", _csv(long), data='layout = "long"\n')
    study = load_study(root)
    raw = read_prompts(root)
    assert list(raw.columns) == ["source_row", "participant", "item", "value"]
    assert len(raw) == len(long) and raw["value"].dtype == float
    pd.testing.assert_frame_equal(study.momentary.drop(columns="source_row"),
                                  reference.momentary.drop(columns="source_row"))
    pd.testing.assert_frame_equal(study.quality, reference.quality)


def test_excel_sheet_by_name(tmp_path: Path, reference: Study) -> None:
    """Check that [data] sheet picks the named sheet of a workbook."""
    root = tmp_path / "study"
    (root / "data").mkdir(parents=True)
    with pd.ExcelWriter(root / "data" / "momentary.xlsx") as book:
        pd.DataFrame({"note": ["cover sheet"]}).to_excel(book, sheet_name="About", index=False)
        MOMENTARY.to_excel(book, sheet_name="Answers", index=False)
    _same(reference, load_study(_project(root, ext="xlsx", data='sheet = "Answers"\n')))
    report = check_study(_project(root, ext="xlsx", data='sheet = "Answer"\n'))
    assert [p.message() for p in report.problems] == [
        "data/momentary.xlsx: the workbook has no sheet 'Answer'; expected one of: About, "
        "Answers. Fix: correct [data] sheet in study.toml"]


def test_corrupt_binary_files_are_reported(tmp_path: Path) -> None:
    """Check that a damaged XLSX, Parquet or SAV file gives a clean error naming its format."""
    for fmt, kind in (("xlsx", "Excel"), ("parquet", "Parquet"), ("sav", "SPSS")):
        root = tmp_path / fmt
        report = check_study(_project(root, b"PK\x03\x04 not really " + fmt.encode(), ext=fmt))
        (problem,) = report.problems
        assert problem.code == "unreadable"
        assert problem.what.startswith(f"the file cannot be read as {kind}: ")


def test_parquet_zone_aware_times(tmp_path: Path, reference: Study) -> None:
    """Check that zone-aware timestamps in Parquet keep their instant (any zone, here UTC)."""
    aware = MOMENTARY.copy()
    aware["timestamp"] = reference.momentary.set_index("source_row")["time"].reindex(
        range(2, 2 + len(MOMENTARY))).to_numpy()
    root = tmp_path / "study"
    (root / "data").mkdir(parents=True)
    aware.to_parquet(root / "data" / "momentary.parquet", index=False)
    _same(reference, load_study(_project(root, ext="parquet")))

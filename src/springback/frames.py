"""Rows grouped by a key (a participant id), held in memory or spilled to a private file.

A large study does not fit comfortably in memory, and no stage needs all of it at once: checks
run on a few participants at a time and every booklet needs one participant's rows. `DiskFrames`
keeps rows in an Arrow IPC file (Apache Arrow's columnar file format) in a temporary folder
only this user can open, one record batch per run of a key, so one key's rows are read back
without touching anyone else's. `MemoryFrames` offers the same reads on a frame in memory.
Column types round-trip exactly (Arrow keeps pandas' types in the file's schema).
"""

from __future__ import annotations

import shutil
import tempfile
import weakref
from abc import ABC, abstractmethod
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa


class Frames(ABC):
    """Rows of a frame by key, in the order they were added; the same reads for every kind."""

    @abstractmethod
    def names(self) -> list[str]:
        """Every key with at least one row, in the order first added."""

    @abstractmethod
    def count(self, key: str) -> int:
        """How many rows the key has (0 for an unknown key)."""

    def rows(self, key: str) -> pd.DataFrame:
        """The key's rows with a fresh index (an empty frame of the right types if none)."""
        return self.rows_of([key])

    @abstractmethod
    def rows_of(self, keys: list[str]) -> pd.DataFrame:
        """The rows of several keys, key by key, with a fresh index."""

    def frame(self) -> pd.DataFrame:
        """Every row, keys in sorted order (reads everything: for reports and tests)."""
        return self.rows_of(sorted(self.names()))

    def __len__(self) -> int:
        return sum(self.count(k) for k in self.names())


class MemoryFrames(Frames):
    """A frame in memory, read by the value of its key column."""

    def __init__(self, frame: pd.DataFrame, key: str = "participant") -> None:
        self._frame = frame
        self._key = key
        self._positions: dict[str, np.ndarray] | None = None

    @property
    def positions(self) -> dict[str, np.ndarray]:
        # Row positions of every key found in one pass: a mask per key would scan the whole
        # frame once per key, which grows with the square of the study's size.
        if self._positions is None:
            if self._key not in self._frame.columns:
                self._positions = {}
            else:
                groups = self._frame.groupby(self._key, sort=False, observed=True).indices
                self._positions = {str(k): np.asarray(v) for k, v in groups.items()}
        return self._positions

    def names(self) -> list[str]:
        return list(self.positions)

    def count(self, key: str) -> int:
        return len(self.positions.get(key, ()))

    def rows_of(self, keys: list[str]) -> pd.DataFrame:
        empty = np.empty(0, dtype=np.intp)
        parts = [self.positions.get(k, empty) for k in keys]
        where = np.concatenate(parts) if parts else empty
        return self._frame.iloc[where].reset_index(drop=True)

    def frame(self) -> pd.DataFrame:
        return self._frame


class DiskFrames(Frames):
    """Rows written once, batch by batch, to an Arrow IPC file; then read back by key.

    Add rows with `append`, then `seal` before reading. The folder is made with `mkdtemp`
    (readable by this user only) and removed when the object is collected or the process ends.
    Reads go through ordinary file reads, not a memory map, so the rows read for one key are
    freed with the frame made from them.
    """

    def __init__(self, prefix: str = "springback-") -> None:
        self._folder = Path(tempfile.mkdtemp(prefix=prefix))
        self._finalizer = weakref.finalize(self, shutil.rmtree, self._folder, True)
        self._path = self._folder / "rows.arrows"
        self._writer: pa.ipc.RecordBatchFileWriter | None = None
        self._sink: pa.OSFile | None = None
        self._schema: pa.Schema | None = None
        self._batches: dict[str, list[int]] = {}
        self._counts: dict[str, int] = {}
        self._written = 0
        self._reader: pa.ipc.RecordBatchFileReader | None = None
        self._source: pa.OSFile | None = None

    def append(self, frame: pd.DataFrame, keys: pd.Series | np.ndarray) -> None:
        """Add rows; `keys` gives each row's key. Rows of one key keep their order."""
        table = pa.Table.from_pandas(frame, schema=self._schema, preserve_index=False)
        if self._schema is None:
            self._schema = table.schema
        if not len(frame):
            return
        if self._writer is None:
            self._sink = pa.OSFile(str(self._path), "wb")
            self._writer = pa.ipc.new_file(self._sink, self._schema)
        codes, names = pd.factorize(np.asarray(keys, dtype=object), sort=False)
        order = np.argsort(codes, kind="stable")
        table = table.take(pa.array(order)).combine_chunks()
        bounds = np.flatnonzero(np.diff(codes[order])) + 1
        starts = np.concatenate([[0], bounds])
        ends = np.concatenate([bounds, [len(order)]])
        for start, end in zip(starts.tolist(), ends.tolist(), strict=True):
            key = str(names[codes[order[start]]])
            for batch in table.slice(start, end - start).to_batches():
                self._writer.write_batch(batch)
                self._batches.setdefault(key, []).append(self._written)
                self._written += 1
            self._counts[key] = self._counts.get(key, 0) + end - start

    def seal(self) -> DiskFrames:
        """Finish writing; from now on the rows can be read (and no more can be added)."""
        if self._writer is not None:
            self._writer.close()
            assert self._sink is not None
            self._sink.close()
            self._writer = None
            self._source = pa.OSFile(str(self._path), "rb")
            self._reader = pa.ipc.open_file(self._source)
        return self

    @property
    def schema(self) -> pa.Schema | None:
        return self._schema

    def names(self) -> list[str]:
        return list(self._batches)

    def count(self, key: str) -> int:
        return self._counts.get(key, 0)

    def rows_of(self, keys: list[str]) -> pd.DataFrame:
        if self._schema is None:
            return pd.DataFrame()
        ids = [i for k in keys for i in self._batches.get(k, [])]
        if not ids:
            return self._schema.empty_table().to_pandas()
        if self._reader is None:
            raise RuntimeError("rows are read only after seal()")
        batches = [self._reader.get_batch(i) for i in ids]
        return pa.Table.from_batches(batches, schema=self._schema).to_pandas()

    def close(self) -> None:
        """Remove the file now (it is removed at exit anyway)."""
        if self._writer is not None:
            self._writer.close()
        for handle in (self._sink, self._source):
            if handle is not None and not handle.closed:
                handle.close()
        self._reader = None
        self._finalizer()

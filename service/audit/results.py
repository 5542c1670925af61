"""The audit's result files: part files per flushed batch, the done-index, final tables.

Layout of the output folder::

    parts/peaks-<id>.parquet     peak rows of one flushed batch
    parts/summary-<id>.parquet   summary rows of the same batch (written second: a batch
                                 counts as done only once its summary part exists)
    peaks.parquet                every peak of the current manifest's recordings
    recordings.parquet           one summary row per manifest row, errors included

Every file is written atomically: to a temporary file in the same folder, flushed with
fsync, then moved over the target with ``os.replace``.
"""

from __future__ import annotations

import os
import secrets
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from .rows import PEAK_SCHEMA, SUMMARY_SCHEMA

__all__ = ["PartStore", "atomic_parquet"]


def _fsync_dir(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


@contextmanager
def atomic_parquet(path: Path, schema: pa.Schema) -> Iterator[Callable[[pa.Table], None]]:
    """Yield a function that appends tables; the file appears whole or not at all."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{secrets.token_hex(6)}.tmp")
    try:
        with open(tmp, "wb") as fh:
            writer = pq.ParquetWriter(fh, schema)
            try:
                yield writer.write_table
            finally:
                writer.close()
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        _fsync_dir(path.parent)
    finally:
        if tmp.exists():
            tmp.unlink()


class PartStore:
    """Part files of finished rows in ``out/parts``; the done-index is their keys."""

    def __init__(self, out: str | Path) -> None:
        self.out = Path(out)
        self.parts = self.out / "parts"
        self.parts.mkdir(parents=True, exist_ok=True)

    def _summary_parts(self) -> list[Path]:
        return sorted(self.parts.glob("summary-*.parquet"))

    def done_keys(self) -> set[str]:
        """Keys of rows diagnosed without error in any earlier or current batch."""
        keys: set[str] = set()
        for p in self._summary_parts():
            t = pq.read_table(p, columns=["key", "status"]).to_pydict()
            keys.update(k for k, s in zip(t["key"], t["status"], strict=True) if s == "ok")
        return keys

    def write_part(self, summaries: list[dict[str, Any]], peaks: list[pa.Table]) -> None:
        """One flushed batch: peaks first, then the summary that marks the batch done."""
        if not summaries:
            return
        pid = f"{time.time_ns():020d}-{secrets.token_hex(4)}"
        table = pa.concat_tables(peaks) if peaks else PEAK_SCHEMA.empty_table()
        with atomic_parquet(self.parts / f"peaks-{pid}.parquet", PEAK_SCHEMA) as write:
            write(table)
        with atomic_parquet(self.parts / f"summary-{pid}.parquet", SUMMARY_SCHEMA) as write:
            write(pa.Table.from_pylist(summaries, schema=SUMMARY_SCHEMA))

    def summaries_for(self, keys: set[str]) -> dict[str, dict[str, Any]]:
        """The stored summary of each wanted key (the first part that has it)."""
        found: dict[str, dict[str, Any]] = {}
        for p in self._summary_parts():
            for r in pq.read_table(p).to_pylist():
                if r["status"] == "ok" and r["key"] in keys and r["key"] not in found:
                    found[r["key"]] = r
        return found

    def write_peaks(self, labels: dict[str, list[tuple[str, int]]], path: Path) -> int:
        """Stream the parts' peaks of the wanted keys into one table; rows written.

        ``labels`` maps a key to the (recording, channel) of every manifest row having it,
        so identical content and settings are diagnosed once and reported per row.
        """
        seen: set[str] = set()
        n = 0
        with atomic_parquet(path, PEAK_SCHEMA) as write:
            for p in sorted(self.parts.glob("peaks-*.parquet")):
                t = pq.read_table(p, schema=PEAK_SCHEMA)
                part_keys = set(t.column("key").to_pylist())
                new = {k for k in part_keys if k in labels and k not in seen}
                if not new:
                    continue
                seen |= new
                sub = t.filter(pc.is_in(t.column("key"), pa.array(sorted(new))))
                for table in _relabel(sub, labels):
                    write(table)
                    n += table.num_rows
        return n

    def write_summaries(self, rows: Iterable[dict[str, Any]], path: Path) -> None:
        with atomic_parquet(path, SUMMARY_SCHEMA) as write:
            write(pa.Table.from_pylist(list(rows), schema=SUMMARY_SCHEMA))


def _relabel(t: pa.Table, labels: dict[str, list[tuple[str, int]]]) -> Iterator[pa.Table]:
    """The peaks once per manifest row having their key, named as that row names them."""
    d = t.to_pydict()
    depth = max(len(labels[k]) for k in set(d["key"]))
    for j in range(depth):
        idx = [i for i, k in enumerate(d["key"]) if len(labels[k]) > j]
        if not idx:
            continue
        sub = t.take(pa.array(idx, pa.int64())).to_pydict()
        sub["recording"] = [labels[k][j][0] for k in sub["key"]]
        sub["channel"] = [labels[k][j][1] for k in sub["key"]]
        yield pa.table(sub, schema=PEAK_SCHEMA)

"""``points.csv``: one row per finished point, appended and forced to disk as each point finishes.

Columns: ``point_id``, the varied fields (SI numbers, or text), every output of the measure, ``seed``,
``seconds`` and ``cpu_seconds`` (wall and CPU time of the point). Reading tolerates a last line cut short by a
kill (it is dropped, and cut off before the next append), so a killed sweep loses only the points that were
running. ``failures.csv`` logs failed attempts the same way (``point_id``, the varied fields, ``error``,
``seconds``); a failed point is tried again on the next run.

A measure that gains an output (``capacity.sweep.measures.ADDED_OUTPUTS``) does not strand the stores written
before: a file whose header is the new one without those columns is rewritten once with the new header (their
cells empty in the older rows; written to a temporary file, forced to disk, then renamed over the old one).
"""

from __future__ import annotations

import csv
import io
import math
import os
from pathlib import Path

from capacity.errors import InputError

POINTS = "points.csv"
FAILURES = "failures.csv"


def _cell(value):
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ("nan" if math.isnan(value) else repr(value))
    if value is None:
        return ""
    return str(value)


def parse_cell(text: str):
    """A CSV cell back to a float where it is one (exact: floats are written with ``repr``), else the text."""
    try:
        return float(text)
    except ValueError:
        return text


class RowFile:
    """An append-only CSV file with a fixed header; every ``append`` is flushed and fsync'ed."""

    def __init__(self, path: Path, columns: list[str], added=()):
        self.path = Path(path)
        self.columns = list(columns)
        self.added = [c for c in added if c in self.columns]
        self.rows = self._read()
        self._handle = None

    def _read(self) -> list[dict]:
        if not self.path.exists():
            return []
        raw = self.path.read_bytes()
        if raw and not raw.endswith(b"\n"):  # a row cut short by a kill: drop it now, and from the file
            raw = raw[: raw.rfind(b"\n") + 1]
            with open(self.path, "r+b") as fh:
                fh.truncate(len(raw))
        lines = list(csv.reader(io.StringIO(raw.decode("utf-8"))))
        if not lines:
            return []
        if self.added and lines[0] == [c for c in self.columns if c not in self.added]:
            lines = self._upgrade(lines)
        if lines[0] != self.columns:
            raise InputError("--out", str(self.path.parent), f"{self.path.name} holds a sweep with other columns "
                             f"({', '.join(lines[0][:6])}...)", "give another --out folder for this sweep, or "
                             "vary the same fields with the same measure (a file written by an older version "
                             "with other output columns: move it away to recompute)")
        return [dict(zip(self.columns, line, strict=True)) for line in lines[1:] if len(line) == len(self.columns)]

    def _upgrade(self, lines: list[list[str]]) -> list[list[str]]:
        """The file rewritten with the current header, empty cells in the added columns of its rows."""
        old = lines[0]
        rows = [dict(zip(old, line, strict=True)) for line in lines[1:] if len(line) == len(old)]
        new = [self.columns] + [[r.get(c, "") for c in self.columns] for r in rows]
        buf = io.StringIO()
        csv.writer(buf, lineterminator="\n").writerows(new)
        tmp = self.path.with_name(self.path.name + ".upgrade")
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            fh.write(buf.getvalue())
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, self.path)
        return new

    def append(self, row: dict) -> None:
        if self._handle is None:
            new = not self.path.exists() or self.path.stat().st_size == 0
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._handle = open(self.path, "a", newline="", encoding="utf-8")
            if new:
                self._write(self.columns)
        self._write([_cell(row.get(c)) for c in self.columns])
        self.rows.append({c: _cell(row.get(c)) for c in self.columns})

    def _write(self, cells) -> None:
        buf = io.StringIO()
        csv.writer(buf, lineterminator="\n").writerow(cells)
        self._handle.write(buf.getvalue())
        self._handle.flush()
        os.fsync(self._handle.fileno())

    def close(self) -> None:
        if self._handle is not None:
            self._handle.close()
            self._handle = None


class Store:
    """The folder of one sweep: finished points (``points.csv``) and failed attempts (``failures.csv``)."""

    def __init__(self, folder, labels: list[str], outputs: list[str], added=()):
        self.folder = Path(folder)
        self.labels = list(labels)
        self.outputs = list(outputs)
        self.points = RowFile(self.folder / POINTS, ["point_id", *labels, *outputs, "seed", "seconds",
                                                            "cpu_seconds"], added)
        self.failures = RowFile(self.folder / FAILURES, ["point_id", *labels, "error", "seconds"])

    def finished(self) -> dict[str, dict]:
        """point id -> its row (values parsed back to floats where they are numbers)."""
        return {r["point_id"]: {k: (v if k == "point_id" else parse_cell(v)) for k, v in r.items()}
                for r in self.points.rows}

    def add_point(self, pid: str, coords: dict, outputs: dict, seed: int, seconds: float,
                  cpu_seconds: float) -> None:
        self.points.append({"point_id": pid, **coords, **outputs, "seed": seed, "seconds": round(seconds, 4),
                            "cpu_seconds": round(cpu_seconds, 4)})

    def add_failure(self, pid: str, coords: dict, error: str, seconds: float) -> None:
        self.failures.append({"point_id": pid, **coords, "error": error, "seconds": round(seconds, 4)})

    def close(self) -> None:
        self.points.close()
        self.failures.close()

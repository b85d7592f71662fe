"""The measurement ledger: what was measured, from which file content, with which settings.

An SQLite database (standard library) with one row per (file content, settings):
the file's SHA-256, size, modification time and last path, the measurement row
(the record's CSV columns, as JSON) or the error. Each result is committed in its
own transaction, so a run killed at any moment loses at most the maps in flight
and the next run resumes where it stopped. Only the process that runs the batch
writes the ledger; workers only measure.

A file whose path, size and modification time match the ledger is taken to have
the content recorded (its hash is not computed again); any other file is hashed
(serial runs hash it first, so a renamed or copied map is recognised by its
content and not measured again; parallel runs hash it in the worker beside the
measurement, so the main process never becomes the bottleneck).
"""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
import time
from pathlib import Path

from .errors import PolarfluxError

__all__ = ["Ledger", "default_ledger_path", "file_digest", "MEASURE_VERSION"]

#: Bumped whenever the measurement itself changes, so old results are not reused.
MEASURE_VERSION = 3  # 2: timeless maps refused, time from the FITS standard keywords; 3: line-of-sight B0 per column, latitude bands and fill uncertainty

_SCHEMA = """
CREATE TABLE IF NOT EXISTS measurements (
    digest TEXT NOT NULL,
    settings TEXT NOT NULL,
    size INTEGER NOT NULL,
    path TEXT NOT NULL,
    mtime_ns INTEGER NOT NULL,
    row TEXT,
    error TEXT,
    measured_at TEXT NOT NULL,
    PRIMARY KEY (digest, settings)
);
CREATE INDEX IF NOT EXISTS by_path ON measurements (path, size, mtime_ns);
"""


def default_ledger_path() -> Path:
    """The ledger in the user's cache folder ($XDG_CACHE_HOME or ~/.cache)/polarflux/ledger.sqlite."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "polarflux" / "ledger.sqlite"


def file_digest(path: str, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while True:
            block = handle.read(chunk)
            if not block:
                break
            digest.update(block)
    return digest.hexdigest()


def settings_key(cap_latitude: float, fill: str, field: str, plane=None) -> str:
    settings = {"cap": float(cap_latitude), "fill": fill, "field": field, "version": MEASURE_VERSION}
    if plane is not None:  # only cubes measured by plane carry it, so other keys stay as they were
        settings["plane"] = plane
    return json.dumps(settings, sort_keys=True)


class Ledger:
    """A measurement ledger in the SQLite file ``path`` (made if absent)."""

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = Path(path)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._db = sqlite3.connect(str(self.path), timeout=60.0)
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=NORMAL")
            self._db.executescript(_SCHEMA)
            self._db.commit()
        except (sqlite3.Error, OSError) as exc:
            raise PolarfluxError(f"{self.path}: cannot open the measurement ledger ({exc})") from None

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> Ledger:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def known_digest(self, path: str, stat: os.stat_result) -> str | None:
        """The content hash recorded for ``path`` when its size and mtime still match, else None."""
        hit = self._db.execute(
            "SELECT digest FROM measurements WHERE path = ? AND size = ? AND mtime_ns = ? LIMIT 1",
            (path, stat.st_size, stat.st_mtime_ns),
        ).fetchone()
        return hit[0] if hit else None

    def lookup(self, digest: str, settings: str):
        """(row dict or None, error or None), or None when this content was not measured with these settings."""
        hit = self._db.execute(
            "SELECT row, error FROM measurements WHERE digest = ? AND settings = ?", (digest, settings)
        ).fetchone()
        if hit is None:
            return None
        return (json.loads(hit[0]) if hit[0] else None), hit[1]

    def store(self, digest: str, settings: str, path: str, stat: os.stat_result, row: dict | None,
              error: str | None) -> None:
        """Record one result in its own transaction."""
        with self._db:
            self._db.execute(
                "INSERT OR REPLACE INTO measurements VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (digest, settings, stat.st_size, path, stat.st_mtime_ns,
                 None if row is None else json.dumps(row), error, time.strftime("%Y-%m-%dT%H:%M:%S")),
            )

    def count(self) -> int:
        return int(self._db.execute("SELECT COUNT(*) FROM measurements").fetchone()[0])

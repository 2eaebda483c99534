"""Persistent weight cache: exact per-graph results shared across lattices, runs and processes.

The cache is one SQLite file, ``<cache dir>/weights.sqlite``, holding text values under text keys.  The
caller builds the key (canonical graph form, model, spins, format version) and the value (JSON of exact
fractions); this module only stores them safely:

- every row carries the sha256 of its value; a row whose checksum does not match is reported once with a
  warning and deleted, so the caller recomputes it;
- WAL journal, a busy timeout and ``INSERT OR IGNORE`` let several processes fill the same cache at once;
  weights are deterministic, so a second write of a key is dropped (with a loud warning if it differs);
- each ``put_many`` is one transaction: a run killed at any moment keeps every batch committed before.

With ``synchronous=NORMAL`` a committed batch survives the death of the process; after a power cut the
last few batches may be lost, but the file stays consistent.  SQLite's locking needs a local file system.
"""

from __future__ import annotations

import hashlib
import os
import sqlite3
import time
import warnings
from collections.abc import Iterable, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import platformdirs

from hte.errors import InputError

CACHE_FILE_NAME = "weights.sqlite"
BUSY_TIMEOUT_SECONDS = 60.0
_QUERY_CHUNK = 500  # keys per SELECT, below SQLite's limit on bound parameters

_SCHEMA = "CREATE TABLE IF NOT EXISTS weights (key TEXT PRIMARY KEY, value TEXT NOT NULL, sha256 TEXT NOT NULL)"


def default_cache_dir() -> Path:
    """Return the weight-cache folder: ``$HTE_CACHE_DIR`` if set, else the user cache directory of hte."""
    return Path(os.environ.get("HTE_CACHE_DIR") or platformdirs.user_cache_dir("hte"))


def _checksum(value: str) -> str:
    return hashlib.sha256(value.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class CacheStats:
    """Size of a weight cache: number of rows and bytes on disk (database file plus its write-ahead log)."""

    path: Path
    rows: int
    size_bytes: int


class WeightCache:
    """Key-value store of exact per-graph results in ``<directory>/weights.sqlite``.

    Parameters
    ----------
    directory : str or Path, optional
        Cache folder, created if missing; default :func:`default_cache_dir`.

    Raises
    ------
    InputError
        If the folder cannot be created or written, or the cache file is not a weight cache.

    Notes
    -----
    Open one ``WeightCache`` per process (a connection must not cross ``fork``).  Use it as a context
    manager, or call :meth:`close`.
    """

    def __init__(self, directory: str | os.PathLike | None = None):
        self.directory = Path(directory if directory is not None else default_cache_dir()).absolute()
        self.path = self.directory / CACHE_FILE_NAME
        self._connection = None
        try:
            self.directory.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(
                f"cannot create the weight-cache folder {self.directory}: {exc.strerror or exc}. "
                "Set HTE_CACHE_DIR to a writable folder."
            ) from exc
        for target in (self.directory, self.path):
            if target.exists() and not os.access(target, os.W_OK):
                raise InputError(
                    f"cannot write the weight cache: {target} is read-only. Make it writable, "
                    "or set HTE_CACHE_DIR to a writable folder."
                )
        deadline = time.monotonic() + BUSY_TIMEOUT_SECONDS
        while self._connection is None:
            try:
                with self._translate_errors():
                    self._connection = sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_SECONDS, isolation_level=None)
                    self._connection.execute("PRAGMA journal_mode=WAL")
                    self._connection.execute("PRAGMA synchronous=NORMAL")
                    self._connection.execute(_SCHEMA)
                    self._connection.execute("SELECT key, value, sha256 FROM weights LIMIT 0")
            except (InputError, sqlite3.OperationalError) as exc:
                self.close()  # racing openers of a new file get "locked" at once, without the busy timeout
                if isinstance(exc, InputError) or time.monotonic() > deadline:
                    raise
                time.sleep(0.01)

    @contextmanager
    def _translate_errors(self):
        """Turn SQLite errors caused by the cache file or folder into InputError naming them."""
        try:
            yield
        except sqlite3.DatabaseError as exc:
            reason = str(exc)
            if isinstance(exc, sqlite3.OperationalError) and "locked" in reason:
                raise  # busy beyond the timeout: not the user's fault
            if "readonly" in reason or "unable to open" in reason or "disk I/O" in reason:
                advice = "make the folder writable, or set HTE_CACHE_DIR to a writable folder."
                raise InputError(f"cannot write the weight cache {self.path} ({reason}): {advice}") from exc
            raise InputError(
                f"{self.path} is not a valid hte weight cache ({reason}). It holds only recomputable "
                "results: delete the file, or set HTE_CACHE_DIR to another folder."
            ) from exc

    @contextmanager
    def _write_transaction(self):
        with self._translate_errors():
            self._connection.execute("BEGIN IMMEDIATE")
            try:
                yield self._connection
            except BaseException:
                self._connection.rollback()
                raise
            self._connection.execute("COMMIT")

    def get(self, key: str) -> str | None:
        """Return the value stored under `key`, or None if absent or corrupt."""
        return self.get_many([key]).get(key)

    def get_many(self, keys: Iterable[str]) -> dict[str, str]:
        """Return ``{key: value}`` for those `keys` that are stored intact (absent and corrupt ones omitted)."""
        keys = list(dict.fromkeys(keys))
        found, corrupt = {}, []
        with self._translate_errors():
            for start in range(0, len(keys), _QUERY_CHUNK):
                chunk = keys[start : start + _QUERY_CHUNK]
                marks = ",".join("?" * len(chunk))
                rows = self._connection.execute(f"SELECT key, value, sha256 FROM weights WHERE key IN ({marks})", chunk)
                for key, value, checksum in rows:
                    if _checksum(value) == checksum:
                        found[key] = value
                    else:
                        corrupt.append((key, value, checksum))
        if corrupt:
            with self._write_transaction() as db:
                db.executemany("DELETE FROM weights WHERE key = ? AND value = ? AND sha256 = ?", corrupt)
            self._warn(corrupt, "failed their checksum and were deleted; they will be recomputed")
        return found

    def put(self, key: str, value: str) -> bool:
        """Store `value` under `key` unless the key is present; return True if a row was added."""
        return self.put_many([(key, value)]) == 1

    def put_many(self, items: Mapping[str, str] | Iterable[tuple[str, str]]) -> int:
        """Store many ``(key, value)`` pairs in one transaction; return the number of rows added.

        A key already stored keeps its row.  If that row fails its checksum it is replaced; if it holds a
        different value a warning is issued, since results are deterministic and must agree.
        """
        pairs = list(items.items() if isinstance(items, Mapping) else items)
        for key, value in pairs:
            if not isinstance(key, str) or not isinstance(value, str):
                raise TypeError(f"weight-cache keys and values must be str, got {type(key)} and {type(value)}")
        added, corrupt, conflicting = 0, [], []
        with self._write_transaction() as db:
            for key, value in pairs:
                checksum = _checksum(value)
                cursor = db.execute("INSERT OR IGNORE INTO weights VALUES (?, ?, ?)", (key, value, checksum))
                if cursor.rowcount == 1:
                    added += 1
                    continue
                stored, stored_checksum = db.execute("SELECT value, sha256 FROM weights WHERE key = ?", (key,)).fetchone()
                if _checksum(stored) != stored_checksum:
                    db.execute("UPDATE weights SET value = ?, sha256 = ? WHERE key = ?", (value, checksum, key))
                    corrupt.append((key,))
                elif stored != value:
                    conflicting.append((key,))
        if corrupt:
            self._warn(corrupt, "failed their checksum and were overwritten with the new values")
        if conflicting:
            self._warn(
                conflicting,
                "were already stored with DIFFERENT values; the stored ones were kept. Weights are "
                "deterministic, so this points to a bug or to keys that do not identify the computation",
            )
        return added

    def _warn(self, rows: list[tuple], what: str) -> None:
        keys = ", ".join(repr(row[0]) for row in rows[:3]) + (", ..." if len(rows) > 3 else "")
        warnings.warn(f"weight cache {self.path}: {len(rows)} row(s) ({keys}) {what}.", RuntimeWarning, stacklevel=3)

    def __len__(self) -> int:
        with self._translate_errors():
            return self._connection.execute("SELECT COUNT(*) FROM weights").fetchone()[0]

    def stats(self) -> CacheStats:
        """Return the number of rows and the bytes on disk of the cache."""
        files = [self.path, self.path.with_name(CACHE_FILE_NAME + "-wal")]
        return CacheStats(self.path, len(self), sum(f.stat().st_size for f in files if f.exists()))

    def prune(self, prefix: str) -> int:
        """Delete every row whose key starts with `prefix` (all rows if it is empty); return how many."""
        with self._write_transaction() as db:
            cursor = db.execute("DELETE FROM weights WHERE substr(key, 1, ?) = ?", (len(prefix), prefix))
        return cursor.rowcount

    def close(self) -> None:
        """Close the connection; committed data is on disk already."""
        if self._connection is not None:
            self._connection.close()
            self._connection = None

    def __enter__(self) -> WeightCache:
        return self

    def __exit__(self, *exc_info) -> None:
        self.close()

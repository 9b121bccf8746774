"""The results store: one SQLite file per study, in WAL mode.

Schema (version 1)
------------------
``meta(key TEXT PRIMARY KEY, value TEXT)``
    ``format = lyapbench-store``, ``schema_version = 1``, ``created`` (UTC).
    A file without this row is not ours and is refused.
``manifests(id INTEGER PRIMARY KEY, created TEXT, body TEXT)``
    One row per ``run`` invocation; ``body`` is the JSON manifest
    (:mod:`suite.manifest`).
``cells(key TEXT PRIMARY KEY, spec TEXT, system, task, learner, fraction, noise,
physics, seed, status, error, cost TEXT, info TEXT, started, finished, attempts,
manifest_id)``
    One row per finished cell; ``spec`` is the cell's JSON spec, ``cost`` and
    ``info`` JSON objects; ``status`` one of :data:`suite.cell.STATUSES`
    (a CHECK constraint).
``metrics(cell TEXT REFERENCES cells(key), metric TEXT, horizon REAL, value REAL)``
    Accuracy figures, ``horizon`` NULL where the figure is not a curve; a
    UNIQUE index on ``(cell, metric, IFNULL(horizon, -1))`` forbids duplicates
    (a plain UNIQUE would let NULL horizons repeat). SQLite stores NaN as NULL,
    so a NULL ``value`` reads back as NaN.

Atomicity
---------
A cell's row and its metric rows are written in one transaction
(:meth:`Store.record`); a sweep killed at any moment loses at most the cells in
flight, and a cell is either complete in the store or absent. The cell key is
the primary key: recording a cell twice is refused, never duplicated.

Writers
-------
Only the runner's parent process writes. Two ``run`` processes on one store
are prevented by an exclusive ``fcntl.flock`` on a sidecar file
``<store>.lock``, held for the whole run (:meth:`Store.open` with
``lock=True``); the second run refuses with a clear message instead of
waiting. The kernel drops the lock when its holder exits, even by SIGKILL,
so no stale lock is ever left behind. Readers (export, reports) take no lock:
WAL lets them read while a run writes.
"""

from __future__ import annotations

import fcntl
import json
import math
import os
import sqlite3
from datetime import datetime, timezone
from pathlib import Path

from suite.cell import STATUSES, CellOutcome, CellSpec

__all__ = ["Store", "StoreError", "StoreLockedError", "SCHEMA_VERSION", "FORMAT"]

FORMAT = "lyapbench-store"
SCHEMA_VERSION = 1

_SCHEMA = f"""
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE manifests (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    created TEXT NOT NULL,
    body TEXT NOT NULL
);
CREATE TABLE cells (
    key TEXT PRIMARY KEY,
    spec TEXT NOT NULL,
    system TEXT NOT NULL,
    task TEXT NOT NULL,
    learner TEXT NOT NULL,
    fraction REAL NOT NULL,
    noise REAL NOT NULL,
    physics TEXT NOT NULL,
    seed INTEGER NOT NULL,
    status TEXT NOT NULL CHECK (status IN ({", ".join(repr(s) for s in STATUSES)})),
    error TEXT NOT NULL DEFAULT '',
    cost TEXT NOT NULL DEFAULT '{{}}',
    info TEXT NOT NULL DEFAULT '{{}}',
    started TEXT,
    finished TEXT NOT NULL,
    attempts INTEGER NOT NULL DEFAULT 1,
    manifest_id INTEGER REFERENCES manifests(id)
);
CREATE TABLE metrics (
    cell TEXT NOT NULL REFERENCES cells(key),
    metric TEXT NOT NULL,
    horizon REAL,
    value REAL
);
CREATE UNIQUE INDEX metrics_unique ON metrics (cell, metric, IFNULL(horizon, -1.0));
"""


class StoreError(ValueError):
    """A file that is not a lyapbench store, is corrupt, or has another schema version."""


class StoreLockedError(StoreError):
    """Another ``run`` holds the store."""


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def _json(obj) -> str:
    def clean(o):
        if isinstance(o, float) and not math.isfinite(o):
            return repr(o)  # JSON has no NaN/inf; keep them readable
        if isinstance(o, dict):
            return {str(k): clean(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [clean(v) for v in o]
        if hasattr(o, "item") and callable(o.item):  # numpy scalars
            return clean(o.item())
        return o
    return json.dumps(clean(obj), sort_keys=True, default=str)


def _float_or_none(v):
    if v is None:
        return None
    v = float(v)
    return None if math.isnan(v) else v


class Store:
    """A lyapbench results store (see the module docstring).

    Use :meth:`open`; the object is a context manager that closes the
    connection and releases the lock.
    """

    def __init__(self, path: Path, conn: sqlite3.Connection, lock_fd: int | None):
        self.path = path
        self._conn = conn
        self._lock_fd = lock_fd
        self._inode = self._identity()

    def _identity(self):
        try:
            st = os.stat(self.path)
        except OSError:
            return None
        return (st.st_dev, st.st_ino)

    def _check_still_there(self) -> None:
        """Refuse to write into a store whose file was removed or replaced since it was opened.

        SQLite would go on writing into the unlinked file and every result
        would be lost without a word.
        """
        if self._inode is None:
            self._inode = self._identity()
        elif self._identity() != self._inode:
            raise StoreError(f"store {str(self.path)!r} was removed or replaced during the run; "
                             "the results of this run cannot be saved")

    def _write_failed(self, exc: sqlite3.Error) -> StoreError:
        if self._conn.in_transaction:
            self._conn.execute("ROLLBACK")
        return StoreError(f"store {str(self.path)!r}: cannot write ({exc}); the cells committed before "
                          "are kept: fix the cause and run again with --resume")

    # ------------------------------------------------------------------ opening
    @classmethod
    def open(cls, path, *, create: bool = False, lock: bool = False, readonly: bool = False) -> "Store":
        """Open (or with ``create`` make) the store at ``path``.

        Parameters
        ----------
        create : bool
            Create the file if it does not exist (its folder is created too).
        lock : bool
            Take the exclusive run lock (``<path>.lock``) first; raises
            :class:`StoreLockedError` when another run holds it.
        readonly : bool
            Open for reading only (export, reports).

        Raises
        ------
        StoreError
            Not a lyapbench store, corrupt, or another schema version.
        FileNotFoundError
            ``path`` does not exist and ``create`` is false.
        """
        path = Path(path)
        if path.is_dir():
            raise StoreError(f"store {str(path)!r} is a folder, expected a file")
        exists = path.exists()
        if not exists and not create:
            raise FileNotFoundError(f"store {str(path)!r} does not exist")
        if exists:
            try:
                cls._check_header(path)
            except StoreError:
                if lock:  # another run may be creating it right now: say so, not "not a store"
                    cls._raise_if_locked(path)
                raise
        elif not readonly:
            try:
                path.parent.mkdir(parents=True, exist_ok=True)
            except OSError as exc:  # a file where a folder should be, no permission, ...
                raise StoreError(f"store {str(path)!r}: cannot create its folder "
                                 f"({exc.strerror or type(exc).__name__})") from None
        lock_fd = None
        if lock:
            path.parent.mkdir(parents=True, exist_ok=True)
            lock_fd = cls._take_lock(path)
        try:
            if readonly:
                conn = sqlite3.connect(path.resolve().as_uri() + "?mode=ro", uri=True,
                                       isolation_level=None)
            else:
                path.parent.mkdir(parents=True, exist_ok=True)
                conn = sqlite3.connect(str(path), isolation_level=None, timeout=30)
            store = cls(path, conn, lock_fd)
            if exists:
                store._check_meta()
                if not readonly:
                    conn.execute("PRAGMA journal_mode=WAL")
            else:
                store._create()
            conn.execute("PRAGMA foreign_keys=ON")
            return store
        except sqlite3.DatabaseError as exc:
            if lock_fd is not None:
                os.close(lock_fd)
            raise StoreError(f"store {str(path)!r} is corrupt or not a lyapbench store ({exc})") from None
        except BaseException:
            if lock_fd is not None:
                os.close(lock_fd)
            raise

    @staticmethod
    def _check_header(path: Path) -> None:
        try:
            with open(path, "rb") as fh:
                head = fh.read(16)
        except OSError as exc:
            raise StoreError(f"store {str(path)!r} cannot be read ({exc.strerror})") from None
        if head != b"SQLite format 3\x00":
            raise StoreError(f"{str(path)!r} is not a lyapbench store (not an SQLite file)")

    @staticmethod
    def _raise_if_locked(path: Path) -> None:
        """Raise :class:`StoreLockedError` if a run holds ``path``'s lock (creates nothing)."""
        try:
            fd = os.open(path.with_name(path.name + ".lock"), os.O_RDONLY)
        except OSError:
            return
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = os.read(fd, 64).decode(errors="replace").strip()
            who = f" (pid {holder})" if holder else ""
            raise StoreLockedError(
                f"store {str(path)!r} is in use by another lyapbench run{who}; "
                "wait for it to finish or use another --store") from None
        finally:
            os.close(fd)

    @staticmethod
    def _take_lock(path: Path) -> int:
        lock_path = path.with_name(path.name + ".lock")
        try:
            fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:  # a read-only or vanished folder
            raise StoreError(f"store {str(path)!r}: cannot create its lock file {str(lock_path)!r} "
                             f"({exc.strerror or type(exc).__name__})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            try:
                holder = os.read(fd, 64).decode(errors="replace").strip()
            finally:
                os.close(fd)
            who = f" (pid {holder})" if holder else ""
            raise StoreLockedError(
                f"store {str(path)!r} is in use by another lyapbench run{who}; "
                "wait for it to finish or use another --store") from None
        os.ftruncate(fd, 0)
        os.write(fd, str(os.getpid()).encode())
        return fd

    def _check_meta(self) -> None:
        try:
            rows = dict(self._conn.execute("SELECT key, value FROM meta").fetchall())
        except sqlite3.DatabaseError:
            raise StoreError(f"{str(self.path)!r} is not a lyapbench store (no meta table)") from None
        if rows.get("format") != FORMAT:
            raise StoreError(f"{str(self.path)!r} is not a lyapbench store")
        if rows.get("schema_version") != str(SCHEMA_VERSION):
            raise StoreError(f"store {str(self.path)!r} has schema version {rows.get('schema_version')}, "
                             f"this lyapbench reads version {SCHEMA_VERSION}")

    def _create(self) -> None:
        c = self._conn
        c.execute("PRAGMA journal_mode=WAL")
        c.execute("BEGIN IMMEDIATE")
        try:
            # executescript would commit on its own: run the statements one by one
            for stmt in _SCHEMA.split(";"):
                if stmt.strip():
                    c.execute(stmt)
            c.executemany("INSERT INTO meta(key, value) VALUES (?, ?)",
                          [("format", FORMAT), ("schema_version", str(SCHEMA_VERSION)),
                           ("created", _now())])
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise

    # ------------------------------------------------------------------- closing
    def close(self) -> None:
        if self._conn is not None:
            self._conn.close()
            self._conn = None
        if self._lock_fd is not None:
            os.close(self._lock_fd)  # closing the descriptor releases the flock
            self._lock_fd = None

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # ------------------------------------------------------------------- writing
    def add_manifest(self, manifest: dict) -> int:
        self._check_still_there()
        try:
            cur = self._conn.execute("INSERT INTO manifests(created, body) VALUES (?, ?)",
                                     (_now(), _json(manifest)))
        except sqlite3.OperationalError as exc:  # disk full, read-only file, I/O error
            raise self._write_failed(exc) from None
        return int(cur.lastrowid)

    def record(self, key: str, spec: CellSpec, outcome: CellOutcome, *, started: str | None = None,
               finished: str | None = None, attempts: int = 1, manifest_id: int | None = None) -> None:
        """Write one finished cell and its metric rows in a single transaction.

        Raises
        ------
        sqlite3.IntegrityError
            The cell is already recorded, or two metric rows share
            ``(metric, horizon)``; nothing is written then.
        ValueError
            ``outcome.status`` is not one of :data:`STATUSES`.
        """
        if outcome.status not in STATUSES:
            raise ValueError(f"cell status {outcome.status!r} is not one of {', '.join(STATUSES)}")
        self._check_still_there()
        c = self._conn
        c.execute("BEGIN IMMEDIATE")
        try:
            c.execute(
                "INSERT INTO cells(key, spec, system, task, learner, fraction, noise, physics, seed, "
                "status, error, cost, info, started, finished, attempts, manifest_id) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (key, _json(spec.canonical()), spec.system, spec.task, spec.learner,
                 float(spec.fraction), float(spec.noise), spec.physics, int(spec.seed),
                 outcome.status, str(outcome.error or ""), _json(outcome.cost or {}),
                 _json(outcome.info or {}), started, finished or _now(), int(attempts), manifest_id))
            c.executemany(
                "INSERT INTO metrics(cell, metric, horizon, value) VALUES (?, ?, ?, ?)",
                [(key, str(m.metric), _float_or_none(m.horizon), _float_or_none(m.value))
                 for m in outcome.metrics])
            c.execute("COMMIT")
        except sqlite3.OperationalError as exc:  # disk full, read-only file, I/O error
            raise self._write_failed(exc) from None
        except BaseException:
            if c.in_transaction:  # a failed COMMIT may have rolled back already
                c.execute("ROLLBACK")
            raise

    # ------------------------------------------------------------------- reading
    def finished_keys(self) -> set[str]:
        return {r[0] for r in self._conn.execute("SELECT key FROM cells")}

    def count(self) -> int:
        return int(self._conn.execute("SELECT COUNT(*) FROM cells").fetchone()[0])

    def status_counts(self) -> dict[str, int]:
        return dict(self._conn.execute("SELECT status, COUNT(*) FROM cells GROUP BY status").fetchall())

    def cells(self) -> list[dict]:
        """Every cell row as a dict (``spec``, ``cost`` and ``info`` decoded from JSON)."""
        cur = self._conn.execute("SELECT * FROM cells ORDER BY rowid")
        names = [d[0] for d in cur.description]
        out = []
        for row in cur:
            d = dict(zip(names, row))
            for k in ("spec", "cost", "info"):
                d[k] = json.loads(d[k]) if d[k] else {}
            out.append(d)
        return out

    def metrics(self) -> list[tuple]:
        """Every metric row as ``(cell, metric, horizon, value)``; NaN for a NULL value."""
        return [(c, m, h, float("nan") if v is None else v)
                for c, m, h, v in self._conn.execute(
                    "SELECT cell, metric, horizon, value FROM metrics ORDER BY rowid")]

    def manifests(self) -> list[dict]:
        return [{"id": i, "created": cr, **json.loads(body)}
                for i, cr, body in self._conn.execute("SELECT id, created, body FROM manifests ORDER BY id")]

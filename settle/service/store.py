"""The site service's store: one SQLite database in the data folder (WAL mode, every write one transaction).

Tables
    tokens    name, sha256 of the token (the token itself is never stored), created, revoked (NULL while valid).
    batches   every accepted upload: who (token name), when (UTC), the sha256 of the file, rows kept, rows added.
    readings  one row per reading, unique by (point_id, date, drive): posting a reading again adds nothing, and a
              late survey may fill in an earlier day of a point's series. Each keeps the batch and file line it came in.
              A point keeps the place it was first stored at: a row of a later batch that places it more than
              `SAME_PLACE_M` away (plan or depth) is left out with the reason, as within one file.
    runs      each refit: when it started and ended, its state, its message, the readings it saw, and its fits and
              forecast (JSON) when it ended well.

SQLite is the embedded default: no server to run, one file to back up, and its transactions make a batch all in or
not in at all, also when the process is killed mid-write (the write-ahead log is rolled back on the next open).
Concurrent writers wait for one another (`busy_timeout`), so twenty clients posting at once all get their turn.
"""
from __future__ import annotations

import hashlib
import hmac
import json
import math
import secrets
import sqlite3
import time
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..inputs.readings import SAME_PLACE_M, Readings

DATABASE = "site.sqlite"
#: How long a writer waits for another's transaction before giving up. [ms]
BUSY_TIMEOUT_MS = 60_000
#: Token names: letters, digits, '-', '_', '.', 1 to 64 characters (they appear in listings and in batches).
TOKEN_NAME_CHARS = set("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789-_.")
TOKEN_NAME_MAX = 64

SCHEMA = """
CREATE TABLE IF NOT EXISTS tokens (
    name TEXT PRIMARY KEY,
    token_sha256 TEXT NOT NULL UNIQUE,
    created_utc TEXT NOT NULL,
    revoked_utc TEXT
);
CREATE TABLE IF NOT EXISTS batches (
    batch INTEGER PRIMARY KEY AUTOINCREMENT,
    token_name TEXT NOT NULL,
    received_utc TEXT NOT NULL,
    file_sha256 TEXT NOT NULL,
    rows_kept INTEGER NOT NULL,
    rows_added INTEGER NOT NULL,
    rows_left_out INTEGER NOT NULL
);
CREATE TABLE IF NOT EXISTS readings (
    point_id TEXT NOT NULL,
    date_utc TEXT NOT NULL,
    drive TEXT NOT NULL,
    settlement_mm REAL NOT NULL,
    face_chainage_m REAL NOT NULL,
    x_m REAL NOT NULL,
    y_m REAL NOT NULL,
    depth_m REAL NOT NULL,
    batch INTEGER NOT NULL REFERENCES batches(batch),
    line INTEGER NOT NULL,
    PRIMARY KEY (point_id, date_utc, drive)
);
CREATE TABLE IF NOT EXISTS runs (
    run INTEGER PRIMARY KEY AUTOINCREMENT,
    started_utc TEXT NOT NULL,
    finished_utc TEXT,
    state TEXT NOT NULL,
    message TEXT NOT NULL DEFAULT '',
    readings INTEGER NOT NULL DEFAULT 0,
    fits_json TEXT,
    forecast_json TEXT
);
"""


def utc_now() -> str:
    """Now, UTC, ISO 8601 to the second with a Z."""
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class TokenRow:
    name: str
    created_utc: str
    revoked_utc: str | None


@dataclass(frozen=True)
class Stored:
    """What one accepted upload did: its batch number, the rows kept (by the file's checks and the store's), those
    new to the store, and the rows the store left out, (line, reason)."""

    batch: int
    kept: int
    added: int
    left_out: tuple[tuple[int, str], ...] = ()


class Store:
    """The data folder's database. Each call opens its own connection, so threads and processes may share it."""

    def __init__(self, folder, create: bool = False):
        self.folder = Path(folder)
        self.path = self.folder / DATABASE
        if not self.folder.is_dir():
            if not create:
                raise InputError(f"--data {self.folder}: no such folder; `settle token add NAME --data DIR` or "
                                 "`settle serve` creates it")
            from gis_out.site_folder import make_data_folder

            make_data_folder(self.folder)
        with self._connect() as db:
            db.execute("PRAGMA journal_mode=WAL")
            db.executescript(SCHEMA)

    @contextmanager
    def _connect(self):
        try:
            db = sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None)
        except sqlite3.Error as exc:
            raise InputError(f"--data {self.folder}: the database {DATABASE} cannot be opened: {exc}") from None
        try:
            db.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
            db.execute("PRAGMA synchronous=FULL")
            db.execute("PRAGMA foreign_keys=ON")
            yield db
        except sqlite3.DatabaseError as exc:
            raise InputError(f"--data {self.folder}: the database {DATABASE} is not usable: {exc}") from None
        finally:
            db.close()

    @contextmanager
    def _transaction(self):
        """One write transaction: all of it is stored, or none (BEGIN IMMEDIATE takes the write lock at once)."""
        with self._connect() as db:
            db.execute("BEGIN IMMEDIATE")
            try:
                yield db
            except BaseException:
                db.execute("ROLLBACK")
                raise
            db.execute("COMMIT")

    # ------------------------------------------------------------------------------------------------- tokens
    def add_token(self, name: str) -> str:
        """A new write token for `name`, returned once; only its sha256 is stored."""
        check_token_name(name)
        token = secrets.token_urlsafe(32)
        with self._transaction() as db:
            if db.execute("SELECT 1 FROM tokens WHERE name = ?", (name,)).fetchone():
                raise InputError(f"token {name!r} exists already; revoke it first or choose another name")
            db.execute("INSERT INTO tokens (name, token_sha256, created_utc) VALUES (?, ?, ?)",
                       (name, token_digest(token), utc_now()))
        return token

    def revoke_token(self, name: str) -> None:
        with self._transaction() as db:
            found = db.execute("SELECT revoked_utc FROM tokens WHERE name = ?", (name,)).fetchone()
            if found is None:
                raise InputError(f"no token named {name!r}; `settle token list --data DIR` lists them")
            if found[0] is None:
                db.execute("UPDATE tokens SET revoked_utc = ? WHERE name = ?", (utc_now(), name))

    def tokens(self) -> list[TokenRow]:
        with self._connect() as db:
            rows = db.execute("SELECT name, created_utc, revoked_utc FROM tokens ORDER BY name").fetchall()
        return [TokenRow(*r) for r in rows]

    def token_name(self, token: str) -> str | None:
        """The name of a valid (not revoked) token, or None. Compared by digest in constant time."""
        digest = token_digest(token)
        with self._connect() as db:
            rows = db.execute("SELECT name, token_sha256 FROM tokens WHERE revoked_utc IS NULL").fetchall()
        for name, stored in rows:
            if hmac.compare_digest(stored, digest):
                return name
        return None

    # ----------------------------------------------------------------------------------------------- readings
    def store_readings(self, readings: Readings, token_name: str, file_sha256: str) -> Stored:
        """One upload's readings (as the checks of `settle.inputs.readings` kept them) stored in one transaction:
        a reading already stored (same point, date and drive) is not stored again."""
        names = readings.drive_names
        rows = [(str(p), _iso(d), names[int(k)], float(s), float(f), float(x), float(y), float(z), int(line))
                for p, d, k, s, f, x, y, z, line in zip(
                    readings.point_id, readings.date, readings.drive, readings.settlement_mm,
                    readings.face_chainage_m, readings.x_m, readings.y_m, readings.depth_m, readings.line)]
        with self._transaction() as db:
            rows, moved = _keep_places(db, rows)
            cursor = db.execute(
                "INSERT INTO batches (token_name, received_utc, file_sha256, rows_kept, rows_added, rows_left_out) "
                "VALUES (?, ?, ?, ?, 0, ?)", (token_name, utc_now(), file_sha256, len(rows),
                                              readings.left_out_count + len(moved)))
            batch = cursor.lastrowid
            before = db.total_changes
            db.executemany(
                "INSERT OR IGNORE INTO readings (point_id, date_utc, drive, settlement_mm, face_chainage_m, x_m, y_m, "
                "depth_m, batch, line) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [r[:8] + (batch, r[8]) for r in rows])
            added = db.total_changes - before
            db.execute("UPDATE batches SET rows_added = ? WHERE batch = ?", (added, batch))
        return Stored(batch=batch, kept=len(rows), added=added, left_out=tuple(moved))

    def readings(self, drive_names: tuple[str, ...], point_id: str | None = None) -> Readings | None:
        """Every stored reading (or one point's) as a `Readings`, ordered by point, drive and date; None when there is
        none. Readings of a drive the project no longer has are left aside."""
        query = ("SELECT point_id, date_utc, drive, settlement_mm, face_chainage_m, x_m, y_m, depth_m, line "
                 "FROM readings")
        args: tuple = ()
        if point_id is not None:
            query += " WHERE point_id = ?"
            args = (point_id,)
        with self._connect() as db:
            rows = db.execute(query + " ORDER BY point_id, drive, date_utc", args).fetchall()
        index = {name: k for k, name in enumerate(drive_names)}
        rows = [r for r in rows if r[2] in index]
        if not rows:
            return None
        p, d, k, s, f, x, y, z, line = zip(*rows)
        return Readings(point_id=np.array(p, dtype=object), x_m=np.array(x, dtype=float), y_m=np.array(y, dtype=float),
                        depth_m=np.array(z, dtype=float),
                        date=np.array([v.rstrip("Z") for v in d], dtype="datetime64[s]"),
                        settlement_mm=np.array(s, dtype=float), face_chainage_m=np.array(f, dtype=float),
                        drive=np.array([index[v] for v in k], dtype=int), line=np.array(line, dtype=int),
                        drive_names=tuple(drive_names), source=f"{self.path} readings")

    def reading_summary(self) -> tuple[int, str | None]:
        """(count of readings, the latest reading's date) in the store."""
        with self._connect() as db:
            count, last = db.execute("SELECT COUNT(*), MAX(date_utc) FROM readings").fetchone()
        return int(count), last

    def batches(self) -> list[dict]:
        with self._connect() as db:
            db.row_factory = sqlite3.Row
            return [dict(r) for r in db.execute("SELECT * FROM batches ORDER BY batch")]

    # --------------------------------------------------------------------------------------------------- runs
    def start_run(self, readings: int) -> int:
        with self._transaction() as db:
            return db.execute("INSERT INTO runs (started_utc, state, readings) VALUES (?, 'running', ?)",
                              (utc_now(), readings)).lastrowid

    def end_run(self, run: int, state: str, message: str = "", fits=None, forecast=None) -> None:
        with self._transaction() as db:
            db.execute("UPDATE runs SET finished_utc = ?, state = ?, message = ?, fits_json = ?, forecast_json = ? "
                       "WHERE run = ?", (utc_now(), state, message,
                                         None if fits is None else json.dumps(fits, allow_nan=False),
                                         None if forecast is None else json.dumps(forecast, allow_nan=False), run))

    def latest_run(self, finished_well: bool = False) -> dict | None:
        """The latest run (or the latest that ended well), with its fits and forecast decoded."""
        where = " WHERE state = 'done'" if finished_well else ""
        with self._connect() as db:
            db.row_factory = sqlite3.Row
            row = db.execute(f"SELECT * FROM runs{where} ORDER BY run DESC LIMIT 1").fetchone()
        if row is None:
            return None
        out = dict(row)
        out["fits"] = json.loads(out.pop("fits_json") or "null")
        out["forecast"] = json.loads(out.pop("forecast_json") or "null")
        return out


def _keep_places(db, rows: list[tuple]) -> tuple[list[tuple], list[tuple[int, str]]]:
    """A point keeps its place across batches as within a file: rows that place a stored point more than
    `SAME_PLACE_M` away from where it was stored, in plan or in depth, are left out with the reason."""
    ids = sorted({r[0] for r in rows})
    stored = {}
    for k in range(0, len(ids), 500):
        chunk = ids[k:k + 500]
        found = db.execute("SELECT point_id, x_m, y_m, depth_m, MIN(batch) FROM readings WHERE point_id IN "
                           f"({', '.join('?' * len(chunk))}) GROUP BY point_id", chunk).fetchall()
        stored.update({f[0]: f[1:] for f in found})
    kept, moved = [], []
    for r in rows:
        place = stored.get(r[0])
        if place is not None:
            off = math.hypot(r[5] - place[0], r[6] - place[1])
            deeper = abs(r[7] - place[2])
            if off > SAME_PLACE_M or deeper > SAME_PLACE_M:
                moved.append((r[8], f"point {r[0]} is stored at x {place[0]:.2f}, y {place[1]:.2f}, depth "
                                    f"{place[2]:.2f} m (batch {place[3]}); this row places it {off:.2f} m away in "
                                    f"plan and {deeper:.2f} m in depth (a point keeps its place within "
                                    f"{SAME_PLACE_M:g} m)"))
                continue
        kept.append(r)
    return kept, moved


def check_token_name(name: str) -> None:
    if not name or len(name) > TOKEN_NAME_MAX or not set(name) <= TOKEN_NAME_CHARS:
        raise InputError(f"token name must be 1 to {TOKEN_NAME_MAX} letters, digits, '-', '_' or '.'; got {name!r}")


def _iso(date: np.datetime64) -> str:
    return f"{np.datetime_as_string(np.datetime64(date, 's'), unit='s')}Z"

"""History store: every analysis kept with its raw inputs, in one SQLite file.

A record holds the unit name, the UTC time, the manifest text, every raw sweep
file byte for byte (with its path relative to the manifest and its sha256), the
result JSON and the rfmeas version that produced it. File contents are stored
once per distinct sha256, so re-analysing the same sweeps costs no space.

Writes are one transaction per record in WAL mode, so a crash or Ctrl-C in the
middle of a write leaves the store as it was before that record.

Store references (used by ``rfmeas compare``):

- ``@12``            record 12
- ``@12~``           the record of the same unit before record 12 (``@12~2``: two before)
- ``@latest``        the newest record of any unit
- ``@latest:UNIT``   the newest record of UNIT (``@latest:UNIT~``: the one before it)
- ``@prev``          the record before the other side of the comparison: before a
                     stored record, the one of its unit before it; before a fresh
                     analysis, the newest stored record of that unit
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import logging
import os
import re
import sqlite3
import sys
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from .errors import InputError

log = logging.getLogger(__name__)

DB_ENV_VAR = "RFMEAS_DB"
DEFAULT_LIST_LIMIT = 50
FALLBACK_MANIFEST_NAME = "manifest.toml"


def default_db_path() -> Path:
    """The store file in the user's data folder (env var RFMEAS_DB overrides it)."""
    env = os.environ.get(DB_ENV_VAR)
    if env:
        return Path(env).expanduser()
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Application Support"
    else:
        base = Path(os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share")
    return base / "rfmeas" / "history.sqlite3"


# --- schema -------------------------------------------------------------------------------
# Each step takes the database from version i to i+1 (PRAGMA user_version); a new
# database runs them all. Never edit a released step: append a new one.

def _run_statements(conn: sqlite3.Connection, script: str) -> None:
    """Run ';'-separated statements inside the open transaction (executescript would commit it)."""
    for statement in script.split(";"):
        if statement.strip():
            conn.execute(statement)


def _migrate_to_1(conn: sqlite3.Connection) -> None:
    _run_statements(conn, """
        CREATE TABLE records (
            id INTEGER PRIMARY KEY AUTOINCREMENT,
            unit TEXT NOT NULL,
            recorded_utc TEXT NOT NULL,
            manifest_text TEXT,
            result_json TEXT NOT NULL,
            software_version TEXT NOT NULL
        );
        CREATE TABLE files (
            record_id INTEGER NOT NULL REFERENCES records(id) ON DELETE CASCADE,
            rel_path TEXT NOT NULL,
            sha256 TEXT NOT NULL,
            content BLOB NOT NULL,
            PRIMARY KEY (record_id, rel_path)
        );
        CREATE INDEX records_unit ON records (unit, id);
    """)


def _migrate_to_2(conn: sqlite3.Connection) -> None:
    """Move file contents into a table keyed by sha256 so identical files are kept once."""
    _run_statements(conn, """
        CREATE TABLE blobs (
            sha256 TEXT PRIMARY KEY,
            size_bytes INTEGER NOT NULL,
            content BLOB NOT NULL
        );
        INSERT OR IGNORE INTO blobs (sha256, size_bytes, content)
            SELECT sha256, length(content), content FROM files;
        CREATE TABLE files_v2 (
            record_id INTEGER NOT NULL REFERENCES records(id) ON DELETE CASCADE,
            rel_path TEXT NOT NULL,
            sha256 TEXT NOT NULL REFERENCES blobs(sha256),
            PRIMARY KEY (record_id, rel_path)
        );
        INSERT INTO files_v2 (record_id, rel_path, sha256) SELECT record_id, rel_path, sha256 FROM files;
        DROP TABLE files;
        ALTER TABLE files_v2 RENAME TO files;
    """)


MIGRATIONS = [_migrate_to_1, _migrate_to_2]
SCHEMA_VERSION = len(MIGRATIONS)


# --- results ------------------------------------------------------------------------------

@dataclass(frozen=True)
class StoredFile:
    """One raw input file of a record, byte for byte."""

    path: str
    sha256: str
    content: bytes = field(repr=False)

    def to_dict(self) -> dict:
        return {"path": self.path, "sha256": self.sha256, "size_bytes": len(self.content)}


@dataclass(frozen=True)
class Record:
    """One stored analysis with everything needed to redo it."""

    id: int
    unit: str
    recorded_utc: str
    manifest_text: str | None
    files: tuple[StoredFile, ...]
    result: dict
    software_version: str

    def to_dict(self) -> dict:
        return {
            "id": self.id, "unit": self.unit, "recorded_utc": self.recorded_utc,
            "software_version": self.software_version, "manifest_text": self.manifest_text,
            "files": [f.to_dict() for f in self.files], "result": self.result,
        }


@dataclass(frozen=True)
class RecordSummary:
    """One line of the history list."""

    id: int
    unit: str
    recorded_utc: str
    software_version: str
    file_count: int
    design_status: str
    fit_grade: str | None = None

    def to_dict(self) -> dict:
        return {"id": self.id, "unit": self.unit, "recorded_utc": self.recorded_utc,
                "software_version": self.software_version, "file_count": self.file_count,
                "design_status": self.design_status, "fit_grade": self.fit_grade}


def design_status(result: dict) -> str:
    """'pass', 'fail', 'not judged' or 'no design' from a result's design_check (rfmeas.design)."""
    from .design import design_status as status_of_check

    return status_of_check(result.get("design_check"))


def fit_grade(result: dict) -> str | None:
    """The stored fit-quality grade (good, marginal, poor); None for records made before it existed."""
    fit = result.get("fit")
    quality = fit.get("quality") if isinstance(fit, dict) else None
    grade = quality.get("grade") if isinstance(quality, dict) else None
    return grade if isinstance(grade, str) else None


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


_REF_RE = re.compile(r"^@(?:(?P<id>\d+)|(?P<latest>latest)(?::(?P<unit>.+?))?|(?P<prev>prev))(?P<tilde>~(?P<back>\d*))?$")


def is_reference(text: str) -> bool:
    """True if `text` is meant as a store reference (starts with '@')."""
    return text.startswith("@")


# --- the store ----------------------------------------------------------------------------

class HistoryStore:
    """The history database at `path` (default: default_db_path()). Opened on first use."""

    def __init__(self, path: str | Path | None = None):
        self.path = Path(path).expanduser() if path is not None else default_db_path()
        self._conn: sqlite3.Connection | None = None

    # connection and schema
    def _connect(self) -> sqlite3.Connection:
        if self._conn is not None:
            return self._conn
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            conn = sqlite3.connect(self.path, timeout=30, isolation_level=None)
        except (OSError, sqlite3.Error) as exc:
            raise InputError(f"cannot open the history store: {exc}", path=self.path) from exc
        try:
            version = conn.execute("PRAGMA user_version").fetchone()[0]
            if version > SCHEMA_VERSION:
                raise InputError(
                    f"the history store has schema version {version}, newer than this rfmeas "
                    f"understands ({SCHEMA_VERSION}); upgrade rfmeas to read it", path=self.path)
            conn.execute("PRAGMA journal_mode=WAL")
            conn.execute("PRAGMA synchronous=FULL")
            conn.execute("PRAGMA foreign_keys=ON")
            self._migrate(conn, version)
        except sqlite3.DatabaseError as exc:
            conn.close()
            raise InputError(f"not a readable history store: {exc}", path=self.path) from exc
        except BaseException:
            conn.close()
            raise
        self._conn = conn
        return conn

    def _migrate(self, conn: sqlite3.Connection, version: int) -> None:
        for step, migrate in enumerate(MIGRATIONS[version:], start=version + 1):
            log.info("history store %s: migrating to schema version %d", self.path, step)
            with self._transaction(conn):
                migrate(conn)
                conn.execute(f"PRAGMA user_version = {step}")

    @staticmethod
    @contextlib.contextmanager
    def _transaction(conn: sqlite3.Connection):
        """BEGIN IMMEDIATE ... COMMIT; anything raised (Ctrl-C included) rolls back."""
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")

    def close(self) -> None:
        if self._conn is not None:
            self._conn.close()
            self._conn = None

    def __enter__(self) -> HistoryStore:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def schema_version(self) -> int:
        return self._connect().execute("PRAGMA user_version").fetchone()[0]

    # writing
    def record(self, name: str, manifest_text: str | None, sources: list[tuple[str, bytes]],
               result: dict) -> int:
        """Store one analysis; returns its record id. `sources`: (path relative to manifest, bytes).

        The result is kept as strict JSON: NaN and infinities become null.
        """
        from . import __version__
        from .jsonio import dumps_json

        rows = _checked_sources(sources)
        result_json = dumps_json(result)
        conn = self._connect()
        with self._transaction(conn):
            return self._insert(conn, name, manifest_text, rows, result_json, __version__)

    @staticmethod
    def _insert(conn, name, manifest_text, rows, result_json, version) -> int:
        recorded_utc = datetime.now(timezone.utc).isoformat(timespec="seconds")
        cur = conn.execute(
            "INSERT INTO records (unit, recorded_utc, manifest_text, result_json, software_version) "
            "VALUES (?, ?, ?, ?, ?)", (name, recorded_utc, manifest_text, result_json, version))
        record_id = cur.lastrowid
        for rel_path, digest, content in rows:
            conn.execute("INSERT OR IGNORE INTO blobs (sha256, size_bytes, content) VALUES (?, ?, ?)",
                         (digest, len(content), content))
            conn.execute("INSERT INTO files (record_id, rel_path, sha256) VALUES (?, ?, ?)",
                         (record_id, rel_path, digest))
        return record_id

    # reading
    def get(self, record_id: int) -> Record:
        conn = self._connect()
        row = conn.execute("SELECT id, unit, recorded_utc, manifest_text, result_json, software_version "
                           "FROM records WHERE id = ?", (record_id,)).fetchone()
        if row is None:
            raise InputError(f"no record {record_id} in the history store", path=self.path)
        files = tuple(
            StoredFile(rel_path, digest, bytes(content)) for rel_path, digest, content in conn.execute(
                "SELECT f.rel_path, f.sha256, b.content FROM files f JOIN blobs b ON b.sha256 = f.sha256 "
                "WHERE f.record_id = ? ORDER BY f.rowid", (record_id,)))
        return Record(id=row[0], unit=row[1], recorded_utc=row[2], manifest_text=row[3],
                      files=files, result=json.loads(row[4]), software_version=row[5])

    def list(self, unit: str | None = None, limit: int | None = DEFAULT_LIST_LIMIT) -> list[RecordSummary]:
        """Records newest first, of one unit or all; at most `limit` (None: all)."""
        sql = ("SELECT r.id, r.unit, r.recorded_utc, r.software_version, r.result_json, "
               "(SELECT count(*) FROM files f WHERE f.record_id = r.id) FROM records r")
        args: list = []
        if unit is not None:
            sql += " WHERE r.unit = ?"
            args.append(unit)
        sql += " ORDER BY r.id DESC"
        if limit is not None:
            sql += " LIMIT ?"
            args.append(int(limit))
        return [RecordSummary(id=i, unit=u, recorded_utc=t, software_version=v, file_count=n,
                              design_status=design_status(result), fit_grade=fit_grade(result))
                for i, u, t, v, result, n in ((i, u, t, v, json.loads(res), n)
                                              for i, u, t, v, res, n in self._connect().execute(sql, args))]

    def previous(self, record_id: int) -> Record | None:
        """The record of the same unit stored just before `record_id` (None if it is the first)."""
        unit = self.get(record_id).unit
        row = self._connect().execute("SELECT max(id) FROM records WHERE unit = ? AND id < ?",
                                      (unit, record_id)).fetchone()
        return None if row[0] is None else self.get(row[0])

    def latest(self, unit: str | None = None) -> Record | None:
        """The newest record of `unit` (of any unit when None); None if there is none."""
        rows = self.list(unit, limit=1)
        return self.get(rows[0].id) if rows else None

    def resolve(self, ref: str, *, other_unit: str | None = None, other_id: int | None = None) -> Record:
        """The record a reference like '@12', '@12~', '@latest:UNIT' or '@prev' names.

        `other_unit` / `other_id` describe the other side of a comparison, which
        '@prev' is relative to.
        """
        m = _REF_RE.match(ref.strip())
        if m is None:
            raise InputError(f"'{ref}' is not a store reference (use @ID, @ID~, @latest, @latest:UNIT or @prev)")
        back = int(m["back"]) if m["back"] else (1 if m["tilde"] else 0)
        if m["id"]:
            record = self.get(int(m["id"]))
        elif m["latest"]:
            record = self.latest(m["unit"])
            if record is None:
                where = f" for unit '{m['unit']}'" if m["unit"] else ""
                raise InputError(f"{ref}: the history store has no records{where}", path=self.path)
        else:
            if other_id is not None:
                record, back = self.get(other_id), back + 1
            elif other_unit is not None:
                record = self.latest(other_unit)
                if record is None:
                    raise InputError(f"@prev: no stored record of unit '{other_unit}'", path=self.path)
            else:
                raise InputError("@prev needs the other side of the comparison to name a unit")
        for _ in range(back):
            earlier = self.previous(record.id)
            if earlier is None:
                raise InputError(f"{ref}: unit '{record.unit}' has no record before {record.id}", path=self.path)
            record = earlier
        return record

    # export
    def export(self, record_id: int, folder: str | Path, overwrite: bool = False) -> list[Path]:
        """Write a record's manifest and sweep files into `folder`, byte for byte; returns the paths.

        The manifest is written under its own name when it is one of the stored
        files, else as manifest.toml. Existing files are refused unless `overwrite`.
        """
        record = self.get(record_id)
        outputs = [(f.path, f.content) for f in record.files]
        manifest_bytes = None if record.manifest_text is None else record.manifest_text.encode("utf-8")
        if manifest_bytes is not None and all(content != manifest_bytes for _, content in outputs):
            outputs.insert(0, (FALLBACK_MANIFEST_NAME, manifest_bytes))
        folder = Path(folder)
        root = folder.resolve()
        targets = []
        for rel_path, content in outputs:
            target = (root / rel_path).resolve()
            if not target.is_relative_to(root):
                raise InputError(f"record {record_id} holds '{rel_path}', which lies outside the export folder; "
                                 "export it by hand", path=folder)
            if target.exists() and not overwrite:
                raise InputError(f"'{rel_path}' exists already; choose an empty folder or allow overwriting",
                                 path=target)
            targets.append((target, content))
        from .io.atomic import atomic_write_bytes

        for target, content in targets:
            target.parent.mkdir(parents=True, exist_ok=True)
            atomic_write_bytes(target, content)
        return [t for t, _ in targets]


def _checked_sources(sources) -> list[tuple[str, str, bytes]]:
    rows, seen = [], set()
    for rel_path, content in sources:
        rel_path = str(rel_path).replace("\\", "/")
        if not isinstance(content, (bytes, bytearray, memoryview)):
            raise InputError(f"source '{rel_path}' must be bytes, not {type(content).__name__}")
        if rel_path in seen:
            raise InputError(f"source '{rel_path}' is given twice")
        seen.add(rel_path)
        content = bytes(content)
        rows.append((rel_path, _sha256(content), content))
    return rows


def record_analysis(store: HistoryStore, analysis) -> int:
    """Store an Analysis (anything with `.to_dict()` and `.sources`); returns the record id.

    The manifest text is taken from the first .toml file among the sources (None
    when the analysis came from bare sweep files).
    """
    result = analysis.to_dict()
    sources = list(analysis.sources)
    manifest_text = next((content.decode("utf-8", errors="replace") for rel_path, content in sources
                          if str(rel_path).lower().endswith(".toml")), None)
    return store.record(result.get("name") or "unnamed", manifest_text, sources, result)

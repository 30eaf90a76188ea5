"""History store: every analysis kept with its raw inputs, in one SQLite file.

A record holds the unit name, the UTC time, the manifest text, every raw sweep
file byte for byte (with its path relative to the manifest and its sha256), the
result JSON and the rfmeas version that produced it. File contents are stored
once per distinct sha256, so re-analysing the same sweeps costs no space.

Writes are one transaction per record in WAL mode, so a crash or Ctrl-C in the
middle of a write leaves the store as it was before that record. Creating and
migrating the schema is one `BEGIN IMMEDIATE` transaction that re-reads the
schema version under the lock, so any number of processes may create the
store at once; a busy store is waited for (BUSY_TIMEOUT_S), never an error.
A store that cannot be written (a read-only file or folder) is still read.
A damaged record (a result that is not a JSON object, a file whose content is
missing or does not match its sha256) is skipped with a note in `notes`.

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
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path, PurePosixPath

from rfmeas.errors import InputError

log = logging.getLogger(__name__)

DB_ENV_VAR = "RFMEAS_DB"
DEFAULT_LIST_LIMIT = 50
FALLBACK_MANIFEST_NAME = "manifest.toml"
BUSY_TIMEOUT_S = 60.0  # how long a writer waits for another one before giving up
EXTERNAL_FOLDER = "external"  # where sweeps from outside the manifest's folder are kept


class DamagedRecord(InputError):
    """A stored record that cannot be read back (bad result JSON, missing or altered file)."""


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
# database runs them all, in one transaction. Never change what a released step
# does: append a new one.

def _run_statements(conn: sqlite3.Connection, script: str) -> None:
    """Run ';'-separated statements inside the open transaction (executescript would commit it)."""
    for statement in script.split(";"):
        if statement.strip():
            conn.execute(statement)


def _migrate_to_1(conn: sqlite3.Connection) -> None:
    _run_statements(conn, """
        CREATE TABLE IF NOT EXISTS records (
            id INTEGER PRIMARY KEY AUTOINCREMENT,
            unit TEXT NOT NULL,
            recorded_utc TEXT NOT NULL,
            manifest_text TEXT,
            result_json TEXT NOT NULL,
            software_version TEXT NOT NULL
        );
        CREATE TABLE IF NOT EXISTS files (
            record_id INTEGER NOT NULL REFERENCES records(id) ON DELETE CASCADE,
            rel_path TEXT NOT NULL,
            sha256 TEXT NOT NULL,
            content BLOB NOT NULL,
            PRIMARY KEY (record_id, rel_path)
        );
        CREATE INDEX IF NOT EXISTS records_unit ON records (unit, id);
    """)


def _migrate_to_2(conn: sqlite3.Connection) -> None:
    """Move file contents into a table keyed by sha256 so identical files are kept once."""
    _run_statements(conn, """
        CREATE TABLE IF NOT EXISTS blobs (
            sha256 TEXT PRIMARY KEY,
            size_bytes INTEGER NOT NULL,
            content BLOB NOT NULL
        );
        INSERT OR IGNORE INTO blobs (sha256, size_bytes, content)
            SELECT sha256, length(content), content FROM files;
        CREATE TABLE IF NOT EXISTS files_v2 (
            record_id INTEGER NOT NULL REFERENCES records(id) ON DELETE CASCADE,
            rel_path TEXT NOT NULL,
            sha256 TEXT NOT NULL REFERENCES blobs(sha256),
            PRIMARY KEY (record_id, rel_path)
        );
        INSERT INTO files_v2 (record_id, rel_path, sha256) SELECT record_id, rel_path, sha256 FROM files;
        DROP TABLE files;
        ALTER TABLE files_v2 RENAME TO files;
    """)


def manifest_notes(manifest_text) -> str | None:
    """The [transformer] notes of a manifest's text; None when it has none or is not readable TOML."""
    import tomllib

    if not isinstance(manifest_text, str):
        return None
    try:
        notes = tomllib.loads(manifest_text).get("transformer", {}).get("notes")
    except (tomllib.TOMLDecodeError, AttributeError):
        return None
    return notes.strip() or None if isinstance(notes, str) else None


def _migrate_to_3(conn: sqlite3.Connection) -> None:
    """A note per record (to tell the before and after of one unit apart), filled for the records
    kept so far from their manifest's [transformer] notes."""
    conn.execute("ALTER TABLE records ADD COLUMN note TEXT")
    rows = conn.execute("SELECT id, manifest_text FROM records").fetchall()
    for record_id, text in rows:
        note = manifest_notes(text)
        if note is not None:
            conn.execute("UPDATE records SET note = ? WHERE id = ?", (note, record_id))


MIGRATIONS = [_migrate_to_1, _migrate_to_2, _migrate_to_3]
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
    note: str | None = None

    def to_dict(self) -> dict:
        return {
            "id": self.id, "unit": self.unit, "recorded_utc": self.recorded_utc,
            "software_version": self.software_version, "note": self.note, "manifest_text": self.manifest_text,
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
    note: str | None = None

    def to_dict(self) -> dict:
        return {"id": self.id, "unit": self.unit, "recorded_utc": self.recorded_utc,
                "software_version": self.software_version, "file_count": self.file_count,
                "design_status": self.design_status, "fit_grade": self.fit_grade, "note": self.note}


def design_status(result: dict) -> str:
    """'pass', 'fail', 'not judged' or 'no design' from a result's design_check (rfmeas.judge.design)."""
    from rfmeas.judge.design import design_status as status_of_check

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
    """The history database at `path` (default: default_db_path()). Opened on first use.

    `read_only` is True once opened on a store this process may not write;
    `notes` collects one sentence per damaged record skipped while reading.
    """

    def __init__(self, path: str | Path | None = None):
        self.path = Path(path).expanduser() if path is not None else default_db_path()
        self._conn: sqlite3.Connection | None = None
        self.read_only = False
        self.notes: list[str] = []

    # connection and schema
    def _connect(self) -> sqlite3.Connection:
        if self._conn is not None:
            return self._conn
        with self._sqlite_errors():
            conn = self._open()
        try:
            with self._sqlite_errors():
                self._prepare(conn)
        except BaseException:
            conn.close()
            raise
        self._conn = conn
        return conn

    def _open(self) -> sqlite3.Connection:
        """A connection: read-write when this process may write the file and its folder, else read-only."""
        try:
            if not self.path.exists():
                self.path.parent.mkdir(parents=True, exist_ok=True)
            elif self.path.is_dir():
                raise InputError("is a folder, not a history store file", path=self.path)
            elif not self.path.is_file():  # a FIFO or device would block or never be a store
                raise InputError("is not a regular file, so not a history store", path=self.path)
            elif not _looks_like_sqlite(self.path):  # SQLite would take a tiny file over as a new store
                raise InputError("not a readable history store: the file is not an SQLite database",
                                 path=self.path)
            writable = not self.path.exists() or (os.access(self.path, os.W_OK)
                                                   and os.access(self.path.parent, os.W_OK))
        except OSError as exc:
            raise InputError(f"cannot open the history store: {exc.strerror or exc}", path=self.path) from exc
        if writable:
            return sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_S, isolation_level=None)
        self.read_only = True
        log.info("history store %s is not writable: opened read-only", self.path)
        return _open_read_only(self.path)

    def _prepare(self, conn: sqlite3.Connection) -> None:
        conn.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        version = self._checked_version(conn)
        if self.read_only:
            if version < SCHEMA_VERSION:
                raise InputError(f"the history store is read-only and has the older schema version {version}; "
                                 "open it once with write access to upgrade it", path=self.path)
            conn.execute("PRAGMA query_only = ON")
            return
        _wait_for_wal(conn)
        conn.execute("PRAGMA synchronous=FULL")
        conn.execute("PRAGMA foreign_keys=ON")
        if version < SCHEMA_VERSION:
            self._migrate(conn)

    def _checked_version(self, conn: sqlite3.Connection) -> int:
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise InputError(
                f"the history store has schema version {version}, newer than this rfmeas "
                f"understands ({SCHEMA_VERSION}); upgrade rfmeas to read it", path=self.path)
        return version

    def _migrate(self, conn: sqlite3.Connection) -> None:
        """Create or upgrade the schema in one write transaction; the version is re-read under its lock,
        so a process that waited for another's creation finds nothing left to do."""
        with self._transaction(conn):
            version = self._checked_version(conn)
            for step, migrate in enumerate(MIGRATIONS[version:], start=version + 1):
                log.info("history store %s: migrating to schema version %d", self.path, step)
                migrate(conn)
            if version < SCHEMA_VERSION:
                conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")

    @contextlib.contextmanager
    def _sqlite_errors(self):
        """Turn SQLite's errors into one plain sentence about the store (InputError, exit code 2)."""
        try:
            yield
        except sqlite3.DatabaseError as exc:
            text = str(exc)
            if "readonly" in text or "read-only" in text:
                message = f"the history store cannot be written ({text})"
            elif "locked" in text or "busy" in text:
                message = f"the history store stayed busy for {BUSY_TIMEOUT_S:g} s ({text}); try again"
            else:
                message = f"not a readable history store: {text}"
            raise InputError(message, path=self.path) from exc

    @staticmethod
    @contextlib.contextmanager
    def _transaction(conn: sqlite3.Connection):
        """BEGIN IMMEDIATE ... COMMIT; anything raised (Ctrl-C included) rolls back."""
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            if conn.in_transaction:
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
        with self._sqlite_errors():
            return self._connect().execute("PRAGMA user_version").fetchone()[0]

    def _note(self, text: str) -> None:
        if text not in self.notes:
            log.warning("%s: %s", self.path, text)
            self.notes.append(text)

    # writing
    def record(self, name: str, manifest_text: str | None, sources: list[tuple[str, bytes]],
               result: dict, note: str | None = None) -> int:
        """Store one analysis; returns its record id. `sources`: (path relative to manifest, bytes).

        The result is kept as strict JSON: NaN and infinities become null. `note` tells this
        record apart from the unit's others (default: the manifest's [transformer] notes).
        """
        from rfmeas import __version__
        from rfmeas.io.jsonio import dumps_json

        rows = _checked_sources(sources)
        result_json = dumps_json(result)
        conn = self._connect()
        if self.read_only:
            raise InputError("the history store is read-only (no write permission on the file or its "
                             "folder)", path=self.path)
        with self._sqlite_errors(), self._transaction(conn):
            return self._insert(conn, name, manifest_text, rows, result_json, __version__,
                                manifest_notes(manifest_text) if note is None else (note.strip() or None))

    def set_note(self, record_id: int, note: str | None) -> None:
        """Replace a record's note (None or blank text clears it)."""
        conn = self._connect()
        if self.read_only:
            raise InputError("the history store is read-only (no write permission on the file or its "
                             "folder)", path=self.path)
        with self._sqlite_errors(), self._transaction(conn):
            done = conn.execute("UPDATE records SET note = ? WHERE id = ?",
                                ((note or "").strip() or None, record_id))
            if done.rowcount == 0:
                raise InputError(f"no record {record_id} in the history store", path=self.path)

    @staticmethod
    def _insert(conn, name, manifest_text, rows, result_json, version, note=None) -> int:
        recorded_utc = datetime.now(timezone.utc).isoformat(timespec="seconds")
        cur = conn.execute(
            "INSERT INTO records (unit, recorded_utc, manifest_text, result_json, software_version, note) "
            "VALUES (?, ?, ?, ?, ?, ?)", (name, recorded_utc, manifest_text, result_json, version, note))
        record_id = cur.lastrowid
        for rel_path, digest, content in rows:
            conn.execute("INSERT OR IGNORE INTO blobs (sha256, size_bytes, content) VALUES (?, ?, ?)",
                         (digest, len(content), content))
            conn.execute("INSERT INTO files (record_id, rel_path, sha256) VALUES (?, ?, ?)",
                         (record_id, rel_path, digest))
        return record_id

    # reading
    def get(self, record_id: int) -> Record:
        """One record; DamagedRecord when it cannot be read back whole."""
        with self._sqlite_errors():
            conn = self._connect()
            row = conn.execute("SELECT id, unit, recorded_utc, manifest_text, result_json, software_version, "
                               "note FROM records WHERE id = ?", (record_id,)).fetchone()
            if row is None:
                raise InputError(f"no record {record_id} in the history store", path=self.path)
            file_rows = conn.execute(
                "SELECT f.rel_path, f.sha256, b.content FROM files f LEFT JOIN blobs b ON b.sha256 = f.sha256 "
                "WHERE f.record_id = ? ORDER BY f.rowid", (record_id,)).fetchall()
        result = self._result_of(record_id, row[4])
        files = []
        for rel_path, digest, content in file_rows:
            if not isinstance(content, bytes) or _sha256(content) != digest:
                what = "is missing" if content is None else "does not match its sha256"
                raise DamagedRecord(f"record {record_id} is damaged: the content of '{rel_path}' {what}",
                                    path=self.path)
            files.append(StoredFile(str(rel_path), digest, content))
        if not isinstance(row[1], str):
            raise DamagedRecord(f"record {record_id} is damaged: its unit name is not text", path=self.path)
        return Record(id=row[0], unit=row[1], recorded_utc=str(row[2]),
                      manifest_text=row[3] if isinstance(row[3], str) else None,
                      files=tuple(files), result=result, software_version=str(row[5]),
                      note=row[6] if isinstance(row[6], str) else None)

    def _result_of(self, record_id: int, text) -> dict:
        try:
            result = json.loads(text)
        except (TypeError, ValueError, RecursionError):
            result = None
            why = "its result is not valid JSON"
        else:
            kind = {list: "list", str: "string", int: "number", float: "number", bool: "true/false"}
            why = f"its result is a JSON {kind.get(type(result), 'null')}, not an object"
        if not isinstance(result, dict):
            raise DamagedRecord(f"record {record_id} is damaged: {why}", path=self.path)
        return result

    def list(self, unit: str | None = None, limit: int | None = DEFAULT_LIST_LIMIT) -> list[RecordSummary]:
        """Records newest first, of one unit or all; at most `limit` (None: all).

        Damaged records are left out, each with a sentence in `notes`.
        """
        sql = ("SELECT r.id, r.unit, r.recorded_utc, r.software_version, r.result_json, "
               "(SELECT count(*) FROM files f WHERE f.record_id = r.id), r.note FROM records r")
        args: list = []
        if unit is not None:
            sql += " WHERE r.unit = ?"
            args.append(unit)
        sql += " ORDER BY r.id DESC"
        out: list[RecordSummary] = []
        with self._sqlite_errors():
            cursor = self._connect().execute(sql, args)
            for i, u, t, v, res, n, note in cursor:
                if limit is not None and len(out) >= int(limit):
                    break
                try:
                    result = self._result_of(i, res)
                except DamagedRecord as exc:
                    self._note(f"{exc.message}; skipped")
                    continue
                out.append(RecordSummary(id=i, unit=str(u), recorded_utc=str(t), software_version=str(v),
                                         file_count=n, design_status=design_status(result),
                                         fit_grade=fit_grade(result),
                                         note=note if isinstance(note, str) else None))
        return out

    def _readable(self, ids) -> Record | None:
        """The first of `ids` that reads back whole; damaged ones are noted and passed over."""
        for record_id in ids:
            try:
                return self.get(record_id)
            except DamagedRecord as exc:
                self._note(f"{exc.message}; skipped")
        return None

    def previous(self, record_id: int) -> Record | None:
        """The record of the same unit stored just before `record_id` (None if it is the first)."""
        unit = self.get(record_id).unit
        with self._sqlite_errors():
            ids = [r[0] for r in self._connect().execute(
                "SELECT id FROM records WHERE unit = ? AND id < ? ORDER BY id DESC", (unit, record_id))]
        return self._readable(ids)

    def latest(self, unit: str | None = None) -> Record | None:
        """The newest record of `unit` (of any unit when None); None if there is none."""
        sql, args = "SELECT id FROM records ORDER BY id DESC", ()
        if unit is not None:
            sql, args = "SELECT id FROM records WHERE unit = ? ORDER BY id DESC", (unit,)
        with self._sqlite_errors():
            ids = [r[0] for r in self._connect().execute(sql, args)]
        return self._readable(ids)

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
        from rfmeas.io.atomic import atomic_write_bytes

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


def _looks_like_sqlite(path: Path) -> bool:
    """An empty file (a store being created) or one that starts with SQLite's header."""
    with open(path, "rb") as handle:
        head = handle.read(16)
    return head == b"" or head == b"SQLite format 3\x00"


def _open_read_only(path: Path) -> sqlite3.Connection:
    """Open a store this process may not write. A store in WAL mode needs its shared-memory file,
    which a read-only folder may lack; then it is read as an immutable file."""
    from urllib.parse import quote

    uri = "file:" + quote(str(path.resolve()))
    conn = sqlite3.connect(f"{uri}?mode=ro", uri=True, timeout=BUSY_TIMEOUT_S, isolation_level=None)
    try:
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
        return conn
    except sqlite3.OperationalError as exc:
        conn.close()
        log.info("history store %s: read-only open failed (%s); reading it as immutable", path, exc)
    return sqlite3.connect(f"{uri}?immutable=1", uri=True, isolation_level=None)


def _wait_for_wal(conn: sqlite3.Connection) -> None:
    """Switch the store to WAL mode. Changing the journal mode of a new file that another process is
    creating can answer 'locked' at once, without SQLite's busy wait, so wait here."""
    deadline = time.monotonic() + BUSY_TIMEOUT_S
    delay_s = 0.005
    while True:
        try:
            conn.execute("PRAGMA journal_mode=WAL").fetchone()
            return
        except sqlite3.OperationalError as exc:
            if "locked" not in str(exc) and "busy" not in str(exc) or time.monotonic() > deadline:
                raise
        time.sleep(delay_s)
        delay_s = min(delay_s * 2, 0.2)


# --- what a record keeps of an analysis ------------------------------------------------------

def _unique_name(preferred: str, taken: set[str]) -> str:
    """`preferred`, or 'stem-2.ext', 'stem-3.ext', ... when that name is taken."""
    if preferred not in taken:
        return preferred
    folder, _, base = preferred.rpartition("/")
    stem, dot, ext = base.partition(".")
    for n in range(2, 10_000):
        candidate = f"{folder + '/' if folder else ''}{stem}-{n}{dot}{ext}"
        if candidate not in taken:
            return candidate
    raise InputError(f"too many sweep files named '{preferred}'")


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    return json.dumps(str(value), ensure_ascii=False)  # a TOML basic string is a JSON string here


def _toml_document(doc: dict, comment: str) -> str:
    """TOML text of a manifest-shaped document: tables of scalars and an array of [[sweep]] tables."""
    lines = [f"# {comment}"]
    for table, content in doc.items():
        if table == "sweep":
            continue
        lines += ["", f"[{table}]"] + [f"{k} = {_toml_value(v)}" for k, v in content.items()]
    for entry in doc.get("sweep", []):
        lines += ["", "[[sweep]]"] + [f"{k} = {_toml_value(v)}" for k, v in entry.items()]
    return "\n".join(lines) + "\n"


def _key_line(key: str) -> re.Pattern:
    return re.compile(rf"""^(?P<head>[ \t]*{key}[ \t]*=[ \t]*)(?P<value>"(?:[^"\\\n]|\\.)*"|'[^'\n]*')""",
                      re.MULTILINE)


_ARRAY_HEADER = re.compile(r"^[ \t]*\[\[[ \t]*(?P<table>[A-Za-z0-9_-]+)[ \t]*\]\]", re.MULTILINE)


def _renamed_manifest(text: str, renames: list[tuple[str, str]], key: str = "file", table: str = "sweep") -> str:
    """The manifest with `key` of each [[table]] entry that has it replaced (renames: (old, new) in order).

    The text is edited in place when its `key = "..."` lines under [[table]] headers can be
    matched to the entries one by one, so comments and layout stay; otherwise it is written anew.
    """
    import tomllib

    if all(old == new for old, new in renames):
        return text
    headers = [(m.start(), m["table"]) for m in _ARRAY_HEADER.finditer(text)]

    def under_table(pos: int) -> bool:
        owner = [name for start, name in headers if start < pos]
        return bool(owner) and owner[-1] == table

    matches = [m for m in _key_line(key).finditer(text) if under_table(m.start())]
    if len(matches) == len(renames):
        pieces, last = [], 0
        for m, (old, new) in zip(matches, renames):
            if tomllib.loads("v = " + m["value"])["v"] != old:
                break
            pieces += [text[last:m.start("value")], _toml_value(new)]
            last = m.end("value")
        else:
            edited = "".join(pieces) + text[last:]
            entries = [e for e in tomllib.loads(edited).get(table, []) if key in e]
            if [e[key] for e in entries] == [new for _, new in renames]:
                return edited
    doc = tomllib.loads(text)
    for entry, (_, new) in zip([e for e in doc.get(table, []) if key in e], renames):
        entry[key] = new
    return _toml_document(doc, "rewritten by rfmeas: the files are named as kept in the history store")


def _manifest_for_files(measurement, names: list[str]) -> str:
    """A manifest for sweeps given without one, so that an exported record can be analysed again."""
    doc: dict = {"transformer": {"name": measurement.name}}
    for key in ("primary_turns", "secondary_turns"):
        if getattr(measurement, key, None) is not None:
            doc["transformer"][key] = getattr(measurement, key)
    design = getattr(measurement, "design", None)
    if design is not None:
        doc["design"] = {k: v for k, v in design.to_dict().items() if v is not None and k != "target_turns_ratio"}
    doc["sweep"] = []
    for sweep, name in zip(measurement.sweeps, names):
        entry = {"file": name, "port1": sweep.port1}
        if sweep.port2 is not None and not sweep.is_through_method:
            entry["port2"] = sweep.port2
        else:
            entry["termination"] = sweep.termination.to_json()
        if sweep.is_through_method:
            entry["method"] = sweep.method
        doc["sweep"].append(entry)
    return _toml_document(doc, "written by rfmeas for sweep files given without a manifest")


def record_sources(measurement) -> tuple[str | None, list[tuple[str, bytes]]]:
    """(manifest text, [(name, bytes)]) to keep for a MeasurementSet, so that an export can be analysed.

    Sweeps inside the manifest's folder keep the path the manifest names them by;
    sweeps from elsewhere go to 'external/NAME' (NAME-2, ... when names clash) and
    the kept manifest is rewritten to point at them. The same file listed twice is
    kept once. Sweeps given without a manifest get a manifest written for them.
    """
    readings = [r for r in getattr(measurement, "readings", ()) if r.raw_bytes is not None]
    sweeps = [s for s in measurement.sweeps if s.raw_bytes is not None]
    manifest_text = getattr(measurement, "manifest_text", None)
    manifest_path = getattr(measurement, "manifest_path", None)
    base = Path(manifest_path).resolve().parent if manifest_text is not None and manifest_path else None

    def key(sweep) -> str:
        return str(Path(sweep.path).resolve()) if sweep.path else f"label:{sweep.label}"

    inside, outside = {}, {}
    for sweep in sweeps + readings:
        if base is not None and sweep.path and Path(sweep.path).resolve().is_relative_to(base):
            inside.setdefault(key(sweep), Path(sweep.path).resolve().relative_to(base).as_posix())
            continue
        bare = Path(sweep.path).name if sweep.path else (sweep.label or "sweep.s1p")
        outside.setdefault(key(sweep), f"{EXTERNAL_FOLDER}/{bare}" if base is not None else bare)
    taken = {FALLBACK_MANIFEST_NAME, *inside.values()}
    names = dict(inside)
    for k, preferred in outside.items():
        names[k] = _unique_name(preferred, taken)
        taken.add(names[k])
    out, seen = [], set()
    for sweep in sweeps + readings:
        if key(sweep) not in seen:
            seen.add(key(sweep))
            out.append((names[key(sweep)], sweep.raw_bytes))
    if manifest_text is None:
        manifest_text = _manifest_for_files(measurement, [names[key(s)] for s in sweeps])
    elif base is not None:
        manifest_text = _renamed_manifest(manifest_text, _manifest_renames(manifest_text, base, names))
        manifest_text = _renamed_manifest(manifest_text, _manifest_renames(manifest_text, base, names, "reading"),
                                          table="reading")
        manifest_text = _with_fixtures(manifest_text, base, taken, out)
    return manifest_text, [(FALLBACK_MANIFEST_NAME, manifest_text.encode("utf-8"))] + out


def _fixture_files(toml_path: Path) -> list[Path] | None:
    """A jig definition and the standard files it names, when they all lie in its folder (else None)."""
    import tomllib

    folder = toml_path.parent.resolve()
    try:
        doc = tomllib.loads(toml_path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return None
    standards = doc.get("standards") if isinstance(doc.get("standards"), dict) else {}
    files = [toml_path.resolve()]
    for value in standards.values():
        if isinstance(value, str):
            path = (folder / value).resolve()
            if not path.is_relative_to(folder) or not path.is_file():
                return None
            files.append(path)
    return files


def _with_fixtures(text: str, base: Path, taken: set[str], out: list) -> str:
    """Keep the test jigs a manifest's sweeps name (definition and standards) with the record.

    A jig inside the manifest's folder keeps its path; one from elsewhere goes to
    'fixtures/NAME/' and the kept manifest is rewritten to point at it. A jig whose
    standards lie outside its own folder is not kept (logged).
    """
    import tomllib

    renames, kept = [], {}
    for entry in tomllib.loads(text).get("sweep", []):
        old = entry.get("fixture")
        if not isinstance(old, str):
            continue
        toml_path = base / old
        toml_path = toml_path / "fixture.toml" if toml_path.is_dir() else toml_path
        files = _fixture_files(toml_path) if toml_path.is_file() else None
        if files is None:
            log.info("test jig '%s' is not kept with the record (not found, or its standards lie elsewhere)", old)
            renames.append((old, old))
            continue
        folder = files[0].parent
        if str(folder) not in kept:
            if folder.is_relative_to(base):
                prefix = folder.relative_to(base).as_posix()
            else:
                prefix, n = f"fixtures/{folder.name}", 2
                while any(t == prefix or t.startswith(prefix + "/") for t in taken):
                    prefix, n = f"fixtures/{folder.name}-{n}", n + 1
            for path in files:
                name = f"{prefix}/{path.relative_to(folder).as_posix()}" if prefix != "." else \
                    path.relative_to(folder).as_posix()
                if name not in taken:
                    taken.add(name)
                    out.append((name, path.read_bytes()))
            kept[str(folder)] = prefix
        prefix = kept[str(folder)]
        new = f"{prefix}/{files[0].name}" if prefix != "." else files[0].name
        renames.append((old, old if folder.is_relative_to(base) else new))
    return _renamed_manifest(text, renames, key="fixture")


def _manifest_renames(text: str, base: Path, names: dict[str, str], table: str = "sweep") -> list[tuple[str, str]]:
    """(file as the manifest names it, name it is kept under) for each [[sweep]] (or `table`) entry."""
    import tomllib

    renames = []
    for entry in tomllib.loads(text).get(table, []):
        old = entry.get("file")
        new = names.get(str((base / old).resolve()), old)
        same = PurePosixPath(old.replace("\\", "/")).as_posix() == new  # 'x.s1p' named as './x.s1p'
        renames.append((old, old if same else new))
    return renames


def record_analysis(store: HistoryStore, analysis, note: str | None = None, result: dict | None = None) -> int:
    """Store an Analysis (anything with `.to_dict()` and `.sources`); returns the record id.
    `note`: the record's note (default: the manifest's [transformer] notes); `result`: its
    `to_dict()` when the caller already has it.

    The files kept are those of `record_sources` (an exported record can be
    analysed again); an object without a measurement set gives its `sources`,
    and the manifest text is then the first .toml file among them.
    """
    result = analysis.to_dict() if result is None else result
    measurement = getattr(analysis, "recorded", None) or getattr(analysis, "measurement", None)
    if measurement is not None and hasattr(measurement, "sweeps"):
        manifest_text, sources = record_sources(measurement)
    else:
        sources = list(analysis.sources)
        manifest_text = next((content.decode("utf-8", errors="replace") for rel_path, content in sources
                              if str(rel_path).lower().endswith(".toml")), None)
    return store.record(result.get("name") or "unnamed", manifest_text, sources, result, note=note)


def keep_analysis(analysis, db: str | Path | None = None, result: dict | None = None):
    """Keep `analysis` in the store at `db` (None: the default store): (record id, None), or
    (None, the store's error) when it could not be kept, so the caller can still show the
    analysis before it reports the error. `result`: its `to_dict()` when already made."""
    from rfmeas.errors import RfmeasError

    try:
        with HistoryStore(db) as store:
            return record_analysis(store, analysis, result=result), None
    except RfmeasError as exc:
        return None, exc

"""The results database of a study folder: SQLite (one transaction per finished task, written only by the
coordinator) plus Parquet tables beside it (profiles, samples, fronts)."""

from __future__ import annotations

import json
import platform
import sqlite3
import time
from pathlib import Path

from tubewright.models.errors import CaseError
from tubewright.optimizer.output.jsonsafe import finite

import tubewright

SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS tasks (
    task_id TEXT PRIMARY KEY, kind TEXT, inputs_json TEXT, status TEXT NOT NULL, reason TEXT, summary_json TEXT,
    tables_json TEXT, started REAL, finished REAL, seconds REAL, attempts INTEGER DEFAULT 0, provenance_json TEXT
);
CREATE TABLE IF NOT EXISTS members (
    position INTEGER PRIMARY KEY, task_id TEXT NOT NULL REFERENCES tasks(task_id), name TEXT, grp TEXT,
    swept_json TEXT
);
"""
# A task is stored once per identity; ``members`` lists the study's entries (two entries with the same fully
# resolved inputs, e.g. a sweep point equal to the nominal case, share one computation).


APPLICATION_ID = 0x54574C54  # "TWLT": written into every store tubewright creates (SQLite application_id)


def dumps(value) -> str:
    return json.dumps(finite(value), sort_keys=True, default=str)


class Store:
    def __init__(self, folder: Path):
        self.folder = Path(folder)
        self.db_path = self.folder / "results.sqlite"
        self.tables = self.folder / "tables"

    def open(self, study=None, create: bool = False, read_only: bool = False):
        """Open the store. A database tubewright did not create (no APPLICATION_ID) or a corrupt one is
        refused and left byte-identical; ``read_only`` (status, report) never writes to the folder."""
        if not self.db_path.exists():
            if not create:
                raise CaseError(str(self.folder), "", "no results database here (results.sqlite): run the study "
                                "first")
        else:
            self.check_owner()
            if study is not None:
                owner = self.meta().get("study_path")
                if owner is not None and owner != str(study.path):
                    raise CaseError(str(self.folder), "", f"this folder belongs to another study ({owner}); choose "
                                    "another --out folder")
        if read_only:
            self.conn = sqlite3.connect(f"{self.db_path.resolve().as_uri()}?mode=ro", uri=True, timeout=30)
            return self
        new = not self.db_path.exists()
        self.folder.mkdir(parents=True, exist_ok=True)
        self.tables.mkdir(exist_ok=True)
        self.conn = sqlite3.connect(self.db_path, timeout=30)
        if new:
            self.conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
        self.conn.execute("PRAGMA journal_mode=WAL")
        # WAL with synchronous=NORMAL survives a killed process (only a power cut can lose the last commits)
        self.conn.execute("PRAGMA synchronous=NORMAL")
        self.conn.executescript(SCHEMA)
        columns = {row[1] for row in self.conn.execute("PRAGMA table_info(tasks)")}
        if "reason_code" not in columns:  # stores written before reason codes existed
            self.conn.execute("ALTER TABLE tasks ADD COLUMN reason_code TEXT")
        if study is not None:
            with self.conn:
                for key, value in (("study_path", str(study.path)), ("title", study.title)):
                    self.conn.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, value))
        return self

    def check_owner(self):
        """Refuse a database that is not a tubewright store, or that SQLite cannot read, without writing."""
        uri = f"{self.db_path.resolve().as_uri()}?mode=ro"
        try:
            conn = sqlite3.connect(uri, uri=True)
            try:
                app = conn.execute("PRAGMA application_id").fetchone()[0]
                if app != APPLICATION_ID:
                    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
                    if not (app == 0 and {"meta", "tasks", "members"} <= set(tables)):  # stores before the id
                        raise CaseError(str(self.db_path), "", "not a tubewright results database (another "
                                        "program's file?): left untouched; choose another --out folder")
                check = conn.execute("PRAGMA quick_check").fetchone()[0]
            finally:
                conn.close()
        except sqlite3.DatabaseError as err:
            raise CaseError(str(self.db_path), "", f"the results database cannot be read ({err}): it is corrupt "
                            "or not a database; left untouched") from err
        if check != "ok":
            raise CaseError(str(self.db_path), "", f"the results database is damaged ({check}); left untouched")

    def meta(self) -> dict:
        conn = sqlite3.connect(f"{self.db_path.resolve().as_uri()}?mode=ro", uri=True)
        try:
            return dict(conn.execute("SELECT key, value FROM meta").fetchall())
        except sqlite3.OperationalError:
            return {}
        finally:
            conn.close()

    def register(self, tasks):
        """Insert the study's tasks that the database does not know yet, as pending, and the study's entries
        (one transaction)."""
        with self.conn:
            self.conn.execute("DELETE FROM members")
            for t in tasks:
                self.conn.execute("INSERT OR IGNORE INTO tasks (task_id, kind, inputs_json, status) "
                                  "VALUES (?, ?, ?, 'pending')",
                                  (t.task_id, t.kind, dumps({"options": t.options, "case": t.case_data})))
                self.conn.execute("INSERT INTO members VALUES (?, ?, ?, ?, ?)",
                                  (t.position, t.task_id, t.name, t.group, dumps(t.swept)))

    def statuses(self) -> dict:
        return dict(self.conn.execute("SELECT task_id, status FROM tasks").fetchall())

    def record(self, task, result: dict, started: float):
        """Write one finished task: tables to Parquet first, then its row in one transaction (a kill between
        the two leaves the task pending, never half-recorded)."""
        import pyarrow as pa
        import pyarrow.parquet as pq

        files = {}
        for name, columns in (result.get("tables") or {}).items():
            if not columns:
                continue
            path = self.tables / f"{task.task_id}-{name}.parquet"
            tmp = path.with_suffix(".tmp")
            pq.write_table(pa.table({k: list(v) if not hasattr(v, "dtype") else v for k, v in columns.items()}), tmp)
            tmp.replace(path)
            files[name] = str(path.relative_to(self.folder))
        provenance = {"inputs_hash": task.task_id, "tubewright": tubewright.__version__,
                      "python": platform.python_version(), "seed": task.options.get("seed"), "host": platform.node()}
        with self.conn:
            self.conn.execute(
                "UPDATE tasks SET status = ?, reason_code = ?, reason = ?, summary_json = ?, tables_json = ?, "
                "started = ?, finished = ?, seconds = ?, attempts = attempts + 1, provenance_json = ? "
                "WHERE task_id = ?",
                (str(result["status"]), str(result.get("reason_code") or ""), result.get("reason", ""),
                 dumps(result.get("summary", {})), dumps(files), started, time.time(), result.get("seconds"),
                 dumps(provenance), task.task_id))

    def mark_unfinished(self, tasks, status, code, reason: str):
        """Record why tasks that were started did not finish (their results, if any, are not kept)."""
        with self.conn:
            for t in tasks:
                self.conn.execute("UPDATE tasks SET status = ?, reason_code = ?, reason = ? WHERE task_id = ?",
                                  (str(status), str(code), reason, t.task_id))

    def rows(self, task_ids=None) -> list[dict]:
        cur = self.conn.execute("SELECT t.task_id, m.position, m.name, t.kind, m.grp, m.swept_json, t.status, "
                                "t.reason_code, t.reason, t.summary_json, t.tables_json, t.seconds, t.attempts "
                                "FROM members m JOIN tasks t ON t.task_id = m.task_id ORDER BY m.position")
        out = []
        for r in cur.fetchall():
            row = dict(zip(("task_id", "position", "name", "kind", "group", "swept", "status", "reason_code", "reason",
                            "summary", "tables", "seconds", "attempts"), r))
            row["swept"] = json.loads(row["swept"] or "{}")
            row["summary"] = json.loads(row["summary"] or "{}")
            row["tables"] = json.loads(row["tables"] or "{}")
            if task_ids is None or row["task_id"] in task_ids:
                out.append(row)
        return out

    def close(self):
        self.conn.close()

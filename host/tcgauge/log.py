"""The log database: records of a controller in SQLite, and their CSV export.

One file holds any number of runs (one per `tcgauge log` or `tcgauge demo`).
Schema "tcgauge-log" version 1 (table `meta` holds format and version):

    runs     id, started_utc, host_s, ended_host_s, port, identity, host_version, source
    records  run, host_s, seq, t_ms, channel, emf_mv, junction_c, pressure_pa,
             state, fault, true_pressure_pa
    gaps     run, host_s, end_host_s, from_seq, to_seq, missing, reason, detail
    events   run, host_s, t_ms, kind, channel, setpoint, detail
    rejects  run, host_s, raw (the line's bytes), reason

Times: host_s is the host's clock (seconds since the epoch, UTC), t_ms the
device's. Pressures are always pascals; NULL where the record has no number
(states invalid and fault). true_pressure_pa is filled only when the source
is an in-process simulator (the protocol does not carry it).

Durability: the file runs in WAL mode with synchronous=FULL and the logger
commits in small batches (every `batch_s` seconds or `batch_n` records,
whichever first); a gap, event or reject commits at once. A crash, SIGKILL
or Ctrl-C therefore loses at most the last uncommitted batch, and the file
always opens.
"""

import csv
import datetime
import sqlite3
import time

from tcgauge.acquire import Sink
from tcgauge.errors import TcgaugeError

FORMAT = "tcgauge-log"
VERSION = 1

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS runs (
    id INTEGER PRIMARY KEY,
    started_utc TEXT NOT NULL,
    host_s REAL NOT NULL,
    ended_host_s REAL,
    port TEXT NOT NULL,
    identity TEXT,
    host_version TEXT NOT NULL,
    source TEXT NOT NULL DEFAULT 'device'
);
CREATE TABLE IF NOT EXISTS records (
    id INTEGER PRIMARY KEY,
    run INTEGER NOT NULL REFERENCES runs(id),
    host_s REAL NOT NULL,
    seq INTEGER NOT NULL,
    t_ms INTEGER NOT NULL,
    channel INTEGER NOT NULL,
    emf_mv REAL,
    junction_c REAL,
    pressure_pa REAL,
    state TEXT NOT NULL,
    fault TEXT,
    true_pressure_pa REAL
);
CREATE INDEX IF NOT EXISTS records_run_channel ON records (run, channel);
CREATE TABLE IF NOT EXISTS gaps (
    id INTEGER PRIMARY KEY,
    run INTEGER NOT NULL REFERENCES runs(id),
    host_s REAL NOT NULL,
    end_host_s REAL,
    from_seq INTEGER,
    to_seq INTEGER,
    missing INTEGER,
    reason TEXT NOT NULL,
    detail TEXT NOT NULL DEFAULT ''
);
CREATE TABLE IF NOT EXISTS events (
    id INTEGER PRIMARY KEY,
    run INTEGER NOT NULL REFERENCES runs(id),
    host_s REAL NOT NULL,
    t_ms INTEGER,
    kind TEXT NOT NULL,
    channel INTEGER,
    setpoint INTEGER,
    detail TEXT NOT NULL DEFAULT ''
);
CREATE TABLE IF NOT EXISTS rejects (
    id INTEGER PRIMARY KEY,
    run INTEGER NOT NULL REFERENCES runs(id),
    host_s REAL NOT NULL,
    raw BLOB NOT NULL,
    reason TEXT NOT NULL
);
"""


class LogFileError(TcgaugeError):
    """The file is not a tcgauge log database, or has no such run."""


def utc_text(host_s):
    """Seconds since the epoch -> '2026-12-01T23:18:27.123Z'."""
    dt = datetime.datetime.fromtimestamp(host_s, datetime.timezone.utc)
    return dt.strftime("%Y-%m-%dT%H:%M:%S.") + "%03dZ" % (dt.microsecond // 1000)


def connect(path, create=False):
    """Open a log database (WAL mode); create the schema when `create`."""
    if not create:
        try:
            with open(path, "rb") as f:
                head = f.read(16)
        except OSError as exc:
            raise LogFileError("%s: cannot read: %s" % (path, exc.strerror or exc))
        if head != b"SQLite format 3\x00":
            raise LogFileError("%s: not an SQLite database" % path)
    try:
        db = sqlite3.connect(path, isolation_level=None, timeout=10.0)
        db.execute("PRAGMA journal_mode=WAL")
        db.execute("PRAGMA synchronous=FULL")
        if create:
            db.executescript(_SCHEMA)
            db.execute("INSERT OR IGNORE INTO meta VALUES ('format', ?)", (FORMAT,))
            db.execute("INSERT OR IGNORE INTO meta VALUES ('version', ?)", (str(VERSION),))
        meta = dict(db.execute("SELECT key, value FROM meta"))
    except sqlite3.Error as exc:
        raise LogFileError("%s: %s" % (path, exc))
    if meta.get("format") != FORMAT:
        raise LogFileError("%s: not a %s database" % (path, FORMAT))
    if meta.get("version") != str(VERSION):
        raise LogFileError("%s: %s version %s, this tool reads version %d"
                           % (path, FORMAT, meta.get("version"), VERSION))
    return db


def last_run(db):
    """Id of the newest run, or LogFileError if the file has none."""
    row = db.execute("SELECT max(id) FROM runs").fetchone()
    if row[0] is None:
        raise LogFileError("the log holds no runs")
    return row[0]


def check_run(db, run):
    """`run`, or the newest run when None; LogFileError if it does not exist."""
    if run is None:
        return last_run(db)
    if db.execute("SELECT 1 FROM runs WHERE id = ?", (run,)).fetchone() is None:
        raise LogFileError("the log has no run %d" % run)
    return run


class DbSink(Sink):
    """Writes what an Acquirer delivers to a log database, in small batches."""

    def __init__(self, path, source="device", batch_s=0.5, batch_n=50, monotonic=time.monotonic,
                 on_commit=None):
        self.path = path
        self.db = connect(path, create=True)
        self.source = source
        self.batch_s = batch_s
        self.batch_n = batch_n
        self.monotonic = monotonic
        self.on_commit = on_commit  # callable(run, committed record count) after each commit
        self.run = None
        self.pending = 0
        self.committed = 0  # records of this run known to be on disk
        self.commits = 0
        self._last_commit = monotonic()
        self._in_tx = False

    def _begin(self):
        if not self._in_tx:
            self.db.execute("BEGIN")
            self._in_tx = True

    def commit(self):
        """Commit what is pending (records, gaps, events, rejects)."""
        if self._in_tx:
            self.db.execute("COMMIT")
            self._in_tx = False
            self.commits += 1
            self.committed += self.pending
            self.pending = 0
            if self.on_commit is not None:
                self.on_commit(self.run, self.committed)
        self._last_commit = self.monotonic()

    def _maybe_commit(self):
        if self.pending >= self.batch_n or (
                self._in_tx and self.monotonic() - self._last_commit >= self.batch_s):
            self.commit()

    # ---- Sink -----------------------------------------------------------------------
    def on_start(self, info):
        self.db.execute(
            "INSERT INTO runs (started_utc, host_s, port, identity, host_version, source)"
            " VALUES (?, ?, ?, ?, ?, ?)",
            (utc_text(info["host_s"]), info["host_s"], info["port"], info["identity"],
             info["host_version"], self.source))
        self.run = self.db.execute("SELECT last_insert_rowid()").fetchone()[0]
        self._last_commit = self.monotonic()

    def on_record(self, rec, host_s, true_pa):
        self._begin()
        self.db.execute(
            "INSERT INTO records (run, host_s, seq, t_ms, channel, emf_mv, junction_c,"
            " pressure_pa, state, fault, true_pressure_pa) VALUES (?,?,?,?,?,?,?,?,?,?,?)",
            (self.run, host_s, rec.seq, rec.t_ms, rec.ch, rec.emf_mv, rec.t_c, rec.pressure_pa,
             rec.state, rec.fault, true_pa))
        self.pending += 1
        self._maybe_commit()

    def on_reject(self, raw, reason, host_s):
        self._begin()
        self.db.execute("INSERT INTO rejects (run, host_s, raw, reason) VALUES (?,?,?,?)",
                        (self.run, host_s, bytes(raw), reason))
        self.commit()

    def on_gap(self, gap):
        self._begin()
        self.db.execute(
            "INSERT INTO gaps (run, host_s, end_host_s, from_seq, to_seq, missing, reason, detail)"
            " VALUES (?,?,?,?,?,?,?,?)",
            (self.run, gap.host_s, gap.end_host_s, gap.from_seq, gap.to_seq, gap.missing,
             gap.reason, gap.detail or ""))
        self.commit()

    def on_event(self, event):
        self._begin()
        self.db.execute(
            "INSERT INTO events (run, host_s, t_ms, kind, channel, setpoint, detail)"
            " VALUES (?,?,?,?,?,?,?)",
            (self.run, event.host_s, event.t_ms, event.kind, event.channel, event.setpoint,
             event.detail or ""))
        self.commit()

    def on_tick(self, stats):
        self._maybe_commit()

    def on_stop(self, host_s, stats):
        if self.run is not None:
            self._begin()
            self.db.execute("UPDATE runs SET ended_host_s = ? WHERE id = ?", (host_s, self.run))
        self.commit()

    def close(self):
        """Commit and close the database."""
        self.commit()
        self.db.close()


# ---- CSV export ---------------------------------------------------------------------
CSV_HEADER = (
    "run", "host_time_utc", "host_time_s", "seq", "device_time_ms", "channel", "emf_mV",
    "junction_C", "pressure_Pa", "state", "fault", "true_pressure_Pa",
)


def _num(value):
    return "" if value is None else repr(value)


def export_csv(db, out, run=None):
    """Write the records of `run` (all runs when None) as CSV; returns the row count.

    `db` is a path or an open connection, `out` a path or a text file. The
    header names the units; empty cells have no number (states invalid and
    fault never carry a pressure). Numbers are written exactly as stored.
    """
    conn = connect(db) if isinstance(db, str) else db
    try:
        if run is not None:
            check_run(conn, run)
        sql = ("SELECT run, host_s, seq, t_ms, channel, emf_mv, junction_c, pressure_pa, state,"
               " fault, true_pressure_pa FROM records")
        args = ()
        if run is not None:
            sql += " WHERE run = ?"
            args = (run,)
        rows = conn.execute(sql + " ORDER BY run, id", args)
        f = open(out, "w", newline="", encoding="ascii") if isinstance(out, str) else out
        try:
            w = csv.writer(f, lineterminator="\n")
            w.writerow(CSV_HEADER)
            n = 0
            for (r, host_s, seq, t_ms, ch, emf, tj, p, state, fault, true_p) in rows:
                w.writerow((r, utc_text(host_s), "%.3f" % host_s, seq, t_ms, ch, _num(emf),
                            _num(tj), _num(p), state, fault or "", _num(true_p)))
                n += 1
        finally:
            if isinstance(out, str):
                f.close()
        return n
    finally:
        if isinstance(db, str):
            conn.close()

"""The log database: schema, WAL, batched commits, rejects, gaps, reconnect, CSV.

A scripted controller (tests/host/fake_stream.py: the real SCPI dispatcher
plus a script of stream lines) stands in for the device. Readings are
invented demo values (Wren tube, Larkspur bell jar). SQLite facts: WAL mode
and commit visibility to other connections are documented at
https://sqlite.org/wal.html ("readers see the last committed transaction").
"""

import io
import os
import signal
import sqlite3
import subprocess
import sys
import time

import pytest

from fake_stream import FakeTime, StreamDevice, rec_line
from tcgauge import log as logdb
from tcgauge.acquire import Acquirer, Sink
from tcgauge.errors import TcgaugeError

WALL0 = 1800000000.0  # 2027-01-15T08:00:00Z, a fixed host clock for exact output


class WallClock:
    """Host clock: starts at WALL0 and moves 0.25 s per call."""

    def __init__(self):
        self.t = WALL0 - 0.25

    def __call__(self):
        self.t += 0.25
        return self.t


# Quiet reads while the acquirer finishes its setup queries, so a scripted
# failure hits the streaming loop rather than the connection set-up.
SETTLE = [None] * 10


def count(path, sql="SELECT count(*) FROM records"):
    """Read through a second connection: sees committed rows only."""
    conn = sqlite3.connect(path)
    try:
        return conn.execute(sql).fetchone()[0]
    finally:
        conn.close()


class Probe(Sink):
    """Calls `actions[seq](rec)` when the record with that seq arrives."""

    def __init__(self, actions):
        self.actions = actions

    def on_record(self, rec, host_s, true_pa):
        action = self.actions.get(rec.seq)
        if action is not None:
            action(rec)


def run(tmp_path, ports, batch_n=50, batch_s=0.5, before=(), after=(), clock=None, **kw):
    """Log the scripted ports (list: device, or exception the opener raises) -> (db path, stats, time)."""
    path = str(tmp_path / "log.db")
    t = FakeTime(step=1e-4) if clock is None else clock
    ports = list(ports)
    opened = []

    def open_port():
        item = ports.pop(0)
        if isinstance(item, BaseException):
            raise item
        opened.append(item)
        return item

    sink = logdb.DbSink(path, batch_n=batch_n, batch_s=batch_s, monotonic=t)
    acq = Acquirer(open_port, port_name="scripted", monotonic=t, sleep=t.sleep, clock=WallClock(),
                   **kw)
    stats = acq.run(list(before) + [sink] + list(after), stop=lambda: not ports and opened[-1].done)
    sink.close()
    return path, stats, t


def test_wal_mode_and_schema(tmp_path):
    path, stats, _ = run(tmp_path, [StreamDevice([rec_line(0, 0, 1, 7.25, 23.5, 0.5)])])
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert dict(conn.execute("SELECT key, value FROM meta")) == {"format": "tcgauge-log", "version": "1"}
    run_row = conn.execute("SELECT started_utc, port, identity, host_version, source FROM runs").fetchone()
    from tcgauge import __version__
    assert run_row == ("2027-01-15T08:00:00.000Z", "scripted", "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0",
                       __version__, "device")
    cols = [r[1] for r in conn.execute("PRAGMA table_info(records)")]
    assert cols == ["id", "run", "host_s", "seq", "t_ms", "channel", "emf_mv", "junction_c",
                    "pressure_pa", "state", "fault", "true_pressure_pa"]
    assert stats["records"] == 1


def test_commits_every_batch_n_records(tmp_path):
    seen = {}
    path = str(tmp_path / "log.db")
    script = [rec_line(i, 100 * i, 1 + i % 2, 7.0, 23.5, 0.5) for i in range(120)]
    probe = Probe({74: lambda rec: seen.setdefault("at75", count(path)),
                   119: lambda rec: seen.setdefault("at120", count(path))})
    _, stats, _ = run(tmp_path, [StreamDevice(script)], batch_n=50, batch_s=1e9, after=[probe])
    # a reader sees whole batches only: 50 of 75, 100 of 120; the close commits the rest
    assert seen == {"at75": 50, "at120": 100}
    assert count(path) == 120 == stats["records"]


def test_commits_every_batch_s_seconds(tmp_path):
    seen = {}
    path = str(tmp_path / "log.db")
    t = FakeTime(step=1e-4)

    def wait(rec):
        seen["before"] = count(path)
        t.t += 0.6  # more than batch_s passes before the next record

    script = [rec_line(i, 100 * i, 1, 7.0, 23.5, 0.5) for i in range(11)]
    probe = Probe({9: wait, 10: lambda rec: seen.setdefault("after", count(path))})
    run(tmp_path, [StreamDevice(script)], batch_n=1000, batch_s=0.5, after=[probe], clock=t,
        setpoint_poll_s=1e9)
    # once batch_s has passed, the next tick (10 rows) or record 10 (11 rows) commits,
    # whichever comes first, without waiting for batch_n
    assert seen["before"] == 0 and seen["after"] in (10, 11)


def test_corrupt_record_is_counted_and_kept(tmp_path):
    good = rec_line(0, 0, 1, 7.25, 23.5, 0.5)
    bad = good[:-6] + "9" + good[-5:]  # one changed character in the pressure field
    path, stats, _ = run(tmp_path, [StreamDevice([good, bad, rec_line(1, 100, 2, 7.25, 23.5, 0.5)])])
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT raw, reason FROM rejects").fetchall() == [
        (bad.encode(), "record checksum mismatch")]  # reason text: gaugecore.record.decode
    assert [r[0] for r in conn.execute("SELECT seq FROM records ORDER BY id")] == [0, 1]
    assert stats["corrupt"] == 1


def test_line_without_record_mark_is_kept(tmp_path):
    good = rec_line(0, 0, 1, 7.25, 23.5, 0.5)
    path, stats, _ = run(tmp_path, [StreamDevice(SETTLE + [good, good[1:].replace("R,0,", "R,1,")])])
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT raw, reason FROM rejects").fetchall() == [
        (good[1:].replace("R,0,", "R,1,").encode(), "not a record, and no reply was awaited")]
    assert stats["corrupt"] == 1 and stats["records"] == 1


def test_silent_device_is_a_lost_link(tmp_path):
    first = StreamDevice([rec_line(s, 100 * s, 1, 7.0, 23.5, 0.5) for s in range(3)] + SETTLE)
    probe = Probe({2: lambda rec: setattr(first, "hung", True)})
    second = StreamDevice(SETTLE + [rec_line(s, 100 * s, 1, 7.0, 23.5, 0.5) for s in range(8, 10)])
    path, stats, _ = run(tmp_path, [first, second], after=[probe], stall_s=0.05,
                         reply_timeout_s=0.05)
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT from_seq, to_seq, missing, reason, detail FROM gaps ORDER BY id").fetchall() == [
        (2, None, None, "link lost", "no data and no reply for 0.05 s"),
        (2, 8, 5, "reconnected", "")]
    assert [r[0] for r in conn.execute("SELECT seq FROM records")] == [0, 1, 2, 8, 9]


def test_sequence_gap_is_recorded(tmp_path):
    script = [rec_line(s, 100 * s, 1, 7.0, 23.5, 0.5) for s in (0, 1, 2, 6, 7)]
    path, stats, _ = run(tmp_path, [StreamDevice(script)])
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT from_seq, to_seq, missing, reason FROM gaps").fetchall() == [
        (2, 6, 3, "sequence gap")]
    assert (stats["gaps"], stats["missing"]) == (1, 3)


def test_pulled_cable_waits_reconnects_and_keeps_rows(tmp_path):
    path = str(tmp_path / "log.db")
    seen = {}
    first = [rec_line(s, 100 * s, 1 + s % 2, 7.0, 23.5, 0.5) for s in range(10)]
    first += SETTLE + [OSError("device reports readiness to read but returned no data")]
    second = [rec_line(s, 100 * s, 1 + s % 2, 7.0, 23.5, 0.5) for s in range(15, 20)]
    missing = OSError(2, "No such file or directory")
    probe = Probe({15: lambda rec: seen.setdefault("after reconnect", count(path))})
    p, stats, t = run(tmp_path, [StreamDevice(first), missing, missing, StreamDevice(second)],
                      before=[probe])
    assert p == path
    # every row before the loss was committed when the loss was noticed
    assert seen == {"after reconnect": 10}
    conn = sqlite3.connect(path)
    seqs = [r[0] for r in conn.execute("SELECT seq FROM records ORDER BY id")]
    assert seqs == list(range(10)) + list(range(15, 20))
    gaps = conn.execute("SELECT from_seq, to_seq, missing, reason FROM gaps ORDER BY id").fetchall()
    assert gaps == [(9, None, None, "link lost"), (9, 15, 5, "reconnected")]
    # backoff: two failed reopen attempts, the third succeeds
    assert t.slept[:3] == [0.2, 0.5, 1.0]
    assert (stats["reconnects"], stats["missing"], stats["records"]) == (1, 5, 15)


def test_reconnect_to_a_restarted_device_marks_unknown_loss(tmp_path):
    first = [rec_line(s, 100 * s, 1, 7.0, 23.5, 0.5) for s in range(500, 505)] + SETTLE + [OSError("gone")]
    second = [rec_line(s, 100 * s, 1, 7.0, 23.5, 0.5) for s in range(3)]
    path, stats, _ = run(tmp_path, [StreamDevice(first), StreamDevice(second)])
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT from_seq, to_seq, missing, reason, detail FROM gaps ORDER BY id").fetchall() == [
        (504, None, None, "link lost", "cannot read from the port: gone"),
        (504, 0, None, "reconnected", "device restarted")]
    assert count(path) == 8


def test_setpoint_and_fault_events(tmp_path):
    dev = StreamDevice([rec_line(0, 0, 1, 7.0, 23.5, 0.5)] + SETTLE + [
                        rec_line(1, 100, 1, None, 23.5, None, "fault", "heater_open"),
                        rec_line(2, 200, 1, 7.0, 23.5, 0.5)])

    def relay_on(rec):
        dev.facade.sp[1]["relay"] = True

    path, _, _ = run(tmp_path, [dev], setpoint_poll_s=0.0, after=[Probe({0: relay_on})])
    conn = sqlite3.connect(path)
    rows = conn.execute("SELECT kind, channel, setpoint, detail FROM events ORDER BY id").fetchall()
    assert rows[:2] == [("setpoint", 1, 1, "off"), ("setpoint", 1, 2, "off")]
    assert rows[2:] == [("setpoint", 1, 1, "on"), ("fault", 1, None, "heater_open"),
                        ("fault cleared", 1, None, "heater_open")]


def test_csv_export_exact(tmp_path):
    from gaugecore.record import Record
    path = str(tmp_path / "log.db")
    sink = logdb.DbSink(path)
    sink.on_start({"port": "scripted", "identity": "x", "host_version": "0", "host_s": WALL0})
    rows = [
        Record(41, 123456, 1, 7.25, 23.5, 13.332, "ok", None),
        Record(42, 123456, 2, None, 24.0, None, "fault", "heater_open"),
        Record(43, 123556, 1, 0.81, 23.5, 133.32, "over", None),
    ]
    for i, rec in enumerate(rows):
        sink.on_record(rec, WALL0 + 0.1 * i, 13.3 if i == 0 else None)
    sink.close()
    out = io.StringIO()
    assert logdb.export_csv(path, out) == 3
    assert out.getvalue() == (
        "run,host_time_utc,host_time_s,seq,device_time_ms,channel,emf_mV,junction_C,pressure_Pa,"
        "state,fault,true_pressure_Pa\n"
        "1,2027-01-15T08:00:00.000Z,1800000000.000,41,123456,1,7.25,23.5,13.332,ok,,13.3\n"
        "1,2027-01-15T08:00:00.100Z,1800000000.100,42,123456,2,,24.0,,fault,heater_open,\n"
        "1,2027-01-15T08:00:00.200Z,1800000000.200,43,123556,1,0.81,23.5,133.32,over,,\n")
    out_file = str(tmp_path / "out.csv")
    assert logdb.export_csv(path, out_file, run=1) == 3
    with open(out_file) as f:
        assert f.read() == out.getvalue()
    with pytest.raises(logdb.LogFileError, match="the log has no run 2"):
        logdb.export_csv(path, io.StringIO(), run=2)


def test_not_a_log_file(tmp_path):
    bogus = tmp_path / "x.db"
    bogus.write_bytes(b"hello")
    with pytest.raises(logdb.LogFileError, match="not an SQLite database"):
        logdb.connect(str(bogus))
    with pytest.raises(logdb.LogFileError, match="cannot read"):
        logdb.connect(str(tmp_path / "missing.db"))


def test_first_open_failure_is_one_error(tmp_path):
    def open_port():
        raise OSError(2, "No such file or directory")

    acq = Acquirer(open_port, port_name="/dev/ttyNONE")
    with pytest.raises(TcgaugeError, match=r"cannot open /dev/ttyNONE: \[Errno 2\] No such file or directory"):
        acq.run([])


# ---- end to end: `tcgauge log` as a subprocess against `tcgauge sim --pty` ----------------
TCGAUGE = [sys.executable, "-m", "tcgauge"]


def start_sim(speed=10):
    """`tcgauge sim --pty` -> (process, pty path read from its first line)."""
    proc = subprocess.Popen(TCGAUGE + ["sim", "--pty", "--speed", str(speed), "--seed", "3"],
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            stdin=subprocess.DEVNULL)
    path = proc.stdout.readline().strip()
    if not path.startswith("/dev/"):
        stop(proc)
        raise AssertionError("tcgauge sim --pty printed %r" % path)
    return proc, path


def stop(proc, sig=signal.SIGTERM):
    """End a child process (SIGTERM, then SIGKILL after 10 s) and close its pipe."""
    if proc is None:
        return
    if proc.poll() is None:
        proc.send_signal(sig)
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
    if proc.stdout is not None:
        proc.stdout.close()


def wait_line(lines, proc, pattern, timeout_s):
    """Read `proc` stdout lines into `lines` until one contains `pattern`."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line:
            break
        lines.append(line.rstrip("\n"))
        if pattern in line:
            return line
    raise AssertionError("no %r within %.0f s; got %r" % (pattern, timeout_s, lines[-5:]))


def committed(lines):
    return max([int(ln.split("committed ")[1].split()[0]) for ln in lines if "committed" in ln] or [0])


def seq_runs(path):
    conn = sqlite3.connect(path)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        return [r[0] for r in conn.execute("SELECT seq FROM records WHERE run = 1 ORDER BY id")]
    finally:
        conn.close()


def test_sigkill_loses_at_most_the_last_batch(tmp_path):
    db = str(tmp_path / "kill.db")
    sim, pty = start_sim()
    logger = None
    try:
        logger = subprocess.Popen(TCGAUGE + ["log", "--port", pty, "--db", db, "--status-every", "0"],
                                  stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                                  stdin=subprocess.DEVNULL)
        lines = []
        while committed(lines) < 150:
            wait_line(lines, logger, "committed", 20)
        stop(logger, signal.SIGKILL)
        seqs = seq_runs(db)
        # every record of every batch reported committed is there, in order, none skipped
        assert len(seqs) >= committed(lines) >= 150
        assert seqs == list(range(seqs[0], seqs[0] + len(seqs)))
    finally:
        stop(logger, signal.SIGKILL)
        stop(sim)


def test_pulled_cable_end_to_end(tmp_path):
    """The port is a symlink (as /dev/serial/by-id names are); the device is stopped,
    the logger waits and retries, a new device appears under the same name."""
    db = str(tmp_path / "cable.db")
    link = str(tmp_path / "gauge")
    sim, pty = start_sim()
    sim2 = logger = None
    os.symlink(pty, link)
    try:
        logger = subprocess.Popen(
            TCGAUGE + ["log", "--port", link, "--db", db, "--status-every", "0", "--seconds", "30"],
            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, stdin=subprocess.DEVNULL)
        lines = []
        while committed(lines) < 100:
            wait_line(lines, logger, "committed", 20)
        stop(sim)  # the cable is pulled: the pty disappears
        wait_line(lines, logger, "gap: link lost", 10)
        before = committed(lines)
        os.remove(link)
        time.sleep(1.0)  # the logger retries meanwhile and fails
        sim2, pty2 = start_sim()
        os.symlink(pty2, link + ".new")
        os.replace(link + ".new", link)
        wait_line(lines, logger, "gap: reconnected", 20)
        after = committed(lines)
        wait_line(lines, logger, "committed", 10)
        stop(logger)
        assert logger.returncode == 0
        conn = sqlite3.connect(db)
        gaps = conn.execute("SELECT reason, to_seq IS NULL, missing, detail FROM gaps ORDER BY id").fetchall()
        assert [g[0] for g in gaps] == ["link lost", "reconnected"]
        assert gaps[0][1] == 1 and gaps[1][1:] == (0, None, "device restarted")  # a new device counts from 0
        lost_at = conn.execute("SELECT from_seq FROM gaps WHERE reason = 'link lost'").fetchone()[0]
        seqs = seq_runs(db)
        cut = seqs.index(lost_at) + 1
        # nothing logged before the loss was lost, and logging carried on after it
        assert cut >= before >= 100
        assert seqs[:cut] == list(range(seqs[0], lost_at + 1))
        assert seqs[cut:] == list(range(seqs[cut], seqs[cut] + len(seqs) - cut))
        assert len(seqs) - cut > 0 and len(seqs) >= after
        assert conn.execute("SELECT ended_host_s IS NOT NULL FROM runs").fetchone()[0] == 1
    finally:
        stop(logger, signal.SIGKILL)
        stop(sim)
        stop(sim2)


def test_first_open_of_a_silent_device_is_one_error():
    dev = StreamDevice()
    dev.hung = True
    t = FakeTime(step=1e-3)
    acq = Acquirer(lambda: dev, port_name="/dev/ttyQUIET", reply_timeout_s=0.05, monotonic=t)
    with pytest.raises(TcgaugeError, match=r"^cannot open /dev/ttyQUIET: no reply within 0.05 s$"):
        acq.run([])
    assert dev.closed  # the port is not left open

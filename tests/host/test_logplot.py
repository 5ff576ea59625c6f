"""The log plot: what it drew (returned data) for a small scripted log, and a real PNG.

Readings are invented demo values (Wren tube, Larkspur bell jar). Unit
conversion: 1 Torr = 101325/760 Pa exactly (NIST SP 811, B.8). PNG
signature: the eight bytes 89 50 4E 47 0D 0A 1A 0A (PNG specification,
ISO/IEC 15948, 5.2).
"""

import pytest

from gaugecore import units
from gaugecore.record import Record
from tcgauge import log as logdb
from tcgauge.acquire import Event, Gap
from tcgauge.logplot import plot_log, state_spans

T0 = 1800000000.0
TORR = 101325.0 / 760.0  # Pa per Torr, exact (NIST SP 811, B.8)


def make_log(path):
    sink = logdb.DbSink(path, source="simulator test")
    sink.on_start({"port": "sim://", "identity": "tcgauge,TCGAUGE-2CH,SIM,0.1.0",
                   "host_version": "0", "host_s": T0})
    ch1 = [  # (seq, t_ms, p_pa, state, true_pa)
        (0, 10000, 2.0e4, "over", 1.0e5),
        (2, 11000, 50.0, "ok", 48.0),
        (4, 12000, 5.0, "ok", 5.1),
        # seq 5..7 lost: a sequence gap
        (8, 14000, 0.1, "under", 0.05),
    ]
    ch2 = [
        (1, 10000, 2.0e4, "over", 1.0e5),
        (3, 11000, None, "fault", 48.0),
        (9, 14000, 0.1, "under", 0.05),
    ]
    rows = [(s, t, 1, p, st, tp) for s, t, p, st, tp in ch1] + \
           [(s, t, 2, p, st, tp) for s, t, p, st, tp in ch2]
    for seq, t_ms, ch, p, st, tp in sorted(rows):
        fault = "heater_open" if st == "fault" else None
        sink.on_record(Record(seq, t_ms, ch, 7.0, 23.5, p, st, fault), T0 + t_ms / 1000.0, tp)
        if seq == 4:
            sink.on_event(Event("setpoint", T0 + 12.0, 12000, 1, 1, "on"))
    sink.on_gap(Gap("sequence gap", 4, 8, 3, T0 + 14.0, T0 + 14.0))
    sink.close()


def test_state_spans():
    assert state_spans([0, 1, 2, 3], ["ok", "ok", "fault", "ok"]) == [
        ("ok", 0, 2), ("fault", 2, 3), ("ok", 3, 3)]


def test_plot_returns_what_it_drew(tmp_path):
    db = str(tmp_path / "log.db")
    png = str(tmp_path / "log.png")
    make_log(db)
    drawn = plot_log(db, png, unit="TORR")
    assert drawn["run"] == 1 and drawn["symbol"] == "Torr"
    assert drawn["ylabel"] == "pressure (Torr)"
    assert drawn["xlabel"] == "time since the first record (s, simulated device clock)"
    assert drawn["title"] == "Pressure log, run 1, started 2027-01-15 08:00:00 UTC (simulated)"
    c1 = drawn["channels"][1]
    assert c1["t_s"] == [0.0, 1.0, 2.0, 4.0]
    # only ok readings are on the line; limits are markers, fault has no number
    assert c1["pressure"][0] is None and c1["pressure"][3] is None
    assert c1["pressure"][1] == pytest.approx(50.0 / TORR, rel=1e-12)
    assert c1["pressure"][2] == pytest.approx(5.0 / TORR, rel=1e-12)
    assert drawn["markers"][1]["over"] == [(0.0, pytest.approx(2.0e4 / TORR, rel=1e-12))]
    assert drawn["markers"][1]["under"] == [(4.0, pytest.approx(0.1 / TORR, rel=1e-12))]
    assert drawn["channels"][2]["pressure"] == [None, None, None]
    assert drawn["true"][1]["pressure"] == pytest.approx([p / TORR for p in (1e5, 48.0, 5.1, 0.05)])
    assert drawn["spans"] == [
        (1, "over", 0.0, 1.0), (1, "ok", 1.0, 4.0), (1, "under", 4.0, 4.0),
        (2, "over", 0.0, 1.0), (2, "fault", 1.0, 4.0), (2, "under", 4.0, 4.0)]
    assert drawn["faults"] == [(2, "heater_open", 1.0, 4.0)]
    assert drawn["setpoints"] == [(2.0, 1, "on")]
    assert drawn["gaps"] == [(2.0, 4.0, "sequence gap")]
    with open(png, "rb") as f:
        head = f.read(8)
    assert head == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, 5.2)


def test_plot_in_pascals_and_errors(tmp_path):
    db = str(tmp_path / "log.db")
    make_log(db)
    drawn = plot_log(db, str(tmp_path / "pa.png"), unit="pa")
    assert drawn["channels"][1]["pressure"][1] == 50.0 and drawn["ylabel"] == "pressure (Pa)"
    assert units.SYMBOL[drawn["unit"]] == "Pa"
    with pytest.raises(logdb.LogFileError, match="the log has no run 7"):
        plot_log(db, str(tmp_path / "x.png"), run=7)
    with pytest.raises(ValueError, match="unknown pressure unit 'bar'"):
        plot_log(db, str(tmp_path / "x.png"), unit="bar")

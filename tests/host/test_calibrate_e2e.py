"""End to end on the simulator: calibrate a virtual device, then derive a He table from it.

A virtual device (the firmware core on the simulated invented Wren tube in the
invented Larkspur bell jar, sim://?scenario=calibration) is calibrated in N2
with `tcgauge.calrun.run`, the library under `tcgauge calibrate`: vacuum zero at
base pressure, 17 pressures from 0.1 to 200 Pa set on the simulator's chamber,
a simulated reference gauge (tcgauge.refgauge.SimReference: 1 % standard
uncertainty, k=1, with a seeded error of that size, reading the simulator's
true pressure), fit, budget, report, push. Then:

- at pressures between the calibration points over 1e-3..1 Torr (0.133..133
  Pa) the device, converting with the pushed table, reads the true pressure
  within the stated expanded uncertainty U (k = 2: about 95 % coverage, GUM
  ISO/IEC Guide 98-3 6.2; budget per ISO 27893:2011);
- a He table derived from that N2 table (tcgauge.derive.derive_table) and
  pushed to the same device, rebuilt from the same root with He in the
  chamber, reads the true He pressure within its band.

The simulator runs at up to 200 simulated seconds per wall second, one channel.
"""

import math
import time

import numpy as np
import pytest
import serial

from gaugecore import tablefile
from gaugecore.table import Table
from gaugecore.units import PA_PER_TORR
from tcgauge import calrun, derive, transfer
from tcgauge.calibrate import NO_REPRO_NOTE
from tcgauge.client import Client
from tcgauge.link import Link
from tcgauge.refgauge import SimReference
from tcgauge.sim.simtable import make_table

SPEED = 200
U_REF = 0.01  # the simulated reference's certificate: 1 % (k=1), invented for the demo
POINTS_PA = list(np.logspace(math.log10(0.1), math.log10(200.0), 17))  # 5 a decade
SETTLE_S = 30.0  # after each pressure step (the Wren tube's time constant is 11 s at most)


def open_device(root, gas="N2"):
    url = "sim://?scenario=calibration&channels=1&speed=%d&seed=7&gas=%s&root=%s" % (SPEED, gas, root)
    port = serial.serial_for_url(url, timeout=0.05)
    client = Client(Link(port, timeout_s=3.0), channels=1).open()
    dev = calrun.sim_device(port)
    return port, client, dev, calrun.sim_clock(dev, client.link)


def mean_pressure(client, clock, n=10, interval_s=1.0):
    """Mean of n device readings of channel 1 (Pa); every one must be state ok."""
    ps = []
    for _ in range(n):
        text = transfer.call(client, "MEAS? (@1);:CONF:UNIT?", 2)[0]
        value, unit, state, fault = text.split(",")
        assert state == "OK" and unit == "PA", text
        ps.append(float(value))
        clock.wait(interval_s)
    return sum(ps) / n


@pytest.fixture(scope="module")
def calibrated(tmp_path_factory):
    root = tmp_path_factory.mktemp("device")
    out = tmp_path_factory.mktemp("report")
    t0 = time.monotonic()
    port, client, dev, clock = open_device(root)
    ref = SimReference(lambda: dev.bench.true_pressure_pa(0), name="simulated capacitance gauge",
                       u_rel=U_REF, seed=11, noise_rel=0.001, resolution_rel=1e-4)
    news = []
    res = calrun.run(client, 1, "N2", POINTS_PA, ref, calrun.SimChamber(dev, 1), clock, str(out),
                     "simulated reference, invented for the tests (no real certificate)",
                     settle_s=SETTLE_S, progress=news.append, push=True, name="cal_n2")
    mids = []
    pc = [b.p_pa for b in res.cal.budgets]
    wait_s = 300.0  # from 200 Pa down to 0.2 Pa: 10 mV of EMF to settle at tau ~ 11 s
    for a, b in zip(pc, pc[1:]):
        p = math.sqrt(a * b)
        if 1e-3 * PA_PER_TORR <= p <= 1.0 * PA_PER_TORR:
            dev.bench.scenarios[0].set_pressure(p, dev.bench.time_s)
            clock.wait(wait_s)
            wait_s = 60.0  # neighbouring pressures: a small step
            mids.append((p, mean_pressure(client, clock)))
    port.close()
    return {"res": res, "ref": ref, "root": root, "out": out, "mids": mids, "news": news,
            "wall_s": time.monotonic() - t0}


def test_calibration_ran_every_step(calibrated):
    res = calibrated["res"]
    steps = [d["step"] for d in calibrated["news"]]
    assert steps[0] == "base" and "zero" in steps and steps.count("taken") == len(POINTS_PA)
    # the zero moved the heater to where the demo tube gives its nominal zero EMF
    assert res.zero_mv is not None and abs(res.zero_mv) < 0.01
    assert 150.0 < res.heater_ma < 180.0
    c = res.cal
    assert len(c.budgets) == len(POINTS_PA) and not c.fit.rejected
    assert res.push.channel == 1
    assert c.table.wall_c == res.wall_c == pytest.approx(22.0, abs=0.5)  # the bell jar's 22 C
    with open(res.paths["table"], "rb") as f:
        assert tablefile.parse(f.read())[1] == res.push.crc32
    # U can be no smaller than 2 x the reference's 1 % alone (GUM 6.2, k = 2)
    assert min(b.U_rel for b in c.budgets) >= 2 * U_REF
    with open(res.paths["markdown"], encoding="utf-8") as f:
        md = f.read()
    assert "simulated reference, invented for the tests" in md and "not a safety interlock" in md


def test_device_reads_the_true_pressure_within_U_between_the_points(calibrated):
    c = calibrated["res"].cal
    mids = calibrated["mids"]
    assert len(mids) == 14  # 0.2..100 Pa: the midpoints of 5 points a decade inside 0.133..133 Pa
    errs = []
    for p_true, p_dev in mids:
        err = p_dev / p_true - 1.0
        u = c.u_rel_at(p_true)
        assert abs(err) <= u, (p_true, err, u)
        errs.append(err)
    # the reference's seeded error is what the table inherits, as a common offset: in the
    # decade where the interpolation is best the mean error is within 1 % of it
    mid = [e for (p, _), e in zip(mids, errs) if 1.0 <= p <= 30.0]
    assert np.mean(mid) == pytest.approx(calibrated["ref"].error_rel, abs=0.01)


def test_derived_he_table_reads_the_true_he_pressure_within_its_band(calibrated, tmp_path):
    n2 = calibrated["res"].cal.table
    d = derive.derive_table(n2, "He")
    path = str(tmp_path / "cal_he.json")
    derive.write(d, path)
    lo_pa, hi_pa = d.table.p_min_pa, d.table.p_max_pa
    port, client, dev, clock = open_device(calibrated["root"], gas="He")
    try:
        assert dev.bench.true_gas(0) == "He"
        # the same device, from the same root: its zero and heater current are kept
        assert client.heater_target_ma(1) == pytest.approx(calibrated["res"].heater_ma, abs=1e-6)
        pushed = transfer.push(client, path, channel=1, name="cal_he")
        assert client.table(1) == "cal_he"
        refer = calrun.table_referral(d.table)  # the channel's referral for this table
        test_p = [p for p in np.logspace(math.log10(0.2), math.log10(100.0), 8) if lo_pa < p < hi_pa]
        assert len(test_p) >= 6
        for p in test_p:
            dev.bench.scenarios[0].set_pressure(float(p), dev.bench.time_s)
            clock.wait(60.0)
            es = []
            for _ in range(5):
                # one line, one sample: EMF, junction and the device's own reading
                emf, t_cj, reading = transfer.call(client, "MEAS:EMF? (@1);JUNC? (@1);:MEAS? (@1)", 3)
                e = refer(float(emf), float(t_cj))
                value, unit, state, fault = reading.split(",")
                assert state == "OK" and unit == "PA", reading
                # the device converts with the pushed table: its reading is the table's at that EMF
                # (the channel refers with the low-passed junction temperature the reply shows)
                assert float(value) == pytest.approx(d.table.convert(e)[0], rel=1e-3)
                es.append(e)
                clock.wait(1.0)
            lo, hi = d.band.limits_pa([float(np.mean(es))])
            assert lo[0] <= p <= hi[0], (p, lo[0], hi[0])
        with open(path, "rb") as f:
            assert pushed.crc32 == tablefile.parse(f.read())[1]
    finally:
        port.close()


def test_points_option():
    from tcgauge.cmd_calibrate import parse_points

    # 1 Torr = 101325/760 Pa exactly (NIST SP 811, B.8)
    assert parse_points("1e-3:1:1", "TORR") == pytest.approx([x * 101325 / 760 for x in (1e-3, 1e-2, 0.1, 1)])
    assert parse_points("0.1, 1 10", "PA") == [0.1, 1.0, 10.0]
    with pytest.raises(Exception) as exc:
        parse_points("1:0.1:3", "PA")
    assert str(exc.value) == "--points: expected 'P1,P2,...' or 'LO:HI:PER_DECADE', got '1:0.1:3'"


def test_cli_calibrate_on_the_simulator(tmp_path, capsys):
    from tcgauge.cli import main

    out = tmp_path / "cal"
    url = "sim://?scenario=calibration&channels=1&speed=%d&seed=3" % SPEED
    argv = ["calibrate", "--port", url, "--points", "1e-3:1:2", "--unit", "TORR", "--reference", "sim",
            "--traceability", "simulated reference, invented", "-o", str(out), "--settle", "30", "--push"]
    assert main(argv) == 0
    lines = capsys.readouterr().out.splitlines()
    # 1e-3..1 Torr at 2 a decade: 2 * 3 + 1 = 7 log-spaced points, both ends
    assert lines[0] == "reading the reference at base pressure"
    assert lines[2] == "point 1/7: about 0.133 Pa" and "point 7/7: about 133 Pa" in lines
    assert sum(1 for x in lines if x.startswith("point ") and " taken: " in x) == 7
    assert lines[-2] == "wrote %s, %s, %s" % (out / "table.json", out / "calibration.md",
                                               out / "calibration.png")
    with open(str(out / "table.json"), "rb") as f:
        crc = tablefile.parse(f.read())[1]
    assert lines[-1] == "pushed as cal_n2 to channel 1, crc32 0x%08x verified" % crc


def test_cli_calibrate_with_earlier_calibrations(tmp_path, capsys):
    from tcgauge.cli import main

    # an earlier calibration of the same tube in N2: the simulator's own table, 2 % high
    earlier = make_table("wren-demo", "N2", 24, 0.05, 500.0)
    shifted = Table([(e, p * 1.02) for e, p in earlier.points], earlier.gas, earlier.profile,
                    earlier.heater_ma, earlier.ref_c, earlier.tc_type, source="earlier run (simulated)")
    path = tmp_path / "earlier.json"
    path.write_text(tablefile.dumps(shifted))
    out = tmp_path / "cal"
    url = "sim://?scenario=calibration&channels=1&speed=%d&seed=3" % SPEED
    argv = ["calibrate", "--port", url, "--points", "1e-3:1:1", "--unit", "TORR", "--reference", "sim",
            "--traceability", "simulated reference, invented", "-o", str(out), "--settle", "30",
            "--earlier", str(path)]
    assert main(argv) == 0
    text = (out / "calibration.md").read_text()
    assert "reproducibility (repeated calibrations)" in text
    note = [x for x in text.splitlines() if x.startswith("- reproducibility ")]
    assert len(note) == 1 and note[0].endswith("(relative standard deviation of 2 calibrations: this one and "
                                                "1 earlier)")
    # two runs 2 % apart give 2 % / sqrt(2) = 1.4 % (GUM 4.2.2); each run's own errors move the
    # largest point's spread (the term is the largest over the points) somewhat either way
    rel = float(note[0].split()[2]) / 100.0
    assert 0.005 < rel < 0.03, note
    assert NO_REPRO_NOTE not in text
    with pytest.raises(SystemExit) as exc:  # argparse: one or the other
        main(argv + ["--reproducibility", "0.02"])
    assert exc.value.code == 2
    assert "argument --reproducibility: not allowed with argument --earlier" in capsys.readouterr().err


def test_cli_calibrate_stops_with_the_devices_reason(tmp_path, capsys):
    from tcgauge.cli import main

    # an open thermocouple from the start: the device refuses the vacuum zero
    url = "sim://?scenario=calibration&channels=1&speed=%d&fault=tc-open@0" % SPEED
    argv = ["calibrate", "--port", url, "--points", "0.1,1,10,100", "--unit", "PA", "--reference", "sim",
            "--traceability", "x", "-o", str(tmp_path / "cal")]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert err == ("tcgauge: error: calibration stopped: vacuum zero refused: "
                   "channel 1 has a fault: tc-open")
    assert not (tmp_path / "cal").exists()

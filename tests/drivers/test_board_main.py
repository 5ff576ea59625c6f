"""The board's entry point under CPython: board.json -> board -> gaugecore.assembly.build
-> gaugecore.service.Service, on a fake `machine` wired to fake chips (fake_machine.World),
with the host's end of the USB serial as fake_machine.HostPort.

Sources: NIST ITS-90 type K reference function (the `thermocouples` package,
checked by tests/core against NIST Monograph 175) for the cold-junction
term; SBAS501 / SBAS444 / DS22039 / SNOS758 formulas via the fake chips;
IEEE 488.2 10.14 for the four *IDN? fields; SCPI-1999 Vol. 2 21.8 for the
error numbers (-200 execution error, -222 data out of range).
"""

import importlib.util
import json
import os
import shutil
import sys

import pytest
import thermocouples

sys.path.insert(0, os.path.dirname(__file__))
import fake_machine  # noqa: E402

from boards import esp32, pico, pico_w  # noqa: E402
from gaugecore import record, tablefile  # noqa: E402

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
FIRMWARE = os.path.join(ROOT, "firmware")
IDN = "tcgauge,TCGAUGE-2CH,0,0.1.0"


def load_main():
    spec = importlib.util.spec_from_file_location("tcgauge_board_main", os.path.join(FIRMWARE, "main.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def board_dir(tmp_path, **changes):
    with open(os.path.join(FIRMWARE, "board.json")) as f:
        cfg = json.load(f)
    cfg.update(changes)
    (tmp_path / "board.json").write_text(json.dumps(cfg))
    if not (tmp_path / "tables").exists():
        (tmp_path / "tables").mkdir()
        shutil.copy(os.path.join(FIRMWARE, "tables", "demo_n2.json"), str(tmp_path / "tables"))
    return str(tmp_path) + "/"


def run_for(app, world, seconds):
    end = world.clock.us + int(seconds * 1e6)
    while world.clock.us < end:
        app.step()
        world.clock.sleep_ms(5)


def ask(app, port, text, world=None):
    """Send one or more lines, poll until the replies are out -> reply lines."""
    port.lines()  # forget anything before
    port.send(text)
    for _ in range(5):
        app.service.poll()
    return port.lines()


def sim_sleep(world):
    """A sleep_ms coroutine on simulated time: a ticker task moves the fake clock 1 ms
    per event-loop round (driver waits move it too); sleepers wait for their time."""
    import asyncio

    state = {"ticker": None}

    async def ticker():
        while True:
            world.clock.sleep_ms(1)
            await asyncio.sleep(0)

    async def sleep_ms(ms):
        if state["ticker"] is None or state["ticker"].get_loop() is not asyncio.get_running_loop():
            state["ticker"] = asyncio.create_task(ticker())
        wake = world.clock.us + int(ms * 1000)
        await asyncio.sleep(0)
        while world.clock.us < wake:
            await asyncio.sleep(0)

    return sleep_ms


@pytest.fixture
def main_mod():
    return load_main()


def boot(main_mod, monkeypatch, tmp_path, pins=pico.PINS, world_kw=None, **changes):
    world = fake_machine.World(pins, **(world_kw or {}))
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path, **changes)
    port = fake_machine.HostPort()
    app = main_mod.boot(root=root, clock=world.clock, port=port)
    return app, world, root, port


def test_whole_board_reads_pressure(main_mod, monkeypatch, tmp_path):
    # the connector block at the demo table's wall temperature (22 C): there the rise
    # referral and the plain law of intermediate temperatures give the same table EMF
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path, world_kw={"temp_c": 22.0})
    assert world.spi_args == (0, 1000000, 0, 1)  # SBAS501 8.5.1: SPI mode 1 (CPOL 0, CPHA 1)
    assert world.i2c_args[0] == 0 and world.i2c_args[3] == 400000
    # boot notes of the board; the DACs' power-on code set to 0
    assert app.notes == ["heater 1: DAC power-on code set to 0", "heater 2: DAC power-on code set to 0"]
    assert world.dacs[0].eeprom_code == 0 and world.dacs[1].eeprom_code == 0
    # empty store: assembly installed board.json's catalogue table in both slots
    assert os.path.exists(root + "store/ch1.json") and os.path.exists(root + "store/ch2.json")
    assert app.device.table(1) == "demo_n2" and app.device.table(2) == "demo_n2"
    # relays released at boot (active high: pins low)
    for k in (0, 1):
        for p in pico.PINS["relays"][k]:
            assert world.pin(p).value() == 0
    run_for(app, world, 12.0)
    table = tablefile.load(root + "tables/demo_n2.json")
    assert table.wall_c == 22.0
    e_cj = thermocouples.get_thermocouple("K").temp_to_volt(22.0) * 1e3  # ITS-90 type K, 22 C: 0.879 mV (NIST table)
    assert e_cj == pytest.approx(0.879, abs=5e-4)
    for k in (0, 1):
        ch = app.channels[k]
        assert ch.state == "ok", (k, ch.state, ch.fault)
        # heater regulated to 165 mA within one 12-bit DAC step (0.2519 A / 4096 = 61.5 uA)
        assert abs(world.current_a(k) * 1000) == pytest.approx(165.0, abs=0.0615)
        # heater voltage read back through the gain-0.5 amplifier: 1.5 ohm * 165 mA
        assert abs(ch.regulator.voltage_v) == pytest.approx(0.2475, abs=0.002)
        emf_true = world.emf_at_165_mv[k] * (abs(world.current_a(k)) / 0.165) ** 2
        # the loop dithers by a DAC step between reads and EMF ~ I^2: allow two steps,
        # 2 * 2 * 61.5 uA / 165 mA of the EMF
        assert ch.emf_mv == pytest.approx(emf_true, rel=4 * 0.2519 / 4096 / 0.165)
        assert ch.cj_c == 22.0  # TMP117: 22 C = 0B00h exactly (7.8125 m°C per LSB)
        # law of intermediate temperatures with the reference library's E_K(22 C):
        # the table is referred to 0 C, so it is looked up at E_meas + E(22 C)
        p_ref, state = table.convert(ch.emf_mv + e_cj)
        assert state == "ok"
        assert ch.pressure_pa == pytest.approx(p_ref, rel=1e-5)
    # the bridge was reversed (reverse sampling)
    pol = world.pin(pico.PINS["polarity"][0]).history
    assert len(pol) > 10


def test_protocol_through_the_service(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    assert app.controller.on_reading == app.service.on_reading  # the Service hooked it, not main.py
    run_for(app, world, 8.0)
    assert ask(app, port, b"*IDN?\n") == [IDN]  # IEEE 488.2 10.14
    # the boot notes wait in the error queue, oldest first
    assert ask(app, port, b"SYST:ERR?\n") == ['-200,"Execution error;heater 1: DAC power-on code set to 0"']
    reply = ask(app, port, b"MEAS? (@1,2)\n")[0].split(",")
    for k in (0, 1):
        ch = app.channels[k]
        assert float(reply[4 * k]) == pytest.approx(ch.pressure_pa, rel=1e-5)
        assert reply[4 * k + 1:4 * k + 4] == ["PA", "OK", "NONE"]  # device default unit: Pa
    assert float(ask(app, port, b"MEAS:HEAT? (@1)\n")[0]) == pytest.approx(165.0, abs=0.1)
    assert float(ask(app, port, b"MEAS:JUNC? (@2)\n")[0]) == 25.0
    assert ask(app, port, b"STAT:FAUL? (@1,2)\n") == ["NONE,NONE"]


def test_streams_records_while_answering(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 4.0)
    port.send(b"STR ON\n")
    run_for(app, world, 5.0)
    port.send(b"*IDN?\n")
    run_for(app, world, 5.0)
    port.send(b"STR OFF\n")
    app.service.poll()
    lines = port.lines()
    assert IDN in lines
    recs = [record.decode(x) for x in lines if x != IDN]
    # 2 Hz (board.json) on two channels for 10 s: 40 records, +-1 sample per channel at the edges
    assert 36 <= len(recs) <= 44
    assert [r.seq for r in recs] == list(range(len(recs)))  # no gap: the link kept up
    assert {r.ch for r in recs} == {1, 2}
    assert all(r.state == "ok" for r in recs)
    last = [r for r in recs if r.ch == 1][-1]  # the channel's latest reading, as %.4E
    assert last.pressure_pa == pytest.approx(app.channels[0].pressure_pa, rel=1e-4)
    assert last.emf_mv == pytest.approx(app.channels[0].emf_mv, abs=5e-5)  # as %.4f
    assert app.service.dropped == 0


def test_missing_chip_stops_the_boot_with_its_name(main_mod, monkeypatch, tmp_path):
    world = fake_machine.World(pico.PINS)
    del world.i2c.chips[0x61]
    world.i2c.attach(0x50, object())  # e.g. an EEPROM nobody asked for
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path)
    with pytest.raises(OSError) as e:
        main_mod.boot(root=root, clock=world.clock, port=fake_machine.HostPort())
    assert str(e.value) == "i2c: no answer at 0x61 (MCP4725 heater 2)"
    # the DAC that does answer was switched off before the boot stopped (DS22039: PD = 01, code 0)
    assert world.dacs[0].code == 0 and world.dacs[0].pd == 1
    assert world.dacs[0].vout() == 0.0


def test_display_shows_channels(main_mod, monkeypatch, tmp_path):
    drawn = []

    class FB:
        def __init__(self, buf, w, h, fmt):
            pass

        def text(self, s, x, y, c):
            drawn.append((s, x, y))

    import types
    monkeypatch.setitem(sys.modules, "framebuf", types.SimpleNamespace(FrameBuffer=FB, MONO_VLSB=0))
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 8.0)
    lines = app.hw["display"].lines
    assert lines[0].startswith("1: ") and lines[0].endswith(" Pa ok")  # device default unit: PA
    assert lines[1].startswith("2: ") and lines[1].endswith(" Pa ok")
    assert world.oled.on and world.oled.data_writes >= 2
    ask(app, port, b"CONF:UNIT TORR\n")
    run_for(app, world, 1.1)
    assert app.hw["display"].lines[0].endswith(" Torr ok")  # the display follows the device's unit


def test_open_thermocouple_reaches_the_protocol(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 6.0)
    world.ads1220.open_mux.add(0x5)  # channel 2's thermocouple breaks
    run_for(app, world, 3.0)  # 6 samples at 2 Hz
    ch2 = app.channels[1]
    assert ch2.state == "fault" and ch2.fault == "tc-open"
    assert ch2.pressure_pa is None
    assert app.channels[0].state == "ok"
    assert ask(app, port, b"STAT:FAUL? (@1,2)\n") == ["NONE,TC-OPEN"]
    reply = ask(app, port, b"MEAS? (@2)\n")[0]
    assert reply == "NAN,PA,FAULT,TC-OPEN"
    # later the repeated full-scale value also trips the core's stuck-converter
    # check (adc-failure ranks above tc-open): tc-open stays active beneath it
    run_for(app, world, 6.0)
    assert ch2.state == "fault" and ch2.monitor.is_active("tc-open")


def test_no_display_is_a_note(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path, world_kw={"with_display": False})
    assert app.hw["display"] is None
    assert "display: none at 0x3c" in app.notes


def test_other_boards_build(main_mod, monkeypatch, tmp_path):
    for board, pins in (("pico_w", pico_w.PINS), ("esp32", esp32.PINS)):
        d = tmp_path / board
        d.mkdir()
        app, world, root, port = boot(main_mod, monkeypatch, d, pins=pins, board=board)
        assert world.pin(pins["led"]) is app.hw["led"]
        run_for(app, world, 1.0)
        assert ask(app, port, b"*IDN?\n") == [IDN]
    assert pico_w.PINS["led"] == "LED" and esp32.PINS["spi"] == 2


def test_pwm_dac_and_internal_cj(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path, dac="pwm", cj="adc")
    assert [p.pin for p in world.pwms] == [world.pin(6), world.pin(7)]
    assert [p.hz for p in world.pwms] == [100000, 100000]
    app.channels[0].port.set_ma(165.0)
    # duty for 165 mA through the 12.1 k / 1.00 k divider: 0.165 * 13.1 / 3.3 * 65535 = 42925.4
    assert world.pwms[0].duties[-1] == 42925
    assert app.channels[0].sampler.cj.read_c() == 25.0  # ADS1220 sensor: 25 C = 0x320 (8.3.13)


def test_config_errors(main_mod, tmp_path):
    p = tmp_path / "board.json"
    tube = '"tube": {"nominal_ma": 1, "min_ma": 1, "max_ma": 2, "zero_emf_mv": 3}'
    cases = [
        ("[]", "board.json: expected a JSON object"),
        ("{", "board.json: not valid JSON"),
        ('{"board": "uno"}', "board.json: board must be one of pico, pico_w, esp32, not 'uno'"),
        ('{"board": "pico", "tables": ["a"]}', "board.json: tables must list one table name per channel"),
        ('{"board": "pico", "tables": ["a", "b"]}',
         "board.json: tube must give nominal_ma, min_ma, max_ma, zero_emf_mv"),
        ('{"board": "pico", "tables": ["a", "b"], "tube": {"nominal_ma": 1, "min_ma": 1, "max_ma": 2}}',
         "board.json: tube.zero_emf_mv must be a number"),
        ('{"board": "pico", "tables": ["a", "b"], %s, "rate_hz": "fast"}' % tube,
         "board.json: rate_hz must be a number"),
        ('{"board": "pico", "tables": ["a", "b"], %s, "rate_hz": 0}' % tube,
         "board.json: rate_hz must be in 0.1..50, not 0"),
        ('{"board": "pico", "tables": ["a", "b"], %s, "settle_ms": 500}' % tube,
         "board.json: settle_ms must be in 0..100, not 500"),
    ]
    for text, msg in cases:
        p.write_text(text)
        with pytest.raises(ValueError) as e:
            main_mod.read_config(str(p))
        assert str(e.value) == msg


def test_hardware_choice_errors(main_mod, monkeypatch, tmp_path):
    from boards import common

    with pytest.raises(ValueError) as e:
        common.settings({"adc": "ads1115", "cj": "adc"})
    assert str(e.value) == "board.json: cj 'adc' needs adc 'ads1220' (the ADS1115 has no sensor)"
    with pytest.raises(ValueError) as e:
        common.settings({"dac": "r2r"})
    assert str(e.value) == "board.json: dac must be one of mcp4725, pwm, not 'r2r'"
    with pytest.raises(ValueError) as e:
        common.settings({"channels": 3})
    assert str(e.value) == "board.json: channels must be 1 or 2, not 3"


def test_missing_table_stops_the_boot_with_heaters_off(main_mod, monkeypatch, tmp_path):
    world = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path, tables=["demo_n2", "nitrogen_9"])
    with pytest.raises(OSError) as e:
        main_mod.boot(root=root, clock=world.clock, port=fake_machine.HostPort())
    assert str(e.value) == "channel 2: no usable table on the device (no table named nitrogen_9 in the catalogue)"
    for dac in world.dacs:  # DS22039: power-down PD = 01 with code 0, no sink current
        assert dac.code == 0 and dac.pd == 1 and dac.vout() == 0.0
    # main() turns the failure into one line and leaves the REPL usable
    world2 = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world2.module())
    import contextlib
    import io

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main_mod.main(root=root, clock=world2.clock, port=fake_machine.HostPort()) is None
    assert out.getvalue() == ("tcgauge: boot failed: channel 2: no usable table on the device "
                              "(no table named nitrogen_9 in the catalogue)\n")


def test_corrupt_active_table_falls_back_to_previous(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    with open(root + "store/ch1.json", "rb") as f:
        good = f.read()
    with open(root + "store/ch1.prev.json", "wb") as f:
        f.write(good)
    with open(root + "store/ch1.json", "wb") as f:
        f.write(good[:-20])  # torn write
    world2 = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world2.module())
    port2 = fake_machine.HostPort()
    app2 = main_mod.boot(root=root, clock=world2.clock, port=port2)
    assert any(n.startswith("table ch1: active file corrupt") and n.endswith("using previous")
               for n in app2.notes)
    assert app2.channels[0].table == app.channels[0].table
    errors = ask(app2, port2, b"SYST:ERR?\nSYST:ERR?\nSYST:ERR?\n")
    assert errors[2].startswith('-200,"Execution error;table ch1: active file corrupt')


def test_asyncio_loop_serves_the_port_and_streams(main_mod, monkeypatch, tmp_path):
    import asyncio

    world = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world.module())
    port = fake_machine.HostPort(budget=24)  # a link that takes 24 bytes a write
    app = main_mod.boot(root=board_dir(tmp_path), clock=world.clock, sleep_ms=sim_sleep(world), port=port)
    port.send(b"*IDN?\nSYST:ERR:COUN?\nSTR ON\n")
    asyncio.run(main_mod.run(app, cycles=1500))
    lines = port.lines()
    assert lines[0] == IDN
    assert lines[1] == "2"  # the two boot notes wait in the error queue
    recs = [record.decode(line) for line in lines[2:]]
    assert len(recs) >= 10
    assert {r.ch for r in recs} == {1, 2}
    assert [r.seq for r in recs] == list(range(len(recs)))
    assert app.controller.cycles == 1500
    assert all(r.state == "ok" for r in recs[-4:])
    assert app.service.running is False and app.running is False
    assert world.clock.us >= 1500 * 5000  # the controller's 5 ms grid, at least
    # the display/LED task ran beside them: the LED toggles once a second
    led = [v for t, v in world.pin(pico.PINS["led"]).history]
    assert len(led) >= world.clock.us // 1000000 and led[1:4] == [1, 0, 1]


def test_main_switches_the_heaters_off_when_the_loop_ends(main_mod, monkeypatch, tmp_path):
    world = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path)
    port = fake_machine.HostPort()
    # invented levels: the fake tube reads about 12 Pa, above the on level, so the relay closes
    port.send(b"SETP1:DIR ABOV;ONL 10;OFFL 5;ENAB ON\n")
    app = main_mod.main(root=root, clock=world.clock, port=port, sleep_ms=sim_sleep(world), cycles=1200)
    assert app.controller.cycles == 1200
    assert port.lines() == []  # the command was taken without a reply
    assert app.device.sp_relay(1) is True  # energised when the loop stopped ...
    assert world.pin(pico.PINS["relays"][0][0]).value() == 0
    on = [v for t, v in world.pin(pico.PINS["relays"][0][0]).history]
    assert on[-2:] == [1, 0]  # ... and released by shutdown
    for dac in world.dacs:
        assert dac.code == 0 and dac.pd == 1 and dac.vout() == 0.0


def test_usb_port_reads_without_blocking(main_mod):
    import io

    r, w = os.pipe()
    try:
        stdin = io.TextIOWrapper(io.BufferedReader(io.FileIO(r, "rb", closefd=False)))
        out = io.BytesIO()
        usb = main_mod.UsbPort(stdin=stdin, stdout=out)
        assert usb.read_available() == b""  # nothing there: returns at once
        os.write(w, b"*IDN?\n" + b"x" * 100)
        got = usb.read_available()
        assert got == b"*IDN?\n" + b"x" * 58  # one chunk of 64 bytes
        assert usb.read_available() == b"x" * 42  # the rest: none was held in a read buffer
        assert usb.read_available() == b""
        assert usb.write(memoryview(b"abc\n")) == 4
        assert out.getvalue() == b"abc\n"
    finally:
        os.close(r)
        os.close(w)


# ---------------------------------------------------------------- the board's rate limit
# One ADS1220 conversion at 20 SPS takes one data period, 1/20 s (SBAS501 8.3.7,
# single-shot mode; the driver waits 1000 // 20 + 2 = 52 ms). A sample of one
# channel is two of them (+I and -I) plus TcInput's open check every 10th read,
# and a 5 ms settle window per read: 2 * (2.2 * 52 + 2 * 5) = 248.8 ms for two
# channels; with main.RATE_HEADROOM 1.25: 1000 / 311 ms -> 3.2 Hz (0.1 Hz steps).
BOARD_RATES = [
    # (board.json changes, World options, rate_max_hz by that formula)
    ({}, {}, 3.2),
    ({"channels": 1}, {}, 6.4),  # 2.2 * 52 + 10 = 124.4 ms
    ({"adc_rate_sps": 90}, {}, 10.3),  # 1000 // 90 + 2 = 13 ms: 2 * (2.2 * 13 + 10) = 77.2 ms
    # ADS1115 at 860 SPS (SBAS444 Table 8), 1000 // 860 + 1 = 2 ms, no open check: 2 * (4 + 10) = 28 ms
    ({"adc": "ads1115"}, {"with_tc1115": True}, 28.5),
]


@pytest.mark.parametrize("changes,world_kw,expect_hz", BOARD_RATES)
def test_the_board_sustains_its_maximum_rate(main_mod, monkeypatch, tmp_path, changes, world_kw, expect_hz):
    # board.json asks for more than the board can do: capped, with a note
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path, world_kw=world_kw, rate_hz=50, **changes)
    assert main_mod.rate_max_hz(app.hw["channels"]) == expect_hz
    assert app.device.rate_max_hz == expect_hz
    assert "board.json: rate_hz 50 Hz is above this board's %g Hz, using %g Hz" % (expect_hz, expect_hz) in app.notes
    period_ms = int(round(1000.0 / expect_hz))
    assert app.channels[0].sampler.period_ms == period_ms
    run_for(app, world, 3.0)
    seq0 = [c.seq for c in app.channels]
    run_for(app, world, 10.0)
    # the fake chips take the datasheet conversion times on the fake clock: at the
    # maximum every channel keeps the whole-ms grid (one sample of slack at the edges)
    for k in range(len(app.channels)):
        got = app.channels[k].seq - seq0[k]
        assert abs(got - 10000.0 / period_ms) <= 1.0, (k, got)
        if changes.get("adc") != "ads1115":  # the noiseless fake ADS1115 repeats one code at
            # 7.8 uV a step, which the core's stuck-converter check calls adc-failure
            assert app.channels[k].monitor.active is None, app.channels[k].monitor.active


def test_the_maximum_is_needed(main_mod, monkeypatch, tmp_path):
    # past the headroom the default board falls behind its grid: 1.5 x 3.2 Hz asked,
    # the conversions alone (248.8 ms a round) allow at most 4.02 Hz
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    app.device._apply_rate(4.8)  # below the device's own 50 Hz: only the board's limit stops it
    run_for(app, world, 2.0)
    seq0 = app.channels[0].seq
    run_for(app, world, 10.0)
    got = (app.channels[0].seq - seq0) / 10.0
    assert got < 0.9 * 4.8 and got == pytest.approx(1000.0 / 248.8, rel=0.06)


def test_a_rate_above_the_board_is_refused(main_mod, monkeypatch, tmp_path):
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path)
    ask(app, port, b"*CLS\n")
    assert ask(app, port, b"CONF:RATE 5\nSYST:ERR?\nCONF:RATE?\n") == [
        '-222,"Data out of range;5 Hz not in 0.1..3.2 Hz"', "2.000000E+00"]
    assert ask(app, port, b"CONF:RATE 3.2\nSYST:ERR?\nCONF:RATE?\n") == [
        '0,"No error"', "3.205128E+00"]  # the whole-ms period: 1000 / 312 ms
    # the same cap after a reset: *RST goes back to board.json's 2 Hz
    assert ask(app, port, b"*RST;:CONF:RATE?\n") == ["2.000000E+00"]


def test_a_stored_rate_above_a_slower_board(main_mod, monkeypatch, tmp_path):
    # the store was written by the ADS1115 build at 20 Hz; the board is rebuilt with the ADS1220
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path, world_kw={"with_tc1115": True}, adc="ads1115")
    assert ask(app, port, b"CONF:RATE 20\nSYST:ERR:COUN?\n") == ["2"]  # only the two boot notes
    world2 = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world2.module())
    board_dir(tmp_path, adc="ads1220")
    app2 = main_mod.boot(root=root, clock=world2.clock, port=fake_machine.HostPort())
    assert "config: 20 Hz is above this board's 3.2 Hz, using 2 Hz" in app2.notes
    assert app2.device.rate_hz() == 2.0


def test_board_and_virtual_device_share_one_construction_path(main_mod, monkeypatch, tmp_path):
    """main.py and tcgauge.sim.device.VirtualDevice both build through gaugecore.assembly.build."""
    from gaugecore import assembly
    from tcgauge.sim import device as simdevice

    assert simdevice.build is assembly.build  # the simulator imports the very function
    real = assembly.build
    calls = []

    def spy(hardware, clock, catalogue, store, limits, **kw):
        dev = real(hardware, clock, catalogue, store, limits, **kw)
        calls.append((hardware, dev))
        return dev

    monkeypatch.setattr(assembly, "build", spy)
    monkeypatch.setattr(simdevice, "build", spy)
    (tmp_path / "board").mkdir()
    app, world, root, port = boot(main_mod, monkeypatch, tmp_path / "board")
    vd = simdevice.VirtualDevice(root=str(tmp_path / "sim"))
    try:
        assert len(calls) == 2
        assert calls[0][0] is app.hw["channels"] and calls[0][1] is app.device
        assert calls[1][0] is vd.bench.channels and calls[1][1] is vd.device
        assert type(app.device) is type(vd.device)
    finally:
        vd.close()


def test_assembly_checks_the_rate_limit(tmp_path):
    import shutil as sh

    from gaugecore.assembly import build
    from gaugecore.catalogue import Catalogue
    from gaugecore.store import Store
    from tcgauge.sim.bench import Bench

    tables = tmp_path / "tables"
    tables.mkdir()
    sh.copy(os.path.join(FIRMWARE, "tables", "demo_n2.json"), str(tables))
    bench = Bench("wren-demo", seed=1, channels=1)
    lim = [{"nominal_ma": 165.0, "min_ma": 100.0, "max_ma": 220.0, "zero_emf_mv": 12.3}]  # invented

    def make(folder, **kw):
        return build(bench.channels, bench.clock, Catalogue(str(tables)), Store(str(tmp_path / folder)), lim, **kw)

    with pytest.raises(ValueError) as e:
        make("a", rate_hz=5.0, rate_max_hz=3.2)
    assert str(e.value) == "default rate 5 Hz is above the maximum 3.2 Hz"
    with pytest.raises(ValueError) as e:
        make("b", rate_max_hz=60.0)
    assert str(e.value) == "maximum rate 60 Hz not in 0.1..50 Hz"
    dev = make("c", rate_max_hz=3.2)  # no rate given: the device default (10 Hz) is capped to the maximum
    assert dev.rate_max_hz == 3.2 and dev.config["rate_hz"] == 3.2
    assert make("d").rate_max_hz == 50.0  # the virtual device's case: the protocol's own limit

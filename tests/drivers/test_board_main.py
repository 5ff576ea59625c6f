"""The board's entry point under CPython: board.json -> board -> tables -> controller
-> protocol, on a fake `machine` wired to fake chips (fake_machine.World).

Sources: NIST ITS-90 type K reference function (the `thermocouples` package,
checked by tests/core against NIST Monograph 175) for the cold-junction
term; SBAS501 / SBAS444 / DS22039 / SNOS758 formulas via the fake chips;
IEEE 488.2 10.14 for the four *IDN? fields.
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
from gaugecore import tablefile  # noqa: E402

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
FIRMWARE = os.path.join(ROOT, "firmware")


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
    (tmp_path / "tables").mkdir()
    shutil.copy(os.path.join(FIRMWARE, "tables", "demo_n2.json"), str(tmp_path / "tables"))
    return str(tmp_path) + "/"


def run_for(app, world, seconds):
    end = world.clock.us + int(seconds * 1e6)
    while world.clock.us < end:
        app.step()
        world.clock.sleep_ms(5)


@pytest.fixture
def main_mod():
    return load_main()


def boot(main_mod, monkeypatch, tmp_path, pins=pico.PINS, world_kw=None, **changes):
    world = fake_machine.World(pins, **(world_kw or {}))
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path, **changes)
    app = main_mod.boot(root=root, clock=world.clock)
    return app, world, root


def test_whole_board_reads_pressure(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path)
    assert world.spi_args == (0, 1000000, 0, 1)  # SBAS501 8.5.1: SPI mode 1 (CPOL 0, CPHA 1)
    assert world.i2c_args[0] == 0 and world.i2c_args[3] == 400000
    # boot notes: empty store, tables installed from the catalogue; DACs' power-on code set to 0
    notes = app.device.notes
    assert "table ch1: no table installed" in notes
    assert "table ch1: installed demo_n2 from the catalogue" in notes
    assert "heater 1: DAC power-on code set to 0" in notes
    assert world.dacs[0].eeprom_code == 0 and world.dacs[1].eeprom_code == 0
    assert os.path.exists(root + "store/ch1.json") and os.path.exists(root + "store/ch2.json")
    # relays released at boot (active high: pins low)
    for k in (0, 1):
        for p in pico.PINS["relays"][k]:
            assert world.pin(p).value() == 0
    run_for(app, world, 12.0)
    table = tablefile.load(root + "tables/demo_n2.json")
    e_cj = thermocouples.get_thermocouple("K").temp_to_volt(25.0) * 1e3  # ITS-90 type K, 25 C: 1.000 mV (NIST table)
    assert e_cj == pytest.approx(1.000, abs=5e-4)
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
        assert ch.cj_c == 25.0  # TMP117: 25 C = 0C80h exactly
        # law of intermediate temperatures with the reference library's E_K(25 C):
        # the table is referred to 0 C, so it is looked up at E_meas + E(25 C)
        p_ref, state = table.convert(ch.emf_mv + e_cj)
        assert state == "ok"
        assert ch.pressure_pa == pytest.approx(p_ref, rel=1e-5)
    # the bridge was reversed (reverse sampling) and the sink was off while it switched
    pol = world.pin(pico.PINS["polarity"][0]).history
    assert len(pol) > 10


def test_protocol_on_the_board(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 8.0)
    assert app.handle(b"*IDN?\n") == ["tcgauge,TCGAUGE-2CH,0,0.1.0"]  # IEEE 488.2 10.14
    assert app.handle(b"SYST:ERR?\n")[0].startswith('-200,"Execution error;')
    reply = app.handle(b"MEAS:HEAT? (@1)\n")[0]
    assert float(reply) == pytest.approx(165.0, abs=0.1)
    reply = app.handle(b"MEAS:JUNC? (@2)\n")[0]
    assert float(reply) == 25.0
    assert app.handle(b"STAT:FAUL? (@1,2)\n") == ["NONE,NONE"]


def test_missing_chip_stops_the_boot_with_its_name(main_mod, monkeypatch, tmp_path):
    world = fake_machine.World(pico.PINS)
    del world.i2c.chips[0x61]
    world.i2c.attach(0x50, object())  # e.g. an EEPROM nobody asked for
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path)
    with pytest.raises(OSError) as e:
        main_mod.boot(root=root, clock=world.clock)
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
    app, world, root = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 8.0)
    lines = app.hw["display"].lines
    assert lines[0].startswith("1: ") and lines[0].endswith(" Pa ok")  # device default unit: PA
    assert lines[1].startswith("2: ") and lines[1].endswith(" Pa ok")
    assert world.oled.on and world.oled.data_writes >= 2


def test_open_thermocouple_reaches_the_protocol(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path)
    run_for(app, world, 6.0)
    world.ads1220.open_mux.add(0x5)  # channel 2's thermocouple breaks
    run_for(app, world, 3.0)  # 6 samples at 2 Hz
    ch2 = app.channels[1]
    assert ch2.state == "fault" and ch2.fault == "tc-open"
    assert ch2.pressure_pa is None
    assert app.channels[0].state == "ok"
    assert app.handle(b"STAT:FAUL? (@1,2)\n") == ["NONE,TC-OPEN"]
    reply = app.handle(b"MEAS? (@2)\n")[0]
    assert reply.startswith("NAN,") and reply.endswith(",FAULT,TC-OPEN")
    # later the repeated full-scale value also trips the core's stuck-converter
    # check (adc-failure ranks above tc-open): tc-open stays active beneath it
    run_for(app, world, 6.0)
    assert ch2.state == "fault" and ch2.monitor.is_active("tc-open")


def test_no_display_is_a_note(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path, world_kw={"with_display": False})
    assert app.hw["display"] is None
    assert "display: none at 0x3c" in app.device.notes


def test_other_boards_build(main_mod, monkeypatch, tmp_path):
    for board, pins in (("pico_w", pico_w.PINS), ("esp32", esp32.PINS)):
        d = tmp_path / board
        d.mkdir()
        app, world, root = boot(main_mod, monkeypatch, d, pins=pins, board=board)
        assert world.pin(pins["led"]) is app.hw["led"]
        run_for(app, world, 1.0)
    assert pico_w.PINS["led"] == "LED" and esp32.PINS["spi"] == 2


def test_pwm_dac_and_internal_cj(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path, dac="pwm", cj="adc")
    assert [p.pin for p in world.pwms] == [world.pin(6), world.pin(7)]
    assert [p.hz for p in world.pwms] == [100000, 100000]
    app.channels[0].port.set_ma(165.0)
    # duty for 165 mA through the 12.1 k / 1.00 k divider: 0.165 * 13.1 / 3.3 * 65535 = 42925.4
    assert world.pwms[0].duties[-1] == 42925
    assert app.channels[0].sampler.cj.read_c() == 25.0  # ADS1220 sensor: 25 C = 0x320 (8.3.13)


def test_config_errors(main_mod, tmp_path):
    p = tmp_path / "board.json"
    cases = [
        ("[]", "board.json: expected a JSON object"),
        ("{", "board.json: not valid JSON"),
        ('{"board": "uno"}', "board.json: board must be one of pico, pico_w, esp32, not 'uno'"),
        ('{"board": "pico", "tables": ["a"]}', "board.json: tables must list one table name per channel"),
        ('{"board": "pico", "tables": ["a", "b"]}',
         "board.json: tube must give nominal_ma, min_ma, max_ma, zero_emf_mv"),
        ('{"board": "pico", "tables": ["a", "b"], "tube": {"nominal_ma": 1, "min_ma": 1, "max_ma": 2}}',
         "board.json: tube.zero_emf_mv must be a number"),
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


def test_missing_table_stops_the_boot(main_mod, monkeypatch, tmp_path):
    world = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world.module())
    root = board_dir(tmp_path, tables=["demo_n2", "nitrogen_9"])
    with pytest.raises(OSError) as e:
        main_mod.boot(root=root, clock=world.clock)
    assert str(e.value) == "channel 2 has no usable table: no table named nitrogen_9 on the device"


def test_corrupt_active_table_falls_back_to_previous(main_mod, monkeypatch, tmp_path):
    app, world, root = boot(main_mod, monkeypatch, tmp_path)
    with open(root + "store/ch1.json", "rb") as f:
        good = f.read()
    with open(root + "store/ch1.prev.json", "wb") as f:
        f.write(good)
    with open(root + "store/ch1.json", "wb") as f:
        f.write(good[:-20])  # torn write
    world2 = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world2.module())
    app2 = main_mod.boot(root=root, clock=world2.clock)
    assert any(n.startswith("table ch1: active file corrupt") and n.endswith("using previous")
               for n in app2.device.notes)
    assert app2.channels[0].table == app.channels[0].table


def test_asyncio_loop_serves_the_port_and_streams(main_mod, monkeypatch, tmp_path):
    import asyncio

    from gaugecore import record

    world = fake_machine.World(pico.PINS)
    monkeypatch.setitem(sys.modules, "machine", world.module())

    async def sleep_ms(ms):  # simulated time: the loop's waits move the fake clock
        world.clock.sleep_ms(ms)
        await asyncio.sleep(0)

    app = main_mod.boot(root=board_dir(tmp_path), clock=world.clock, sleep_ms=sleep_ms)

    class Port:
        def __init__(self):
            self.pending = [b"*IDN?\n", b"SYST:ERR:COUN?\n", b"STR ON\n"]
            self.lines = []

        def read(self):
            return self.pending.pop(0) if self.pending else b""

        def write_line(self, text):
            self.lines.append(text)

    port = Port()
    asyncio.run(main_mod.run(app, port, period_ms=10, cycles=1500))
    assert port.lines[0] == "tcgauge,TCGAUGE-2CH,0,0.1.0"
    assert int(port.lines[1]) >= 3  # the boot notes wait in the error queue
    recs = [record.decode(line) for line in port.lines[2:]]
    assert len(recs) >= 10
    assert {r.ch for r in recs} == {1, 2}
    assert [r.seq for r in recs] == list(range(1, len(recs) + 1))
    assert app.controller.cycles == 1500
    assert all(r.state == "ok" for r in recs[-4:])

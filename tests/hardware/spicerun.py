"""Run the reference circuit's ngspice netlists in batch mode and read results.

Tests build a small wrapper deck around hardware/spice/sink_core.cir or
hbridge_core.cir: a DAC source, then a .control block that changes
parameters (`alterparam NAME=VALUE` + `reset`), runs an analysis and
`print`s named scalars, or `wrdata`s waveforms to a file. `run()` writes the
deck to a temporary folder, runs `ngspice -b`, fails the test on any ngspice
error, and returns the printed scalars by name.
"""

import math
import os
import re
import subprocess

import pytest

from support import ROOT, require_tool

SPICE_DIR = os.path.join(ROOT, "hardware", "spice")
SINK_CORE = os.path.join(SPICE_DIR, "sink_core.cir")
HBRIDGE_CORE = os.path.join(SPICE_DIR, "hbridge_core.cir")
LOWRAIL_CORE = os.path.join(SPICE_DIR, "sink_lowrail_core.cir")
SINK_BASE = os.path.join(SPICE_DIR, "sink_base.cir")

# MCP4725: VOUT = VDD * code / 4096 (datasheet DS22039, section 6,
# "output voltage"; from memory of the equation's form, 12-bit code 0..4095)
DAC_VDD = 3.3
DAC_BITS = 12

_PRINTED = re.compile(r"^([a-z_][a-z0-9_]*) = ([-+0-9.eE]+)\s*$", re.M)
_ERROR = re.compile(r"^.*(\bError\b|\bERROR\b|[Ff]atal|[Tt]imestep too small|aborted).*$", re.M)


def netlist_params(path=SINK_BASE):
    """The `.param name=value $ comment` defaults of a netlist, as floats."""
    out = {}
    mult = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12}
    with open(path) as f:
        for line in f:
            line = line.split("$")[0].strip()
            if not line.lower().startswith(".param"):
                continue
            for name, val in re.findall(r"(\w+)=([-+0-9.eE]+[a-zA-Z]*)", line):
                m = re.match(r"([-+0-9.eE]+?)(meg|[tgkmunp])?$", val.lower())
                if m is None:
                    raise ValueError("cannot read .param %s=%s in %s" % (name, val, path))
                out[name] = float(m.group(1)) * mult.get(m.group(2) or "", 1.0)
    return out


def dac_code(current_ma, params):
    """MCP4725 code for a heater current: Vset = I * Rs, Vdac = Vset * (Rtop+Rbot)/Rbot."""
    v_dac = current_ma * 1e-3 * params["rs"] * (params["rtop"] + params["rbot"]) / params["rbot"]
    code = int(round(v_dac / DAC_VDD * (1 << DAC_BITS)))
    return max(0, min((1 << DAC_BITS) - 1, code))


def dac_volts(code):
    """MCP4725 output for a code (VDD as the reference)."""
    return DAC_VDD * code / float(1 << DAC_BITS)


def set_ma_from_code(code, params):
    """The heater current the sink is asked for by a DAC code (nominal parts)."""
    ratio = params["rbot"] / (params["rtop"] + params["rbot"])
    return 1000.0 * dac_volts(code) * ratio / params["rs"]


def run(deck, workdir, name="deck.cir", expect=(), timeout_s=60):
    """Run one deck with `ngspice -b`; return {printed name: float}.

    Fails the test on an ngspice error, a non-zero exit, or when a name in
    `expect` was not printed.
    """
    exe = require_tool("ngspice")
    path = os.path.join(str(workdir), name)
    with open(path, "w") as f:
        f.write(deck)
    proc = subprocess.run(
        [exe, "-b", path], cwd=str(workdir), capture_output=True, text=True, timeout=timeout_s
    )
    text = proc.stdout + proc.stderr
    errors = [m.group(0) for m in _ERROR.finditer(text) if "gmin" not in m.group(0)]
    if proc.returncode != 0 or errors:
        detail = "\n".join(errors) or text[-2000:]
        pytest.fail("ngspice failed (rc %d) on %s:\n%s" % (proc.returncode, name, detail))
    values = {}
    for m in _PRINTED.finditer(text):
        values[m.group(1)] = float(m.group(2))
    missing = [n for n in expect if n not in values]
    if missing:
        pytest.fail("ngspice printed no %s for %s:\n%s" % (", ".join(missing), name, text[-2000:]))
    return values


def alter_lines(cases, defaults=None):
    """Per case, the `alterparam` lines that set every swept parameter.

    `alterparam` values persist across `reset`, so a parameter that one case
    sets and the next one omits is put back to its netlist default here.
    """
    if defaults is None:
        defaults = dict(netlist_params(SINK_BASE))
        defaults.update(netlist_params(HBRIDGE_CORE))
        defaults.update(netlist_params(LOWRAIL_CORE))
    keys = sorted(set(k for c in cases for k in c))
    out = []
    for c in cases:
        out.append(["alterparam %s=%r" % (k, c.get(k, defaults[k])) for k in keys])
    return out


def wrapper(core, dac_source, control_lines, title="tcgauge test deck"):
    """A deck that includes `core`, adds the DAC source and a .control block."""
    lines = [title, ".include %s" % core, dac_source, ".control", "set numdgt=12"]
    lines.extend(control_lines)
    # `quit 0`: without it ngspice -b exits with status 1 after a .control block
    lines.extend(["quit 0", ".endc", ".end", ""])
    return "\n".join(lines)


def read_wrdata(path):
    """Columns of a `wrdata` file: (time, v1, v2, ...) as lists of floats.

    wrdata writes a scale column before every vector; the repeated scale
    columns are dropped.
    """
    t, cols = [], None
    with open(path) as f:
        for line in f:
            parts = line.split()
            if not parts:
                continue
            nums = [float(x) for x in parts]
            if cols is None:
                cols = [[] for _ in range(len(nums) // 2)]
            t.append(nums[0])
            for k in range(len(cols)):
                cols[k].append(nums[2 * k + 1])
    return [t] + cols


def loop_gain(tmp_path, cases, core, dac_source):
    """AC loop gain per case: (|T| at 10 Hz, [(crossover f, phase margin deg)]).

    Middlebrook voltage injection at Vbrk (sink_base.cir): T = -V(s)/V(sfb);
    the phase margin is 180 deg + phase(T) where |T| crosses 1 (log-log
    interpolation between the analysis points, 50 per decade).
    """
    lines = []
    for k, alters in enumerate(alter_lines(cases)):
        lines += alters
        lines += [
            "alterparam acbrk=1",
            "reset",
            "ac dec 50 10 100Meg",
            "let t = -v(s)/v(sfb)",
            "let tmag = abs(t)",
            "let tph = 180/pi*cph(t)",
            "wrdata loop_%d.txt tmag tph" % k,
        ]
    run(wrapper(core, dac_source, lines), tmp_path)
    out = []
    for k in range(len(cases)):
        f, mag, ph = read_wrdata(os.path.join(str(tmp_path), "loop_%d.txt" % k))
        crossings = []
        for j in range(1, len(f)):
            if (mag[j - 1] - 1.0) * (mag[j] - 1.0) <= 0.0 and mag[j - 1] != mag[j]:
                # interpolate in log f / log |T|
                a = math.log(mag[j - 1]) / (math.log(mag[j - 1]) - math.log(mag[j]))
                fc = math.exp(math.log(f[j - 1]) + a * (math.log(f[j]) - math.log(f[j - 1])))
                phc = ph[j - 1] + a * (ph[j] - ph[j - 1])
                crossings.append((fc, 180.0 + phc))
        out.append((mag[0], crossings))
    return out

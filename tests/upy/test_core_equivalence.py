"""The core computes the same under MicroPython as under CPython.

Each grid sends thousands of calls through one MicroPython start (tools/upy/
upygrid.py runs the same driver on both interpreters). Results must agree
within 1e-9 relative (floats cross as repr() text, which round-trips exactly,
see test_runner.py); states, strings and error messages (class and text)
must be identical, except the text of exceptions the interpreter raises
itself (a TypeError for a None argument, say): there only the class must
agree (upygrid.BUILTIN_MESSAGES). The reference for *correct* values is tests/core; here the
reference is CPython running the very same files.

A module that does not exist yet makes its grid fail (ImportError), never skip.
"""

import importlib
import math
import os
import random
import re

import pytest

import upygrid

pytestmark = pytest.mark.upy

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO_TABLE = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")

REL_TOL = 1e-9
# Floor for results that are zero to rounding (e.g. E(t) at t = 1e-300 C): 1e-12
# in the result's unit (mV, C, uV/K, Pa); far below any meaningful digit.
ABS_TOL = 1e-12

NAN = float("nan")
INF = float("inf")
# Arguments a caller might pass by mistake; the core must answer both with the same words.
ODD = [NAN, INF, -INF, None, "20", True, 1e308, -1e308]


def linspace(a, b, n):
    return [a + (b - a) * i / (n - 1) for i in range(n)]


def assert_equivalent(setup, calls, files=None, min_errors=0):
    mismatches, stats = upygrid.check(setup, calls, files, REL_TOL, ABS_TOL)
    shown = "\n".join(mismatches[:15])
    assert mismatches == [], "%d of %d calls differ (first 15):\n%s" % (len(mismatches), len(calls), shown)
    assert stats["calls"] == len(calls)
    # Each grid is built to reach the error paths too.
    assert stats["errors"] >= min_errors, stats
    # A built-in exception is tolerated only for a deliberately wrong argument
    # (None, a bool, a str or int where a name or number belongs): for real
    # numbers the core must answer in its own words, the same on both.
    numeric = [shown for call, shown in stats["builtin"] if not odd_call(call)]
    assert numeric == [], "built-in exception for numeric input (text differs):\n" + "\n".join(numeric[:10])
    for call, shown in stats["builtin"][:3]:
        print("built-in exception text differs (class agrees):", shown)
    return stats


def odd_call(call):
    """True if the call has a deliberately wrong argument (see ODD, BAD_TYPES)."""
    return any(a is None or isinstance(a, bool) or a == "20" or (type(a) is int and a == 5) for a in call[1])


# ---------------------------------------------------------------- units

UNITS_SETUP = """
from gaugecore import units
FNS = {"to_pa": units.to_pa, "from_pa": units.from_pa}
"""


def test_units_grid(upy):
    rnd = random.Random(1)
    values = [0.0, -0.0, 1.0, 760.0, 101325.0, 1e-12, 1e12, -5.0] + [10 ** rnd.uniform(-6, 6) for _ in range(300)]
    units = ["PA", "TORR", "MBAR", "MICRON", "torr", "Micron", "mbar"]
    bad_units = ["psi", "", "Torr ", None, 5, "bar"]
    calls = []
    for fn in ("to_pa", "from_pa"):
        for v in values:
            for u in units:
                calls.append((fn, (v, u)))
        for v in ODD:
            calls.append((fn, (v, "TORR")))
        for u in bad_units:
            calls.append((fn, (1.0, u)))
    assert len(calls) > 4000
    assert_equivalent(UNITS_SETUP, calls, min_errors=2 * len(bad_units))


# ---------------------------------------------------------------- thermocouple

TC_SETUP = """
from gaugecore import thermocouple as tc
FNS = {"emf_mv": tc.emf_mv, "temperature_c": tc.temperature_c,
       "seebeck_uv_per_k": tc.seebeck_uv_per_k, "range_c": tc.range_c,
       "types": lambda: tc.TYPES}
"""

BAD_TYPES = ["X", "", None, 5, "KK", "S"]


@pytest.fixture(scope="module")
def tc():
    return importlib.import_module("gaugecore.thermocouple")


def test_thermocouple_grid(upy, tc):
    rnd = random.Random(2)
    calls = [("types", ())]
    assert tuple(tc.TYPES) == ("E", "J", "K", "N", "T")  # the five base-metal types of NIST Monograph 175
    for t_type in tc.TYPES:
        calls.append(("range_c", (t_type,)))
        calls.append(("range_c", (t_type.lower(),)))
        t_min, t_max = tc.range_c(t_type)
        temps = linspace(t_min, t_max, 300) + [rnd.uniform(t_min, t_max) for _ in range(150)]
        # ends, just outside them, 0 C (where the reference functions change piece) and its neighbours
        temps += [t_min, t_max, 0.0, -0.0, 1e-9, -1e-9, 1e-300, math.nextafter(t_min, INF),
                  math.nextafter(t_max, -INF)]
        beyond = [math.nextafter(t_min, -INF), math.nextafter(t_max, INF), t_min - 1.0, t_max + 1.0,
                  -1000.0, 1e6] + ODD
        for t in temps + beyond:
            calls.append(("emf_mv", (t_type, t)))
        for t in temps[::3] + beyond:
            calls.append(("seebeck_uv_per_k", (t_type, t)))
        e_min = tc.emf_mv(t_type, t_min)
        e_max = tc.emf_mv(t_type, t_max)
        emfs = linspace(e_min, e_max, 300) + [rnd.uniform(e_min, e_max) for _ in range(150)]
        emfs += [e_min, e_max, 0.0, -0.0, 1e-9, -1e-9, math.nextafter(e_min, INF), math.nextafter(e_max, -INF)]
        emfs += [tc.emf_mv(t_type, t) for t in linspace(t_min, t_max, 40)]  # exact forward values
        e_beyond = [math.nextafter(e_min, -INF), math.nextafter(e_max, INF), e_min - 1.0, e_max + 1.0] + ODD
        for e in emfs + e_beyond:
            calls.append(("temperature_c", (t_type, e)))
    for bad in BAD_TYPES:
        for fn in ("emf_mv", "temperature_c", "seebeck_uv_per_k"):
            calls.append((fn, (bad, 20.0)))
        calls.append(("range_c", (bad,)))
    assert len(calls) > 5000
    assert_equivalent(TC_SETUP, calls, min_errors=5 * 20)


# ---------------------------------------------------------------- cold junction

CJ_SETUP = """
from gaugecore import coldjunction as cj
_C = {}
def _refer(tc_type, t_ref_c, emf_meas_mv, t_cj_c):
    key = (tc_type, t_ref_c)
    if key not in _C:
        _C[key] = cj.ColdJunction(tc_type, t_ref_c)
    return _C[key].refer(emf_meas_mv, t_cj_c)
FNS = {"hot_junction_c": cj.hot_junction_c, "refer_emf_mv": cj.refer_emf_mv, "ColdJunction.refer": _refer}
"""


def test_coldjunction_grid(upy, tc):
    importlib.import_module("gaugecore.coldjunction")
    calls = []
    emfs = linspace(-2.0, 16.0, 61) + [0.0, 0.5, 15.0]  # the tube's 0.5-15 mV span and beyond
    t_cjs = [-20.0, 0.0, 23.5, 35.0, 60.0]
    for t_type in tc.TYPES:
        t_min, t_max = tc.range_c(t_type)
        for e in emfs:
            for t_cj in t_cjs:
                calls.append(("hot_junction_c", (t_type, e, t_cj)))
                for t_ref in (0.0, 20.0, 25.0):
                    calls.append(("refer_emf_mv", (t_type, e, t_cj, t_ref)))
                calls.append(("ColdJunction.refer", (t_type, 25.0, e, t_cj)))
        # junction temperatures outside the type's range, odd values
        for t_cj in [t_min - 1.0, t_max + 1.0, 5000.0] + ODD:
            calls.append(("hot_junction_c", (t_type, 1.0, t_cj)))
            calls.append(("refer_emf_mv", (t_type, 1.0, t_cj, 0.0)))
            calls.append(("refer_emf_mv", (t_type, 1.0, 25.0, t_cj)))
            calls.append(("ColdJunction.refer", (t_type, 0.0, 1.0, t_cj)))
        # a measured EMF so large the hot junction would be beyond the range
        e_top = tc.emf_mv(t_type, t_max)
        calls.append(("hot_junction_c", (t_type, e_top, 30.0)))
        calls.append(("ColdJunction.refer", (t_type, t_max + 1.0, 1.0, 20.0)))
    for bad in BAD_TYPES:
        calls.append(("hot_junction_c", (bad, 1.0, 20.0)))
        calls.append(("refer_emf_mv", (bad, 1.0, 20.0, 0.0)))
    assert len(calls) > 5000
    assert_equivalent(CJ_SETUP, calls, min_errors=5 * 30)


# ---------------------------------------------------------------- tables and table files

TABLE_SETUP = """
from gaugecore import tablefile
TABLES = {}
def _table(name):
    if name not in TABLES:
        with open(DATA + "/" + name, "rb") as f:
            TABLES[name] = tablefile.loads(f.read())
    return TABLES[name]
def _load_text(name):
    with open(DATA + "/" + name) as f:
        text = f.read()
    return tablefile.dumps(tablefile.loads(text))
def _load_bytes(name):
    with open(DATA + "/" + name, "rb") as f:
        data = f.read()
    t, crc = tablefile.parse(data)
    return (tablefile.dumps(t), crc, t.describe())
FNS = {"convert": lambda name, e: _table(name).convert(e),
       "dumps": lambda name: tablefile.dumps(_table(name)),
       "describe": lambda name: _table(name).describe(),
       "limits": lambda name: (_table(name).p_min_pa, _table(name).p_max_pa,
                               _table(name).emf_range_mv, _table(name).emf_invalid_above_mv),
       "load_text": _load_text, "load_bytes": _load_bytes,
       "rise_slope_at": lambda name, e: _table(name).rise_slope_at(e),
       "rise_refer": lambda name, e, t: _rise(name).refer(e, t)}
from gaugecore.coldjunction import RiseReferral
RISE = {}
def _rise(name):
    if name not in RISE:
        RISE[name] = RiseReferral(_table(name))
    return RISE[name]
"""

# Invented curve for generated tables (demo only, like tools/tables/make_demo_table.py):
# emf = E0 / (1 + g/G), g = p / (1 + p/P_T).
def invented_points(n, e0_mv, g, p_t, p_lo, p_hi):
    pts = []
    for i in range(n):
        p = p_lo * (p_hi / p_lo) ** (i / (n - 1))
        gp = p / (1.0 + p / p_t)
        pts.append((float("%.10g" % (e0_mv / (1.0 + gp / g))), float("%.10g" % p)))
    return pts


@pytest.fixture(scope="module")
def table_files():
    """{file name: text} for the demo table and a few generated ones (invented data)."""
    table = importlib.import_module("gaugecore.table")
    tablefile = importlib.import_module("gaugecore.tablefile")
    with open(DEMO_TABLE, encoding="utf-8") as f:
        files = {"demo_n2.json": f.read()}
    gen = [
        ("min4.json", invented_points(4, 10.0, 1.5, 20.0, 0.1, 200.0), "He", "K", 0.0, 0.15, 0.05,
         "invented: four-point minimum"),
        ("e17.json", invented_points(17, 14.5, 3.0, 50.0, 0.02, 1000.0), "Ar", "E", 25.0, 0.3, 0.0,
         'invented, Larkspur bell jar: quote " backslash \\ tab \t newline \n and \u00b5 \u2014'),
        ("max128.json", invented_points(table.MAX_POINTS, 12.0, 2.0, 30.0, 0.01, 1300.0), "N2", "T", 21.5,
         0.05, 0.2, "invented: the largest table the core takes"),
    ]
    for name, pts, gas, tc_type, ref_c, margin, noise, source in gen:
        t = table.Table(pts, gas, "wren-demo", 140.0, ref_c, tc_type, source, margin, noise)
        files[name] = tablefile.dumps(t)
    # version 2: a wall temperature without slopes, and one with invented slopes
    pts = invented_points(9, 11.0, 2.0, 40.0, 0.05, 500.0)
    t = table.Table(pts, "N2", "wren-demo", 150.0, 0.0, "K", "invented: wall only", wall_c=23.25)
    files["wall_only.json"] = tablefile.dumps(t)
    slopes = [-0.0018 + 0.00025 * i for i in range(9)]  # invented
    t = table.Table(pts, "N2", "wren-demo", 150.0, 0.0, "K", "invented: wall and slopes", wall_c=21.0,
                    rise_slope_per_k=slopes)
    files["wall_slopes.json"] = tablefile.dumps(t)
    return files


def emf_grid(t, rnd):
    """EMFs across, on, between and beyond every point of table t, and odd values."""
    lo, hi = t.emf_range_mv
    knots = list(t.segments()[0])
    emfs = linspace(-0.3, t.emf_invalid_above_mv * 1.1, 500) + [rnd.uniform(lo, hi) for _ in range(300)]
    for k in knots:
        emfs += [k, math.nextafter(k, INF), math.nextafter(k, -INF), k + 1e-6, k - 1e-6]
    for k0, k1 in zip(knots, knots[1:]):
        emfs.append(0.5 * (k0 + k1))
    for edge in (-t.noise_mv, t.emf_invalid_above_mv):
        emfs += [edge, math.nextafter(edge, INF), math.nextafter(edge, -INF)]
    emfs += [0.0, -0.0, -1.0, -1e300, 1e300, 1e6, NAN, INF, -INF]
    return emfs


def test_table_convert_grid(upy, table_files):
    rnd = random.Random(3)
    tablefile = importlib.import_module("gaugecore.tablefile")
    calls = []
    for name, text in sorted(table_files.items()):
        t = tablefile.loads(text)
        calls += [("describe", (name,)), ("limits", (name,)), ("dumps", (name,))]
        for e in emf_grid(t, rnd):
            calls.append(("convert", (name, e)))
    assert len(calls) > 3000
    stats = assert_equivalent(TABLE_SETUP, calls, table_files)
    assert stats["errors"] == 0


def test_rise_referral_grid(upy, table_files):
    # the channel's default compensation: slopes interpolated in EMF and the
    # rise carried to the table's wall, across the tube's EMF span and beyond
    rnd = random.Random(5)
    tablefile = importlib.import_module("gaugecore.tablefile")
    calls = []
    for name in ("demo_n2.json", "wall_only.json", "wall_slopes.json", "min4.json"):
        t = tablefile.loads(table_files[name])
        lo, hi = t.emf_range_mv
        emfs = linspace(lo - 0.5, hi + 0.5, 120) + [rnd.uniform(lo, hi) for _ in range(60)]
        emfs += list(t.segments()[0]) + [0.0, -0.2, 60.0, NAN, INF]
        for e in emfs:
            calls.append(("rise_slope_at", (name, e)))
            for t_cj in (15.0, 22.0, 27.5, 35.0):
                calls.append(("rise_refer", (name, e, t_cj)))
        calls += [("rise_refer", (name, 5.0, t_cj)) for t_cj in (-300.0, 2000.0, NAN)]
    assert len(calls) > 3000
    stats = assert_equivalent(TABLE_SETUP, calls, table_files)
    assert stats["errors"] == 0


def test_dumps_is_byte_identical(upy, table_files):
    """dumps() on MicroPython gives exactly the bytes CPython gives."""
    tablefile = importlib.import_module("gaugecore.tablefile")
    calls = [("dumps", (name,)) for name in sorted(table_files)]
    cp = upygrid.run_cpython(TABLE_SETUP, calls, table_files)
    mp = upygrid.run_micropython(TABLE_SETUP, calls, table_files)
    assert mp == cp
    for (_, (name,)), line in zip(calls, cp):
        assert line == "R\ts" + upygrid.escape(tablefile.dumps(tablefile.loads(table_files[name])))


def _with_crc(body):
    """A file text whose CRC is right for `body` (so loads gets past the check)."""
    crc32 = importlib.import_module("gaugecore.crc32").crc32
    return body + '"crc32": "0x%08x"}\n' % crc32(body.encode("utf-8"))


def corrupted_texts(text):
    """{name: bytes} of damaged and of well-sealed but wrong variants of a table file."""
    data = text.encode("utf-8")
    out = {}
    # bytes replaced (digit by another digit, anything else by 'x'): every byte of
    # the header and of the tail, every 5th in the points; and truncations
    for i in range(len(data)):
        if 300 <= i < len(data) - 60 and i % 5:
            continue
        c = data[i:i + 1]
        new = b"7" if c == b"3" else (b"3" if c.isdigit() else (b"y" if c == b"x" else b"x"))
        out["flip%04d.json" % i] = data[:i] + new + data[i + 1:]
    for n in list(range(0, len(data), 37)) + [len(data) - 1, len(data) - 2]:
        out["cut%04d.json" % n] = data[:n]
    body = text[: text.rfind('"crc32": "')]
    lines = body.split("\n")
    rows = [i for i, ln in enumerate(lines) if ln.startswith("  [")]  # point lines, as dumps writes them
    (e0, p0), (e1, p1) = [lines[i].strip().rstrip(",")[1:-1].split(", ") for i in rows[:2]]
    e_last = lines[rows[-1]].strip()[1:-1].split(", ")[0]

    def point(i, new):
        out = list(lines)
        out[rows[i]] = "  " + new + ("," if i != len(rows) - 1 and i != -1 else "")
        return "\n".join(out)

    def field(key, new):
        return re.sub(r'"%s": ("[^"]*"|[-+0-9.eE]+)' % key, lambda m: '"%s": %s' % (key, new), body, count=1)

    sealed = {
        "version3": field("version", "3"),
        "version1": field("version", "1"),  # version 1 has no wall fields
        "wall_str": field("wall_c", '"22"'),
        "wall_hot": field("wall_c", "400"),
        "no_wall": re.sub(r' "wall_c": [-+0-9.eE]+,\n', "", body, count=1),
        "slope_big": body.replace('"rise_slope_per_k": [\n  ', '"rise_slope_per_k": [\n  0.5, ', 1),
        "slope_str": body.replace('"rise_slope_per_k": [\n  ', '"rise_slope_per_k": [\n  "x", ', 1),
        "slope_few": re.sub(r'("rise_slope_per_k": \[\n  )[-+0-9.eE]+, ', r"\1", body, count=1),
        "slope_null": re.sub(r'"rise_slope_per_k": \[[^\]]*\]', '"rise_slope_per_k": {}', body, count=1),
        "version_str": field("version", '"1"'),
        "version_float": field("version", "1.0"),
        "format": field("format", '"other-table"'),
        "gas": field("gas", '"Xe"'),
        "gas_num": field("gas", "7"),
        "no_gas": re.sub(r' "gas": "[^"]*",', "", body, count=1),
        "extra": field("version", '1, "colour": "red"'),
        "tc": field("tc_type", '"S"'),
        "heater0": field("heater_ma", "0"),
        "heater_bool": field("heater_ma", "true"),
        "margin": field("invalid_margin", "-1"),
        "noise": field("noise_mv", "null"),
        "order": point(1, "[%s, %r]" % (e1, float(p0) * 0.5)),
        "emf_up": point(1, "[%r, %s]" % (float(e0) + 1.0, p1)),
        "neg_p": point(0, "[%s, -%s]" % (e0, p0)),
        "pair3": point(0, "[%s, %s, 1]" % (e0, p0)),
        "str_pt": point(0, '["%s", %s]' % (e0, p0)),
        "nan_pt": point(0, "[NaN, %s]" % p0),
        "inf_pt": point(0, "[%s, Infinity]" % e0),
        "huge": point(-1, "[%s, 1e400]" % e_last),
        "few": "\n".join(lines[: rows[2]] + [lines[rows[2]].rstrip(",")] + lines[rows[-1] + 1:]),
        "not_list": body.replace('"points": [', '"points": {"a": [').replace("\n ],\n ", "\n ]},\n "),
    }
    for key, t in sealed.items():
        assert t != body, "variant %s did not change the file: has the file layout changed?" % key
    sealed["empty"] = ""
    sealed["array"] = "[]"
    for key, t in sealed.items():
        out["sealed_%s.json" % key] = _with_crc(t).encode("utf-8") if key not in ("empty", "array") else t.encode()
    out["badutf8.json"] = data.replace(b"invented", b"inv\xffnted")
    out["crc_upper.json"] = data.replace(b'"crc32": "0x', b'"crc32": "0X')
    out["trailing.json"] = data + b" "
    out["bom.json"] = b"\xef\xbb\xbf" + data
    out["good.json"] = data
    return out


def test_corrupted_files_give_identical_errors(upy, table_files):
    files = corrupted_texts(table_files["demo_n2.json"])
    calls = [("load_bytes", (name,)) for name in sorted(files)]
    assert len(calls) > 500
    stats = assert_equivalent(TABLE_SETUP, calls, files)
    # all but good.json (and flips that leave the text valid, if any) are refused
    assert stats["errors"] >= len(calls) - 5, stats


def test_text_and_bytes_load_alike(upy, table_files):
    calls = [(fn, (name,)) for name in sorted(table_files) for fn in ("load_text", "load_bytes")]
    stats = assert_equivalent(TABLE_SETUP, calls, table_files)
    assert stats["errors"] == 0


# ---------------------------------------------------------------- crc32 (under the table files)

CRC_SETUP = """
from gaugecore import crc32 as c
FNS = {"crc32": lambda h: c.crc32(bytes.fromhex(h)), "crc32_py": lambda h: c.crc32_py(bytes.fromhex(h)),
       "crc32_from": lambda h, start: c.crc32_py(bytes.fromhex(h), start)}
"""


def test_crc32_grid(upy):
    rnd = random.Random(4)
    blobs = [b"", b"123456789", b"\x00", b"\xff" * 7] + [rnd.randbytes(rnd.randrange(1, 300)) for _ in range(300)]
    calls = []
    for b in blobs:
        calls += [("crc32", (b.hex(),)), ("crc32_py", (b.hex(),)), ("crc32_from", (b.hex(), 0xCBF43926))]
    stats = assert_equivalent(CRC_SETUP, calls)
    assert stats["errors"] == 0
    # check value of CRC-32/ISO-HDLC: Greg Cook, "Catalogue of parametrised CRC algorithms"
    assert upygrid.run_micropython(CRC_SETUP, [("crc32_py", (b"123456789".hex(),))]) == ["R\ti%d" % 0xCBF43926]

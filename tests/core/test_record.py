"""Stream records: exact format, CRC against the catalogue, round trip, corruption, gaps.

CRC source: Greg Cook, "Catalogue of parametrised CRC algorithms" (reveng),
entry CRC-16/IBM-3740 (alias CRC-16/CCITT-FALSE): width=16 poly=0x1021
init=0xffff refin=false refout=false xorout=0x0000 check=0x29b1. Independent
reference: CPython's binascii.crc_hqx (CRC-CCITT, poly 0x1021, MSB first)
with the initial value 0xFFFF computes the same CRC.
"""

import binascii
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gaugecore import record, states


def test_crc_check_value_from_the_catalogue():
    # reveng catalogue, CRC-16/IBM-3740: check = 0x29B1 for b"123456789"
    assert record.crc16(b"123456789") == 0x29B1
    assert record.crc16("123456789") == 0x29B1
    assert record.crc16(b"") == 0xFFFF  # the init value: nothing shifted in


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=200))
def test_crc_matches_binascii_crc_hqx(data):
    # binascii.crc_hqx(data, 0xFFFF) is CRC-16/IBM-3740 (Python docs, binascii.crc_hqx)
    assert record.crc16(data) == binascii.crc_hqx(data, 0xFFFF)


def test_exact_line():
    # invented demo sample of the Wren tube on the Larkspur bell jar
    line = record.encode(41, 123456, 1, 7.25, 23.5, 1.3332e1, "ok", None)
    body = "!R,41,123456,1,7.2500,23.50,1.3332E+01,ok,"
    assert line == body + "*%04X" % binascii.crc_hqx(body.encode(), 0xFFFF)
    rec = record.decode(line + "\r\n")
    assert rec.fields() == (41, 123456, 1, 7.25, 23.5, 13.332, "ok", None)


def test_fault_has_no_pressure_and_names_the_fault():
    line = record.encode(7, 10, 2, None, 24.0, 5.0, "fault", "heater_open")
    assert line.startswith("!R,7,10,2,,24.00,,fault,heater_open*")
    rec = record.decode(line)
    assert rec.pressure_pa is None and rec.emf_mv is None and rec.fault == "heater_open"
    line = record.encode(8, 11, 2, 0.1, 24.0, 5.0, "invalid", "ignored")
    assert line.startswith("!R,8,11,2,0.1000,24.00,,invalid,*")
    assert record.decode(line).fault is None


@pytest.mark.parametrize("state", ["ok", "under", "over", "invalid", "fault"])
def test_round_trip_every_state(state):
    p = None if state in ("invalid", "fault") else 0.5
    fault = "tc_open" if state == "fault" else None
    rec = record.decode(record.encode(999999999, 2**31, 3, -0.0123, -5.25, p, state, fault))
    assert rec == record.Record(999999999, 2**31, 3, -0.0123, -5.25, p, state, fault)


_STATE = st.sampled_from(states.ALL)


@settings(max_examples=300, deadline=None)
@given(seq=st.integers(0, 10**12), t_ms=st.integers(0, 2**40), ch=st.integers(1, 9),
       emf=st.one_of(st.none(), st.floats(-20, 20)), t_c=st.one_of(st.none(), st.floats(-50, 150)),
       p=st.floats(1e-6, 2e5), state=_STATE)
def test_round_trip_fuzz(seq, t_ms, ch, emf, t_c, p, state):
    fault = "adc_fail" if state == states.FAULT else None
    rec = record.decode(record.encode(seq, t_ms, ch, emf, t_c, p, state, fault))
    assert rec.seq == seq % record.SEQ_MOD and rec.t_ms == t_ms and rec.ch == ch
    assert rec.state == state and rec.fault == fault
    if emf is None:
        assert rec.emf_mv is None
    else:
        assert abs(rec.emf_mv - emf) <= 0.5e-4 + 1e-12  # 4 decimals in mV
    if t_c is not None:
        assert abs(rec.t_c - t_c) <= 0.005 + 1e-9
    if state in (states.INVALID, states.FAULT):
        assert rec.pressure_pa is None
    else:
        assert math.isclose(rec.pressure_pa, p, rel_tol=5.1e-5)  # 5 significant digits


def test_every_single_changed_character_is_detected():
    # a CRC with a degree-16 generator detects every burst error of 16 bits or less
    # (Peterson & Brown, "Cyclic codes for error detection", Proc. IRE 1961; citation
    # from memory), so any one changed 8-bit character; checked exhaustively here
    line = record.encode(12345, 67890, 2, 7.1234, 22.75, 2.5e-1, "under", None)
    alphabet = [chr(c) for c in range(32, 127)]
    tried = 0
    for i in range(len(line)):
        for c in alphabet:
            if c == line[i]:
                continue
            bad = line[:i] + c + line[i + 1 :]
            with pytest.raises(ValueError):
                record.decode(bad)
            tried += 1
    assert tried == len(line) * 94


@pytest.mark.parametrize("line, reason", [
    ("R,1,2,1,,,,ok,*0000", "record does not start with !R,"),
    ("!R,1,2,1,,,1,ok,", "record has no checksum"),
    ("!R,1,2,1,,,1,ok,*12", "record has no checksum"),
    ("!R,1,2,1,,,1,ok,*12ab", "record checksum is not upper-case hex"),
    ("!R,1,2,1,,,1,ok,*0000", "record checksum mismatch"),
])
def test_decode_reasons(line, reason):
    with pytest.raises(ValueError, match="^%s$" % reason.replace("!", "\\!").replace("*", "\\*")):
        record.decode(line)


def _signed(body):
    return body + "*%04X" % record.crc16(body)


@pytest.mark.parametrize("body, reason", [
    ("!R,1,2,1,,,1,ok", "record has 7 fields, expected 8"),
    ("!R,x,2,1,,,1,ok,", "record field seq is not an unsigned integer"),
    ("!R,1,2,0,,,1,ok,", "record channel must be >= 1"),
    ("!R,1,2,1,nan,,1,ok,", "record field emf_mv is not a number"),
    ("!R,1,2,1,,,1,maybe,", "record state 'maybe' unknown"),
    ("!R,1,2,1,,,1,fault,x", "record has a pressure for state fault"),
    ("!R,1,2,1,,,,ok,", "record has no pressure for state ok"),
    ("!R,1,2,1,,,,fault,", "record fault name and state disagree"),
    ("!R,1,2,1,,,,fault,Bad", "record fault name has a bad character"),
    ("!R,1000000000,2,1,,,1,ok,", "record seq out of range"),
])
def test_decode_rejects_inconsistent_records_even_with_good_crc(body, reason):
    with pytest.raises(ValueError) as info:
        record.decode(_signed(body))
    assert str(info.value) == reason


def test_records_cannot_be_confused_with_replies():
    assert record.is_record(b"!R,1") and record.is_record("!")
    # IEEE 488.2 8.7 (section number from memory): response data start with a digit, sign, letter, quote or '#'
    for reply in ("1", "-113,\"Undefined header\"", "+1.0E-01,TORR,OK,NONE", "NAN", '"wren"', "#14abcd"):
        assert not record.is_record(reply)


def test_gaps_with_wrap():
    assert record.gap(5, 6) == 0
    assert record.gap(5, 9) == 3
    assert record.gap(record.SEQ_MOD - 1, 0) == 0
    assert record.gap(record.SEQ_MOD - 2, 1) == 2
    assert record.encode(record.SEQ_MOD + 4, 0, 1, None, None, None, "invalid", None).startswith("!R,4,")

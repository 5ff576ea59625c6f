"""PyVISA with the pyvisa-py backend opens the virtual device's pseudo-terminal like a board."""

import threading

import pytest
import pyvisa

from tcgauge.sim.device import VirtualDevice


@pytest.fixture
def pty_device():
    dev = VirtualDevice(scenario="steps", speed=5, seed=6)
    path = dev.serve_pty()
    yield path
    dev.close()
    assert [t for t in threading.enumerate() if t.name == "tcgauge-virtual-device"] == []


def test_pyvisa_py_queries_idn_and_a_pressure(pty_device):
    rm = pyvisa.ResourceManager("@py")
    try:
        inst = rm.open_resource("ASRL%s::INSTR" % pty_device, read_termination="\n",
                                write_termination="\n", timeout=3000)
        try:
            inst.baud_rate = 115200
            fields = inst.query("*IDN?").split(",")
            assert len(fields) == 4  # IEEE 488.2 10.14
            assert fields[0] == "tcgauge" and fields[2] == "SIM0006"
            value, unit, state, fault = inst.query("MEAS? (@1)").split(",")
            assert unit == "PA" and fault == "NONE"
            assert state in ("OK", "UNDER", "OVER", "INVALID")
            if state != "INVALID":
                assert float(value) > 0.0
            inst.write("CONF:UNIT MBAR")
            assert inst.query("CONF:UNIT?") == "MBAR"
            assert inst.query("SYST:ERR?") == '0,"No error"'
        finally:
            inst.close()
    finally:
        rm.close()

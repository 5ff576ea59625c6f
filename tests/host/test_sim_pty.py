"""`tcgauge sim --pty` as a subprocess: the port path first, a board-like port, clean stop."""

import os
import select
import signal
import subprocess
import sys
import time

import pytest
import serial


def start(*args):
    proc = subprocess.Popen([sys.executable, "-m", "tcgauge", "sim", "--pty"] + list(args),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    ready, _, _ = select.select([proc.stdout], [], [], 20.0)
    if not ready:
        proc.kill()
        proc.communicate(timeout=10)
        pytest.fail("tcgauge sim printed no port within 20 s")
    path = proc.stdout.readline().decode().strip()
    return proc, path


def stop(proc, sig=signal.SIGINT):
    if proc.poll() is None:
        proc.send_signal(sig)
    try:
        out, err = proc.communicate(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate(timeout=10)
        pytest.fail("tcgauge sim did not stop within 10 s of the signal")
    return proc.returncode, out.decode(), err.decode()


def ask(port, line):
    port.write((line + "\n").encode())
    reply = port.readline()
    assert reply.endswith(b"\n"), reply
    return reply.decode().rstrip("\n")


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_pty_serves_idn_and_a_pressure_and_stops_cleanly(sig):
    proc, path = start("--scenario", "steps", "--speed", "5", "--seed", "2")
    try:
        assert path.startswith("/dev/pts/") and os.path.exists(path)
        with serial.Serial(path, 115200, timeout=3.0) as port:
            port.reset_input_buffer()
            fields = ask(port, "*IDN?").split(",")
            assert len(fields) == 4  # IEEE 488.2 10.14: maker, model, serial, firmware
            assert fields[:3] == ["tcgauge", "TCGAUGE-2CH", "SIM0002"]
            time.sleep(0.3)
            value, unit, state, fault = ask(port, "MEAS? (@1)").split(",")
            assert unit == "PA" and fault == "NONE"
            assert state in ("OK", "UNDER", "OVER")
            assert float(value) > 0.0
            assert ask(port, "CONF:UNIT TORR;:MEAS? (@1)").split(",")[1] == "TORR"
        with serial.Serial(path, 115200, timeout=3.0) as port:  # a second open works too
            assert ask(port, "*TST?") == "0"
    finally:
        code, out, err = stop(proc, sig)
    assert code == 0, err
    assert out == ""  # nothing on stdout after the port path (the first line, read above)


def test_list_scenarios_and_bad_arguments():
    out = subprocess.run([sys.executable, "-m", "tcgauge", "sim", "--list-scenarios"],
                         capture_output=True, timeout=30, text=True)
    assert out.returncode == 0
    assert out.stdout.split() == ["ambient-ramp", "calibration", "gas-change", "pumpdown", "steps", "vent"]
    bad = subprocess.run([sys.executable, "-m", "tcgauge", "sim", "--pty", "--fault", "tc-open"],
                         capture_output=True, timeout=30, text=True)
    assert bad.returncode == 2
    assert bad.stderr == ("tcgauge: error: fault 'tc-open': expected NAME@SECONDS[:CHANNEL]\n")
    bad = subprocess.run([sys.executable, "-m", "tcgauge", "sim"],
                         capture_output=True, timeout=30, text=True)
    assert bad.returncode == 2
    assert bad.stderr == "tcgauge: error: sim: say where to serve: --pty\n"


def test_fault_option_reaches_the_device():
    proc, path = start("--scenario", "steps", "--speed", "10", "--fault", "cj-fail@1:2")
    try:
        with serial.Serial(path, 115200, timeout=3.0) as port:
            deadline = time.monotonic() + 5.0
            while ask(port, "STAT:FAUL? (@2)") != "CJ-FAILURE" and time.monotonic() < deadline:
                time.sleep(0.1)
            assert ask(port, "MEAS? (@2)") == "NAN,PA,FAULT,CJ-FAILURE"
            assert ask(port, "STAT:FAUL? (@1)") == "NONE"
    finally:
        code, _, err = stop(proc)
    assert code == 0, err

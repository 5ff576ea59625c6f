"""A virtual MicroPython board on a pseudo-terminal, for mpremote and deploy tests.

    with VirtualBoard() as board:
        subprocess.run(["mpremote", "connect", board.path, "fs", "ls"])
        board.files()                     # {"main.py": b"...", ...}

Behind the pty is one persistent Node process (repl.mjs) running the real
MicroPython 1.27 WebAssembly interpreter: globals, imported modules and the
in-memory filesystem (/flash, the working directory, starts empty) survive
between code chunks, as on a board. This module speaks MicroPython's REPL
protocol on the pty, as shared/runtime/pyexec.c does and as mpremote's
transport_serial.py expects:

  friendly REPL  Ctrl-A -> raw REPL; Ctrl-B -> banner; Ctrl-C -> new prompt;
                 Ctrl-D -> soft reset; a typed line is echoed and run on Enter
  raw REPL       banner "raw REPL; CTRL-B to exit\\r\\n>"; bytes collect until
                 Ctrl-D, then "OK" + stdout + "\\x04" + traceback + "\\x04" + ">";
                 Ctrl-D on an empty buffer: "OK\\r\\nMPY: soft reboot\\r\\n" and
                 the raw banner again; Ctrl-A: banner; Ctrl-B: friendly REPL;
                 Ctrl-C: clear the buffer
  raw paste      "\\x05A\\x01" is answered "R\\x00" (understood, not supported),
                 after which mpremote falls back to the raw REPL

Differences from a board (documented, tested where they matter):
  - soft reset starts a fresh interpreter with the files carried over; boot.py
    and main.py are never run (as after a soft reset in raw mode);
  - output newlines are sent as \\r\\n, as a board's cooked stdout does;
  - the WebAssembly build raises OSError with Emscripten errno numbers
    (ENOENT 44); a traceback's last line "OSError: 44" is rewritten to the
    board's "OSError: [Errno 2] ENOENT" so mpremote maps it as for a board
    (e.errno inside code still sees 44);
  - a running chunk cannot be interrupted (Ctrl-C acts between chunks);
    CHUNK_TIMEOUT_S bounds each chunk, after which the board is dead.
Standard library only.
"""

import base64
import errno
import json
import os
import select
import shutil
import subprocess
import tempfile
import termios
import threading
import tty

HERE = os.path.dirname(os.path.abspath(__file__))
REPL_JS = os.path.join(HERE, "repl.mjs")
PACKAGE = os.path.join(HERE, "node_modules", "@micropython", "micropython-webassembly-pyscript")

CTRL_A, CTRL_B, CTRL_C, CTRL_D, CTRL_E = 1, 2, 3, 4, 5
RAW_BANNER = b"raw REPL; CTRL-B to exit\r\n"
SOFT_REBOOT = b"MPY: soft reboot\r\n"
CHUNK_TIMEOUT_S = 30.0
START_TIMEOUT_S = 15.0

# Emscripten errno -> (MicroPython errno, name or None): the numbers a board's
# port (newlib / Linux numbering) uses; names as MicroPython's errno module has them.
_EMSCRIPTEN_ERRNO = {
    44: (errno.ENOENT, "ENOENT"),
    20: (errno.EEXIST, "EEXIST"),
    54: (errno.ENOTDIR, None),
    31: (errno.EISDIR, "EISDIR"),
    55: (errno.ENOTEMPTY, None),
    28: (errno.EINVAL, "EINVAL"),
    2: (errno.EACCES, "EACCES"),
    8: (errno.EBADF, "EBADF"),
    29: (errno.EIO, "EIO"),
    51: (errno.ENOSPC, None),
    63: (errno.EPERM, "EPERM"),
}


class BoardError(RuntimeError):
    """The virtual board could not start, or its interpreter died or hung."""


def _board_errno_text(err):
    """Rewrite a last line 'OSError: 44' (Emscripten numbering) as a board prints it."""
    lines = err.split("\n")
    for i in range(len(lines) - 1, -1, -1):
        line = lines[i]
        if not line.strip():
            continue
        if line.startswith("OSError: ") and line[9:].strip().isdigit():
            code = int(line[9:].strip())
            if code in _EMSCRIPTEN_ERRNO:
                num, name = _EMSCRIPTEN_ERRNO[code]
                lines[i] = "OSError: [Errno %d] %s" % (num, name) if name else "OSError: %d" % num
        break
    return "\n".join(lines)


def _cooked(data):
    """Newlines as a board's stdout sends them."""
    return data.replace(b"\r\n", b"\n").replace(b"\n", b"\r\n")


class Interpreter:
    """The Node side: one persistent MicroPython interpreter (repl.mjs)."""

    def __init__(self, heap="8m"):
        node = shutil.which("node")
        if node is None:
            raise BoardError("node is not on PATH; run tools/setup.sh (needs Node 20 or newer)")
        if not os.path.isdir(PACKAGE):
            raise BoardError("MicroPython npm package missing (%s); run tools/setup.sh" % PACKAGE)
        self._stderr = tempfile.TemporaryFile()  # a file, so Node can never block on a full pipe
        self.proc = subprocess.Popen(
            [node, REPL_JS, "--heap", str(heap)],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=self._stderr,
        )
        self._lock = threading.Lock()

    def request(self, obj, timeout_s=CHUNK_TIMEOUT_S):
        """Send one request and return the parsed reply; BoardError on death or timeout."""
        with self._lock:
            if self.proc.poll() is not None:
                raise BoardError("the interpreter has exited (status %s)" % self.proc.returncode)
            try:
                self.proc.stdin.write((json.dumps(obj) + "\n").encode("utf-8"))
                self.proc.stdin.flush()
            except OSError as exc:
                raise BoardError("cannot write to the interpreter: %s" % exc)
            ready, _, _ = select.select([self.proc.stdout], [], [], timeout_s)
            if not ready:
                self.kill()
                raise BoardError("the interpreter did not answer within %s s" % timeout_s)
            line = self.proc.stdout.readline()
            if not line:
                self._stderr.seek(0)
                err = self._stderr.read().decode("utf-8", "replace")
                raise BoardError("the interpreter closed its output: %s" % err.strip())
            reply = json.loads(line)
            if not reply.get("ok"):
                raise BoardError("interpreter: %s" % reply.get("error"))
            return reply

    def exec(self, code, timeout_s=CHUNK_TIMEOUT_S):
        """Run `code` -> (stdout bytes, traceback text or "")."""
        reply = self.request({"op": "exec", "code": code}, timeout_s)
        out = base64.b64decode(reply["out"])
        err = base64.b64decode(reply["err"]).decode("utf-8", "replace")
        return out, _board_errno_text(err)

    def reset(self):
        """Soft reset: fresh interpreter, files kept."""
        self.request({"op": "reset"}, START_TIMEOUT_S)

    def kill(self):
        if self.proc.poll() is None:
            self.proc.kill()
        self.proc.wait(5)

    def close(self, timeout_s=5.0):
        """Ask the interpreter to quit; kill it if it does not within timeout_s."""
        if self.proc.poll() is None:
            try:
                self.request({"op": "quit"}, timeout_s)
                self.proc.wait(timeout_s)
            except (BoardError, subprocess.TimeoutExpired, OSError, ValueError):
                pass
        self.kill()
        for f in (self.proc.stdin, self.proc.stdout, self._stderr):
            try:
                f.close()
            except OSError:
                pass


class VirtualBoard:
    """A MicroPython board on a pty; see the module docstring."""

    def __init__(self, heap="8m", machine="tcgauge virtual board"):
        self.heap = heap
        self.machine = machine
        self.interp = None
        self.path = None
        self.chunks = 0  # raw-REPL code chunks executed
        self.soft_resets = 0
        self._master = self._slave = None
        self._thread = None
        self._stop = threading.Event()
        self._mode = "friendly"
        self._buf = bytearray()
        self._banner = b""
        self.error = None  # the exception that stopped the serving thread, if any

    # ---- life cycle -------------------------------------------------------------
    def start(self):
        """Start the interpreter and the pty; return the pty's path."""
        self.interp = Interpreter(self.heap)
        try:
            out, err = self.interp.exec("import sys\nprint(sys.version.split('; ')[-1])", START_TIMEOUT_S)
        except BoardError:
            self.interp.close()
            raise
        if err:
            self.interp.close()
            raise BoardError("interpreter failed to start: %s" % err)
        self._banner = ("%s; %s with WebAssembly\r\n" % (out.decode().strip(), self.machine)
                        + 'Type "help()" for more information.\r\n').encode()
        self._master, self._slave = os.openpty()
        tty.setraw(self._slave)
        os.set_blocking(self._master, False)
        self.path = os.ttyname(self._slave)
        self._thread = threading.Thread(target=self._serve, name="vboard", daemon=True)
        self._thread.start()
        return self.path

    def close(self, timeout_s=5.0):
        """Stop serving, stop the interpreter, close the pty."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout_s)
        if self.interp is not None:
            self.interp.close(timeout_s)
        for fd in (self._master, self._slave):
            if fd is not None:
                try:
                    os.close(fd)
                except OSError:
                    pass
        self._master = self._slave = None

    def __enter__(self):
        self.start()
        return self

    def __exit__(self, *exc):
        self.close()

    # ---- direct access, bypassing the serial line (for tests) -------------------
    def exec(self, code):
        """Run `code` on the board directly -> stdout text; BoardError with the traceback if it raised."""
        out, err = self.interp.exec(code)
        if err:
            raise BoardError("code raised on the board:\n" + err)
        return out.decode("utf-8", "replace")

    def files(self):
        """{relative path: bytes} of every file on the board."""
        code = (
            "import os, binascii\n"
            "def _walk(d):\n"
            " for e in os.ilistdir(d or '.'):\n"
            "  p = (d + '/' if d else '') + e[0]\n"
            "  if e[1] & 0x4000:\n"
            "   _walk(p)\n"
            "  else:\n"
            "   with open(p, 'rb') as f:\n"
            "    print(p, binascii.hexlify(f.read()).decode())\n"
            "_walk('')\n"
            "del _walk\n"
        )
        out = {}
        for line in self.exec(code).splitlines():
            name, _, hexdata = line.partition(" ")
            out[name] = bytes.fromhex(hexdata)
        return out

    # ---- the serial side --------------------------------------------------------
    def _write(self, data):
        view = memoryview(data)
        while view and not self._stop.is_set():
            try:
                n = os.write(self._master, view)
                view = view[n:]
            except BlockingIOError:
                # Nobody reads the port (no client open): drop what waits for it, as a
                # board's USB serial does when no host is listening.
                termios.tcflush(self._slave, termios.TCIFLUSH)
                select.select([], [self._master], [], 0.05)

    def _serve(self):
        try:
            while not self._stop.is_set():
                ready, _, _ = select.select([self._master], [], [], 0.1)
                if not ready:
                    continue
                try:
                    data = os.read(self._master, 4096)
                except BlockingIOError:
                    continue
                except OSError as exc:
                    if exc.errno == errno.EIO:
                        continue
                    raise
                for c in data:
                    self._char(c)
        except Exception as exc:  # noqa: BLE001  (kept for the test to report)
            self.error = exc
            self._stop.set()

    def _char(self, c):
        if self._mode == "raw":
            self._raw_char(c)
        else:
            self._friendly_char(c)

    def _raw_char(self, c):
        buf = self._buf
        if c == CTRL_A:
            if len(buf) == 2 and buf[0] == CTRL_E:
                del buf[:]
                self._write(b"R\x00")  # raw paste understood but not supported
                return
            del buf[:]
            self._write(RAW_BANNER + b">")
        elif c == CTRL_B:
            del buf[:]
            self._mode = "friendly"
            self._write(b"\r\n" + self._banner + b">>> ")
        elif c == CTRL_C:
            del buf[:]
        elif c == CTRL_D:
            self._write(b"OK")
            if not buf:
                self._write(b"\r\n")
                self._soft_reset()
                self._write(RAW_BANNER + b">")
                return
            code = bytes(buf).decode("utf-8", "replace")
            del buf[:]
            out, err = self.interp.exec(code)
            self.chunks += 1
            self._write(_cooked(out) + b"\x04" + _cooked(err.encode("utf-8")) + b"\x04>")
        else:
            buf.append(c)

    def _friendly_char(self, c):
        buf = self._buf
        if c == CTRL_A:
            del buf[:]
            self._mode = "raw"
            self._write(b"\r\n" + RAW_BANNER + b">")
        elif c == CTRL_B:
            del buf[:]
            self._write(b"\r\n" + self._banner + b">>> ")
        elif c == CTRL_C:
            del buf[:]
            self._write(b"\r\n>>> ")
        elif c == CTRL_D:
            del buf[:]
            self._write(b"\r\n")
            self._soft_reset()
            self._write(self._banner + b">>> ")
        elif c in (13, 10):
            line = bytes(buf).decode("utf-8", "replace")
            del buf[:]
            self._write(b"\r\n")
            if line.strip():
                out, err = self.interp.exec(line)
                self._write(_cooked(out) + _cooked(err.encode("utf-8")))
            self._write(b">>> ")
        elif c in (8, 127):
            if buf:
                buf.pop()
                self._write(b"\x08 \x08")
        else:
            buf.append(c)
            self._write(bytes([c]))

    def _soft_reset(self):
        self._write(SOFT_REBOOT)
        self.interp.reset()
        self.soft_resets += 1


def main(argv=None):
    """`python tools/upy/vboard.py`: serve a board, print its pty path, run until SIGINT/SIGTERM."""
    import signal
    import sys

    board = VirtualBoard()
    path = board.start()
    signal.signal(signal.SIGTERM, lambda *_: board._stop.set())
    signal.signal(signal.SIGINT, lambda *_: board._stop.set())
    sys.stdout.write(path + "\n")
    sys.stdout.flush()
    try:
        while not board._stop.is_set() and board.interp.proc.poll() is None:
            board._stop.wait(0.5)
    finally:
        board.close()
    if board.error is not None:
        sys.stderr.write("vboard: %s\n" % board.error)
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

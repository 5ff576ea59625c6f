"""Run one grid of calls under MicroPython and CPython and compare the results.

A grid is a list of calls (name, args). `setup` is Python source, safe on
both interpreters, that defines FNS = {name: callable}; it may read input
files from the folder named by the variable DATA. The same driver (DRIVER
below) runs every call on both sides, in one MicroPython start for the whole
grid, and writes one line per call:

    R <tokens of the result>       or      E <exception class> <message>

Values travel as tokens: f<repr(float)> (repr round-trips exactly on both
interpreters, checked in tests/upy/test_runner.py), i<int>, b0/b1, n (None),
s<escaped str>, [<count> then the items of a tuple or list. Arguments use
the same tokens. `compare` matches floats within a relative tolerance and
everything else (states, strings, error messages) exactly, except the text
of exceptions the interpreter raises itself (BUILTIN_MESSAGES: only the class
is compared; the differing texts are listed in stats["builtin"]).
"""

import math
import os
import shutil
import tempfile

import upyrun

DRIVER = r'''
import sys


def _esc(s):
    return s.replace("\\", "\\\\").replace("\t", "\\t").replace("\n", "\\n").replace("\r", "\\r")


def _unesc(s):
    if "\\" not in s:
        return s
    out = []
    i = 0
    n = len(s)
    while i < n:
        c = s[i]
        if c == "\\" and i + 1 < n:
            i += 1
            c = {"t": "\t", "n": "\n", "r": "\r"}.get(s[i], s[i])
        out.append(c)
        i += 1
    return "".join(out)


def _dec(tok):
    k = tok[0]
    v = tok[1:]
    if k == "f":
        return float(v)
    if k == "i":
        return int(v)
    if k == "s":
        return _unesc(v)
    if k == "n":
        return None
    if k == "b":
        return v == "1"
    raise ValueError("grid: bad argument token %r" % tok)


def _flat(v, out):
    if v is None:
        out.append("n")
    elif isinstance(v, bool):
        out.append("b1" if v else "b0")
    elif isinstance(v, int):
        out.append("i%d" % v)
    elif isinstance(v, float):
        out.append("f" + repr(v))
    elif isinstance(v, str):
        out.append("s" + _esc(v))
    elif isinstance(v, (tuple, list)):
        out.append("[%d" % len(v))
        for x in v:
            _flat(x, out)
    else:
        out.append("?" + type(v).__name__)


def run_grid(fns, path, write):
    f = open(path)
    for line in f:
        line = line.rstrip("\n")
        if not line:
            continue
        toks = line.split("\t")
        fn = fns[toks[0]]
        args = [_dec(t) for t in toks[1:]]
        try:
            r = fn(*args)
        except Exception as e:
            o = ["E", type(e).__name__, "s" + _esc(str(e))]
        else:
            o = ["R"]
            _flat(r, o)
        write("\t".join(o) + "\n")
    f.close()
'''

_ns = {}
exec(DRIVER, _ns)
_flat = _ns["_flat"]
escape = _ns["_esc"]  # how a str result appears in a line, after "s"


def encode_call(name, args):
    """One input line: the function name, then one token per argument."""
    out = [name]
    for a in args:
        if isinstance(a, (tuple, list)):
            raise ValueError("grid arguments are scalars (float, int, bool, str, None)")
        _flat(a, out)
    return "\t".join(out)


def _write_inputs(folder, calls, files):
    for name, content in (files or {}).items():
        mode = "wb" if isinstance(content, bytes) else "w"
        with open(os.path.join(folder, name), mode) as f:
            f.write(content)
    with open(os.path.join(folder, "_grid_in.txt"), "w") as f:
        for name, args in calls:
            f.write(encode_call(name, args) + "\n")


def run_cpython(setup, calls, files=None):
    """Output lines of the grid under this CPython."""
    tmp = tempfile.mkdtemp(prefix="upygrid-")
    try:
        _write_inputs(tmp, calls, files)
        ns = {"__name__": "grid"}
        exec(DRIVER + "\nDATA = %r\n" % tmp + setup, ns)
        out = []
        ns["run_grid"](ns["FNS"], os.path.join(tmp, "_grid_in.txt"), out.append)
        return "".join(out).splitlines()
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def run_micropython(setup, calls, files=None, timeout_s=120):
    """Output lines of the grid under MicroPython (one interpreter start)."""
    tmp = tempfile.mkdtemp(prefix="upygrid-")
    try:
        _write_inputs(tmp, calls, files)
        inputs = {}
        for name in os.listdir(tmp):
            with open(os.path.join(tmp, name), "rb") as f:
                inputs[name] = f.read()
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    code = (DRIVER + "\nDATA = '/data'\n" + setup
            + "\nrun_grid(FNS, '/data/_grid_in.txt', sys.stdout.write)\n")
    return upyrun.run(code, timeout_s=timeout_s, files=inputs).splitlines()


def _same(a, b, rel_tol, abs_tol):
    if a == b:
        return True
    if a[:1] == "f" and b[:1] == "f":
        x = float(a[1:])
        y = float(b[1:])
        if math.isnan(x) or math.isnan(y) or math.isinf(x) or math.isinf(y):
            return False
        return math.isclose(x, y, rel_tol=rel_tol, abs_tol=abs_tol)
    return False


# Exceptions the interpreter raises itself (wrong argument types, ...): their
# text is MicroPython's or CPython's own, so only the class is compared. Every
# other exception (ValueError, OSError and the core's own classes) must carry
# the same message on both.
BUILTIN_MESSAGES = ("TypeError", "AttributeError", "ZeroDivisionError", "OverflowError",
                    "IndexError", "KeyError")


def compare(calls, cp_lines, mp_lines, rel_tol=1e-9, abs_tol=0.0):
    """(mismatches, stats): mismatches are readable strings naming the call and
    both outputs; stats counts calls, errors, bit-identical lines, and lists
    in 'builtin' (call, text) for the calls whose built-in exception text differs."""
    bad = []
    builtin = []
    if len(cp_lines) != len(mp_lines) or len(cp_lines) != len(calls):
        bad.append("line counts differ: %d calls, CPython %d lines, MicroPython %d lines"
                   % (len(calls), len(cp_lines), len(mp_lines)))
    identical = errors = 0
    for call, cp, mp in zip(calls, cp_lines, mp_lines):
        shown = "%s%r:\n    CPython:     %s\n    MicroPython: %s" % (call[0], tuple(call[1]), cp, mp)
        if cp == mp:
            identical += 1
        if cp.startswith("E\t"):
            errors += 1
        ct = cp.split("\t")
        mt = mp.split("\t")
        if ct[0] == "E" and mt[0] == "E" and ct[1] == mt[1] and ct[1] in BUILTIN_MESSAGES:
            if ct != mt:
                builtin.append((call, shown))
            continue
        if len(ct) != len(mt) or not all(_same(a, b, rel_tol, abs_tol) for a, b in zip(ct, mt)):
            bad.append(shown)
    stats = {"calls": len(calls), "identical": identical, "errors": errors, "builtin": builtin}
    return bad, stats


def check(setup, calls, files=None, rel_tol=1e-9, abs_tol=0.0):
    """Run the grid on both interpreters; return (mismatches, stats)."""
    cp = run_cpython(setup, calls, files)
    mp = run_micropython(setup, calls, files)
    return compare(calls, cp, mp, rel_tol, abs_tol)

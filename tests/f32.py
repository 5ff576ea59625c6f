"""The firmware core in IEEE 754 single precision, emulated under CPython.

MicroPython on the boards this project targets computes with 32-bit floats:
the rp2 and esp32 ports build with MICROPY_FLOAT_IMPL_FLOAT
(micropython/micropython issue #6813 quotes ports/rp2's mpconfigport.h;
PR #11949: "By default, MicroPython RPI pico port has single precision float
support"; PR #6294 for the esp32 port). CPython and the WebAssembly build the
other tiers use compute in double, so they cannot show a precision problem.

`single_precision()` imports firmware/gaugecore afresh with every float result
rounded to binary32: every float literal, every result of + - * / % ** (and of
augmented assignments), and every call's result (math.exp, float(), a
method's return value), and the floats of json.loads. Rounding the double
result of + - * / or sqrt to single gives exactly the single-precision result,
because double carries more than 2 x 24 + 2 bits (S. A. Figueroa, "When is
double rounding innocuous?", ACM SIGNUM Newsletter 30(3), 1995). exp, log and
pow are rounded from double, at least as accurate as a board's single-precision
libm: there the emulation is slightly kinder than a board. Integers are left
alone (MicroPython's are exact too).

    with single_precision():
        from gaugecore.table import Table      # the single-precision core
    # outside the block, `gaugecore` is the double-precision one again
    with single_precision(("gaugecore", "drivers", "boards")):
        main = load_file("firmware/main.py", "board_main")   # the whole board

Objects made inside the block keep their single-precision modules.
"""

import ast
import contextlib
import copy
import importlib
import importlib.abc
import importlib.util
import math
import os
import struct
import sys

FIRMWARE = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "firmware")
PACKAGES = ("gaugecore",)  # the default; the board's packages are "drivers" and "boards"
_S = struct.Struct("<f")


def r32(x):
    """x rounded to the nearest binary32 value when it is a float (overflow -> +/-inf)."""
    if type(x) is float:
        try:
            return _S.unpack(_S.pack(x))[0]
        except OverflowError:
            return math.copysign(math.inf, x)
    return x


def deep32(x):
    """r32 through the lists and dicts of a parsed JSON document."""
    if type(x) is float:
        return r32(x)
    if isinstance(x, list):
        return [deep32(v) for v in x]
    if isinstance(x, dict):
        return {k: deep32(v) for k, v in x.items()}
    return x


def _call(name, node):
    return ast.copy_location(ast.Call(ast.Name(name, ast.Load()), [node], []), node)


class _Round(ast.NodeTransformer):
    """Source transformation: round every float a module computes (module docstring)."""

    def visit_Constant(self, node):
        if type(node.value) is float:
            return ast.copy_location(ast.Constant(r32(node.value)), node)
        return node

    def visit_BinOp(self, node):
        self.generic_visit(node)
        return _call("_r32", node)

    def visit_Call(self, node):
        self.generic_visit(node)
        f = node.func
        if (isinstance(f, ast.Attribute) and f.attr == "loads" and isinstance(f.value, ast.Name)
                and f.value.id == "json"):
            return _call("_deep32", node)
        return _call("_r32", node)

    def visit_AugAssign(self, node):
        # x op= y -> x = _r32(x op y): the target is evaluated twice, which the
        # core never minds (no target with a side effect)
        self.generic_visit(node)
        load = copy.deepcopy(node.target)
        load.ctx = ast.Load()
        value = _call("_r32", ast.copy_location(ast.BinOp(load, node.op, node.value), node))
        return ast.copy_location(ast.Assign([node.target], value), node)


class _Loader(importlib.abc.Loader):
    def __init__(self, filename):
        self.filename = filename

    def create_module(self, spec):
        return None

    def exec_module(self, module):
        with open(self.filename) as f:
            tree = ast.parse(f.read(), self.filename)
        tree = ast.fix_missing_locations(_Round().visit(tree))
        module.__dict__["_r32"] = r32
        module.__dict__["_deep32"] = deep32
        exec(compile(tree, self.filename, "exec"), module.__dict__)


class _Finder(importlib.abc.MetaPathFinder):
    def __init__(self, packages):
        self.packages = packages

    def find_spec(self, name, path, target=None):
        if not _ours(name, self.packages):
            return None
        base = os.path.join(FIRMWARE, *name.split("."))
        if os.path.isdir(base):
            filename = os.path.join(base, "__init__.py")
            return importlib.util.spec_from_file_location(name, filename, loader=_Loader(filename),
                                                          submodule_search_locations=[base])
        if os.path.isfile(base + ".py"):
            return importlib.util.spec_from_file_location(name, base + ".py", loader=_Loader(base + ".py"))
        return None


def _ours(name, packages):
    return any(name == p or name.startswith(p + ".") for p in packages)


def load_file(path, name):
    """The single-precision module of one source file (firmware/main.py), under `name`."""
    spec = importlib.util.spec_from_file_location(name, path, loader=_Loader(path))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@contextlib.contextmanager
def single_precision(packages=PACKAGES):
    """Inside: `import gaugecore...` (and the other `packages` of firmware/) gives the
    single-precision code (module docstring)."""
    saved = {k: v for k, v in sys.modules.items() if _ours(k, packages)}
    for k in saved:
        del sys.modules[k]
    finder = _Finder(packages)
    sys.meta_path.insert(0, finder)
    try:
        for p in packages:
            importlib.import_module(p)
        yield
    finally:
        sys.meta_path.remove(finder)
        for k in [k for k in sys.modules if _ours(k, packages)]:
            del sys.modules[k]
        sys.modules.update(saved)

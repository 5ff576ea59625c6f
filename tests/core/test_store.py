"""gaugecore.store: tables and configuration that survive power loss.

The power-loss proof: a fake filesystem counts every operation (open, read,
write, close, rename, remove, mkdir) and loses power after the Nth, for
every N across a whole install, in four ways of losing the file being
written (kept as written, truncated to a random prefix, a random prefix plus
random garbage, reverted to its old state as littlefs does). After each
loss a fresh `boot()` must give the old table or the new one, never garbage
and never nothing when an old one existed. The fake refuses a rename onto an
existing name (stricter than littlefs or MicroPython's FAT driver), so the
store cannot depend on a replacing rename. The rules checked are the
store's own contract (firmware/gaugecore/store.py, design.md "Files on the
board are replaced atomically"); the CRC is tablefile's (its own tests check it
against zlib).

The last test runs an install/boot cycle under the real MicroPython
(tools/upy/upyrun.py) to show that the os calls used exist there.
"""

import errno
import os
import random
import sys

import pytest

from gaugecore import store as storemod
from gaugecore import tablefile
from gaugecore.store import Store, StoreError
from gaugecore.table import Table

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")

# Invented demo tables (not measurements).
OLD = Table([(12.0, 0.05), (7.0, 2.0), (1.5, 50.0), (0.8, 400.0)], "N2", "wren-demo",
            165.0, 0.0, "K", "invented demo data, old")
NEW = Table([(12.1, 0.05), (9.0, 0.8), (6.9, 2.0), (1.4, 50.0), (0.75, 400.0)], "N2", "wren-demo",
            165.0, 0.0, "K", "invented demo data, new")
OLD_TEXT = tablefile.dumps(OLD).encode("utf-8")
NEW_TEXT = tablefile.dumps(NEW).encode("utf-8")
MODES = ("cold", "prefix", "garbage", "revert")


class PowerLoss(BaseException):
    """Power failed: every later operation of this fake fails the same way."""


class FakeFile:
    def __init__(self, fs, path, mode):
        self.fs = fs
        self.path = path
        self.writing = "w" in mode
        self.pending = b""
        self.pos = 0

    def write(self, data):
        self.fs._op("write", self.path)
        self.pending += bytes(data)
        if self.fs.mode == "cold":
            self.fs.files[self.path] = self.pending  # straight to disk
        return len(data)

    def read(self, n=-1):
        self.fs._op("read", self.path)
        data = self.fs.files[self.path]
        out = data[self.pos:] if n < 0 else data[self.pos:self.pos + n]
        self.pos += len(out)
        return out

    def close(self):
        self.fs._op("close", self.path)
        if self.writing:
            self.fs.files[self.path] = self.pending
            self.fs.open_writes.pop(self.path, None)
            self.writing = False


class FakeFs:
    """In-memory filesystem that loses power after `budget` operations."""

    def __init__(self, files=None, budget=None, mode="cold", seed=0):
        self.files = dict(files or {})
        self.dirs = set()
        self.budget = budget
        self.mode = mode
        self.rng = random.Random(seed)
        self.ops = 0
        self.log = []
        self.dead = False
        self.open_writes = {}  # path -> (file, contents before open or None)

    def _op(self, name, path):
        if self.dead:
            raise PowerLoss()
        if self.budget is not None and self.ops >= self.budget:
            self._lose_power()
            raise PowerLoss()
        self.ops += 1
        self.log.append((name, path))

    def _lose_power(self):
        self.dead = True
        for path, (f, before) in self.open_writes.items():
            data = f.pending
            if self.mode == "cold":
                self.files[path] = data
            elif self.mode == "prefix":
                self.files[path] = data[:self.rng.randint(0, len(data))]
            elif self.mode == "garbage":
                junk = bytes(self.rng.randint(0, 255) for _ in range(self.rng.randint(1, 64)))
                self.files[path] = data[:self.rng.randint(0, len(data))] + junk
            elif before is None:  # revert (littlefs): a new file vanishes
                self.files.pop(path, None)
            else:
                self.files[path] = before

    def open(self, path, mode):
        self._op("open", path)
        if "w" in mode:
            before = self.files.get(path)
            f = FakeFile(self, path, mode)
            self.files[path] = b""
            self.open_writes[path] = (f, before)
            return f
        if path not in self.files:
            raise OSError(errno.ENOENT, "no such file")
        return FakeFile(self, path, mode)

    def rename(self, old, new):
        self._op("rename", old)
        if old not in self.files:
            raise OSError(errno.ENOENT, "no such file")
        if new in self.files:
            raise OSError(errno.EEXIST, "file exists")
        self.files[new] = self.files.pop(old)

    def remove(self, path):
        self._op("remove", path)
        if path not in self.files:
            raise OSError(errno.ENOENT, "no such file")
        del self.files[path]

    def mkdir(self, path):
        self._op("mkdir", path)
        if path in self.dirs:
            raise OSError(errno.EEXIST, "exists")
        self.dirs.add(path)

    def reboot(self):
        """A fresh, powered filesystem with what was durable on this one."""
        fs = FakeFs(self.files)
        fs.dirs = set(self.dirs)
        return fs


def installed(*texts):
    """A FakeFs holding slot ch1 after installing each text in turn."""
    fs = FakeFs()
    st = Store("tables", fs)
    for t in texts:
        st.install("ch1", t)
    return fs.reboot()


def count_ops(fs_files_factory, action):
    fs = fs_files_factory()
    action(Store("tables", fs))
    return fs.ops


# ------------------------------------------------------------------ normal use

def test_install_then_boot_gives_the_table_and_keeps_the_previous():
    fs = installed(OLD_TEXT, NEW_TEXT)
    assert sorted(fs.files) == ["tables/ch1.json", "tables/ch1.prev.json"]
    assert fs.files["tables/ch1.json"] == NEW_TEXT
    assert fs.files["tables/ch1.prev.json"] == OLD_TEXT
    table, fault = Store("tables", fs).boot("ch1")
    assert table == NEW and fault is None


def test_install_returns_table_and_crc():
    table, crc = Store("tables", FakeFs()).install("ch1", NEW_TEXT.decode())
    assert table == NEW
    assert crc == tablefile.parse(NEW_TEXT)[1]


def test_install_op_sequence_is_the_documented_one():
    fs = installed(OLD_TEXT)
    Store("tables", fs).install("ch1", NEW_TEXT)
    names = [op for op, path in fs.log if op in ("write", "rename", "remove")]
    paths = [path for op, path in fs.log if op in ("write", "rename", "remove")]
    # steps 1, 3, 4, 5 of the module docstring (the stale-tmp remove fails quietly:
    # the fake logs the attempt before refusing it)
    assert names == ["remove", "write", "remove", "rename", "rename"]
    assert paths == ["tables/ch1.tmp", "tables/ch1.tmp", "tables/ch1.prev.json",
                     "tables/ch1.json", "tables/ch1.tmp"]


@pytest.mark.parametrize("text, kwargs, message", [
    (OLD_TEXT.replace(b"[7, 2]", b"[7, 3]"), {},
     "table refused: crc mismatch: file says 0x%08x, content gives 0x%08x"),
    (OLD_TEXT[:100], {}, "table refused: not valid JSON (truncated or damaged file?)"),
    (OLD_TEXT, {"expect_tc_type": "E"},
     "table refused: thermocouple type K, the channel is type E"),
])
def test_install_refuses_with_a_reason_and_touches_nothing(text, kwargs, message):
    fs = installed(OLD_TEXT)
    before = dict(fs.files)
    with pytest.raises(StoreError) as exc:
        Store("tables", fs).install("ch1", text, **kwargs)
    if "crc" in message:
        # the CRC of the body as edited (zlib.crc32 is the reference, see test_tablefile)
        import zlib
        cut = text.rfind(b'"crc32": "')
        message = message % (int(text[cut + 12:cut + 20], 16), zlib.crc32(text[:cut]))
    assert str(exc.value) == message
    assert fs.files == before
    assert [op for op, _ in fs.log if op in ("write", "rename", "remove")] == []


def test_refuses_too_many_points_and_too_many_bytes():
    fs = FakeFs()
    with pytest.raises(StoreError) as exc:
        Store("tables", fs, max_points=4).install("ch1", NEW_TEXT)
    assert str(exc.value) == "table refused: 5 points, this store holds at most 4"
    with pytest.raises(StoreError) as exc:
        Store("tables", fs, max_bytes=100).install("ch1", NEW_TEXT)
    assert str(exc.value) == "table refused: %d bytes, at most 100" % len(NEW_TEXT)
    assert fs.files == {}


def test_expected_type_per_slot_from_the_constructor():
    st = Store("tables", FakeFs(), expect_tc_type={"ch2": "E"})
    st.install("ch1", OLD_TEXT)
    with pytest.raises(StoreError) as exc:
        st.install("ch2", OLD_TEXT)
    assert str(exc.value) == "table refused: thermocouple type K, the channel is type E"
    # boot does not use a file of the wrong type either
    table, fault = Store("tables", st.fs, expect_tc_type={"ch1": "E"}).boot("ch1")
    assert table is None
    assert fault == ("table ch1: active file corrupt (table refused: thermocouple type K, "
                     "the channel is type E) and previous missing; no table")


def test_bad_slot_names():
    st = Store("tables", FakeFs())
    for slot, msg in [("", "slot name must be 1..24 characters, got ''"),
                      ("ch/1", "slot name 'ch/1': only a-z, 0-9, '_' and '-' are allowed"),
                      ("config", "slot name 'config' is reserved")]:
        with pytest.raises(StoreError) as exc:
            st.boot(slot)
        assert str(exc.value) == msg


def test_boot_falls_back_and_reports():
    fs = installed(OLD_TEXT, NEW_TEXT)
    import zlib
    damaged = NEW_TEXT.replace(b"[9, 0.8]", b"[9, 0.9]")  # one flipped digit
    fs.files["tables/ch1.json"] = damaged
    table, fault = Store("tables", fs).boot("ch1")
    assert table == OLD
    cut = damaged.rfind(b'"crc32"')
    assert fault == ("table ch1: active file corrupt (crc mismatch: file says 0x%08x, content "
                     "gives 0x%08x), using previous"
                     % (tablefile.parse(NEW_TEXT)[1], zlib.crc32(damaged[:cut])))  # zlib: reference CRC
    fs.files["tables/ch1.json"] = NEW_TEXT[:-30]  # truncated
    assert Store("tables", fs).boot("ch1") == (
        OLD, "table ch1: active file corrupt (not valid JSON (truncated or damaged file?)), "
        "using previous")
    del fs.files["tables/ch1.json"]
    table, fault = Store("tables", fs).boot("ch1")
    assert table == OLD and fault == "table ch1: active file missing, using previous"
    fs.files["tables/ch1.prev.json"] = b"\x00" * 40
    table, fault = Store("tables", fs).boot("ch1")
    assert table is None
    assert fault == ("table ch1: active file missing and previous corrupt "
                     "(not valid JSON (truncated or damaged file?)); no table")
    assert Store("tables", FakeFs()).boot("ch1") == (None, "table ch1: no table installed")


# ------------------------------------------------------------------ power loss

def sweep(setup_texts, action, check, modes=MODES, seeds=(0, 1, 2)):
    """Run `action(store)` on a fresh copy of the installed state, losing power
    after N operations for every N up to the full count, then check(reboot)."""
    total = count_ops(lambda: installed(*setup_texts), action)
    assert total >= 10  # the whole sequence really is swept
    runs = 0
    for mode in modes:
        for seed in seeds:
            for n in range(total + 1):
                fs = installed(*setup_texts)
                fs.budget, fs.mode, fs.rng = n, mode, random.Random(seed * 1000 + n)
                try:
                    action(Store("tables", fs))
                    finished = True
                except PowerLoss:
                    finished = False
                assert finished == (n == total), (mode, n)
                check(fs.reboot(), finished, (mode, seed, n))
                runs += 1
    return total, runs


def test_power_loss_at_every_step_of_an_install():
    def check(fs, finished, where):
        table, fault = Store("tables", fs).boot("ch1")
        assert table in (OLD, NEW), where  # never garbage, never nothing
        if finished:
            assert (table, fault) == (NEW, None)
        # a second boot is clean: whatever boot repaired stays repaired
        again, fault2 = Store("tables", fs).boot("ch1")
        assert again == table, where

    total, runs = sweep([OLD_TEXT], lambda st: st.install("ch1", NEW_TEXT), check)
    # mkdir, remove stale tmp, open/write/close tmp, open/read/close it back,
    # open/close the active file (is there one?), remove prev, rename, rename
    assert total == 13 and runs == 4 * 3 * 14


def test_power_loss_with_an_older_previous_file_present():
    older = Table([(11.0, 0.05), (7.5, 2.0), (1.6, 50.0), (0.9, 400.0)], "N2", "wren-demo",
                  165.0, 0.0, "K", "invented demo data, older")
    older_text = tablefile.dumps(older).encode("utf-8")

    def check(fs, finished, where):
        table, fault = Store("tables", fs).boot("ch1")
        assert table in (OLD, NEW), where  # the older one never comes back while OLD is good

    sweep([older_text, OLD_TEXT], lambda st: st.install("ch1", NEW_TEXT), check)


def test_power_loss_on_the_first_install_gives_new_or_none():
    seen = set()

    def check(fs, finished, where):
        table, fault = Store("tables", fs).boot("ch1")
        assert table in (NEW, None), where
        if table is None:
            assert fault == "table ch1: no table installed" or fault.startswith(
                "table ch1: active file missing and previous missing"), (where, fault)
        seen.add(table is None)

    sweep([], lambda st: st.install("ch1", NEW_TEXT), check)
    assert seen == {True, False}


def test_interrupted_install_is_finished_at_boot():
    # power lost right after step 4 (active renamed to previous): tmp holds the new table
    fs = installed(OLD_TEXT)
    fs.files["tables/ch1.prev.json"] = fs.files.pop("tables/ch1.json")
    fs.files["tables/ch1.tmp"] = NEW_TEXT
    table, fault = Store("tables", fs).boot("ch1")
    assert table == NEW and fault == "table ch1: install was interrupted; finished it"
    assert sorted(fs.files) == ["tables/ch1.json", "tables/ch1.prev.json"]
    assert Store("tables", fs).boot("ch1") == (NEW, None)


def test_power_loss_during_the_boot_repair():
    def prepared():
        fs = installed(OLD_TEXT)
        fs.files["tables/ch1.prev.json"] = fs.files.pop("tables/ch1.json")
        fs.files["tables/ch1.tmp"] = NEW_TEXT
        return fs

    total = count_ops(prepared, lambda st: st.boot("ch1"))
    for n in range(total + 1):
        fs = prepared()
        fs.budget = n
        try:
            Store("tables", fs).boot("ch1")
        except PowerLoss:
            pass
        table, _ = Store("tables", fs.reboot()).boot("ch1")
        assert table == NEW, n


def test_power_loss_while_saving_the_config():
    old = {"unit": "TORR", "rate_hz": 10.0, "heater_ma": [165.0, 165.0], "fast": False}
    new = {"unit": "PA", "rate_hz": 2.5, "heater_ma": [160.0, 170.0], "fast": True,
           "setpoints": [{"channel": 1, "on_pa": 10.0, "off_pa": 12.0}]}
    defaults = {"unit": "PA", "rate_hz": 1.0, "heater_ma": [165.0, 165.0], "fast": False,
                "setpoints": []}

    def prep():
        fs = FakeFs()
        Store("tables", fs).save_config(old)
        return fs.reboot()

    def merged(cfg):
        out = dict(defaults)
        out.update(cfg)
        return out

    total = count_ops(prep, lambda st: st.save_config(new))
    assert total == 13  # as for a table install
    for mode in MODES:
        for n in range(total + 1):
            fs = prep()
            fs.budget, fs.mode, fs.rng = n, mode, random.Random(n)
            try:
                Store("tables", fs).save_config(new)
            except PowerLoss:
                pass
            cfg, fault = Store("tables", fs.reboot()).load_config(defaults)
            assert cfg in (merged(old), merged(new)), (mode, n)
            if n == total:
                assert (cfg, fault) == (merged(new), None)


def test_config_defaults_kinds_and_faults():
    fs = FakeFs()
    st = Store("tables", fs)
    defaults = {"unit": "PA", "rate_hz": 1.0, "fast": False}
    assert st.load_config(defaults) == (defaults, None)  # first boot: defaults, no fault
    st.save_config({"unit": "TORR", "rate_hz": 5, "fast": 1, "colour": "red"})
    cfg, fault = st.load_config(defaults)
    # an int is a number like the float default; 1 is not a bool; unknown keys dropped
    assert cfg == {"unit": "TORR", "rate_hz": 5, "fast": False}
    assert fault == "config: ignored colour, fast"
    fs.files["tables/config.json"] = fs.files["tables/config.json"].replace(b"TORR", b"MBAR")
    cfg, fault = st.load_config(defaults)
    assert cfg == defaults and fault == "config: no usable file, using defaults"
    with pytest.raises(StoreError) as exc:
        st.save_config({"rate_hz": float("nan")})
    assert str(exc.value) == "config refused: config.rate_hz is not a finite number"
    with pytest.raises(StoreError) as exc:
        st.save_config({"x": [1, object()]})
    assert str(exc.value) == "config refused: config.x[1] is not a JSON value"


def test_config_file_text_and_crc():
    import zlib
    text = storemod.config_dumps({"unit": "PA"})
    body = '{"format": "tcgauge-config", "version": 1,\n "config": {"unit": "PA"},\n '
    assert text == body + '"crc32": "0x%08x"}\n' % zlib.crc32(body.encode())  # zlib: reference CRC-32
    assert storemod.config_loads(text) == {"unit": "PA"}
    with pytest.raises(StoreError) as exc:
        storemod.config_loads(text[:-3])
    assert str(exc.value) == "config file: crc32 field does not close the file (truncated?)"


# ------------------------------------------------------------------ real filesystems

def test_cpython_os_filesystem(tmp_path):
    st = Store(str(tmp_path / "tables"))
    st.install("ch1", OLD_TEXT)
    st.install("ch1", NEW_TEXT)
    assert sorted(os.listdir(tmp_path / "tables")) == ["ch1.json", "ch1.prev.json"]
    assert st.boot("ch1") == (NEW, None)
    st.save_config({"unit": "MBAR"})
    assert st.load_config({"unit": "PA"}) == ({"unit": "MBAR"}, None)


def test_install_and_boot_under_micropython():
    sys.path.insert(0, os.path.join(ROOT, "tools", "upy"))
    from conftest import require_tool
    import upyrun

    require_tool("node")
    with open(DEMO, "rb") as f:
        demo = f.read()
    old = tablefile.loads(demo)
    # the demo table under another invented profile name, as a second, newer table
    new = Table(old.points, old.gas, "wren-demo-b", old.heater_ma, old.ref_c, old.tc_type, old.source)
    new_text = tablefile.dumps(new).encode("utf-8")
    code = """
import os, json
from gaugecore.store import Store, StoreError
os.mkdir('/store')
st = Store('/store/tables', expect_tc_type={'ch1': 'K'})
def read(p):
    f = open(p, 'rb'); d = f.read(); f.close(); return d
demo = read('/data/demo.json')
new = read('/data/new.json')
t1, crc1 = st.install('ch1', demo)
t2, crc2 = st.install('ch1', new)
files = sorted(os.listdir('/store/tables'))
b1 = st.boot('ch1')
f = open('/store/tables/ch1.json', 'wb'); f.write(new[:50]); f.close()
b2 = st.boot('ch1')
os.remove('/store/tables/ch1.json')
os.rename('/store/tables/ch1.prev.json', '/store/tables/ch1.tmp')
b3 = st.boot('ch1')
try:
    st.install('ch1', demo, expect_tc_type='E')
    refused = None
except StoreError as e:
    refused = str(e)
st.save_config({'unit': 'TORR', 'rate_hz': 2.5})
cfg = st.load_config({'unit': 'PA', 'rate_hz': 1.0, 'fast': False})
print(json.dumps({'crc': [crc1, crc2], 'files': files, 'b1': [b1[0].profile, b1[1]],
                  'b2': [b2[0].profile, b2[1]], 'b3': [b3[0].profile, b3[1]],
                  'after': sorted(os.listdir('/store/tables')),
                  'refused': refused, 'cfg': cfg}))
"""
    got = upyrun.run_json(code, files={"demo.json": demo, "new.json": new_text})
    assert got == {
        "crc": [tablefile.parse(demo)[1], tablefile.parse(new_text)[1]],
        "files": ["ch1.json", "ch1.prev.json"],
        "b1": ["wren-demo-b", None],
        "b2": ["wren-demo", "table ch1: active file corrupt (not valid JSON (truncated or "
                            "damaged file?)), using previous"],
        "b3": ["wren-demo", "table ch1: install was interrupted; finished it"],
        "after": ["ch1.json", "config.json"],
        "refused": "table refused: thermocouple type K, the channel is type E",
        "cfg": [{"unit": "TORR", "rate_hz": 2.5, "fast": False}, None],
    }

"""Who is on the port: the board's *IDN? fields and firmware version, against the host's.

    info = identify(Client(Link(port)))
    info["firmware"], info["model"]          # from *IDN? (IEEE 488.2 10.14)
    info["heap_free"]                        # DIAG:MEM:FREE? bytes; -1 not known; None not asked
    version_warning(info), heap_warning(info)  # None, or the text of the problem

The host and the firmware share one version number (gaugecore.version); a
board running another version may speak another protocol, so the mismatch
is reported, not fatal. A board short of heap is reported too: the firmware
fills most of a small board's heap (tools/bench/heap.py), and what is left
is the room for a table upload and the collector.
"""

from gaugecore.commands import MAX_TABLE_BYTES
from gaugecore.table import MAX_POINTS
from gaugecore.version import VERSION

from tcgauge.client import DeviceError

FIELDS = ("maker", "model", "serial", "firmware")
# Heap of a table with the wall model, per point, measured under the MicroPython
# WASM build (the comment at gaugecore.table.MAX_POINTS).
TABLE_BYTES_PER_POINT = 168
# A table upload holds the largest file text while it builds the largest table
# beside the old one: below this much free heap it may fail with MemoryError.
LOW_HEAP_BYTES = MAX_TABLE_BYTES + MAX_POINTS * TABLE_BYTES_PER_POINT


def identify(client):
    """{maker, model, serial, firmware, scpi, heap_free, host} from the device behind `client`.

    heap_free is None when the firmware does not know DIAG:MEM:FREE? (an older one)."""
    info = dict(zip(FIELDS, client.idn()))
    info["scpi"] = client.version()
    try:
        info["heap_free"] = client.memory_free()
    except DeviceError:
        info["heap_free"] = None
    info["host"] = VERSION
    return info


def heap_warning(info):
    """The text when the board reports less than LOW_HEAP_BYTES free, else None."""
    free = info.get("heap_free")
    if free is None or free < 0 or free >= LOW_HEAP_BYTES:
        return None
    return ("the board has only %d bytes of heap free (%d wanted): a table upload may run out of memory; "
            "use a frozen firmware build (firmware/manifest.py) or a board with more RAM" % (free, LOW_HEAP_BYTES))


def _heap_text(free):
    if free is None:
        return "not reported (firmware without DIAG:MEM:FREE?)"
    if free < 0:
        return "not known (the interpreter cannot tell)"
    return "%d bytes free" % free


def version_warning(info):
    """The mismatch text when the firmware's version is not the host's, else None."""
    if info["firmware"] == info["host"]:
        return None
    return ("firmware version %s differs from this host's %s: deploy the matching firmware "
            "(tcgauge deploy) or install the matching host package" % (info["firmware"], info["host"]))


def describe(info):
    """Aligned 'name  value' lines; the firmware line is marked when it differs from the host."""
    lines = []
    for key in FIELDS + ("scpi", "heap", "host"):
        if key == "heap":
            value = _heap_text(info.get("heap_free"))
        else:
            value = info[key]
        if key == "firmware" and info["firmware"] != info["host"]:
            value += "  (MISMATCH: host is %s)" % info["host"]
        lines.append("%-9s %s" % (key, value))
    return "\n".join(lines) + "\n"

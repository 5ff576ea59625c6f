"""CRC-32 (IEEE 802.3; reflected polynomial 0xEDB88320, init and final XOR 0xFFFFFFFF).

`crc32(data, crc=0)` has the signature of binascii.crc32 and zlib.crc32 and
gives the same values: check value crc32(b"123456789") == 0xCBF43926 (Greg
Cook, "Catalogue of parametrised CRC algorithms", CRC-32/ISO-HDLC). It is
binascii.crc32 where the interpreter has it, else `crc32_py`, a small
table-driven version in pure Python. Used on files, never per sample.
"""

_POLY = 0xEDB88320
_table = None


def _make_table():
    t = []
    for n in range(256):
        c = n
        for _ in range(8):
            if c & 1:
                c = (c >> 1) ^ _POLY
            else:
                c >>= 1
        t.append(c)
    return t


def crc32_py(data, crc=0):
    """CRC-32 of the bytes `data`, continuing from `crc` (0 to start)."""
    global _table
    if _table is None:
        _table = _make_table()
    t = _table
    c = crc ^ 0xFFFFFFFF
    for b in data:
        c = t[(c ^ b) & 0xFF] ^ (c >> 8)
    return c ^ 0xFFFFFFFF


try:
    from binascii import crc32
except ImportError:  # no binascii module in this build
    crc32 = crc32_py

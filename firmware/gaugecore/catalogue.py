"""The tables shipped on the device: one folder of table files, named by file stem.

`Catalogue("tables")` lists "<name>.json" files (gaugecore.tablefile format);
the protocol's CONFigure:TABLe and TABLe:CATalog use those names. Tables
are loaded only when asked for, so the board keeps just the ones in use.
"""

import os

from gaugecore import tablefile

_SUFFIX = ".json"
MAX_NAME = 24  # gaugecore.commands.MAX_NAME: a longer file name is not listed


def _listdir(folder):
    try:
        return os.listdir(folder)
    except OSError:
        return []


class Catalogue:
    """Table files in `folder` (a missing folder is an empty catalogue)."""

    def __init__(self, folder="tables"):
        self.folder = folder

    def names(self):
        """Sorted table names (file stems of the .json files)."""
        out = []
        for entry in _listdir(self.folder):
            if entry.endswith(_SUFFIX) and not entry.startswith("."):
                stem = entry[: -len(_SUFFIX)]
                if 0 < len(stem) <= MAX_NAME and "." not in stem:
                    out.append(stem)
        out.sort()
        return out

    def path(self, name):
        """File path of table `name` (ValueError if it is not in the catalogue)."""
        if name not in self.names():
            raise ValueError("no table named %s on the device" % name)
        return self.folder + "/" + name + _SUFFIX

    def text(self, name):
        """The file's bytes (ValueError if unknown, OSError if unreadable)."""
        with open(self.path(name), "rb") as f:
            return f.read()

    def load(self, name):
        """The Table of `name`: ValueError (unknown, or tablefile.TableFileError) or OSError."""
        return tablefile.loads(self.text(name))

"""gaugecore: the measurement core of tcgauge.

Pure Python that runs unchanged under MicroPython on the board and under
CPython on a laptop. It imports nothing of `machine`; hardware reaches it
only through small injected objects (see DEVELOPERS.md, "Interfaces").
"""

from gaugecore.version import VERSION

__version__ = VERSION

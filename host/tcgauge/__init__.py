"""tcgauge host package: tools that talk to, simulate and test the controller."""

from gaugecore.version import VERSION

__version__ = VERSION

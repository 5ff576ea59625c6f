"""`python -m tcgauge` is the same as the `tcgauge` command."""

from tcgauge.cli import run

run()

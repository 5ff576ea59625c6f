"""The one version number of tcgauge: firmware and host read it from here."""

VERSION = "0.1.0"

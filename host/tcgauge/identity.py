"""Who is on the port: the board's *IDN? fields and firmware version, against the host's.

    info = identify(Client(Link(port)))
    info["firmware"], info["model"]          # from *IDN? (IEEE 488.2 10.14)
    version_warning(info)                    # None, or the text of the mismatch

The host and the firmware share one version number (gaugecore.version); a
board running another version may speak another protocol, so the mismatch
is reported, not fatal.
"""

from gaugecore.version import VERSION

FIELDS = ("maker", "model", "serial", "firmware")


def identify(client):
    """{maker, model, serial, firmware, scpi, host} from the device behind `client`."""
    info = dict(zip(FIELDS, client.idn()))
    info["scpi"] = client.version()
    info["host"] = VERSION
    return info


def version_warning(info):
    """The mismatch text when the firmware's version is not the host's, else None."""
    if info["firmware"] == info["host"]:
        return None
    return ("firmware version %s differs from this host's %s: deploy the matching firmware "
            "(tcgauge deploy) or install the matching host package" % (info["firmware"], info["host"]))


def describe(info):
    """Aligned 'name  value' lines; the firmware line is marked when it differs from the host."""
    lines = []
    for key in FIELDS + ("scpi", "host"):
        value = info[key]
        if key == "firmware" and info["firmware"] != info["host"]:
            value += "  (MISMATCH: host is %s)" % info["host"]
        lines.append("%-9s %s" % (key, value))
    return "\n".join(lines) + "\n"

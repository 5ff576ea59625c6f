"""Plot gas tables: EMF against pressure on a log pressure axis, several tables overlaid.

Each table is drawn as its points joined by the core's own conversion curve
(gaugecore.table PCHIP, evaluated through tcgauge.bulk), labelled with gas
and profile; a band (tcgauge.band) is shaded between its lower and upper
pressures at each EMF. Pressures below every table's lowest point read
'under range', above every table's highest point 'over range': both regions
are shaded grey and labelled. Drawn with matplotlib's Agg canvas (no display,
no pyplot state).
"""

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from gaugecore import units
from tcgauge.bulk import convert_array

_LABELS = {"N2": "N$_2$", "air": "air", "He": "He", "Ar": "Ar", "H2": "H$_2$",
           "CO2": "CO$_2$", "H2O": "H$_2$O"}
_CURVE_POINTS = 240  # interpolated points along each table's curve
_MARGIN = 4.0  # width of the under/over range regions drawn, as a pressure factor


def plot_data(tables, bands=None, unit="TORR"):
    """What `plot_tables` draws, as plain arrays (pressures in `unit`).

    {"unit", "symbol", "series": [{"label", "gas", "profile", "points_p", "points_emf_mv",
    "curve_p", "curve_emf_mv", "band": None or {"emf_mv", "lower", "upper"}}],
    "under": (x_lo, x_hi), "over": (x_lo, x_hi)}.
    """
    units.from_pa(1.0, unit)  # ValueError naming the known units
    symbol = units.SYMBOL[unit.upper()]
    bands = list(bands or [])
    if len(bands) < len(tables):
        bands += [None] * (len(tables) - len(bands))
    series = []
    for table, band in zip(tables, bands):
        pts = np.array(table.points)
        e_lo, e_hi = table.emf_range_mv
        e_curve = np.linspace(e_hi, e_lo, _CURVE_POINTS)
        p_curve, _ = convert_array(table, e_curve)
        entry = {"label": "%s, %s" % (_LABELS.get(table.gas, table.gas), table.profile),
                 "gas": table.gas, "profile": table.profile,
                 "points_p": units.from_pa(pts[:, 1], unit), "points_emf_mv": pts[:, 0],
                 "curve_p": units.from_pa(p_curve, unit), "curve_emf_mv": e_curve, "band": None}
        if band is not None:
            entry["band"] = {"emf_mv": band.emf_mv.copy(),
                             "lower": units.from_pa(band.lower_pa, unit),
                             "upper": units.from_pa(band.upper_pa, unit)}
        series.append(entry)
    p_lo = min(float(s["points_p"][0]) for s in series)
    p_hi = max(float(s["points_p"][-1]) for s in series)
    return {"unit": unit.upper(), "symbol": symbol, "series": series,
            "under": (p_lo / _MARGIN, p_lo), "over": (p_hi, p_hi * _MARGIN)}


def plot_tables(path, tables, bands=None, unit="TORR", size_in=(10.0, 6.5), dpi=120):
    """Write the tables (and bands, one per table or None) to the PNG `path`; return `plot_data`."""
    if not tables:
        raise ValueError("plot_tables: no tables to plot")
    data = plot_data(tables, bands, unit)
    fig = Figure(figsize=size_in, dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    cmap = ("tab:blue", "tab:orange", "tab:green", "tab:red", "tab:purple", "tab:brown",
            "tab:pink", "tab:olive", "tab:cyan", "tab:gray")
    top = max(float(np.max(s["points_emf_mv"])) for s in data["series"])
    for k, s in enumerate(data["series"]):
        colour = cmap[k % len(cmap)]
        ax.plot(s["curve_p"], s["curve_emf_mv"], "-", color=colour, linewidth=1.6, label=s["label"])
        if s["band"] is not None:
            b = s["band"]
            # The band is a pressure interval at each EMF: shade between the two pressure curves.
            ax.fill_betweenx(b["emf_mv"], b["lower"], b["upper"], color=colour, alpha=0.18,
                             linewidth=0, label="%s: uncertainty band" % s["label"])
        ax.plot(s["points_p"], s["points_emf_mv"], "o", color=colour, markersize=3.2)
    for key, text in (("under", "under range: EMF above every table's top point"),
                      ("over", "over range: EMF below every table's lowest point")):
        a, b = data[key]
        ax.axvspan(a, b, color="0.85", zorder=0)
        ax.text((a * b) ** 0.5, top * 0.5, text, ha="center", va="center", rotation=90,
                fontsize=8, color="0.3")
    ax.set_xscale("log")
    ax.set_xlim(data["under"][0], data["over"][1])
    ax.set_ylim(0.0, top * 1.08)
    ax.set_xlabel("pressure (%s)" % data["symbol"])
    ax.set_ylabel("thermocouple EMF (mV, at the table's reference temperature)")
    ax.set_title("Gas tables: EMF against pressure (points as stored, curves as the controller "
                 "interpolates)", fontsize=10)
    ax.grid(True, which="both", linewidth=0.4, alpha=0.5)
    ax.legend(loc="lower left", fontsize=8)
    fig.tight_layout()
    fig.savefig(path)
    return data

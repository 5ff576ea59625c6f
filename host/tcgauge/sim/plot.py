"""Family of curves of a thermal-conductivity gauge: steady EMF against pressure, one curve a gas.

Computed with the simulator's steady-state solver (tcgauge.sim.tube) for a
tube profile; drawn with matplotlib's Agg canvas (no display, no pyplot state).
"""

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from gaugecore.units import PA_PER_TORR
from tcgauge.sim.gas import GASES
from tcgauge.sim.profile import load_profile
from tcgauge.sim.tube import steady_state

GAS_ORDER = ("H2", "He", "H2O", "N2", "air", "CO2", "Ar")
_STYLES = {"H2": "-", "He": "-", "H2O": "-.", "N2": "-", "air": "--", "CO2": "-.", "Ar": "-"}
USEFUL_RANGE_TORR = (1e-3, 1.0)  # docs/physics.md s. 1
_LABELS = {"N2": "N$_2$", "air": "air", "He": "He", "Ar": "Ar", "H2": "H$_2$",
           "CO2": "CO$_2$", "H2O": "H$_2$O (vapour)"}


def _pa_to_torr(p):
    return np.asarray(p, dtype=float) / PA_PER_TORR


def _torr_to_pa(p):
    return np.asarray(p, dtype=float) * PA_PER_TORR


def family_data(profile="wren-demo", gases=None, pressures_pa=None, current_a=None,
                t_wall_c=22.0, t_ref_c=None):
    """{"pressure_pa": array, "emf_mv": {gas: array}, ...} of steady EMF per gas.

    Defaults: all gases, 1e-4 Pa to 1e5 Pa (121 log-spaced points), the
    profile's nominal heater current, reference junction at the wall.
    """
    prof = load_profile(profile)
    names = list(GAS_ORDER if gases is None else gases)
    p = np.logspace(-4, 5, 121) if pressures_pa is None else np.asarray(pressures_pa, dtype=float)
    cur = prof.nominal_current_a if current_a is None else current_a
    ref = t_wall_c if t_ref_c is None else t_ref_c
    emf = {}
    for name in names:
        if name not in GASES:
            raise ValueError("unknown gas %r (known: %s)" % (name, ", ".join(GASES)))
        emf[name] = steady_state(prof, name, p, cur, t_wall_c=t_wall_c, t_ref_c=ref).emf_mv
    return {"profile": prof.name, "pressure_pa": p, "emf_mv": emf, "current_a": cur,
            "t_wall_c": t_wall_c, "t_ref_c": ref}


def plot_family(path, profile="wren-demo", gases=None, pressures_pa=None, current_a=None,
                t_wall_c=22.0, t_ref_c=None, size_in=(10.0, 6.5), dpi=120):
    """Write the family of curves to the PNG `path`; return the plotted data (see `family_data`)."""
    data = family_data(profile, gases, pressures_pa, current_a, t_wall_c, t_ref_c)
    prof = load_profile(profile)
    fig = Figure(figsize=size_in, dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    p = data["pressure_pa"]
    for name, emf in data["emf_mv"].items():
        ax.plot(p, emf, lw=1.8, ls=_STYLES.get(name, "-"), label=_LABELS.get(name, name))
    ax.axvspan(USEFUL_RANGE_TORR[0] * PA_PER_TORR, USEFUL_RANGE_TORR[1] * PA_PER_TORR,
               color="0.85", alpha=0.45, zorder=0, label="usual range, 1e-3 to 1 Torr")
    ax.set_xscale("log")
    ax.set_xlim(p[0], p[-1])
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("pressure (Pa)")
    ax.set_ylabel("thermocouple EMF (mV), reference junction at %.0f \u00b0C" % data["t_ref_c"])
    top = ax.secondary_xaxis("top", functions=(_pa_to_torr, _torr_to_pa))
    top.set_xlabel("pressure (Torr)")
    ax.grid(True, which="major", alpha=0.5)
    ax.grid(True, which="minor", alpha=0.15)
    ax.legend(title="gas", loc="upper right", frameon=True)
    ax.set_title("Family of curves: invented demo tube \u2018%s\u2019 (simulated), type %s junction,\n"
                 "heater %.0f mA, wall %.0f \u00b0C" % (prof.name, prof.junction_type,
                                                        data["current_a"] * 1e3, data["t_wall_c"]),
                 fontsize=11)
    fig.text(0.99, 0.005, "tcgauge simulator: lumped heat balance, Knudsen / continuum gas conduction",
             ha="right", va="bottom", fontsize=7, color="0.4")
    fig.tight_layout()
    fig.savefig(path, format="png")
    data["path"] = path
    data["size_px"] = (int(round(size_in[0] * dpi)), int(round(size_in[1] * dpi)))
    return data

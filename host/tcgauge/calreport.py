"""Calibration report: a Markdown summary a lab can file and a PNG plot.

`write_report(cal, folder, info)` writes, into folder:
- table.json: the new table (gaugecore.tablefile, atomic save), whose CRC
  the summary quotes;
- calibration.md: tube, gas, reference gauge and its traceability statement
  (typed by the user), base pressure, date, table CRC, the points with their
  correction factors, the uncertainty budget of every point, U per decade,
  notes, the cited standards and the safety caution;
- calibration.png: pressure error and the expanded-uncertainty band against
  pressure (log axis), and the new table's curve with the points.

`info`: dict with "tube" (profile name; default: the table's), "gas"
(default: the table's), "traceability" (required: the reference's
certificate statement), "operator", "date" (default: today, UTC), "notes".
Numbers are printed with `fmt_u` (uncertainties, 3 significant digits) and
`fmt_p` (pressures, 4).
"""

import datetime
import os

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from gaugecore import tablefile
from tcgauge.calibrate import COMPONENTS, CalibrationError

STANDARDS = (
    "ISO 3567:2011, Vacuum gauges - Calibration by direct comparison with a reference gauge",
    "ISO 27893:2011, Vacuum technology - Vacuum gauges - Evaluation of the uncertainties of "
    "results of calibrations by direct comparison with a reference gauge",
    "ISO/IEC Guide 98-3:2008 (GUM), Uncertainty of measurement - Part 3: Guide to the "
    "expression of uncertainty in measurement",
)

CAUTION = (
    "The controller and its readings are a process aid, not a safety interlock. Do not use a "
    "gauge reading to guard people or equipment (venting, high voltage, hot filaments in "
    "flammable gases, implosion of glassware); use devices made and certified for that, "
    "following local codes and licensed practice."
)


def fmt_u(x):
    """An uncertainty as printed in the report (3 significant digits)."""
    return "%.3g" % x


def fmt_p(x):
    """A pressure as printed in the report (4 significant digits)."""
    return "%.4g" % x


def _cell(x, fmt):
    return "-" if x is None else fmt(x)


def markdown(cal, info, crc):
    """The summary text (str)."""
    table = cal.table
    ref = cal.reference
    if not info.get("traceability"):
        raise CalibrationError("the report needs the reference's traceability statement")
    date = info.get("date") or datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d")
    lines = [
        "# Calibration report: %s tube in %s" % (info.get("tube", table.profile), info.get("gas", table.gas)),
        "",
        "| item | value |",
        "|---|---|",
        "| tube profile | %s |" % info.get("tube", table.profile),
        "| gas | %s |" % info.get("gas", table.gas),
        "| thermocouple / heater | type %s, %s mA, EMF referred to %s C |"
        % (table.tc_type, "%.6g" % table.heater_ma, "%.6g" % table.ref_c),
        "| reference gauge | %s |" % ref.name,
        "| reference uncertainty | %s %% (k=1), drift %s %%, resolution %s Pa + %s %% |"
        % (fmt_u(ref.u_rel * 100), fmt_u(ref.drift_rel * 100), fmt_u(ref.resolution_pa),
           fmt_u(ref.resolution_rel * 100)),
        "| traceability | %s |" % info["traceability"],
        "| base pressure | %s Pa, drift %s Pa |" % (fmt_u(cal.base_pa), fmt_u(cal.base_drift_pa)),
        "| date | %s |" % date,
        "| operator | %s |" % info.get("operator", "-"),
        "| calibrated range | %s..%s Pa, %d points |"
        % (fmt_p(table.p_min_pa), fmt_p(table.p_max_pa), len(cal.budgets)),
        "| table CRC-32 | 0x%08x |" % crc,
        "",
        "Method: direct comparison with the reference gauge on a common chamber (ISO 3567:2011); "
        "each point taken when the device EMF and the reference had both been stable over the "
        "stability window. Uncertainties evaluated per ISO 27893:2011 and the GUM: standard "
        "uncertainties combined in quadrature, expanded U = k u_c with k = %g." % cal.budgets[0].k,
        "",
        "## Points",
        "",
        "| # | p_ref Pa | EMF mV | n | p_ind (previous table) Pa | CF = p_cal/p_ind | u_c Pa | U Pa | U % |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for i, (pt, b) in enumerate(zip(cal.fit.points, cal.budgets)):
        p_ind = cal.p_ind_pa[i] if cal.p_ind_pa else None
        cf = cal.cf[i] if cal.cf else None
        lines.append("| %d | %s | %.6g | %d | %s | %s | %s | %s | %s |" % (
            i, fmt_p(pt.p_ref_pa), pt.emf_mv, len(pt.emf_readings_mv), _cell(p_ind, fmt_p),
            _cell(cf, lambda x: "%.4f" % x), fmt_u(b.u_c_pa), fmt_u(b.U_pa), fmt_u(b.U_rel * 100)))
    lines += ["", "## Uncertainty budget (standard uncertainties, Pa)", "",
              "| p_ref Pa | " + " | ".join(COMPONENTS) + " | u_c | U (k=2) |",
              "|" + "---|" * (len(COMPONENTS) + 3)]
    for b in cal.budgets:
        lines.append("| %s | %s | %s | %s |" % (
            fmt_p(b.p_pa), " | ".join(fmt_u(u) for _, _, u in b.rows), fmt_u(b.u_c_pa), fmt_u(b.U_pa)))
    lines += ["", "Type A: %s. Type B: the others." % ", ".join(
        n for n, kind, _ in cal.budgets[0].rows if kind == "A"), "",
        "## Expanded uncertainty per decade", "",
        "| decade Pa | points | largest U % (k=2) |", "|---|---|---|"]
    for lo, u, n in cal.per_decade():
        lines.append("| %s..%s | %d | %s |" % (fmt_p(lo), fmt_p(lo * 10), n, fmt_u(u * 100)))
    notes = list(cal.fit.merged) + ["rejected %s Pa: %s" % (fmt_p(pt.p_ref_pa), why)
                                    for pt, why in cal.fit.rejected] + list(cal.notes)
    if info.get("notes"):
        notes.append(info["notes"])
    lines += ["", "## Notes", ""] + (["- " + n for n in notes] if notes else ["- none"])
    lines += ["", "## Standards", ""] + ["- " + s for s in STANDARDS]
    lines += ["", "## Caution", "", CAUTION, ""]
    return "\n".join(lines)


def plot(cal, path):
    """The PNG: error and U band against pressure; the table's curve and points."""
    fig = Figure(figsize=(7.5, 7.0))
    FigureCanvasAgg(fig)
    ax1 = fig.add_subplot(2, 1, 1)
    ax2 = fig.add_subplot(2, 1, 2)
    p = np.array([b.p_pa for b in cal.budgets])
    u = np.array([b.U_rel * 100.0 for b in cal.budgets])
    ax1.fill_between(p, -u, u, color="0.85", label="U (k=2)")
    loo = [(pt.p_ref_pa, r * 100.0) for pt, r in zip(cal.fit.points, cal.fit.loo_rel) if r is not None]
    if loo:
        ax1.plot([a for a, _ in loo], [b for _, b in loo], "o", ms=4,
                 label="new table, leave-one-out")
    if cal.p_ind_pa:
        prev = [(b.p_pa, (pi / b.p_pa - 1.0) * 100.0) for b, pi in zip(cal.budgets, cal.p_ind_pa)
                if pi is not None]
        if prev:
            ax1.plot([a for a, _ in prev], [b for _, b in prev], "s", ms=4, label="previous table")
    ax1.axhline(0.0, color="k", lw=0.6)
    ax1.set_xscale("log")
    ax1.set_ylabel("error (indicated / reference - 1), %")
    ax1.legend(fontsize=8)
    ax1.grid(True, which="both", alpha=0.3)
    t = cal.table
    lo, hi = t.emf_range_mv
    e = np.linspace(lo, hi, 400)
    pc = [t.convert(float(x))[0] for x in e]
    ax2.plot(pc, e, "-", label="new table (%s, %s)" % (t.profile, t.gas))
    ax2.plot(p, [pt.emf_mv for pt in cal.fit.points], "o", ms=4, label="calibration points")
    if cal.fit.rejected:
        ax2.plot([pt.p_ref_pa for pt, _ in cal.fit.rejected], [pt.emf_mv for pt, _ in cal.fit.rejected],
                 "x", label="rejected")
    ax2.set_xscale("log")
    ax2.set_xlabel("reference pressure, Pa")
    ax2.set_ylabel("EMF, mV (ref. %g C)" % t.ref_c)
    ax2.legend(fontsize=8)
    ax2.grid(True, which="both", alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    return path


def write_report(cal, folder, info):
    """Write table.json, calibration.md and calibration.png; return their paths."""
    if not os.path.isdir(folder):
        os.makedirs(folder)
    table_path = os.path.join(folder, "table.json")
    tablefile.save(table_path, cal.table)
    with open(table_path, "rb") as f:
        crc = tablefile.parse(f.read())[1]
    md_path = os.path.join(folder, "calibration.md")
    text = markdown(cal, info, crc)
    with open(md_path, "w", encoding="utf-8") as f:
        f.write(text)
    png_path = plot(cal, os.path.join(folder, "calibration.png"))
    return {"table": table_path, "markdown": md_path, "png": png_path}

"""A log database drawn as a PNG: pressure against time, per channel.

`plot_log(db, out_png, unit="TORR", run=None)` draws one run (the newest by
default) with matplotlib's Agg backend and returns what it drew (a dict,
see `plot_log`), so tests can check the figure's content without pixels.

- Top panel: pressure on a log axis in the chosen unit, one line per
  channel; readings at the table's limits are drawn as triangles (under
  range: down, over range: up) since the true value lies beyond them; the
  simulator's true pressure, when the log has it, as a dashed line;
  setpoint switching as dotted vertical lines labelled "SPn on/off"; gaps
  in the data as hatched spans.
- Bottom strip: each channel's state over time as coloured bars (ok,
  under, over, invalid, fault), so a fault or an invalid reading is visible
  where the pressure line has no number.
Time is the device's clock in seconds from the run's first record.
"""

import math

from gaugecore import states, units

from tcgauge import log as logdb

STATE_COLOURS = {
    states.OK: "#4caf50",
    states.UNDER: "#2196f3",
    states.OVER: "#ff9800",
    states.INVALID: "#9e9e9e",
    states.FAULT: "#d32f2f",
}
STATE_LABELS = {
    states.OK: "ok",
    states.UNDER: "under range (below table)",
    states.OVER: "over range (above table)",
    states.INVALID: "invalid (no reading)",
    states.FAULT: "fault (no reading)",
}
CHANNEL_COLOURS = ("#1f4e99", "#b8860b", "#2e7d32", "#6a1b9a")


def load_run(conn, run):
    """The data of one run: records by channel, gaps and events, times in device seconds."""
    rows = conn.execute(
        "SELECT seq, t_ms, channel, pressure_pa, state, fault, true_pressure_pa, host_s"
        " FROM records WHERE run = ? ORDER BY id", (run,)).fetchall()
    info = conn.execute("SELECT started_utc, port, identity, source FROM runs WHERE id = ?",
                        (run,)).fetchone()
    t0_ms = rows[0][1] if rows else 0
    # A device that restarts resets its clock; then host time is the only common axis.
    monotone = all(rows[i][1] >= rows[i - 1][1] for i in range(1, len(rows)))
    host0 = rows[0][7] if rows else 0.0

    def t_of(row):
        return (row[1] - t0_ms) / 1000.0 if monotone else row[7] - host0

    seq_t = {}
    channels = {}
    for row in rows:
        t_s = t_of(row)
        seq_t[row[0]] = t_s
        chan = channels.setdefault(row[2], {"t_s": [], "pressure_pa": [], "state": [],
                                            "fault": [], "true_pa": []})
        chan["t_s"].append(t_s)
        chan["pressure_pa"].append(row[3])
        chan["state"].append(row[4])
        chan["fault"].append(row[5])
        chan["true_pa"].append(row[6])
    t_end = max(seq_t.values()) if seq_t else 0.0
    rows_g = conn.execute("SELECT from_seq, to_seq, reason FROM gaps WHERE run = ? ORDER BY id",
                          (run,)).fetchall()
    back = set(g[0] for g in rows_g if g[2] == "reconnected")
    gaps = []
    for from_seq, to_seq, reason in rows_g:
        if reason == "link lost" and from_seq in back:
            continue  # its "reconnected" row spans the same outage
        t_a = seq_t.get(from_seq, 0.0)
        t_b = seq_t.get(to_seq, t_end) if to_seq is not None else t_end
        gaps.append((t_a, t_b, reason))
    events = []
    for host_s, t_ms, kind, channel, setpoint, detail in conn.execute(
            "SELECT host_s, t_ms, kind, channel, setpoint, detail FROM events WHERE run = ?"
            " ORDER BY id", (run,)):
        if t_ms is None:
            continue
        t_s = (t_ms - t0_ms) / 1000.0 if monotone else host_s - host0
        events.append((t_s, kind, channel, setpoint, detail))
    return {"info": info, "channels": channels, "gaps": gaps, "events": events}


def state_spans(t_s, state_list):
    """Runs of equal state -> [(state, t_start, t_end)], each ending where the next begins."""
    spans = []
    for i, st in enumerate(state_list):
        if spans and spans[-1][0] == st:
            continue
        if spans:
            spans[-1][2] = t_s[i]
        spans.append([st, t_s[i], t_s[i]])
    if spans:
        spans[-1][2] = t_s[-1]
    return [tuple(s) for s in spans]


def plot_log(db, out_png, unit="TORR", run=None, title=None, channel_labels=None):
    """Draw a run of the log `db` (path or connection) to `out_png`; return what was drawn.

    channel_labels: {channel: legend text} (default "channel N").
    The returned dict: unit, symbol, run, title, xlabel, ylabel, png, legend
    (the legend's texts, in order), and
    channels {ch: {"t_s", "pressure"}} (pressure in `unit`, None where no
    number), markers {ch: {"under": [(t, p)], "over": [(t, p)]}},
    true {ch: {"t_s", "pressure"}}, spans [(ch, state, t0, t1)] for the
    state strip, faults [(ch, name, t0, t1)] (the stretch of each fault, named
    in the strip where wide enough), setpoints [(t_s, n, "on"/"off")],
    gaps [(t0, t1, reason)].
    """
    import matplotlib
    matplotlib.use("Agg")
    from matplotlib import pyplot as plt
    from matplotlib.patches import Patch

    units.to_pa(1.0, unit)
    unit = unit.upper()
    symbol = units.SYMBOL[unit]
    conn = logdb.connect(db) if isinstance(db, str) else db
    try:
        run = logdb.check_run(conn, run)
        data = load_run(conn, run)
    finally:
        if isinstance(db, str):
            conn.close()
    started, port, identity, source = data["info"]
    chans = data["channels"]
    if not chans:
        raise logdb.LogFileError("run %d holds no records" % run)

    drawn = {"unit": unit, "symbol": symbol, "run": run, "png": out_png, "channels": {},
             "markers": {}, "true": {}, "spans": [], "faults": [], "setpoints": [], "gaps": []}
    fig, (ax, strip) = plt.subplots(
        2, 1, sharex=True, figsize=(10, 6.2), gridspec_kw={"height_ratios": [5, 1]})
    legend = []
    for i, ch in enumerate(sorted(chans)):
        c = chans[ch]
        colour = CHANNEL_COLOURS[i % len(CHANNEL_COLOURS)]
        p = [None if (v is None or st != states.OK) else units.from_pa(v, unit)
             for v, st in zip(c["pressure_pa"], c["state"])]
        y = [math.nan if v is None else v for v in p]
        line, = ax.plot(c["t_s"], y, color=colour, lw=2.4 if i == 0 else 1.2,
                        label=(channel_labels or {}).get(ch, "channel %d" % ch), zorder=3 + i)
        legend.append(line)
        drawn["channels"][ch] = {"t_s": list(c["t_s"]), "pressure": p}
        marks = {"under": [], "over": []}
        for t, v, st in zip(c["t_s"], c["pressure_pa"], c["state"]):
            if st in (states.UNDER, states.OVER) and v is not None:
                marks[st].append((t, units.from_pa(v, unit)))
        drawn["markers"][ch] = marks
        for st, mk in ((states.UNDER, "v"), (states.OVER, "^")):
            if marks[st]:
                ax.plot([m[0] for m in marks[st]], [m[1] for m in marks[st]], mk, ms=5,
                        color=colour, mfc="none", ls="none", markevery=max(1, len(marks[st]) // 25),
                        zorder=3 + i)
        true = [(t, units.from_pa(v, unit)) for t, v in zip(c["t_s"], c["true_pa"]) if v]
        if true:
            tl, = ax.plot([t for t, _ in true], [v for _, v in true], "--", color="black",
                          lw=1.0, alpha=0.8 if i == 0 else 0.0,
                          label="true pressure (simulator)" if i == 0 else None)
            if i == 0:
                legend.append(tl)
            drawn["true"][ch] = {"t_s": [t for t, _ in true], "pressure": [v for _, v in true]}
        for st, t_a, t_b in state_spans(c["t_s"], c["state"]):
            drawn["spans"].append((ch, st, t_a, t_b))
            strip.barh(i, max(t_b - t_a, 1e-9), left=t_a, height=0.7,
                       color=STATE_COLOURS.get(st, "#000000"), edgecolor="none")
        # name each fault where its stretch is wide enough to hold the word
        t_all = (c["t_s"][-1] - c["t_s"][0]) or 1.0
        for name, t_a, t_b in state_spans(c["t_s"], c["fault"]):
            if name is None:
                continue
            drawn["faults"].append((ch, name, t_a, t_b))
            if (t_b - t_a) / t_all > 0.08:
                strip.text((t_a + t_b) / 2.0, i, name.upper(), ha="center", va="center",
                           fontsize=7, color="white", clip_on=True)
    if any(m["under"] for m in drawn["markers"].values()):
        legend.append(ax.plot([], [], "v", color="grey", mfc="none", ls="none",
                              label="under range: below this value")[0])
    if any(m["over"] for m in drawn["markers"].values()):
        legend.append(ax.plot([], [], "^", color="grey", mfc="none", ls="none",
                              label="over range: above this value")[0])
    for t_a, t_b, reason in data["gaps"]:
        drawn["gaps"].append((t_a, t_b, reason))
        for a in (ax, strip):
            a.axvspan(t_a, max(t_b, t_a + 1e-9), facecolor="#eeeeee", edgecolor="#9e9e9e",
                      hatch="//", lw=0.0, alpha=0.6, zorder=1)
    if data["gaps"]:
        reasons = sorted(set(g[2] for g in data["gaps"]))
        legend.append(Patch(facecolor="#eeeeee", edgecolor="#9e9e9e", hatch="//",
                            label="no data: " + ", ".join(reasons)))
    sp_seen = False
    for t_s, kind, channel, setpoint, detail in data["events"]:
        if kind != "setpoint":
            continue
        drawn["setpoints"].append((t_s, setpoint, detail))
        ax.axvline(t_s, color="#7b1fa2", ls=":", lw=1.0)
        where = "" if channel is None else " (ch%d)" % channel
        ax.annotate("SP%d %s%s" % (setpoint, detail, where), (t_s, 1.0),
                    xycoords=("data", "axes fraction"), xytext=(2, -10 - 10 * ((setpoint - 1) % 3)), textcoords="offset points",
                    fontsize=7, color="#7b1fa2")
        sp_seen = True
    if sp_seen:
        legend.append(ax.plot([], [], ":", color="#7b1fa2", label="setpoint relay switched")[0])

    ax.set_yscale("log")
    t_lo = min(c["t_s"][0] for c in chans.values())
    t_hi = max(c["t_s"][-1] for c in chans.values())
    pad = 0.02 * ((t_hi - t_lo) or 1.0)  # room for the markers at either end
    ax.set_xlim(t_lo - pad, t_hi + pad)
    ylabel = "pressure (%s)" % symbol
    simulated = (source or "").startswith("simulator")
    xlabel = "time since the first record (s, %s)" % (
        "simulated device clock" if simulated else "device clock")
    ax.set_ylabel(ylabel)
    ax.grid(True, which="major", alpha=0.35)
    ax.grid(True, which="minor", alpha=0.12)
    if title is None:
        title = "Pressure log, run %d, started %s UTC%s" % (
            run, started.replace("T", " ").rstrip("Z")[:19],
            " (simulated)" if simulated else "")
    ax.set_title(title, fontsize=11)
    ax.legend(handles=legend, loc="upper right", fontsize=8, framealpha=0.9)
    ch_list = sorted(chans)
    strip.set_yticks(range(len(ch_list)))
    strip.set_yticklabels(["ch%d" % ch for ch in ch_list], fontsize=8)
    strip.set_ylim(-0.6, len(ch_list) - 0.4)
    strip.invert_yaxis()
    strip.set_xlabel(xlabel)
    strip.set_title("state", fontsize=8, loc="left")
    used = [st for st in states.ALL if any(s[1] == st for s in drawn["spans"])]
    strip.legend(handles=[Patch(color=STATE_COLOURS[st], label=STATE_LABELS[st]) for st in used],
                 loc="upper center", bbox_to_anchor=(0.5, -0.75), ncol=len(used) or 1, fontsize=7,
                 frameon=False)
    fig.text(0.01, 0.005, "%s  |  %s" % (identity or "unknown device", port), fontsize=6,
             color="#666666")
    fig.tight_layout()
    fig.savefig(out_png, dpi=110)
    plt.close(fig)
    drawn.update({"title": title, "xlabel": xlabel, "ylabel": ylabel,
                  "legend": [h.get_label() for h in legend]})
    return drawn

"""The space-time picture: voltage along the bus against time, as a heat map (matplotlib, Agg).

Two panels share the time axis.  Top: the trunk, distance along it [mm]
downward, one band per chain of segments (:func:`budget.along.trunk_runs`: a
daisy chain is one band; a star or tree one band per branch), bus nodes and
the taps on them named at the left.  Bottom: one band per tap -- its stub from
the bus node (top) to the device end, then its pin (die node) -- named with
the tap, the driver marked.  Colour: the voltage, white at the bus's final DC
level, red above it (overshoot), blue below, saturating beyond COLOUR_RANGE of
the swing; a wave shows as a slanted colour
front, and a reflection as a front that starts at a discontinuity and runs
back.  The thin black line is the half-swing level.
"""
from __future__ import annotations

import math

import numpy as np

from .along import AlongWaves, along, trunk_runs
from .errors import ArgumentError
from .plots import _pyplot

# Points within this fraction of the swing of their final level count as settled
# when choosing the time shown (the data keep the whole window).
SHOWN_SETTLE_FRACTION = 0.05
# At most this many time columns drawn (the data keep every step).
MAX_COLUMNS = 1000
# Colours span the final level +- this fraction of the swing (saturating beyond), so that
# reflections of a tenth of the swing show clearly next to the edge itself.
COLOUR_RANGE = 0.4
CMAP = "RdBu_r"
FRONT = "#000000"


def shown_window(waves: AlongWaves) -> float:
    """Time [s] up to which the picture is drawn by default: 10 % after the last time any point of the
    bus is further than SHOWN_SETTLE_FRACTION of the swing from its final DC level, at least 20 time
    steps and at most the whole window."""
    swing = float(np.max(np.abs(waves.v_end - waves.v_start))) or 1.0
    off = np.abs(waves.v - waves.v_end[:, None]) > SHOWN_SETTLE_FRACTION * swing
    cols = np.flatnonzero(off.any(axis=0))
    t_last = float(waves.t[cols[-1]]) if cols.size else 0.0
    return float(min(waves.t[-1], max(1.1 * t_last, 20 * waves.dt)))


def along_figure(design, driver: str, edge: str, *, t_max: float | None = None, waves: AlongWaves | None = None):
    """Figure of the voltage along every segment, stub and pin when ``driver`` drives ``edge``.

    t_max [s]: the end of the time axis drawn (default :func:`shown_window`);
    waves: a result of :func:`budget.along.along` for this design, driver and
    edge (computed when not given).
    """
    plt = _pyplot()
    from matplotlib.colors import Normalize
    from matplotlib.lines import Line2D

    if waves is None:
        waves = along(design, driver, edge)
    if t_max is not None and not (isinstance(t_max, (int, float)) and math.isfinite(t_max) and t_max > 0):
        raise ArgumentError(f"t_max must be a positive time [s], got {t_max!r}")
    t_end = float(min(t_max, waves.t[-1])) if t_max is not None else shown_window(waves)
    n_show = int(np.searchsorted(waves.t, t_end * (1 + 1e-12), side="right"))
    stride = max(1, math.ceil(n_show / MAX_COLUMNS))
    cols = np.arange(0, n_show, stride)
    t_ns = waves.t[cols] * 1e9

    centre = float(np.median(waves.v_end))
    swing = float(np.max(np.abs(waves.v_end - waves.v_start)))
    half = float(np.max(np.abs(waves.v[:, :n_show] - centre))) or 1.0
    if swing > 0:
        half = min(half, COLOUR_RANGE * swing)
    norm = Normalize(vmin=centre - half, vmax=centre + half)
    v_front = float(np.median(0.5 * (waves.v_start + waves.v_end)))

    runs = trunk_runs(design)
    by_index = {b.index: b for b in waves.bands if b.kind == "segment"}
    stubs = {b.tap: b for b in waves.bands if b.kind == "stub"}
    pins = {b.tap: b for b in waves.bands if b.kind == "pin"}
    taps_at = {}
    for tap in design.taps:
        taps_at.setdefault(tap.node, []).append(tap.name)

    n_taps = len(design.taps)
    total_m = sum(r.offsets[-1] for r in runs)
    k, unit = (1e3, "mm") if total_m < 2.0 else (1.0, "m")     # metres for a field bus, mm for a board
    total = total_m * k or 1.0
    gap = 0.1 * total
    fig, (ax_t, ax_p) = plt.subplots(2, 1, figsize=(9.5, 4.2 + 0.32 * n_taps + 0.12 * len(runs)), sharex=True, layout="constrained",
                                     gridspec_kw={"height_ratios": [1.0 + 0.1 * len(runs), 0.35 + 0.07 * n_taps]})
    mesh = None

    def draw(ax, y, rows):
        """Heat map of rows (their y positions strictly increasing after dropping repeats) and the front."""
        nonlocal mesh
        y = np.asarray(y, dtype=float)
        keep = np.concatenate(([True], np.diff(y) > 0))
        c = waves.v[rows][keep][:, cols]
        y = y[keep]
        if y.size == 1:
            y, c = np.array([y[0] - 0.5, y[0] + 0.5]), np.vstack([c, c])
        tt, yy = np.meshgrid(t_ns, y)
        mesh = ax.pcolormesh(tt, yy, c, cmap=CMAP, norm=norm, shading="nearest", rasterized=True)
        if c.min() < v_front < c.max() and y.size >= 2:
            ax.contour(tt, yy, c, levels=[v_front], colors=FRONT, linewidths=0.6)

    # -- trunk panel ----------------------------------------------------------------
    ticks, tick_labels, base = [], [], 0.0
    for run in runs:
        for (seg, rev), off in zip(run.segments, run.offsets):
            b = by_index[seg]
            r = np.arange(*b.rows)
            x = waves.x[r] * k
            if rev:
                x, r = (b.length * k - x)[::-1], r[::-1]
            draw(ax_t, base + off * k + x, r)
        for node, off in zip(run.nodes, run.offsets):
            ticks.append(base + off * k)
            names = taps_at.get(node, [])
            tick_labels.append(f"{node} [{', '.join(names)}] {off * k:.4g} {unit}" if names
                               else f"{node} {off * k:.4g} {unit}")
        if run is not runs[-1]:
            ax_t.axhspan(base + run.offsets[-1] * k, base + run.offsets[-1] * k + gap, color="#d9d9d9", lw=0)
        base += run.offsets[-1] * k + gap
    ax_t.set_ylim(base - gap, 0)
    ax_t.set_yticks(ticks, tick_labels, fontsize=7)
    ax_t.set_ylabel(f"along the trunk [{unit}]", fontsize=8)
    ax_t.set_title("trunk: bus node [taps on it] and distance from the start of each chain", fontsize=8, loc="left")

    # -- taps panel: stub (bus node at the top) then pin ---------------------------------
    STUB = 0.7
    for i, tap in enumerate(design.taps):
        if tap.name in stubs:
            b = stubs[tap.name]
            r = np.arange(*b.rows)
            draw(ax_p, i + STUB * waves.x[r] / (b.length or 1.0), r)
            p0 = i + STUB + 0.04
        else:
            p0 = i
        pr = np.arange(*pins[tap.name].rows)
        tt, yy = np.meshgrid(t_ns, [p0, i + 1.0])
        ax_p.pcolormesh(tt, yy, np.vstack([waves.v[pr][:, cols]] * 2), cmap=CMAP, norm=norm, shading="nearest",
                        rasterized=True)
        if i:
            ax_p.axhline(i, color="white", lw=1.2)
    ax_p.set_ylim(n_taps, 0)
    ax_p.set_facecolor("#d9d9d9")
    ax_p.set_yticks([i + 0.5 for i in range(n_taps)],
                    [f"{t.name}{' (driver)' if t.name == driver else ''}: "
                     + (f"stub {float(t.stub.length) * 1e3:.3g} mm, pin" if t.stub is not None else "pin")
                     for t in design.taps], fontsize=7)
    ax_p.set_ylabel("taps", fontsize=8)
    ax_p.set_xlabel("time from the start of the edge [ns]", fontsize=8)
    for ax in (ax_t, ax_p):
        ax.tick_params(labelsize=7)
        ax.set_xlim(t_ns[0], t_ns[-1])

    cb = fig.colorbar(mesh, ax=[ax_t, ax_p], fraction=0.035, pad=0.02, extend="both")
    cb.set_label(f"voltage [V]\nwhite: final DC level {centre:.3g} V; saturates beyond "
                 f"+-{100 * COLOUR_RANGE:.0f} % of the swing", fontsize=8)
    cb.ax.tick_params(labelsize=7)
    ax_t.legend([Line2D([], [], color=FRONT, lw=0.8)], [f"half-swing level {v_front:.3g} V"], fontsize=7,
                loc="lower right", framealpha=0.8)
    what = "rising" if edge == "rise" else "falling"
    fig.suptitle(f"{waves.design}: {driver} drives a {what} edge -- voltage along the bus\n"
                 "estimates from a linear model; confirm by measurement", fontsize=9)
    return fig


__all__ = ["along_figure", "shown_window", "SHOWN_SETTLE_FRACTION"]

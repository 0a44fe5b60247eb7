"""Pictures of a check (matplotlib, Agg backend: no display needed).

- :func:`waveform_figure`: the pin waveform at every receiver for one driver
  and edge -- the nominal design, every tolerance corner in thin grey, the
  worst corner at that receiver in bold (the check's rule: a violation
  first, then the least headroom; numbers from :func:`budget.sweep.sweep`,
  so they equal the check's) -- over the shaded
  threshold region (VIL..VIH) and the level the budget requires
  (VIH + allocations on a rising edge, VIL - allocations on a falling one).
- :func:`margin_map_figure`: a driver x receiver map of the worst margin of a
  :class:`budget.report.CheckReport` (lowest over both edges and every
  analysed case), red below the required minimum.

:func:`save` writes PNG, SVG or PDF (chosen by the file suffix) atomically.
"""
from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np

from .errors import ArgumentError
from .limits import listed
from .files import write_atomically

FORMATS = (".png", ".svg", ".pdf")
PLOT_MAX_CORNERS = 256

# colours (our own choices)
NOMINAL = "#1f4e8c"
WORST = "#c0392b"
CORNER = "#9aa0a6"
BAND = "#f5c16c"
REQUIRED = "#6c3483"


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _waves(design, driver, edge, values, n):
    """Pin waveforms of n variants with the same time step and window as budget.check uses."""
    from .netlist import flatten
    from .simulate import check_status, run_netlist
    from .sweep import plan

    box = {p: (float(lo), float(hi)) for p, (lo, hi) in design.tolerances.items()}
    if box:
        full = {}
        for p, (lo, hi) in box.items():
            col = values[p] if values and p in values else np.full(n, float(design.params[p]))
            full[p] = np.concatenate(([lo, hi], col))
        offset = 2
    else:
        full, offset = {}, 0
    env, dts, tss = plan(design, full, (edge,))
    batch = design.with_values(full) if full else design
    net = flatten(batch, driver, edge, dt=dts[edge], t_stop=tss[edge], envelope=env)
    waves, dc, status = run_netlist(net)
    check_status(status, net, batch)
    return net, waves[:, :, offset:], dc[:, :, offset:]


def _headrooms(design, driver, edge, values):
    """[n_variants, n_rcv] headroom [V] and violation bits from :func:`budget.sweep.sweep` -- the
    numbers and the worst-case rule of the check -- and the receivers' names."""
    from .sweep import sweep

    res = sweep(design, values, drivers=[driver], edges=(edge,), keep="margin")
    return res.headroom[:, 0, 0, :], res.bits[:, 0, 0, :], res.receivers


def waveform_figure(design, driver: str, edge: str, *, receivers=None, corners: bool = True,
                    max_corners: int = PLOT_MAX_CORNERS):
    """Figure of the pin waveforms at each receiver when ``driver`` drives ``edge``.

    receivers: names to show (default: every receiver but the driver);
    corners: overlay every tolerance corner when there are at most
    ``max_corners`` of them, with the worst one (least headroom) highlighted.
    """
    from .analyses import corner_values
    from .kernels.metrics import worst_along
    from .metrics import allocation
    from .roles import driving_part

    plt = _pyplot()
    if edge not in ("rise", "fall"):
        raise ArgumentError(f"edge must be 'rise' or 'fall', got {edge!r}")
    driving_part(design, driver)
    all_rcv = [r for r in design.receivers if r != driver]
    if receivers is None:
        receivers = all_rcv
    for r in receivers:
        if r not in all_rcv:
            raise ArgumentError(f"{r!r} is not a receiver for driver {driver}; receivers: {listed(all_rcv)}")
    if not receivers:
        raise ArgumentError(f"no receiver to show for driver {driver}")

    note = ""
    vals, n, labels = None, 1, ["nominal"]
    if corners and design.tolerances:
        try:
            cv, paths, codes = corner_values(design, max_corners=max_corners)
        except ArgumentError:
            cv, note = {}, f"corners not shown (more than {max_corners})"
        if cv:
            n = codes.shape[0] + 1
            vals = {p: np.concatenate(([design.params[p]], a)) for p, a in cv.items()}
            labels += [f"corner {i + 1}" for i in range(codes.shape[0])]
    net, waves, dc = _waves(design, driver, edge, vals, n)
    heads, bits, rcv_names = _headrooms(design, driver, edge, vals)
    t_ns = net.t * 1e9
    ncol = min(3, len(receivers))
    nrow = math.ceil(len(receivers) / ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.6 * ncol, 3.1 * nrow + 0.6), squeeze=False,
                             sharex=True)
    rising = edge == "rise"
    for ax, name in zip(axes.flat, receivers):
        j = design.tap_names.index(name)
        part = design.parts[design.tap(name).part]
        node = net.out_node[j]
        lo_i, hi_i = (0, 1) if rising else (1, 0)
        col = rcv_names.index(name)
        head = heads[:, col]
        worst = int(worst_along(bits[:, col], head))    # the check's rule: a violation first, then headroom
        for k in range(1, n):
            if k != worst:
                ax.plot(t_ns, waves[:, j, k], color=CORNER, lw=0.6, alpha=0.45,
                        label="corners" if k == (1 if worst != 1 else 2) else None)
        vil, vih = float(part.vil), float(part.vih)
        ax.axhspan(vil, vih, color=BAND, alpha=0.35, lw=0, label="threshold region VIL..VIH")
        v_lo, v_hi = float(dc[lo_i, node, 0]), float(dc[hi_i, node, 0])
        swing = abs(v_hi - v_lo)
        alloc = allocation(design.noise_budget, swing)
        need = vih + alloc + design.noise_budget.min_margin if rising else vil - alloc - design.noise_budget.min_margin
        ax.axhline(need, color=REQUIRED, lw=1.0, ls=":", label="required level (threshold + budget)")
        for lim, key in ((part.v_max, "v_max"), (part.v_min, "v_min")):
            if lim is not None and (float(np.min(waves[:, j, :])) - swing < lim < float(np.max(waves[:, j, :])) + swing):
                ax.axhline(lim, color=WORST, lw=0.8, ls="--", label="absolute limits" if key == "v_max" else None)
        ax.plot(t_ns, waves[:, j, 0], color=NOMINAL, lw=1.4, label="nominal")
        if worst != 0:
            ax.plot(t_ns, waves[:, j, worst], color=WORST, lw=1.8, label=f"worst: {labels[worst]}")
        ax.set_title(f"{name}: headroom {head[worst]:+.3f} V ({labels[worst]})", fontsize=9)
        ax.grid(True, lw=0.3, alpha=0.5)
        ax.tick_params(labelsize=8)
    for ax in axes.flat[len(receivers):]:
        ax.set_visible(False)
    for ax in axes[-1]:
        ax.set_xlabel("time from the start of the edge [ns]", fontsize=8)
    for ax in axes[:, 0]:
        ax.set_ylabel("pin voltage [V]", fontsize=8)
    handles, lbls = [], []
    for ax in axes.flat[:len(receivers)]:
        for h, lab in zip(*ax.get_legend_handles_labels()):
            if lab.startswith("worst:"):
                lab = "worst corner at that receiver"
            if lab not in lbls:
                handles.append(h)
                lbls.append(lab)
    fig.legend(handles, lbls, loc="lower center", ncol=min(len(lbls), 3), fontsize=8, frameon=False)
    what = "rising" if rising else "falling"
    sub = f"{n - 1} tolerance corners" if n > 1 else (note or "nominal design only")
    fig.suptitle(f"{design.bus.name}: {driver} drives a {what} edge ({sub}); estimates, confirm by measurement",
                 fontsize=10)
    fig.tight_layout(rect=(0, 0.06 + 0.02 / nrow, 1, 0.97))
    return fig


def margin_map_figure(report):
    """Driver x receiver map of the worst margin [V] in a CheckReport (over edges and analyses)."""
    plt = _pyplot()
    from matplotlib.colors import TwoSlopeNorm

    drivers = list(dict.fromkeys(r["driver"] for r in report.results))
    receivers = list(report.receivers) or list(dict.fromkeys(r["receiver"] for r in report.results))
    grid = np.full((len(drivers), len(receivers)), np.nan)
    fail = np.zeros_like(grid, dtype=bool)
    for r in report.results:
        m = r["margin_high"] if r["edge"] == "rise" else r["margin_low"]
        i, j = drivers.index(r["driver"]), receivers.index(r["receiver"])
        if m is not None and not (m >= grid[i, j]):
            grid[i, j] = m
        fail[i, j] |= not r["pass"]
    finite = grid[np.isfinite(grid)]
    lo = float(min(finite.min(), -1e-3)) if finite.size else -1.0
    hi = float(max(finite.max(), 1e-3)) if finite.size else 1.0
    norm = TwoSlopeNorm(vmin=lo, vcenter=float(report.budget["min_margin"]) if lo < report.budget["min_margin"] < hi
                        else 0.5 * (lo + hi), vmax=hi)
    w = max(4.5, 0.75 * len(receivers) + 2.5)
    h = max(3.0, 0.55 * len(drivers) + 2.0)
    fig, ax = plt.subplots(figsize=(w, h))
    im = ax.imshow(np.ma.masked_invalid(grid), cmap="RdYlGn", norm=norm, aspect="auto")
    ax.set_facecolor("#e0e0e0")
    for i in range(len(drivers)):
        for j in range(len(receivers)):
            if drivers[i] == receivers[j]:
                ax.text(j, i, "drives", ha="center", va="center", fontsize=7, color="#555555")
            elif np.isfinite(grid[i, j]):
                txt = f"{grid[i, j]:+.3f}" + ("\nFAIL" if fail[i, j] else "")
                ax.text(j, i, txt, ha="center", va="center", fontsize=7,
                        fontweight="bold" if fail[i, j] else "normal")
    wd = report.worst
    if wd["driver"] in drivers and wd["receiver"] in receivers:
        i, j = drivers.index(wd["driver"]), receivers.index(wd["receiver"])
        ax.add_patch(plt.Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, lw=2.2, edgecolor="black"))
    ax.set_xticks(range(len(receivers)), receivers, rotation=45, ha="right", fontsize=8)
    ax.set_yticks(range(len(drivers)), drivers, fontsize=8)
    ax.set_xlabel("receiver")
    ax.set_ylabel("driver")
    cb = fig.colorbar(im, ax=ax)
    cb.set_label("worst margin after allocations [V]", fontsize=8)
    scope = ", ".join(["nominal"] + [k.replace("_", " ") for k in report.analyses if k != "nominal"])
    ax.set_title(f"{report.design}: worst margin ({scope}); verdict {report.verdict.upper()}\n"
                 "black box: worst case; estimates, confirm by measurement", fontsize=9)
    fig.tight_layout()
    return fig


def save(fig, path) -> None:
    """Write ``fig`` to ``path`` (.png, .svg or .pdf) atomically; nothing is left behind on error."""
    plt = _pyplot()
    target = Path(path)
    suffix = target.suffix.lower()
    if suffix not in FORMATS:
        raise ArgumentError(f"{path}: unknown picture format {suffix or '(none)'!r}; use one of "
                            f"{', '.join(FORMATS)}")
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format=suffix[1:], dpi=120)
    finally:
        plt.close(fig)
    write_atomically(target, lambda fh: fh.write(buf.getvalue()), binary=True)


__all__ = ["waveform_figure", "margin_map_figure", "save", "FORMATS"]

"""IBIS models as the engine's non-linear devices: I-V tables, rails and switching coefficients (SI).

A device sits on a die node; its current *into the buffer* (leaving the node) at die voltage v is
(IBIS sign convention, currents positive into the buffer; docs/references.md H1, H2)::

    i(v, t) = Ku(t) Ipullup(Vpu - v) + Kd(t) Ipulldown(v - Vpd) + Igndclamp(v - Vgc) + Ipowerclamp(Vpc - v)

with the pull-up and power-clamp tables on rail-relative voltages.  Tables are interpolated
linearly and extended beyond their ends along their end segments (common practice).  A device
that is not driving has Ku = Kd = 0 (high impedance: only its clamps conduct).

The switching coefficients Ku(t), Kd(t) of an edge come, in this order of preference, from

1. two V-T waveforms of that edge (different fixtures): at every time of the waveforms the
   die's KCL into each fixture, Ku Ipu(Vpu - V) + Kd Ipd(V) = -(Iclamps(V) + (C_comp + C_fixture)
   dV/dt + (V - V_fixture)/R_fixture), is two linear equations in Ku and Kd (the two-waveform
   method for IBIS V-T tables, as the IBIS Open Forum's modelling guides describe it; from memory,
   docs/references.md H2);
2. one V-T waveform and the condition Ku + Kd = 1 (the one-waveform method, same source);
3. [Ramp]: Ku rises linearly from 0 to 1 (Kd = 1 - Ku) over the 0-100 % time dt_20-80 / 0.6 of
   a linear ramp (docs/references.md D3: a linear ramp covers 20-80 % in 0.6 of its duration).

The V-T tables describe the die with C_comp and no package (the standard describes the
package separately; from memory); fixtures with L_fixture, R_dut, L_dut or C_dut are refused.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .ibis import CORNERS, IbisError, IbisModel

METHODS = ("auto", "waveforms", "waveform", "ramp")
TABLES = ("pullup", "pulldown", "gnd_clamp", "power_clamp")


@dataclass(frozen=True)
class Switching:
    """Ku(t), Kd(t) [-] of one edge at one corner on a time grid t [s]; ``method`` says how they were found."""
    t: np.ndarray
    ku: np.ndarray
    kd: np.ndarray
    method: str


def _interp(x, xs, ys):
    """Linear interpolation, extended along the end segments (as the engine's kernel does)."""
    y = np.interp(x, xs, ys)
    lo = x < xs[0]
    hi = x > xs[-1]
    if np.any(lo):
        y = np.where(lo, ys[0] + (x - xs[0]) * (ys[1] - ys[0]) / (xs[1] - xs[0]), y)
    if np.any(hi):
        y = np.where(hi, ys[-1] + (x - xs[-1]) * (ys[-1] - ys[-2]) / (xs[-1] - xs[-2]), y)
    return y


def table_current(model: IbisModel, which: str, v, corner: str):
    """Current [A] into the buffer of one I-V table at die voltage v [V] (0 where the model has no such table)."""
    tab = getattr(model, which)
    v = np.asarray(v, dtype=float)
    if tab is None:
        return np.zeros_like(v)
    rail = model.rail(which, corner)
    x = rail - v if which in ("pullup", "power_clamp") else v - rail
    return _interp(x, tab.x, tab.at(corner))


def device_current(model: IbisModel, v, corner: str, ku=0.0, kd=0.0):
    """i(v) [A] into the buffer (the module's equation) at die voltage v [V], coefficients ku, kd [-]."""
    return (ku * table_current(model, "pullup", v, corner) + kd * table_current(model, "pulldown", v, corner)
            + table_current(model, "gnd_clamp", v, corner) + table_current(model, "power_clamp", v, corner))


def _where(model: IbisModel, source: str):
    return dict(source=source, line=model.line, keyword="Model")


def switching(model: IbisModel, edge: str, corner: str, method: str = "auto", *, source="<ibis>") -> Switching:
    """Ku(t), Kd(t) of ``edge`` ("rise" or "fall") at ``corner`` by ``method`` (see the module docstring)."""
    if method not in METHODS:
        raise IbisError(f"unknown switching method {method!r}; use one of {', '.join(METHODS)}", source=source)
    if not model.can_drive:
        raise IbisError(f"model {model.name!r} (Model_type {model.model_type}) cannot drive", **_where(model, source))
    waves = model.rising if edge == "rise" else model.falling
    for w in waves:
        if any(getattr(w, k) != 0.0 for k in ("l_fixture", "r_dut", "l_dut", "c_dut")):
            raise IbisError(f"model {model.name!r}: a waveform at line {w.table.line} has L_fixture, R_dut, L_dut or "
                            "C_dut: fixtures other than R_fixture, V_fixture and C_fixture are not modelled; "
                            "use ibis.switching = \"ramp\"", **_where(model, source))
    has_pu, has_pd = model.pullup is not None, model.pulldown is not None
    if method == "auto":
        method = "waveforms" if len(waves) >= 2 and has_pu and has_pd else "waveform" if waves else "ramp"
    if method == "ramp":
        return _from_ramp(model, edge, corner)
    if not waves or (method == "waveforms" and len(waves) < 2):
        raise IbisError(f"model {model.name!r} has {len(waves)} {edge} waveform(s); method {method!r} needs "
                        f"{2 if method == 'waveforms' else 1}", **_where(model, source))
    if method == "waveforms":
        return _from_two(model, edge, corner, waves[0], waves[1], source)
    return _from_one(model, edge, corner, waves[0], source)


def _from_ramp(model, edge, corner):
    r = model.ramp
    dt = (r.dt_r if edge == "rise" else r.dt_f).at(corner)
    t_full = dt / 0.6              # 20-80 % of a linear ramp is 0.6 of its duration (docs/references.md D3)
    up = np.array([0.0, 1.0])
    t = np.array([0.0, t_full])
    if edge == "rise":
        return Switching(t, up, 1.0 - up, "ramp")
    return Switching(t, 1.0 - up, up, "ramp")


def _rhs(model, corner, w, t):
    """Right-hand side b(t) [A] of Ku Ipu + Kd Ipd = b for waveform w, at times t (see module docstring)."""
    tab = w.table
    v = np.interp(t, tab.x, tab.at(corner))
    dvdt = np.interp(t, tab.x, np.gradient(tab.at(corner), tab.x))
    c = model.c_comp.at(corner) + w.c_fixture
    clamps = table_current(model, "gnd_clamp", v, corner) + table_current(model, "power_clamp", v, corner)
    return v, -(clamps + c * dvdt + (v - w.v_fixture.at(corner)) / w.r_fixture)


def _ends(edge):
    return ((0.0, 1.0), (1.0, 0.0)) if edge == "rise" else ((1.0, 0.0), (0.0, 1.0))


def _from_two(model, edge, corner, w1, w2, source):
    t_end = min(w1.table.x[-1], w2.table.x[-1])
    t = np.unique(np.concatenate([w1.table.x, w2.table.x]))
    t = t[(t >= max(w1.table.x[0], w2.table.x[0])) & (t <= t_end)]
    v1, b1 = _rhs(model, corner, w1, t)
    v2, b2 = _rhs(model, corner, w2, t)
    a11, a12 = table_current(model, "pullup", v1, corner), table_current(model, "pulldown", v1, corner)
    a21, a22 = table_current(model, "pullup", v2, corner), table_current(model, "pulldown", v2, corner)
    det = a11 * a22 - a12 * a21
    scale = np.maximum(np.abs(a11 * a22), np.abs(a12 * a21))
    if np.any(np.abs(det) <= 1e-9 * scale):
        k = int(np.argmax(np.abs(det) <= 1e-9 * scale))
        raise IbisError(f"model {model.name!r}: the two {edge} waveforms (lines {w1.table.line}, {w2.table.line}) "
                        f"give no independent equations at t = {t[k]:.4g} s (same fixture voltage?); "
                        "use ibis.switching = \"waveform\" or \"ramp\"", **_where(model, source))
    ku = (b1 * a22 - b2 * a12) / det
    kd = (a11 * b2 - a21 * b1) / det
    return Switching(t, ku, kd, "waveforms")


def _from_one(model, edge, corner, w, source):
    t = w.table.x.copy()
    v, b = _rhs(model, corner, w, t)
    ipu, ipd = table_current(model, "pullup", v, corner), table_current(model, "pulldown", v, corner)
    den = ipu - ipd
    if np.any(np.abs(den) < 1e-12):
        k = int(np.argmax(np.abs(den) < 1e-12))
        raise IbisError(f"model {model.name!r}: pull-up and pull-down currents are equal at t = {t[k]:.4g} s of the "
                        f"{edge} waveform at line {w.table.line}: Ku + Kd = 1 cannot be solved there",
                        **_where(model, source))
    ku = (b - ipd) / den
    return Switching(t, ku, 1.0 - ku, "waveform")


def corner_index(value) -> np.ndarray:
    """Corner value(s) of a design (-1 min / slow-weak, 0 typ, +1 max / fast-strong) -> column index 0 typ, 1 min, 2 max."""
    c = np.rint(np.asarray(value, dtype=float)).astype(np.int64)
    return np.where(c < 0, 1, np.where(c > 0, 2, 0))


def corner_name(value) -> str:
    return CORNERS[int(corner_index(value))]

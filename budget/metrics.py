"""Edge metrics of a sampled waveform, simulated or measured (Python API).

The metric definitions are a contract (see DEVELOPERS.md, "Metrics"); the
arithmetic lives in :mod:`budget.kernels.metrics`.
"""
from __future__ import annotations

from dataclasses import dataclass, asdict

import numpy as np

from .errors import ArgumentError
from .kernels import metrics as mk


@dataclass(frozen=True)
class EdgeMetrics:
    """Metrics of one edge at one receiver; SI units, None where a time never occurs.

    t_switch, t_valid [s]: first entry into / final stay beyond the threshold
    region; flight_min, flight_max [s]: the same minus the driver's reference
    time; overshoot = v_peak - V_hi, undershoot = V_lo - v_trough [V];
    ringback [V]: lowest level after first reaching the valid threshold, minus
    that threshold (negative: re-entered the threshold region; mirrored for a
    falling edge); monotonic: no fall-back of more than 2 % of the swing on
    the way through the threshold region; settle_time [s]; margin [V]: noise
    margin after the budget allocations (margin_high on a rising edge,
    margin_low on a falling edge).
    """
    t_switch: float | None
    t_valid: float | None
    flight_min: float | None
    flight_max: float | None
    overshoot: float
    undershoot: float
    ringback: float | None
    monotonic: bool
    settle_time: float | None
    margin: float
    v_peak: float
    v_trough: float

    def as_dict(self) -> dict:
        return asdict(self)


def from_vector(out) -> EdgeMetrics:
    """EdgeMetrics from a kernel output vector (NaN -> None)."""
    def opt(i):
        x = float(out[i])
        return None if np.isnan(x) else x
    return EdgeMetrics(
        t_switch=opt(mk.T_SWITCH), t_valid=opt(mk.T_VALID), flight_min=opt(mk.FLIGHT_MIN),
        flight_max=opt(mk.FLIGHT_MAX), overshoot=float(out[mk.OVERSHOOT]),
        undershoot=float(out[mk.UNDERSHOOT]), ringback=opt(mk.RINGBACK),
        monotonic=bool(out[mk.MONOTONIC] > 0.5), settle_time=opt(mk.SETTLE_TIME),
        margin=float(out[mk.MARGIN]), v_peak=float(out[mk.V_PEAK]), v_trough=float(out[mk.V_TROUGH]),
    )


def edge_metrics(t, v, *, edge: str, v_lo: float, v_hi: float, vil: float, vih: float,
                 t_ref: float = 0.0, settle_band: float = 0.05, allocation: float = 0.0) -> EdgeMetrics:
    """Metrics of one edge of the waveform v(t) at a receiver.

    Parameters
    ----------
    t : array [s]
        Sample times, strictly increasing; any spacing (measured traces welcome).
    v : array [V]
        Pin voltage at those times.
    edge : "rise" or "fall"
    v_lo, v_hi : float [V]
        DC levels at this pin with the driver in its low and high state.
    vil, vih : float [V]
        Receiver input thresholds, vil < vih.
    t_ref : float [s]
        Driver timing reference (flight times are measured from it).
    settle_band : float [-]
        Half-width of the settling band as a fraction of the swing v_hi - v_lo.
    allocation : float [V]
        Sum of the budget allocations subtracted from the margin.
    """
    if edge not in ("rise", "fall"):
        raise ArgumentError(f"edge must be 'rise' or 'fall', got {edge!r}")
    t = np.ascontiguousarray(t, dtype=float)
    v = np.ascontiguousarray(v, dtype=float)
    if t.ndim != 1 or v.shape != t.shape:
        raise ArgumentError(f"t and v must be 1-D arrays of one length (got shapes {t.shape} and {v.shape})")
    if t.size < 2:
        raise ArgumentError("need at least two samples")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(v))):
        raise ArgumentError("t and v must be finite (no NaN or inf samples)")
    if np.any(np.diff(t) <= 0):
        i = int(np.flatnonzero(np.diff(t) <= 0)[0])
        raise ArgumentError(f"t must be strictly increasing (sample {i + 1} at {t[i + 1]:g} s follows {t[i]:g} s)")
    for name, x in (("v_lo", v_lo), ("v_hi", v_hi), ("vil", vil), ("vih", vih), ("t_ref", t_ref),
                    ("settle_band", settle_band), ("allocation", allocation)):
        if not np.isfinite(x):
            raise ArgumentError(f"{name} must be finite, got {x!r}")
    if not vil < vih:
        raise ArgumentError(f"need vil < vih, got vil={vil:g} V, vih={vih:g} V")
    if not v_lo < v_hi:
        raise ArgumentError(f"need v_lo < v_hi, got v_lo={v_lo:g} V, v_hi={v_hi:g} V")
    out = np.empty(mk.N_METRICS)
    mk.edge_metrics(t, v, edge == "rise", float(v_lo), float(v_hi), float(vil), float(vih), float(t_ref),
                    float(settle_band) * (v_hi - v_lo), float(allocation), out)
    return from_vector(out)


def smooth(t, v, window: float) -> np.ndarray:
    """Centred moving average [V] of a measured trace over ``window`` [s].

    Use it deliberately on noisy captures before :func:`edge_metrics`; the
    metrics themselves never filter, so unfiltered noise counts against margin.
    """
    t = np.ascontiguousarray(t, dtype=float)
    v = np.ascontiguousarray(v, dtype=float)
    if not window > 0:
        raise ArgumentError(f"window must be positive, got {window!r}")
    if t.shape != v.shape or t.ndim != 1 or np.any(np.diff(t) <= 0):
        raise ArgumentError("t must be strictly increasing and v of the same length")
    out = np.empty_like(v)
    mk.moving_average(t, v, float(window), out)
    return out


def allocation_terms(budget) -> tuple[float, float]:
    """(volts [V], fraction of the swing [-]) summed over the ``[budget]`` allocations.

    The allocation taken off a margin at a pin whose swing is |V_hi - V_lo| is
    volts + fraction * swing (see :func:`allocation`); this is the one place
    the allocations are summed.
    """
    volts = sum(float(v) for v, unit in budget.allocations.values() if unit == "V")
    frac = sum(float(v) for v, unit in budget.allocations.values() if unit == "swing")
    return volts, frac


def allocation(budget, swing: float) -> float:
    """Sum of the budget allocations [V] at a pin of the given swing [V]."""
    volts, frac = allocation_terms(budget)
    return volts + frac * abs(swing)
